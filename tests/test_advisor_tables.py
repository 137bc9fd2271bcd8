"""matdb.advisor.tables: the unit-polarisation tables and their disk cache."""

from __future__ import annotations

import numpy as np
import pytest

from matdb import advisor as A
from matdb.physics import plate_tables as PT


def test_disk_cache_is_reused(tmp_path, monkeypatch):

    monkeypatch.setenv("MATDB_CACHE_DIR", str(tmp_path))
    A.clear_memory_cache()
    spec = A.ArrangementSpec("cuboid", (0.00635, 0.00635, 0.00635), "stripes", 2, 2)
    g = A.geometry(spec, (0.008, 0.008), 0.05)
    hs = np.array([2e-4, 1.2e-3])
    first = g.coarse(hs)
    g.save()
    assert any((tmp_path / "advisor").iterdir())  # a diskcache folder
    A.clear_memory_cache()

    def boom(*a, **k):
        raise AssertionError("recomputed despite the cache")

    monkeypatch.setattr(PT, "plane_integrals", boom)
    again = A.geometry(spec, (0.008, 0.008), 0.05).coarse(hs)
    assert np.array_equal(first, again)
    A.clear_memory_cache()


def test_reverse_field_shared_by_arrangements_equal_up_to_scale(tmp_path, monkeypatch):
    # magnetostatics has no length scale (Jackson, Classical Electrodynamics, 3rd ed.,
    # sec. 5.8): the largest reverse field of 2x2 checkerboards of 10 mm and 25.4 mm cubes
    # is one number; the shared value equals the larger array's own demagnetisation check
    # (to the rounding of coordinates at the edge point where the worst value sits)
    from matdb.advisor import tables as T
    from matdb.advisor.candidates import ArrangementSpec
    from matdb.constants import T_REF_K
    from matdb.physics import thermal as TH

    monkeypatch.setenv("MATDB_CACHE_DIR", str(tmp_path))
    T.clear_memory_cache()
    small = ArrangementSpec("cuboid", (0.01,) * 3, "checkerboard", 2, 2)
    big = ArrangementSpec("cuboid", (0.0254,) * 3, "checkerboard", 2, 2)
    assert T.shape_key(small) == T.shape_key(big)
    assert T.shape_key(small) != T.shape_key(ArrangementSpec("cuboid", (0.01,) * 3, "stripes", 2, 2))
    shared = T.geometry(small, (0.017, 0.017), 0.05).demag_hmax()
    assert T.geometry(big, (0.017, 0.017), 0.05).demag_hmax() == shared
    own = TH.demag_check(big.build(1.0), 1.0, 0.0, "NdFeB", [T_REF_K]).worst_ratio * TH.KNEE_FRACTION["NdFeB"][0]
    assert own == pytest.approx(shared, rel=1e-6)
    T.clear_memory_cache()
