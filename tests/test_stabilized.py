"""Floating-magnet mode (matdb.physics.stabilized): every check against something outside
the module, named beside it."""

from __future__ import annotations

import json
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hst
from scipy import integrate

from matdb.errors import InputError
from matdb.physics import stabilized as S
from matdb.constants import MU0

REPO = Path(__file__).resolve().parent.parent
EXAMPLE = REPO / "examples" / "floating_magnet.toml"
TWO = REPO / "examples" / "floating_magnet_two_stations.toml"
THREE = REPO / "examples" / "floating_magnet_three_stations.toml"


def _rigid_doc(path):
    """The example with ``rigid = true`` on every magnet: the idealised model these
    tests compare with magpylib."""
    doc = tomllib.loads(path.read_text())
    tables = [doc.get("lifter"), doc.get("floater")]
    for st in doc.get("station", []):
        tables += [st.get("lifter"), st.get("floater")]
    for t in tables:
        if isinstance(t, dict):
            t["rigid"] = True
    return doc
C = MU0 / (4 * math.pi)


# ---------------------------------------------------------------------------
# helpers: the point-dipole field, straight from Jackson (1999), eq. (5.56)
# ---------------------------------------------------------------------------
def jackson_b(m_vec, r_vec):
    """B of a point dipole m at the origin, at r (Jackson eq. 5.56)."""
    r = np.asarray(r_vec, dtype=float)
    m = np.asarray(m_vec, dtype=float)
    rn = np.linalg.norm(r)
    n = r / rn
    return C * (3 * n * (n @ m) - m) / rn**3


def b2_vertical(rho, z, m):
    """|B|^2 of a vertical dipole, C^2 m^2 (4 z^2 + rho^2) / r^8 (Jackson eq. 5.56 squared)."""
    return C**2 * m**2 * (4 * z**2 + rho**2) / (rho**2 + z**2) ** 4


def test_hand_derivatives_of_dipole_b2_match_finite_differences():
    # the hand derivatives used below, checked against central differences of Jackson's
    # field itself (numerical differentiation, no source needed)
    m, rho, z, h = 0.3, 2e-3, 3e-3, 1e-7
    d1 = -24 * C**2 * m**2 * z**3 / (rho**2 + z**2) ** 5
    d2 = -24 * C**2 * m**2 * z**2 * (3 * rho**2 - 7 * z**2) / (rho**2 + z**2) ** 6

    def b2(zz):
        b = jackson_b([0, 0, m], [rho, 0, zz])
        return b @ b

    assert d1 == pytest.approx((b2(z + h) - b2(z - h)) / (2 * h), rel=1e-6)
    assert d2 == pytest.approx((b2(z + h) - 2 * b2(z) + b2(z - h)) / h**2, rel=1e-4)


# ---------------------------------------------------------------------------
# image-dipole model against direct integration of the force density
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("thickness", [math.inf, 1e-3])
def test_image_dipole_force_and_stiffness_vs_half_space_integration(thickness):
    # force density on a weak diamagnet (chi/2mu0) grad(B^2) (Landau & Lifshitz sec. 32;
    # Simon, Heflinger & Geim 2001), integrated over the plate's volume with scipy.integrate
    m, chi, a = 0.25, -1.6e-4, 4e-3
    top = a + thickness if math.isfinite(thickness) else np.inf
    d1 = lambda rho, z: -24 * C**2 * m**2 * z**3 / (rho**2 + z**2) ** 5  # noqa: E731
    d2 = lambda rho, z: -24 * C**2 * m**2 * z**2 * (3 * rho**2 - 7 * z**2) / (rho**2 + z**2) ** 6  # noqa: E731
    # force on the plate, z component: (chi/2mu0) * integral of d(B^2)/dz; on the dipole: minus that
    fz_plate, _ = integrate.dblquad(lambda rho, z: chi / (2 * MU0) * d1(rho, z) * 2 * math.pi * rho,
                                    a, top, 0, np.inf, epsabs=0, epsrel=1e-10)
    assert fz_plate > 0  # the plate above is pushed up, away from the dipole (and the dipole down)
    assert S.dipole_plate_force(m, chi, a, thickness) == pytest.approx(fz_plate, rel=1e-7)
    # stiffness of one plate: d2U/dz2 with U = |chi|/(2mu0) * integral of B^2
    k1, _ = integrate.dblquad(lambda rho, z: abs(chi) / (2 * MU0) * d2(rho, z) * 2 * math.pi * rho,
                              a, top, 0, np.inf, epsabs=0, epsrel=1e-10)
    assert S.dipole_plates_stiffness(m, chi, a, thickness) == pytest.approx(2 * k1, rel=1e-7)


