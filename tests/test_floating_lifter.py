"""The lifter on the floater (matdb.physics.floating.lifter): every check against something
outside the module, named beside it."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hst
from scipy.spatial.transform import Rotation

from matdb.physics import floating as S


FLOATER = S.Body("cylinder", (6.35e-3, 3.175e-3), 1.3)


# ---------------------------------------------------------------------------
# lifter on floater
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("distance", [5e-3, 20e-3, 60e-3])
def test_lifter_force_vs_magpylib_cylinders(distance):
    # magpylib.getFT (meshed target, finite differences): a general-purpose reference
    magpy = pytest.importorskip("magpylib")
    lifter = S.Body("cylinder", (25.4e-3, 25.4e-3), 1.3)
    lif = lifter.at((0, 0, distance + lifter.half_height))
    src = magpy.magnet.Cylinder(dimension=(25.4e-3, 25.4e-3), polarization=(0, 0, 1.3),
                                position=(0, 0, distance + lifter.half_height))
    tgt = magpy.magnet.Cylinder(dimension=FLOATER.size, polarization=(0, 0, 1.3))
    ref, _ = magpy.getFT(src, tgt, meshing=4000)
    got = S.lifter_force(lif, FLOATER)
    assert got[2] == pytest.approx(ref[2], rel=2e-5)
    assert abs(got[0]) < 1e-9 * got[2]


def test_lifter_force_vs_magpylib_cuboids_off_axis():
    # magpylib.getFT on a cuboid floater displaced 1 mm off the axis (lateral and vertical force)
    magpy = pytest.importorskip("magpylib")
    lif = S.Body("cuboid", (20e-3, 20e-3, 10e-3), 1.2).at((0, 0, 15e-3))
    flo = S.Body("cuboid", (4e-3, 4e-3, 4e-3), 1.3).at((1e-3, 0, 0))
    src = magpy.magnet.Cuboid(dimension=(20e-3, 20e-3, 10e-3), polarization=(0, 0, 1.2), position=(0, 0, 15e-3))
    tgt = magpy.magnet.Cuboid(dimension=(4e-3, 4e-3, 4e-3), polarization=(0, 0, 1.3), position=(1e-3, 0, 0))
    ref, _ = magpy.getFT(src, tgt, meshing=(10, 10, 10))
    got = S.lifter_force(lif, flo)
    assert got[2] == pytest.approx(ref[2], rel=1e-5)
    assert got[0] == pytest.approx(ref[0], rel=1e-4)


def test_lifter_torque_vs_magpylib_on_a_tilted_floater():
    # torque on a floater tilted by 0.01 rad: magpylib.getFT against -kappa*theta - c*x from
    # the energy Hessian (small-angle expansion)
    magpy = pytest.importorskip("magpylib")
    lifter = S.Body("cylinder", (20e-3, 10e-3), 1.3)
    D = 12e-3
    lif = lifter.at((0, 0, D + lifter.half_height))
    hz = S.lifter_hessian(lif, FLOATER)
    th = 0.01
    src = magpy.magnet.Cylinder(dimension=(20e-3, 10e-3), polarization=(0, 0, 1.3), position=(0, 0, D + 5e-3))
    tgt = magpy.magnet.Cylinder(dimension=FLOATER.size, polarization=(0, 0, 1.3),
                                orientation=Rotation.from_rotvec([0, th, 0]))
    _, torque = magpy.getFT(src, tgt, meshing=4000)
    assert torque[1] == pytest.approx(-hz["kappa_y"] * th, rel=1e-3)


@settings(max_examples=15, deadline=None)
@given(j1=hst.floats(0.2, 1.5), j2=hst.floats(0.2, 1.5), d=hst.floats(2e-3, 60e-3))
def test_lifter_force_is_bilinear_in_the_polarisations(j1, j2, d):
    # F = integral of (M . grad) B_lifter: linear in the floater's M and in the lifter's J
    # (superposition, Jackson sec. 5.9)
    lif = S.Body("cylinder", (20e-3, 10e-3), j1).at((0, 0, d + 5e-3))
    flo = S.Body("cylinder", FLOATER.size, j2)
    ref = S.lifter_force(S.Body("cylinder", (20e-3, 10e-3), 1.0).at((0, 0, d + 5e-3)),
                         S.Body("cylinder", FLOATER.size, 1.0))
    assert S.lifter_force(lif, flo)[2] == pytest.approx(j1 * j2 * ref[2], rel=1e-9)


@pytest.mark.parametrize("lifter", [S.Body("cylinder", (25.4e-3, 25.4e-3), 1.3),
                                    S.Body("cuboid", (20e-3, 20e-3, 10e-3), 1.2),
                                    S.Body("ring", (30e-3, 10e-3, 10e-3), 1.3)])
def test_laplace_kz_plus_2kr_is_zero_on_the_axis(lifter):
    # Earnshaw / Laplace: the energy is harmonic, k_x + k_y + k_z = 0; axial symmetry
    # gives k_z + 2 k_r = 0 (Simon, Heflinger & Geim 2001)
    lif = lifter.at((0, 0, 15e-3 + lifter.half_height))
    kz, kr = S.lifter_stiffness(lif, FLOATER)
    assert kz < 0 < kr
    assert abs(kz + 2 * kr) < 1e-6 * abs(kz)
    h = S.lifter_hessian(lif, FLOATER)
    assert h["k_x"] + h["k_y"] + kz == pytest.approx(0, abs=1e-5 * abs(kz))


def test_lifter_tilt_terms_tend_to_the_dipole_values():
    # dipole in a field: kappa = m B, lateral-tilt coupling m B'/2 (Simon & Geim 2000;
    # Jackson eq. 5.69 U = -m.B), for a tiny floater far below a large lifter
    tiny = S.Body("cylinder", (0.3e-3, 0.3e-3), 1.3)
    lif = S.Body("cylinder", (25.4e-3, 25.4e-3), 1.3).at((0, 0, 20e-3 + 12.7e-3))
    bz = lif.B(np.array([[0, 0, 0.0]]))[0, 2]
    dz = 1e-5
    db = (lif.B(np.array([[0, 0, dz]]))[0, 2] - lif.B(np.array([[0, 0, -dz]]))[0, 2]) / (2 * dz)
    h = S.lifter_hessian(lif, tiny)
    assert h["kappa_y"] == pytest.approx(tiny.moment * bz, rel=1e-4)
    assert abs(h["c_x_ty"]) == pytest.approx(tiny.moment * db / 2, rel=1e-3)


# ---------------------------------------------------------------------------
# the on-axis pull and its table
# ---------------------------------------------------------------------------
PAIRS = [
    (S.Body("cylinder", (25.4e-3, 25.4e-3), 1.3), FLOATER),
    (S.Body("cuboid", (20e-3, 20e-3, 10e-3), 1.2), FLOATER),
    (S.Body("ring", (30e-3, 10e-3, 10e-3), 1.3), S.Body("cuboid", (4e-3, 4e-3, 4e-3), 1.3)),
    (S.Body("cylinder", (50.8e-3, 25.4e-3), 1.3), S.Body("ring", (12.7e-3, 6.35e-3, 6.35e-3), 1.3)),
]


@pytest.mark.parametrize("lifter,floater", PAIRS)
def test_axial_pull_is_the_face_quadrature_of_lifter_force(lifter, floater):
    # the folded on-axis rule against the full face rule of lifter_force at each
    # distance (regression check: the same quadrature summed in another order)
    d = np.array([2e-3, 9e-3, 31e-3, 0.2]) + floater.half_height
    direct = [S.lifter_force(lifter.at((0, 0, x + lifter.half_height)), floater)[2] for x in d]
    assert S.axial_pull(lifter, floater, d) == pytest.approx(direct, rel=1e-12)


@pytest.mark.parametrize("lifter,floater", PAIRS)
def test_pull_table_error_is_within_its_stated_bound(lifter, floater):
    # the spline of the unit pull against direct quadrature (lifter_force, full face rule)
    # halfway between table nodes, over the whole table: stated bound 1e-6 of the peak
    # pull (numerical check, no source needed)
    table = S.pull_table(lifter, floater)
    assert table.error < 1e-6
    u = table.d - floater.half_height
    mid = np.sqrt(u[1:] * u[:-1])[::7] + floater.half_height
    unit_l, unit_f = S.Body(lifter.shape, lifter.size, 1.0), S.Body(floater.shape, floater.size, 1.0)
    direct = np.array([S.lifter_force(unit_l.at((0, 0, x + lifter.half_height)), unit_f)[2] for x in mid])
    assert np.max(np.abs(table.pull(mid) - direct)) < 1e-6 * np.max(np.abs(table.f))
    # and its slope against a central difference of the direct pull (rel. to the largest slope)
    h = 1e-7
    fd = (S.axial_pull(unit_l, unit_f, mid + h) - S.axial_pull(unit_l, unit_f, mid - h)) / (2 * h)
    assert np.max(np.abs(table.slope(mid) - fd)) < 1e-4 * np.max(np.abs(fd))


def test_station_balance_holds_the_weight_on_the_full_quadrature():
    # statics: at the balance the pull of lifter_force (full face rule, no table) equals
    # the weight; the table only brackets the root
    lifter = S.Body("cylinder", (25.4e-3, 25.4e-3), 1.3)
    model = S.StationModel(lifter, FLOATER, 0.75e-3, -4.5e-4, -8.5e-5, 1e-3, 0.5e-3)
    for w in (2e-3, 7e-3, 20e-3):
        D = model.balance(w)
        assert S.lifter_force(lifter.at((0, 0, D + lifter.half_height)), FLOATER)[2] == pytest.approx(w, rel=1e-11)
        assert abs(model.pull(D) - w) < 1e-6 * model.peak_force()[1]  # the table's stated bound
