"""Floating-plate physics (matdb.physics.plate) against outside references.

References used below:
- Berry & Geim: M. V. Berry and A. K. Geim, "Of flying frogs and levitrons",
  Eur. J. Phys. 18, 307 (1997): a weak diamagnet has the energy density
  -chi B^2/(2 mu0); it floats where -B dB/dz >= mu0 rho g / |chi|, about 1400 T^2/m
  for water.
- Jackson: J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), eq. (5.56), the
  point-dipole field, whose plane integral of B^2 has a closed form (derived in
  ``_dipole_plane_integral``).
- magpylib (an independent, general-purpose field library, used here only as a reference).
- Gauss (divergence) theorem: force and torque from surface integrals must equal the
  derivatives of the volume energy.
"""

from __future__ import annotations

import dataclasses
import math

import magpylib as magpy
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from matdb.errors import InputError
from matdb.physics import plate as P
from matdb.physics.arrangement import Arrangement, build_arrangement
from matdb.constants import G_STANDARD, MU0
from matdb.data.catalog import get_material

A = 0.0127  # 1/2 inch cube [m]
PG = dict(chi_perp_abs=4.5e-4, chi_par_abs=8.5e-5)  # pyrolytic graphite, Simon & Geim (2000)
PG_RHO = 2200.0  # kg/m^3, Simon & Geim (2000)
BI_CHI, BI_RHO = 1.66e-4, 9780.0  # bismuth, CRC Handbook (from memory of the CRC table)


def _geom(arr, lx, ly=None, t=1e-3, shape="rectangle", cx=0.0, cy=0.0):
    bx, by = P.edge_lines(arr.magnets)
    return P.PlateGeometry(shape, lx, lx if ly is None else ly, t, cx, cy, bx, by)


@pytest.fixture(scope="module")
def checker():
    """2 x 2 checkerboard of 12.7 mm N42-class cubes (Br 1.3 T)."""
    return build_arrangement("cuboid", (A, A, A), "checkerboard", 2, 2, br=1.3)


@pytest.fixture(scope="module")
def checker_magpy():
    """The same checkerboard built in magpylib."""
    c = magpy.Collection()
    for r in range(2):
        for col in range(2):
            s = (-1) ** (r + col)
            c.add(magpy.magnet.Cuboid(polarization=(0, 0, s * 1.3), dimension=(A, A, A),
                                      position=((col - 0.5) * A, (r - 0.5) * A, -A / 2)))
    return c


# ---------------------------------------------------------------------------
# quadrature
# ---------------------------------------------------------------------------
def _dipole_field(m):
    """Point dipole m (along z) at the origin, Jackson eq. (5.56)."""
    def f(p):
        r = np.linalg.norm(p, axis=1)[:, None]
        n = p / r
        mv = np.array([0.0, 0.0, m])
        return MU0 / (4 * math.pi) * (3 * n * (n @ mv)[:, None] - mv) / r ** 3
    return f


def _dipole_plane_integral(m, h, radius):
    """integral of |B|^2 over the disc rho <= R at height h above a z dipole.

    |B|^2 = (mu0 m / 4 pi)^2 (1 + 3 cos^2 theta) / r^6 with cos theta = h / r; with
    u = rho^2 + h^2 the integral is pi (mu0 m/4pi)^2 [ (1/(2 h^4) - 1/(2 u1^2))
    + (1/h^4 - h^2/u1^3) ], u1 = R^2 + h^2 (Jackson eq. 5.56, integrated by hand).
    """
    k = (MU0 * m / (4 * math.pi)) ** 2
    u1 = radius ** 2 + h ** 2
    return math.pi * k * ((0.5 / h ** 4 - 0.5 / u1 ** 2) + (1 / h ** 4 - h ** 2 / u1 ** 3))


def test_disc_plane_integral_matches_dipole_closed_form():
    # Jackson eq. (5.56) integrated in closed form (see _dipole_plane_integral)
    m, h, d = 0.5, 3e-3, 10e-3
    plate = P.PlateGeometry("disc", d, d, 1e-3, breaks_x=(0.0,), breaks_y=(0.0,))
    iz, ixy = P.plane_integrals(_dipole_field(m), plate, [h], order=16)
    assert (iz[0] + ixy[0]) == pytest.approx(_dipole_plane_integral(m, h, d / 2), rel=1e-9)


def test_rectangle_footprint_weights_sum_to_area(checker):
    # geometry: the weights of a quadrature rule integrate 1 exactly (common practice)
    plate = _geom(checker, 0.017, 0.011)
    for scale in (5e-5, 1e-3):
        x, y, w = P.footprint_rule(plate, scale)
        assert w.sum() == pytest.approx(0.017 * 0.011, rel=1e-13)
        assert np.all((np.abs(x) <= 0.0085) & (np.abs(y) <= 0.0055))