def test_dipole_stiffness_is_the_published_formula_for_thick_plates():
    # Simon, Heflinger & Geim, Am. J. Phys. 69, 702 (2001): k = 3 mu0 |chi| m^2 / (8 pi a^5)
    m, chi, a = 0.1, -4e-4, 3e-3
    assert S.dipole_plates_stiffness(m, chi, a) == pytest.approx(3 * MU0 * abs(chi) * m**2 / (8 * math.pi * a**5))


@pytest.mark.parametrize("orientation", ["vertical", "horizontal"])
def test_anisotropic_half_space_equals_mean_chi(orientation):
    # Simon, Heflinger & Geim (2001): effective chi (chi_perp + chi_par)/2 for a dipole;
    # checked by integrating Jackson's field over a plane at depth s (scipy.integrate)
    m = [0, 0, 1.0] if orientation == "vertical" else [1.0, 0, 0]
    s = 2e-3

    def comp(rho, phi, which):
        b = jackson_b(m, [rho * math.cos(phi), rho * math.sin(phi), s])
        v = b[2] ** 2 if which == "z" else b[0] ** 2 + b[1] ** 2
        return v * rho

    bz, _ = integrate.dblquad(lambda rho, phi: comp(rho, phi, "z"), 0, 2 * math.pi, 0, np.inf, epsrel=1e-9)
    bh, _ = integrate.dblquad(lambda rho, phi: comp(rho, phi, "h"), 0, 2 * math.pi, 0, np.inf, epsrel=1e-9)
    assert bz == pytest.approx(bh, rel=1e-6)
    cp, cq = -4.5e-4, -8.5e-5
    assert abs(cp) * bz + abs(cq) * bh == pytest.approx(abs(S.effective_chi(cp, cq)) * (bz + bh), rel=1e-6)


def test_dipole_tilt_stiffness_vs_image_energy_of_a_tilted_dipole():
    # image of a dipole in a weak half-space: (chi/2)(-m_x, -m_y, m_z) at the mirror point
    # (Jackson sec. 4.4 with mu -> 1 + chi); energy -1/2 m.B_image; second difference in tilt
    m0, chi, a, d = 0.2, -3e-4, 5e-3, 1e-3

    def energy(th):
        m = m0 * np.array([math.sin(th), 0, math.cos(th)])
        img = chi / 2 * np.array([-m[0], -m[1], m[2]])
        return 2 * (-0.5 * m @ jackson_b(img, [0, 0, 2 * a]))  # two plates, same by symmetry

    kappa = (energy(d) + energy(-d) - 2 * energy(0)) / d**2
    assert S.dipole_plates_tilt_stiffness(m0, chi, a) == pytest.approx(kappa, rel=1e-5)
    assert kappa < 0  # plates push a dipole to lie down (Simon, Heflinger & Geim 2001)


# ---------------------------------------------------------------------------
# finite-size model of the plates
# ---------------------------------------------------------------------------
FLOATER = S.Body("cylinder", (6.35e-3, 3.175e-3), 1.3)


