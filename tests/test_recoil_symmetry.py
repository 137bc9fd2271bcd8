"""Mirror symmetry of the tabulated recoil correction.

Physics: B and J are axial vectors (J. D. Jackson, Classical Electrodynamics, 3rd ed.,
sec. 6.10): sources symmetric under a reflection give a field symmetric under it, with the
components turned as an axial vector. The plate's quadrature folds (matdb.physics.plate)
rely on that symmetry holding exactly, so the single-precision table must keep it to the
last bit.
"""

import numpy as np
import pytest

from matdb.analysis import levitate as L
from matdb.design.toml_io import load_design
from matdb.physics import recoil_field as RF

AXIAL = {  # reflection of the grid and of an axial vector
    "x": (lambda c: c[:, ::-1, :, :], np.array([1, -1, -1])),
    "y": (lambda c: c[:, :, ::-1, :], np.array([-1, 1, -1])),
}


def _diag(c):
    return -np.swapaxes(c, 1, 2)[..., [1, 0, 2]]


def _checkerboard(dj_scale=(1.0, 1.0, 1.0, 1.0)):
    sizes = np.ones((4, 3))
    centres = np.array([[0.5, 0.5, -0.5], [-0.5, 0.5, -0.5], [-0.5, -0.5, -0.5], [0.5, -0.5, -0.5]])
    dj = np.array([[0, 0, 1.0], [0, 0, -1.0], [0, 0, 1.0], [0, 0, -1.0]]) * np.array(dj_scale)[:, None]
    return sizes, centres, dj


def test_checkerboard_table_is_exactly_symmetric():
    """A 2 x 2 checkerboard of cells (alternating J_z) is symmetric under both mirror planes
    and the diagonal with an overall sign +1 (mirrors) / -1 (diagonal): the table holds that
    to the bit."""
    t = RF._Table(*_checkerboard(), top_z=0.0)
    c = t.coef
    assert c.dtype == np.float32 and np.abs(c).max() > 0
    for flip, turn in AXIAL.values():
        assert np.array_equal(flip(c) * turn.astype(np.float32), c)
    assert np.array_equal(_diag(c), -c) or np.array_equal(_diag(c), c)


def test_asymmetric_sources_are_left_alone():
    """One cell's departure 30 % larger breaks every reflection: the table is returned
    as computed (no mean taken)."""
    t = RF._Table(*_checkerboard((1.3, 1.0, 1.0, 1.0)), top_z=0.0)
    c = t.coef
    for flip, turn in AXIAL.values():
        assert not np.allclose(flip(c) * turn, c, atol=1e-3 * np.abs(c).max())
    assert np.array_equal(RF._symmetrised(c.copy()), c)


def test_rounding_noise_is_removed_and_values_move_little():
    """A symmetric array with float32-sized noise becomes exactly symmetric, moving no
    value by more than half the tolerance of the largest."""
    rng = np.random.default_rng(1)
    base = rng.normal(size=(3, 9, 9, 3)).astype(np.float32)
    flip, turn = AXIAL["x"]
    sym = (base + flip(base) * turn.astype(np.float32)) * np.float32(0.5)
    noisy = sym + rng.normal(scale=1e-7, size=sym.shape).astype(np.float32)
    out = RF._symmetrised(noisy)
    assert np.array_equal(flip(out) * turn.astype(np.float32), out)
    assert np.abs(out - noisy).max() <= 0.5 * RF.SYMMETRY_TOL * np.abs(noisy).max()


@pytest.mark.parametrize("name", ["plate_checkerboard_2x2.toml"])
def test_default_model_keeps_the_folds_of_a_symmetric_layout(name, tmp_path, monkeypatch):
    """The example's 2 x 2 checkerboard is symmetric about its centre: with the default
    (subdivided recoil) model the field check keeps both mirror lines and the diagonal, so
    the plate integrals are folded as for the rigid magnets."""
    monkeypatch.setenv("MATDB_CACHE_DIR", str(tmp_path))
    RF.clear_tables()
    d = load_design(f"examples/{name}")
    geom = L.plate_geometry(d, d.arrangement(293.15))
    assert geom.mirrors == (pytest.approx(d.plate.center_m[0]), pytest.approx(d.plate.center_m[1]))
    assert geom.swap