@pytest.mark.parametrize("shape", ["rectangle", "disc"])
@pytest.mark.parametrize("gap", [0.0, 5e-5, 1e-3])
def test_lift_quadrature_converges_including_zero_gap(checker, gap, shape):
    # convergence (regression check): doubling the Gauss order changes F by < 1e-6
    if shape == "disc":
        plate = _geom(checker, 0.012, shape="disc", cx=1e-3)
    else:
        plate = _geom(checker, 0.010, 0.008, cx=1e-3, cy=-5e-4)
    f8 = P.lift_force(checker.B, plate, [gap], order=8, **PG)[0]
    f16 = P.lift_force(checker.B, plate, [gap], order=16, **PG)[0]
    assert math.isfinite(f8) and f8 > 0
    assert abs(f8 - f16) < 1e-6 * abs(f16)


def test_lift_with_magpylib_field_agrees(checker, checker_magpy):
    # magpylib as an independent field: same integrals, field from another code
    plate = _geom(checker, 0.010)
    gaps = [2e-4, 1e-3, 2.5e-3]
    f_ours = P.lift_force(checker.B, plate, gaps, order=6, **PG)
    f_ref = P.lift_force(lambda p: checker_magpy.getB(p), plate, gaps, order=6, **PG)
    np.testing.assert_allclose(f_ours, f_ref, rtol=1e-8)


# ---------------------------------------------------------------------------
# Berry & Geim
# ---------------------------------------------------------------------------
def test_thin_plate_lift_per_volume_is_chi_over_2mu0_grad_b2(checker):
    # Berry & Geim (1997): force density (|chi|/(2 mu0)) * (-d(B^2)/dz) for a small body
    chi = 1e-4
    x0, y0, z0 = 3e-3, 2e-3, 1.5e-3
    side, t = 2e-5, 2e-6
    plate = P.PlateGeometry("rectangle", side, side, t, x0, y0)
    f = P.lift_force(checker.B, plate, [z0 - t / 2], chi, chi, order=4)[0]
    h = 1e-6
    b2 = np.sum(checker.B(np.array([[x0, y0, z0 + h], [x0, y0, z0 - h]])) ** 2, axis=1)
    density = chi / (2 * MU0) * -(b2[0] - b2[1]) / (2 * h)
    assert f / (side * side * t) == pytest.approx(density, rel=1e-4)


def test_water_levitation_threshold_from_constants():
    # Berry & Geim (1997): water levitates where -B dB/dz >= mu0 rho g / |chi|, about
    # 1400 T^2/m; chi and rho of water from the database (Schenck 1996 / CRC)
    w = get_material("water")
    need = MU0 * w.density_kg_m3 * G_STANDARD / abs(w.chi_si)
    assert need == pytest.approx(1400, rel=0.05)
    # and the plate model gives exactly that balance: a thin water layer in a field with
    # B dB/dz = -need has lift = weight (consistency of F with the force density)
    plate = P.PlateGeometry("rectangle", 1e-3, 1e-3, 1e-5)

    def field(p):  # B_z = sqrt(B0^2 - 2 need z): B dB/dz = -need exactly
        bz = np.sqrt(4.0 - 2 * need * p[:, 2])
        return np.column_stack([0 * bz, 0 * bz, bz])

    f = P.lift_force(field, plate, [1e-4], abs(w.chi_si), abs(w.chi_si), order=4)[0]
    weight = w.density_kg_m3 * plate.volume * G_STANDARD
    assert f == pytest.approx(weight, rel=1e-9)


# ---------------------------------------------------------------------------
# scaling and separation
# ---------------------------------------------------------------------------
@settings(max_examples=10, deadline=None)
@given(chi_perp=st.floats(1e-6, 1e-3), chi_par=st.floats(1e-6, 1e-3), br=st.floats(0.2, 1.5))
def test_lift_scales_with_chi_and_br_squared(checker, chi_perp, chi_par, br):
    # Berry & Geim (1997): F is linear in |chi| and quadratic in B (hence in Br)
    plate = _geom(checker, 0.008)
    gaps = [3e-4, 1.2e-3]
    unit = checker.with_unit_polarization()
    iz, ixy = P.plate_surface_integrals(unit.B, plate, gaps, order=4)
    scaled = P.lift_from_integrals(iz, ixy, chi_perp, chi_par, br_scale=br)
    direct = P.lift_force(checker.scaled(br / 1.3).B, plate, gaps, chi_perp, chi_par, order=4)
    np.testing.assert_allclose(direct, scaled, rtol=1e-9)
    f1 = P.lift_force(checker.B, plate, gaps, 2 * chi_perp, 2 * chi_par, order=4)
    f2 = P.lift_force(checker.B, plate, gaps, chi_perp, chi_par, order=4)
    np.testing.assert_allclose(f1, 2 * f2, rtol=1e-12)