def test_plane_integral_vs_scipy_quad():
    # P(s) for the real cylinder field, integrated with scipy.integrate.quad over the radius
    # (independent adaptive quadrature of the same integrand)
    fp = S.FinitePlates(FLOATER, -4.5e-4, -8.5e-5, 1e-3)
    s = FLOATER.half_height + 0.4e-3

    def f(rho):
        b = FLOATER.B(np.array([[rho, 0.0, s]]))[0]
        return (4.5e-4 * b[2] ** 2 + 8.5e-5 * (b[0] ** 2 + b[1] ** 2)) * 2 * math.pi * rho

    R = FLOATER.size[0] / 2
    pts = [0, R - 1e-3, R, R + 1e-3, 5 * R, 50 * R]
    ref = sum(integrate.quad(f, lo, hi, epsabs=0, epsrel=1e-11, limit=400)[0] for lo, hi in zip(pts[:-1], pts[1:]))
    ref += integrate.quad(f, pts[-1], np.inf, epsabs=0, epsrel=1e-9)[0]
    assert fp.plane_integral(s) == pytest.approx(ref, rel=1e-7)


def test_slab_energy_vs_depth_integral_of_plane_integrals():
    # U = 2 * 1/(2 mu0) * integral over depth of P(s) (Landau & Lifshitz sec. 32), the depth
    # integral done by scipy.integrate.quad: checks the volume quadrature used for tilt
    fp = S.FinitePlates(FLOATER, -1.6e-4, -1.6e-4, 1e-3)
    a = FLOATER.half_height + 0.5e-3
    q, _ = integrate.quad(fp.plane_integral, a, a + 1e-3, epsabs=0, epsrel=1e-10, limit=200)
    assert fp.energy(a) == pytest.approx(q / MU0, rel=1e-6)


@pytest.mark.parametrize("shape,size", [("cylinder", (6.35e-3, 3.175e-3)), ("cuboid", (5e-3, 5e-3, 5e-3))])
def test_finite_size_plates_tend_to_the_dipole_model(shape, size):
    # Simon, Heflinger & Geim (2001): far from the plates the floater acts as its dipole
    body = S.Body(shape, size, 1.3)
    fp = S.FinitePlates(body, -4.5e-4, -8.5e-5, 1e-3)
    errs, terrs = [], []
    for a in (5 * max(size), 10 * max(size), 25 * max(size)):
        kd = S.dipole_plates_stiffness(body.moment, fp.chi_dipole, a, 1e-3)
        td = S.dipole_plates_tilt_stiffness(body.moment, fp.chi_dipole, a, 1e-3)
        errs.append(abs(fp.stiffness(a) / kd - 1))
        terrs.append(abs(fp.tilt_stiffness(a) / td - 1))
    assert errs[0] > errs[1] > errs[2] and errs[2] < 2e-3
    assert terrs[-1] < 2e-2 and terrs[-1] < terrs[0]


def test_finite_size_table_matches_direct_evaluation():
    # the tabulated stiffness against the same integrals without the table (convergence of
    # the interpolation; numerical, no source needed)
    fp = S.FinitePlates(FLOATER, -4.5e-4, -8.5e-5, 1e-3, g_min=0.2e-3)
    for a in (FLOATER.half_height + 0.3e-3, 3e-3, 7.7e-3, 30e-3):
        assert fp.stiffness(a) == pytest.approx(fp.stiffness_direct(a), rel=1e-4)


def test_plate_stiffness_quadrature_converges_as_the_plates_close_in():
    # finer Gauss-Legendre panels give the same plane-integral slope near the face
    # (convergence test, numerical, no source needed)
    fp = S.FinitePlates(FLOATER, -1.6e-4, -1.6e-4, 1e-3)
    for gap in (1e-3, 1e-4, 1e-5):
        s = FLOATER.half_height + gap
        xy, w = fp._plane_nodes(s)
        coarse = fp.plane_integral_slope(s)
        # halve every panel: recompute with twice the Gauss order on the same edges
        r_edges = S._axis_edges(fp._features()[0], gap, 1e3 * (s + FLOATER.lateral))
        r, wr = S._composite(r_edges, 16)
        d = 1e-3 * gap
        vals = []
        for z in s + d * np.array([-2.0, -1.0, 1.0, 2.0]):
            b = FLOATER.B(np.column_stack([r, np.zeros_like(r), np.full(r.size, z)]))
            vals.append((2 * math.pi * r * wr) @ fp._weighted(b))
        fine = (vals[0] - 8 * vals[1] + 8 * vals[2] - vals[3]) / (12 * d)
        assert coarse == pytest.approx(fine, rel=1e-6)
        assert np.isfinite(coarse) and coarse < 0


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
    from scipy.spatial.transform import Rotation

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
# the report: facts of the trade
# ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo():
    from matdb.design import parse_stabilized

    return parse_stabilized(_rigid_doc(EXAMPLE), source=str(EXAMPLE))


