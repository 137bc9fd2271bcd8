"""matdb.advisor.tables: the unit-polarisation tables and their disk cache."""

from __future__ import annotations

import numpy as np

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