# ---------------------------------------------------------------------------
# divergence theorem: surface force and torque vs energy derivatives
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("dof,step,tol", [(0, 1e-5, 2e-5), (1, 1e-5, 2e-5), (2, 1e-5, 1e-4),
                                          (3, 2e-3, 1e-3), (4, 2e-3, 1e-3), (5, 2e-3, 1e-4)])
def test_surface_force_and_torque_equal_minus_energy_gradient(checker, dof, step, tol):
    # Gauss theorem (module docstring): F = -dU/dq for the volume energy U, torque with
    # the M x B term of the anisotropic tensor included
    plate = _geom(checker, 0.010, 0.008, cx=1e-3, cy=-5e-4)
    gap = 6e-4
    pivot = (1e-3, -5e-4, gap + 2e-3)
    poses = np.zeros((2, 6))
    poses[0, dof], poses[1, dof] = step, -step
    u = P.stored_energy_split(checker.B, plate, gap, pivot, poses, order=12)
    du = -(u[0] - u[1]) / (2 * step)
    q = P.generalized_forces_split(checker.B, plate, gap, pivot, np.zeros((1, 6)), order=12)[0]
    scale = np.abs(q[:, dof]).max()
    np.testing.assert_allclose(du, q[:, dof], atol=tol * scale)


def test_closed_surface_vertical_force_equals_lift(checker):
    # divergence theorem: the side faces carry no vertical force
    plate = _geom(checker, 0.010)
    q = P.generalized_forces_split(checker.B, plate, 7e-4, (0, 0, 1e-3), np.zeros((1, 6)))[0]
    iz, ixy = P.plate_surface_integrals(checker.B, plate, [7e-4])
    lift = P.lift_from_integrals(iz, ixy, 1.0, 0.0)[0], P.lift_from_integrals(iz, ixy, 0.0, 1.0)[0]
    np.testing.assert_allclose(q[:, 2], lift, rtol=1e-9)


def test_stiffness_cross_terms_symmetric_before_symmetrising(checker):
    # conservative forces: dF_x/dpitch = dtau_y/dx (Goldstein ch. 6), checked on the raw
    # central differences
    plate = _geom(checker, 0.010)
    gap, pivot = 7e-4, (0.0, 0.0, 1.5e-3)
    h, th = 2e-6, 1e-3
    poses = np.zeros((4, 6))
    poses[0, 0], poses[1, 0], poses[2, 4], poses[3, 4] = h, -h, th, -th
    q = P.combine(np.transpose(P.generalized_forces_split(checker.B, plate, gap, pivot, poses),
                               (1, 0, 2)), *PG.values())
    dtau_dx = (q[0, 4] - q[1, 4]) / (2 * h)
    dfx_dth = (q[2, 0] - q[3, 0]) / (2 * th)
    assert dtau_dx == pytest.approx(dfx_dth, rel=1e-3)


# ---------------------------------------------------------------------------
# facts of the trade
# ---------------------------------------------------------------------------
def test_graphite_plate_floats_stably_over_2x2_checkerboard(checker):
    # common practice, no source: a ~1 mm pyrolytic graphite plate floats over a 2 x 2
    # alternating array of 12.7 mm NdFeB cubes and stays put
    r = P.analyse_plate(checker.B, _geom(checker, 0.010), density=PG_RHO, **PG)
    assert r.floats and 0 < r.gap < 3e-3
    assert r.k_z > 0 and r.f_z > 0
    assert r.stability.laterally_stable
    assert r.stability.k_x > 0 and r.stability.k_pitch > 0


def test_graphite_plate_cut_too_big_is_not_stable(checker):
    # common practice, no source: a plate cut a little too big will not stay on
    r = P.analyse_plate(checker.B, _geom(checker, 0.018), density=PG_RHO, **PG)
    assert r.floats
    assert not r.stability.laterally_stable


def test_stable_side_max_between_working_and_too_big(checker):
    # consequence of the two facts above: the largest stable side lies between them
    s = P.stable_side_max(checker.B, _geom(checker, 0.010), density=PG_RHO, extent=2 * A, **PG)
    assert s is not None and 0.010 < s < 0.018
    # not square: no figure
    assert P.stable_side_max(checker.B, _geom(checker, 0.010, 0.008), density=PG_RHO,
                             extent=2 * A, **PG) is None


def test_bismuth_plate_does_not_float_over_2x2(checker):
    # common practice, no source: bismuth (chi ~ -1.66e-4, 9780 kg/m^3) of similar size
    # does not float over the 2 x 2 array
    r = P.analyse_plate(checker.B, _geom(checker, 0.010), BI_CHI, BI_CHI, BI_RHO,
                        with_stability=False)
    assert not r.floats and r.gap is None
    assert r.forces.max() < r.weight