@pytest.fixture(scope="module")
def demo_result(demo):
    return S.levitate_stabilized(demo)


def test_result_keys_are_plain_json(demo_result):
    # the contract keys, JSON round trip (json module)
    keys = {"mode", "floats", "lifter_distance_m", "k_lifter_z_n_m", "k_lifter_r_n_m", "k_plates_n_m",
            "k_plates_dipole_n_m", "max_plate_distance_m", "max_plate_distance_dipole_m", "max_payload_kg",
            "verdict_model", "window", "safe_distance_m", "warnings", "tilt_stable"}
    assert keys <= set(demo_result)
    assert json.loads(json.dumps(demo_result)) == demo_result
    assert demo_result["mode"] == "stabilized" and demo_result["verdict_model"] == "finite-size"
    for row in demo_result["window"]:
        assert {"payload_kg", "lifter_distance_m", "max_plate_distance_m"} <= set(row)


def test_balance_is_unstable_alone_and_weight_is_held(demo, demo_result):
    # Earnshaw: the lifter alone is vertically unstable at the balance (k_z < 0); the pull
    # there equals the weight (statics)
    st = demo.stations[0]
    r = demo_result
    assert r["k_lifter_z_n_m"] < 0 < r["k_lifter_r_n_m"]
    model = S._station_model(st, demo.temperature_k)
    w = (st.floater.mass_kg + st.payload_kg) * 9.80665
    assert model.force(r["lifter_distance_m"]) == pytest.approx(w, rel=1e-9)
    assert model.force(r["lifter_distance_m"] * 0.99) > w  # closer pulls harder: falling branch


def test_heavier_payload_sits_closer_and_window_narrows(demo_result):
    # common practice, no source: a heavier floater is set closer to the lifter and the
    # plates must come closer (the balance becomes more delicate)
    rows = [r for r in demo_result["window"] if r["max_plate_distance_m"] is not None]
    assert len(rows) >= 5
    d = [r["lifter_distance_m"] for r in rows]
    a = [r["max_plate_distance_m"] for r in rows]
    assert all(x > y for x, y in zip(d, d[1:]))
    assert all(x > y for x, y in zip(a, a[1:]))
    # beyond the largest payload no stable point exists
    last = demo_result["window"][-1]
    assert last["payload_kg"] == pytest.approx(demo_result["max_payload_kg"])
    # with the plates fixed at the design's distance the largest payload is where the
    # narrowing window passes that distance
    a = demo_result["plate_distance_m"]
    p_here = demo_result["max_payload_at_plate_distance_kg"]
    below = [r for r in rows if r["payload_kg"] < p_here]
    above = [r for r in rows if r["payload_kg"] > p_here]
    assert below and above
    assert below[-1]["max_plate_distance_m"] > a > above[0]["max_plate_distance_m"]


def test_plates_too_far_or_too_weak_give_no_stable_point(demo):
    # common practice, no source: without (effective) plates, or with plates too far apart,
    # the floater snaps up or falls
    from dataclasses import replace

    st = demo.stations[0]
    far = replace(st, plates=replace(st.plates, distance=10e-3))
    r = S.levitate_stabilized(replace(demo, stations=(far,)))
    assert r["floats"] is False and r["plate_distance_in_window"] is False
    assert r["k_z_total_n_m"] < 0
    none = replace(st, plates=replace(st.plates, chi_perp=-1e-9, chi_par=-1e-9, distance=None))
    r = S.levitate_stabilized(replace(demo, stations=(none,)))
    assert r["floats"] is False and r["max_plate_distance_m"] is None