def test_plate_as_wide_as_single_magnet_slides_off():
    # common practice, no source: a plate as wide as a single magnet's face, or wider,
    # slides off it (k_x < 0)
    single = build_arrangement("cuboid", (A, A, A), "single", br=1.3)
    for side in (A, 1.2 * A):
        r = P.analyse_plate(single.B, _geom(single, side, t=5e-4), density=PG_RHO, **PG)
        assert r.floats
        assert r.stability.k_x < 0 and not r.stability.laterally_stable


def test_small_isotropic_chip_over_middle_of_face_is_stable():
    # common practice, no source: a much smaller chip can sit over the middle of a large
    # face, where |B| has a minimum. Checked for an isotropic diamagnet (graphite-like
    # |chi| in all directions, a hypothetical material): the |B| minimum is what holds it.
    # (For pyrolytic graphite itself the weight |chi_perp| >> |chi_par| puts B_z^2 first,
    # and B_z peaks over the middle; the model then finds the chip unstable.)
    m = build_arrangement("cuboid", (0.010, 0.010, 0.010), "single", br=1.45)
    r = P.analyse_plate(m.B, _geom(m, 0.002, t=2e-4), 4.5e-4, 4.5e-4, PG_RHO)
    assert r.floats
    assert r.stability.k_x > 0 and r.stability.laterally_stable


def test_high_payload_lowers_tilt_stiffness(checker):
    # rigid body about the combined CoM (Goldstein ch. 6): raising the payload's centre
    # of mass adds -h M g to the tilt stiffness, so it falls with payload height
    plate = _geom(checker, 0.012)
    mass = PG_RHO * plate.volume
    ks = [P.stability(checker.B, plate, 6e-4, *PG.values(), mass, 1e-4, h).k_pitch
          for h in (0.0, 5e-3)]
    assert ks[1] < ks[0]


def test_disc_plate_floats_and_is_neutral_in_yaw(checker):
    # a disc with its c axis vertical is unchanged by a turn about z (symmetry), so its
    # yaw stiffness is zero (common practice, no source)
    r = P.analyse_plate(checker.B, _geom(checker, 0.010, shape="disc"), density=PG_RHO, **PG)
    assert r.floats and r.stability.laterally_stable
    assert abs(r.stability.k_yaw) < 1e-6 * r.stability.k_pitch + 1e-12


def test_equilibrium_is_highest_root_with_falling_force(checker):
    # definition (Simon and Geim 2000, stable float): F(g) = W, dF/dg < 0, the highest such root
    plate = _geom(checker, 0.010)
    r = P.analyse_plate(checker.B, plate, density=PG_RHO, **PG, with_stability=False)
    f = P.lift_force(checker.B, plate, [r.gap - 1e-6, r.gap, r.gap + 1e-6], **PG)
    assert f[1] == pytest.approx(r.weight, rel=1e-6)
    assert f[0] > f[1] > f[2]
    assert len(r.gaps) >= 50 and r.gaps[0] == pytest.approx(5e-5) and r.gaps[-1] >= 3e-3
    # k_z is -dF/dg
    assert r.k_z == pytest.approx(-(f[2] - f[0]) / 2e-6, rel=1e-3)


def test_bad_geometry_is_an_input_error():
    with pytest.raises(InputError, match="plate.thickness"):
        P.PlateGeometry("rectangle", 0.01, 0.01, -1e-3)
    with pytest.raises(InputError, match="plate.shape"):
        P.PlateGeometry("triangle", 0.01, 0.01, 1e-3)


@pytest.mark.parametrize("dof,step", [(0, 3e-5), (4, 2e-3)])
def test_stiffness_equals_energy_curvature(checker, dof, step):
    # small oscillations (Goldstein ch. 6): K = d^2 U / dq^2 of the volume energy,
    # independent of the surface-integral route used by stiffness_split
    plate = _geom(checker, 0.010)
    gap, pivot = 7e-4, (0.0, 0.0, 1.5e-3)
    poses = np.zeros((3, 6))
    poses[0, dof], poses[2, dof] = step, -step
    u = P.combine(P.stored_energy_split(checker.B, plate, gap, pivot, poses, order=12).T, *PG.values())
    k_energy = (u[0] - 2 * u[1] + u[2]) / step ** 2
    k = P.combine(P.stiffness_split(checker.B, plate, gap, pivot, order=12, dofs=(dof,)),
                  *PG.values())[0, 0]
    assert k == pytest.approx(k_energy, rel=3e-3)


@pytest.mark.parametrize("shape", ["rectangle", "disc"])
def test_closed_surface_rule_geometry(checker, shape):
    # geometry: side area = perimeter x thickness; for a closed surface the integral of
    # n dS vanishes and that of r x n dS too (Gauss theorem applied to constant fields)
    plate = _geom(checker, 0.012, t=1e-3, shape=shape, cx=1e-3)
    ps, ns, ws = P.side_rule(plate, 4e-4, 1.4e-3)
    perimeter = math.pi * 0.012 if shape == "disc" else 4 * 0.012
    assert ws.sum() == pytest.approx(perimeter * 1e-3, rel=1e-12)
    pts, nrm, w = P.surface_rule(plate, 4e-4)
    np.testing.assert_allclose(nrm.T @ w, 0.0, atol=1e-15)
    np.testing.assert_allclose(np.cross(pts, nrm).T @ w, 0.0, atol=1e-17)
    vp, vw = P.volume_rule(plate, 4e-4)
    assert vw.sum() == pytest.approx(plate.volume, rel=1e-12)


def test_lateral_force_and_stiffness_against_plain_midpoint_energy(checker):
    # an independent route: the stored energy U = (1/(2 mu0)) integral w dV on a plain
    # uniform midpoint grid carried with the plate (no panels, no surface integrals), and
    # F_x = -dU/dx, k_x = d^2U/dx^2 (Berry & Geim 1997 energy; Goldstein ch. 6)
    lx, ly, t, gap, cx = 0.010, 0.010, 1e-3, 7e-4, 1.5e-3
    n, nz = 120, 4
    ux = (np.arange(n) + 0.5) / n - 0.5
    uz = (np.arange(nz) + 0.5) / nz
    X, Y, Z = np.meshgrid(ux * lx, ux * ly, uz * t, indexing="ij")
    base = np.column_stack([X.ravel(), Y.ravel(), Z.ravel() + gap])
    dv = lx * ly * t / base.shape[0]

    def energy(dx):
        b = checker.B(base + [cx + dx, 0.0, 0.0])
        w = PG["chi_perp_abs"] * b[:, 2] ** 2 + PG["chi_par_abs"] * (b[:, 0] ** 2 + b[:, 1] ** 2)
        return w.sum() * dv / (2 * MU0)

    h = 5e-5
    u = [energy(h), energy(0.0), energy(-h)]
    plate = _geom(checker, lx, ly, t, cx=cx)
    q = P.combine(P.generalized_forces_split(checker.B, plate, gap, (cx, 0, gap),
                                             np.zeros((1, 6)))[0], *PG.values())
    assert q[0] == pytest.approx(-(u[0] - u[2]) / (2 * h), rel=5e-3)
    k = P.combine(P.stiffness_split(checker.B, plate, gap, (cx, 0, gap), dofs=(0,)), *PG.values())
    assert k[0, 0] == pytest.approx((u[0] - 2 * u[1] + u[2]) / h ** 2, rel=1e-2)


@pytest.mark.parametrize("side", [0.004, 0.010, 0.020, 0.030])
def test_staged_verdict_equals_the_full_matrix_verdict(checker, side):
    # regression check: the staged (verdict-only) path stops early but never changes the
    # verdict; where it runs to the end it has the full matrix's entries
    plate = _geom(checker, side)
    mass = PG_RHO * plate.volume
    gap = P.equilibrium_gap(checker.B, plate, weight=mass * G_STANDARD, order=4, **PG)
    assert gap is not None
    full = P.stability(checker.B, plate, gap, plate_mass=mass, order=4, full=False, **PG)
    staged = P.stability(checker.B, plate, gap, plate_mass=mass, order=4, full=False,
                         staged=True, **PG)
    assert staged.laterally_stable == full.laterally_stable
    assert staged.k_x == pytest.approx(full.k_x, rel=1e-9)
    if full.laterally_stable:
        np.testing.assert_allclose(staged.k, full.k, rtol=1e-9, atol=1e-12 * np.abs(full.k).max())


def test_plane_memo_scaled_by_remanence_squared(checker):
    # Berry & Geim (1997): the energy is quadratic in B, so the lift of the field s B equals
    # the lift of B with |chi| times s^2; a memo of the field B serves both
    plate = _geom(checker, 0.010)
    gaps = np.array([3e-4, 6e-4, 1.2e-3])
    s = 0.93
    memo = P.PlaneMemo(checker.B, plate)
    scaled = P.lift_force(checker.B, plate, gaps, PG["chi_perp_abs"] * s ** 2,
                          PG["chi_par_abs"] * s ** 2, memo=memo)
    direct = P.lift_force(lambda p: s * checker.B(p), plate, gaps, **PG)
    np.testing.assert_allclose(scaled, direct, rtol=1e-12)
    again = P.lift_force(checker.B, plate, gaps, memo=memo, **PG)
    np.testing.assert_allclose(again * s ** 2, scaled, rtol=1e-12)