def test_lifter_that_cannot_clear_the_upper_plate_is_refused(demo):
    # geometry: the upper plate (distance + thickness) must fit below the lifter's face
    from dataclasses import replace

    st = demo.stations[0]
    weak = replace(st, lifter=st.floater)  # a lifter as small as the floater sits close
    d = S._station_model(weak, demo.temperature_k).balance((st.floater.mass_kg + st.payload_kg) * 9.80665)
    bad = replace(weak, plates=replace(st.plates, distance=d - 0.5 * st.plates.thickness))
    with pytest.raises(InputError, match="cannot clear the upper plate"):
        S.levitate_stabilized(replace(demo, stations=(bad,)))


def test_warnings_carry_the_strong_magnet_cautions(demo_result):
    from matdb.physics.thermal import SAFETY_TEXT

    assert SAFETY_TEXT in demo_result["warnings"]
    assert demo_result["safe_distance_m"] > 0.05  # 0.5 mT farther than 5 cm from a 25 mm NdFeB magnet (Jackson 5.56 estimate)


# ---------------------------------------------------------------------------
# several stations
# ---------------------------------------------------------------------------
def test_two_stations_lever_rule():
    # statics of a rigid beam on two supports (lever rule): equal shares when centred,
    # W * (distance to the other support) / span otherwise
    pos = [(-30e-3, 0), (30e-3, 0)]
    assert S.weight_shares(pos, 1.0, (0, 0)) == pytest.approx([0.5, 0.5])
    assert S.weight_shares(pos, 1.0, (-15e-3, 0)) == pytest.approx([0.75, 0.25])
    with pytest.raises(InputError, match="centre_of_mass"):
        S.weight_shares(pos, 1.0, (0, 5e-3))


def test_three_stations_statics_exact():
    # three supports not in a line: shares from force and moment balance (statics)
    pos = np.array([(0, 0), (40e-3, 0), (0, 30e-3)])
    s = S.weight_shares(pos, 2.0, (10e-3, 5e-3))
    assert s.sum() == pytest.approx(2.0)
    assert s @ pos[:, 0] == pytest.approx(2.0 * 10e-3)
    assert s @ pos[:, 1] == pytest.approx(2.0 * 5e-3)


def test_two_station_demo_shares_and_tilt(tmp_path):
    # lever rule on the demo (centre of mass 5 mm towards the right of a 60 mm span) and
    # the heavier share set closer to its lifter (common practice, no source)
    from matdb.design import parse_stabilized

    d = parse_stabilized(_rigid_doc(TWO))
    r = S.levitate_stabilized(d)
    left, right = r["stations"]
    assert right["share_fraction"] == pytest.approx(35 / 60)
    assert left["share_fraction"] == pytest.approx(25 / 60)
    assert right["lifter_distance_m"] < left["lifter_distance_m"]
    assert isinstance(r["tilt_stable"], bool)
    assert r["max_payload_kg"] > d.payload.mass_kg
    # statics with every lifter pulling on every floater: magpylib's forces of both lifters
    # on each floater add up to that floater's load (its weight plus its share)
    magpy = pytest.importorskip("magpylib")
    for i, s_i in enumerate(d.stations):
        srcs = []
        for j, s_j in enumerate(d.stations):
            D = r["stations"][j]["lifter_distance_m"]
            h = s_j.lifter.size[-1]
            srcs.append(magpy.magnet.Cylinder(dimension=s_j.lifter.size, polarization=(0, 0, s_j.lifter.br_t),
                                              position=(s_j.x - s_i.x, s_j.y - s_i.y, D + h / 2)))
        tgt = magpy.magnet.Cylinder(dimension=s_i.floater.size, polarization=(0, 0, s_i.floater.br_t))
        F, _ = magpy.getFT(srcs, tgt, meshing=2000)
        load = (s_i.floater.mass_kg + s_i.payload_kg) * 9.80665 + r["stations"][i]["share_n"]
        assert F[:, 2].sum() == pytest.approx(load, rel=1e-4)