@pytest.mark.parametrize("side,cx", [(0.010, 1e-3), (0.020, 0.0)])
def test_stiffness_matrix_equals_differences_of_the_volume_torque(checker, side, cx):
    # divergence theorem and Reynolds transport (Jackson sec. 5.16; Flanders, Amer. Math.
    # Monthly 80, 615 (1973)): stiffness_split takes the turning of the anisotropic torque
    # from the level pose and the sideways force from the side faces alone; the plain
    # central differences of the closed-surface force and volume torque at moved poses
    # (generalized_forces_split) give the same matrix
    plate = _geom(checker, side, cx=cx, cy=-4e-4)
    gap, pivot = 6e-4, (cx, -4e-4, 1.6e-3)
    k = P.stiffness_split(checker.B, plate, gap, pivot, order=8)
    hs, hr = max(1e-7, 5e-4 * min(side, 10 * gap)), 2e-4
    steps = np.array([hs] * 3 + [hr] * 3)
    poses = np.zeros((12, 6))
    for d in range(6):
        poses[2 * d, d], poses[2 * d + 1, d] = steps[d], -steps[d]
    q = P.generalized_forces_split(checker.B, plate, gap, pivot, poses, order=8)
    raw = -(q[0::2] - q[1::2]) / (2 * steps[:, None, None])  # (j, comp, i)
    ref = np.transpose(raw, (1, 2, 0))
    ref = 0.5 * (ref + np.swapaxes(ref, -1, -2))
    for c in range(2):
        np.testing.assert_allclose(k[c], ref[c], rtol=0, atol=1e-6 * np.abs(ref[c]).max())


# ---------------------------------------------------------------------------
# mirror symmetry of the field (Jackson sec. 6.10: B and J are axial vectors)
# ---------------------------------------------------------------------------
def test_field_mirrors_of_arrangements_checked_with_magpylib(checker):
    # the lines found are lines of symmetry of B_z^2 and B_x^2 + B_y^2 in magpylib's field
    # (an independent field source); an arrangement without one is not given it
    rng = np.random.default_rng(1)
    pts = np.column_stack([rng.uniform(-0.02, 0.02, 50), rng.uniform(-0.02, 0.02, 50),
                           rng.uniform(1e-4, 3e-3, 50)])
    weak = dataclasses.replace(checker.magnets[0], br=1.1)  # one weaker cube: no mirror
    cases = [(checker, (0.0, 0.0)),
             (build_arrangement("cuboid", (A, A, A), "checkerboard", 2, 3, br=1.3), (0.0, 0.0)),
             (build_arrangement("cylinder", (0.01, 0.005), "single", br=1.2), (0.0, 0.0)),
             (Arrangement((weak,) + checker.magnets[1:]), (None, None))]
    for arr, expect in cases:
        c = magpy.Collection()
        for m in arr.magnets:
            src = (magpy.magnet.Cuboid(polarization=m.polarization, dimension=m.size,
                                       position=m.position) if m.shape == "cuboid" else
                   magpy.magnet.Cylinder(polarization=m.polarization, dimension=m.size,
                                         position=m.position))
            c.add(src)
        mx, my = P.field_mirrors(arr.magnets, 0.0, 0.0)
        for axis, line in ((0, mx), (1, my)):
            mp = pts.copy()
            mp[:, axis] *= -1
            b, bm = magpy.getB(c, pts), magpy.getB(c, mp)
            same = (np.allclose(b[:, 2] ** 2, bm[:, 2] ** 2, rtol=1e-9, atol=1e-12)
                    and np.allclose(b[:, 0] ** 2 + b[:, 1] ** 2, bm[:, 0] ** 2 + bm[:, 1] ** 2,
                                    rtol=1e-9, atol=1e-12))
            assert (line is not None) == same, (arr.pattern, axis)
        assert (mx, my) == expect
        # the diagonal: (x, y) -> (y, x)
        b, bm = magpy.getB(c, pts), magpy.getB(c, pts[:, [1, 0, 2]])
        same = (np.allclose(b[:, 2] ** 2, bm[:, 2] ** 2, rtol=1e-9, atol=1e-12)
                and np.allclose(b[:, 0] ** 2 + b[:, 1] ** 2, bm[:, 0] ** 2 + bm[:, 1] ** 2,
                                rtol=1e-9, atol=1e-12))
        assert P.field_swaps(arr.magnets, 0.0, 0.0) == same
    assert P.field_swaps(checker.magnets, 0.0, 0.0)
    assert P.field_mirrors(checker.magnets, 1e-3, 0.0) == (None, 0.0)


@pytest.mark.parametrize("side,gaps", [(0.010, [6e-4]), (0.0047, [7e-5, 1e-3]),
                                        (0.031, [1e-3, 2e-3])])
def test_folded_footprint_integrals_equal_the_full_rule(checker, side, gaps):
    # regression check: a plate centred on the field's mirror lines integrates a quarter
    # of the nodes and gets the full rule's sums (to rounding), for every height
    bx, by = P.edge_lines(checker.magnets)
    full = P.PlateGeometry("rectangle", side, side, 1e-3, 0.0, 0.0, bx, by)
    mirrored = P.PlateGeometry("rectangle", side, side, 1e-3, 0.0, 0.0, bx, by, (0.0, 0.0))
    eighth = dataclasses.replace(mirrored, swap=True)
    for order in (4, 8):
        a = P.plate_surface_integrals(checker.B, full, gaps, order)
        for plate in (mirrored, eighth):
            b = P.plate_surface_integrals(checker.B, plate, gaps, order)
            for u, v in zip(a, b):
                np.testing.assert_allclose(v, u, rtol=1e-12)
        x, _, _ = P.footprint_rule(mirrored, gaps[0], order, folded=True)
        assert x.size < 0.5 * P.footprint_rule(full, gaps[0], order)[0].size
    # off both mirror lines nothing is folded
    off = mirrored.shifted(1e-3, 1e-3)
    assert P.footprint_rule(off, gaps[0], 4, folded=True)[0].size == \
        P.footprint_rule(off, gaps[0], 4)[0].size
    f = P.lateral_force(checker.B, mirrored, gaps[0], **PG)
    np.testing.assert_allclose(f, P.lateral_force(checker.B, full, gaps[0], **PG), rtol=0,
                               atol=1e-12 * P.lift_force(checker.B, full, gaps, **PG)[0])


@pytest.mark.parametrize("side,paired", [(0.006, True), (0.012, True), (0.026, False)])
def test_mirrored_poses_give_the_stiffness_of_both_poses(checker, side, paired):
    # regression check: over a field with mirror lines through the plate's centre and
    # the pivot, each perturbation's minus pose is the mirror image of its plus pose
    # (forces polar, torques axial: Jackson sec. 6.10); the matrix equals the one from
    # both poses evaluated
    bx, by = P.edge_lines(checker.magnets)
    plain = P.PlateGeometry("rectangle", side, side, 1e-3, 0.0, 0.0, bx, by)
    mirrored = P.PlateGeometry("rectangle", side, side, 1e-3, 0.0, 0.0, bx, by, (0.0, 0.0))
    gap = 5e-4
    # (the 26 mm plate's graded rule is not its own mirror image at this gap: both poses)
    assert any(P.mirrored_rules(mirrored, gap, 8)) == paired
    pivot = (0.0, 0.0, gap + 1.5e-3)
    a = P.stiffness_split(checker.B, plain, gap, pivot, order=8)
    # and with the diagonal too: the y and roll columns from the x and pitch columns
    swapped = dataclasses.replace(mirrored, swap=True)
    assert P.swapped_rules(swapped, gap, 8)
    for plate in (mirrored, swapped):
        b = P.stiffness_split(checker.B, plate, gap, pivot, order=8)
        for c in range(2):
            np.testing.assert_allclose(b[c], a[c], rtol=0, atol=1e-9 * np.abs(a[c]).max())
        staged = P.stability(checker.B, plate, gap, 4.5e-4, 8.5e-5, PG_RHO * plate.volume,
                             order=8, full=False, staged=True)
        assert staged.laterally_stable == P.stability(
            checker.B, plain, gap, 4.5e-4, 8.5e-5, PG_RHO * plate.volume, order=8,
            full=False).laterally_stable


def test_default_model_folds_only_where_its_field_is_symmetric():
    # regression check: with the accurate recoil model (recoil_cells = 5, its correction tabulated) the
    # plate of a design is given only the mirror lines and diagonal along which the field's
    # B_z^2 and B_x^2 + B_y^2 are symmetric (Jackson sec. 6.10) to 1e-12, and the folded
    # footprint integrals then equal the full rule's
    from pathlib import Path

    from matdb.analysis.levitate import plate_geometry
    from matdb.design import load_design_text

    text = (Path(__file__).resolve().parent.parent / "examples" / "plate_checkerboard_2x2.toml").read_text()
    design = load_design_text(text.replace("[magnets]\n", "[magnets]\nrecoil_cells = 5\n", 1))
    arr = design.arrangement(293.15)
    assert arr.cells is not None
    geom = plate_geometry(design, arr)
    rng = np.random.default_rng(3)
    pts = np.column_stack([rng.uniform(-0.015, 0.015, 400), rng.uniform(-0.015, 0.015, 400),
                           rng.uniform(5e-5, 3e-3, 400)])
    b = arr.B(pts)
    scale = (b ** 2).sum(axis=1).max()
    images = [(geom.mirrors[0] is not None, pts * [-1, 1, 1]),
              (geom.mirrors[1] is not None, pts * [1, -1, 1]), (geom.swap, pts[:, [1, 0, 2]])]
    for claimed, image in images:
        if claimed:
            bm = arr.B(image)
            np.testing.assert_allclose(bm[:, 2] ** 2, b[:, 2] ** 2, rtol=0, atol=1e-11 * scale)
            np.testing.assert_allclose((bm[:, :2] ** 2).sum(axis=1), (b[:, :2] ** 2).sum(axis=1),
                                       rtol=0, atol=1e-11 * scale)
    plain = dataclasses.replace(geom, mirrors=(None, None), swap=False)
    gaps = [1e-4, 5e-4]
    for u, v in zip(P.plate_surface_integrals(arr.B, geom, gaps, 4),
                    P.plate_surface_integrals(arr.B, plain, gaps, 4)):
        np.testing.assert_allclose(u, v, rtol=1e-11)
    # the rigid magnets' field has every symmetry of the layout
    rigid = design.arrangement(293.15, rigid=True)
    g = plate_geometry(design, rigid)
    assert g.mirrors == (0.0, 0.0) and g.swap