def test_centred_identical_stations_share_equally():
    # symmetry of statics: identical stations under a centred payload share equally
    from matdb.design import parse_stabilized

    doc = _rigid_doc(TWO)
    doc["payload"]["centre_of_mass"] = ["0 mm", "0 mm"]
    r = S.levitate_stabilized(parse_stabilized(doc))
    a, b = r["stations"]
    assert a["share_n"] == pytest.approx(b["share_n"], rel=1e-12)
    assert a["lifter_distance_m"] == pytest.approx(b["lifter_distance_m"], rel=1e-9)


def test_three_station_disc_shares_and_tilt_mode():
    # statics: three supports at the corners of an equilateral triangle under a centred
    # payload carry a third each; a rigid body on three stable vertical supports not in a
    # line has positive tilt stiffness (K = sum k_i r_i r_i^T); its centre of mass below
    # the floaters only adds to it (pendulum)
    from matdb.design import parse_stabilized

    d = parse_stabilized(_rigid_doc(THREE))
    r = S.levitate_stabilized(d)
    assert [s["share_fraction"] for s in r["stations"]] == pytest.approx([1 / 3] * 3, rel=1e-5)
    assert all(s["stable"] for s in r["stations"])
    assert r["tilt_stable"] is True and min(r["body_stiffness_eigenvalues"]) > 0
    assert r["floats"] is True


def test_rigid_body_tilt_needs_positive_station_stiffness():
    # rigid body on springs: a tilt mode is stable when every support is (vertical springs
    # k_i at lever arms r_i give K = sum k_i r_i^2); one negative spring can make it unstable
    st = {"k_x": 1.0, "k_y": 1.0, "k_z": 2.0, "kappa_x": 1e-4, "kappa_y": 1e-4, "kappa_z": 0.0,
          "c_x_ty": 0.0, "c_y_tx": 0.0}
    pos = [(-0.03, 0.0), (0.03, 0.0)]
    K = S._body_stiffness([st, st], pos, (0.0, 0.0, 0.0), 0.01)
    assert K[4, 4] == pytest.approx(2 * 2.0 * 0.03**2 + 2e-4)
    bad = dict(st, k_z=-0.5)
    K2 = S._body_stiffness([st, bad], pos, (0.0, 0.0, 0.0), 0.01)
    assert K2[4, 4] < K[4, 4]
    # a centre of mass above the floaters lowers the tilt stiffness by W z (pendulum, inverted)
    K3 = S._body_stiffness([st, st], pos, (0.0, 0.0, 0.01), 0.01)
    assert K3[3, 3] == pytest.approx(K[3, 3] - 0.01 * 0.01)


# ---------------------------------------------------------------------------
# CLI
# ---------------------------------------------------------------------------
def test_cli_levitate_json(run_cli):
    # matdb levitate DESIGN --format json (issue 4 contract)
    code, out, err = run_cli("levitate", str(EXAMPLE), "--format", "json")
    assert code == 0, err
    r = json.loads(out)
    assert r["mode"] == "stabilized"
    assert r["k_lifter_z_n_m"] < 0
    assert r["window"] and r["verdict_model"] == "finite-size"


def test_cli_levitate_table_shows_the_schedule_in_mm(run_cli):
    # the table is for a person: lifter distance in mm, the payload schedule, the cautions
    code, out, err = run_cli("levitate", str(EXAMPLE), "--format", "json")
    r = json.loads(out)
    code, out, err = run_cli("levitate", str(EXAMPLE))
    assert code == 0, err
    assert f"{r['lifter_distance_m'] * 1e3:.4g} mm" in out
    assert "schedule" in out and "Strong magnets need care" in out


def test_cli_refuses_unknown_key(run_cli, tmp_path):
    # errors are one line naming the key, exit status 2 (DEVELOPERS.md contract)
    doc = EXAMPLE.read_text().replace('payload = "0.2 g"', 'payload = "0.2 g"\ncolour = "red"')
    p = tmp_path / "bad.toml"
    p.write_text(doc)
    code, out, err = run_cli("levitate", str(p))
    assert code == 2 and "floater.colour" in err