@pytest.mark.parametrize("lx,ly,cx,gap", [(0.012, 0.012, 0.0, 5e-5), (0.02, 0.012, 0.0, 5.5e-4),
                                         (0.012, 0.012, 1e-3, 5.5e-4), (0.006, 0.006, 0.0, 0.0)])
def test_surface_images_are_the_mirrored_nodes(checker, lx, ly, cx, gap):
    # regression check: the image of each closed-surface node in a mirror line through the
    # plate's centre is the node at the mirrored point, with the same weight and the normal
    # mirrored (a polar vector: Jackson sec. 6.10); off a line there is no image
    bx, by = P.edge_lines(checker.magnets)
    plate = P.PlateGeometry("rectangle", lx, ly, 1e-3, cx, 0.0, bx, by, (0.0, 0.0))
    sp, sn, sw = P.surface_rule(plate, gap, 8)
    images = P.surface_images(plate, gap, 8)
    assert [a for a, _, _ in images] == [a for a, ok in enumerate(P.mirrored_rules(plate, gap, 8))
                                         if ok]
    assert (0 in [a for a, _, _ in images]) == (cx == 0.0)
    for axis, image, kept in images:
        c = (plate.cx, plate.cy)[axis]
        want = sp.copy()
        want[:, axis] = 2 * c - sp[:, axis]
        np.testing.assert_allclose(sp[image], want, rtol=0, atol=1e-12 * lx)
        np.testing.assert_allclose(sw[image], sw, rtol=1e-12)
        nm = sn.copy()
        nm[:, axis] *= -1
        np.testing.assert_array_equal(sn[image], nm)
        assert np.array_equal(image[image], np.arange(image.size))  # an involution
        assert np.all(kept[image] | kept)  # each pair keeps at least one node
    disc = P.PlateGeometry("disc", lx, lx, 1e-3, 0.0, 0.0, bx, by, (0.0, 0.0))
    assert P.surface_images(disc, gap, 8) == ()


@settings(max_examples=200, deadline=None)
@given(lo=st.floats(-0.05, 0.05), width=st.floats(1e-4, 0.06),
       sing=st.lists(st.floats(-0.08, 0.08), max_size=6), scale=st.floats(1e-7, 1e-2),
       ratio=st.sampled_from([2.0, 3.0, 4.5]))
def test_graded_breaks_panels_grow_geometrically_from_singular_points(lo, width, sing, scale,
                                                                      ratio):
    # Davis & Rabinowitz (1984) ch. 2: panels graded towards a singular point; the rule's
    # contract: sorted breaks from lo to hi through every singular point inside, and each
    # panel away from them no wider than ratio (ratio - 1) x its distance (at least
    # `scale`): the candidate grid's panels have (ratio - 1), merging at most one more step
    from matdb.physics.quadrature import graded_breaks

    hi = lo + width
    b = graded_breaks(lo, hi, sing, scale, ratio)
    assert b[0] == lo and b[-1] == hi and np.all(np.diff(b) > 0)
    near = sorted(s for s in sing if max(lo - s, s - hi, 0.0) <= 0.5 * width)
    for s in near:
        if lo + 1e-9 * width < s < hi - 1e-9 * width:
            assert np.min(np.abs(b - s)) <= 1e-9 * width
    if near:
        s = np.asarray(near)
        for a, c in zip(b[:-1], b[1:]):
            inside = np.any((s >= a) & (s <= c))
            d = 0.0 if inside else float(np.min(np.minimum(np.abs(s - a), np.abs(s - c))))
            assert inside or c - a <= ratio * (ratio - 1.0) * max(d, scale) * (1 + 1e-9)
