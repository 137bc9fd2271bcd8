"""Tests of matdb.physics.thermal against definitions, textbook fields and magpylib.

Field references used below:

* on-axis field of a uniformly magnetised cylinder (equivalent finite solenoid), a
  standard textbook result (e.g. J. M. D. Coey, Magnetism and Magnetic Materials, 2010,
  ch. 2; from memory);
* magnetic surface charge sigma = M.n and the field of a charged sheet through its solid
  angle, H_n = sigma * Omega / (4 pi) (J. D. Jackson, Classical Electrodynamics, 3rd ed.,
  section 5.9, from memory of the section number; "Jackson s. 5.9" below); the solid
  angle of a rectangle seen from above one corner, Omega = atan(A B / (h sqrt(A^2 + B^2
  + h^2))) (standard geometry result);
* the dipole field, Jackson eq. (5.56);
* magpylib (independent closed-form implementation), used as a reference only.
"""

from __future__ import annotations

import math

import magpylib
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matdb.errors import InputError
from matdb.physics.thermal import (
    KNEE_FRACTION,
    SAFETY_TEXT,
    T_REF_K,
    DemagResult,
    br_at,
    chi_at,
    hcj_at,
    lift_derating_pct,
    lift_factor,
    safe_distance,
    worst_case_abs_chi,
    worst_case_br,
)
from matdb.constants import MU0
from matdb.physics.arrangement import build_arrangement
from matdb.physics.thermal import demag_check

C = 273.15  # degC -> K offset (definition of the Celsius scale)

# Grade values used as inputs, from memory of the Chinese sintered NdFeB standard
# GB/T 13560 and of MMPA 0100-00 tables; verify before relying on them elsewhere:
N35_BR, N42_BR = 1.19, 1.30  # typical remanence [T]
N_HCJ = 955e3  # minimum Hcj of the plain N grades, 12 kOe [A/m]
NDFEB_ALPHA, NDFEB_BETA = -0.12, -0.6  # [%/K], common catalogue values
# High-coercivity anisotropic hard ferrite (Sr-La-Co type), from memory of MMPA 0100-00
# and makers' tables; verify:
FERRITE_BR, FERRITE_HCJ = 0.40, 400e3
FERRITE_ALPHA, FERRITE_BETA = -0.20, +0.30  # [%/K]; beta > 0 is the mark of ferrite


# ---------------------------------------------------------------------------
# reversible temperature laws
# ---------------------------------------------------------------------------
def test_br_at_80c_with_ndfeb_alpha():
    # definition of the reversible temperature coefficient of Br (IEC 60404-8-1,
    # MMPA 0100-00): Br(T) = Br20 (1 + alpha/100 (T - 20 C)); 60 K x -0.12 %/K = -7.2 %
    assert br_at(1.30, -0.12, 80 + C) == pytest.approx(0.928 * 1.30, rel=1e-12)


def test_hcj_at_follows_its_coefficient_in_both_directions():
    # same definition for Hcj (IEC 60404-8-1): NdFeB (beta < 0) loses coercivity hot,
    # hard ferrite (beta > 0) loses it cold (common practice / MMPA 0100-00)
    assert hcj_at(N_HCJ, -0.6, 120 + C) == pytest.approx(0.4 * N_HCJ, rel=1e-12)
    assert hcj_at(FERRITE_HCJ, 0.3, -40 + C) == pytest.approx(0.82 * FERRITE_HCJ, rel=1e-12)


def test_lift_derating_at_60c():
    # derived: lift ~ chi grad(B^2) (Berry & Geim, Eur. J. Phys. 18, 307 (1997)),
    # so lift(T)/lift(20 C) = (1 + alpha dT)^2 = (1 - 0.048)^2 -> 9.37 % lost
    assert lift_derating_pct(-0.12, 60 + C) == pytest.approx(100 * (1 - (1 - 0.048) ** 2), rel=1e-12)
    assert lift_factor(-0.12, 60 + C) == pytest.approx((1 - 0.048) ** 2, rel=1e-12)


@settings(max_examples=50, deadline=None)
@given(
    alpha=st.floats(-0.5, 0.0),
    c=st.floats(-5e-3, 5e-3),
    t_c=st.floats(-60.0, 150.0),
)
def test_chi_coefficient_enters_linearly(alpha, c, t_c):
    # derived from F ~ chi grad(B^2): the chi factor multiplies the field factor, and
    # with a linear chi(T) (handbook first-order coefficient) it is 1 + c dT
    t = t_c + C
    dt = t - T_REF_K
    assert lift_factor(alpha, t, c) == pytest.approx(lift_factor(alpha, t) * (1 + c * dt), rel=1e-12, abs=1e-15)
    # alpha = 0: the derating is exactly -100 c dT, linear in c
    assert lift_derating_pct(0.0, t, c) == pytest.approx(-100 * c * dt, rel=1e-9, abs=1e-12)


def test_chi_at_keeps_the_sign_and_scales_the_magnitude():
    # the coefficient is the relative change of |chi| per K (DEVELOPERS.md contract);
    # graphite's diamagnetism weakens on warming (from memory of the CRC Handbook
    # discussion of graphite; sign only matters here)
    chi = chi_at(-4.5e-4, -1.5e-3, 60 + C)
    assert chi < 0
    assert abs(chi) == pytest.approx(4.5e-4 * (1 - 1.5e-3 * 40), rel=1e-12)
    assert chi_at(-1.6e-4, None, 100 + C) == -1.6e-4


@settings(max_examples=30, deadline=None)
@given(coef=st.floats(-1.0, 1.0), x0=st.floats(1e-3, 2.0))
def test_every_law_is_the_identity_at_20c(coef, x0):
    # IEC 60404-8-1: the coefficients are relative to the value at 20 C
    assert br_at(x0, coef, T_REF_K) == x0
    assert hcj_at(x0, coef, T_REF_K) == x0
    assert chi_at(-x0, coef / 100, T_REF_K) == -x0
    assert lift_factor(coef, T_REF_K, coef / 100) == 1.0


def test_laws_accept_arrays_of_temperatures():
    # same definition, vectorised (common practice, no source)
    t = np.array([-20.0, 20.0, 80.0]) + C
    out = br_at(1.0, -0.12, t)
    assert isinstance(out, np.ndarray) and out.shape == (3,)
    assert np.allclose(out, 1 - 0.0012 * (t - T_REF_K), rtol=1e-12)
    assert isinstance(br_at(1.0, -0.12, 300.0), float)


def test_bad_temperatures_are_refused():
    with pytest.raises(InputError, match="t_k"):
        br_at(1.0, -0.12, -5.0)
    with pytest.raises(InputError, match="t_k"):
        lift_factor(-0.12, float("nan"))


# ---------------------------------------------------------------------------
# tolerances
# ---------------------------------------------------------------------------
def test_worst_case_br_prefers_the_guaranteed_minimum():
    # IEC 60404-8-1 grades are specified by minimum values
    assert worst_case_br(1.30, 1.28) == 1.28
    assert worst_case_br(1.30, None) == 1.30


def test_worst_case_abs_chi():
    # lower end of the quoted range (common practice, no source)
    assert worst_case_abs_chi(-1.6e-4, 0.2e-4) == pytest.approx(1.4e-4, rel=1e-12)
    assert worst_case_abs_chi(-1.6e-4, None) == pytest.approx(1.6e-4, rel=1e-12)
    assert worst_case_abs_chi(-1.0e-5, 3e-5) == 0.0


# ---------------------------------------------------------------------------
# knee fractions
# ---------------------------------------------------------------------------
def test_knee_fractions_cover_the_catalogue_families_and_carry_citations():
    # families of matdb.data.catalog.GradeProps; squareness Hk/Hcj lies between 0 and 1 by
    # definition of Hk (MMPA 0100-00); sintered NdFeB is squarer than bonded NdFeB and
    # AlNiCo (Coey 2010 ch. 13)
    assert set(KNEE_FRACTION) == {"NdFeB", "SmCo", "ferrite", "AlNiCo", "bonded-NdFeB"}
    for fraction, citation in KNEE_FRACTION.values():
        assert 0.0 < fraction <= 1.0
        # values from memory are marked so (project rule for seed data citations)
        assert "from memory of" in citation
        assert citation.endswith("verify.")
    assert KNEE_FRACTION["NdFeB"][0] > KNEE_FRACTION["bonded-NdFeB"][0]
    assert KNEE_FRACTION["NdFeB"][0] > KNEE_FRACTION["AlNiCo"][0]


# ---------------------------------------------------------------------------
# demagnetisation check
# ---------------------------------------------------------------------------
def _grid(lo, hi, n, delta):
    x = np.linspace(lo, hi, n)
    x[0] += delta
    x[-1] -= delta
    return x


def _magpylib_sample_max(sources_and_boxes, n=7, pull=1e-6, sampled=None):
    """Largest reverse field over full cuboid grids (interior included), with magpylib.

    ``sources_and_boxes`` is a list of (centre, size, J vector). Each grid includes the
    faces, edges and corners, pulled in by the same absolute distance on every axis.
    Only the first ``sampled`` boxes are sampled (default all); the rest are sources.
    """
    coll = magpylib.Collection(
        [magpylib.magnet.Cuboid(dimension=s, polarization=j, position=c) for c, s, j in sources_and_boxes]
    )
    best = -np.inf
    for c, s, j in sources_and_boxes[:sampled]:
        d = pull * max(s)
        axes = [_grid(-si / 2, si / 2, n, d) + ci for si, ci in zip(s, c)]
        g = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
        with np.errstate(invalid="ignore", divide="ignore"):
            h = coll.getH(g)
        jn = np.asarray(j) / np.linalg.norm(j)
        best = max(best, float(np.nanmax(-h @ jn)))
    return best


def test_tall_ndfeb_cylinder_is_safe_at_20c():
    # A lone N42 cylinder, 10 mm diameter x 20 mm tall. The largest reverse field sits at
    # the face centres; the on-axis field of a uniformly magnetised cylinder gives
    # B_face = (J/2) L / sqrt(L^2 + R^2), so H_rev = M (1 - L / (2 sqrt(L^2 + R^2))).
    d, length = 10e-3, 20e-3
    arr = build_arrangement("cylinder", (d, length), br=N42_BR)
    res = demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [20 + C])
    knee = KNEE_FRACTION["NdFeB"][0] * N_HCJ
    m = N42_BR / MU0
    face = m * (1 - length / (2 * math.hypot(length, d / 2))) / knee
    assert isinstance(res, DemagResult)
    assert not res.risk
    assert res.worst_ratio == pytest.approx(face, rel=1e-6)
    # magpylib at the same point (independent closed form)
    cyl = magpylib.magnet.Cylinder(dimension=(d, length), polarization=(0, 0, N42_BR),
                                   position=arr.magnets[0].position)
    h_ref = -float(cyl.getH(np.array([res.worst_point])).reshape(-1, 3)[0, 2])
    assert res.worst_ratio * knee == pytest.approx(h_ref, rel=1e-6)
    assert "magnet 1" in res.message and "no irreversible loss" in res.message


def test_any_plain_n_grade_magnet_fails_at_150c():
    # Near a face the magnet's own surface charge alone gives H_rev >= M/2 (a charge
    # sheet seen from just beside it subtends 2 pi, Jackson s. 5.9), while at 150 C the
    # knee has fallen to 0.9 * 0.22 * Hcj (beta -0.6 %/K): N grades are rated to 80 C
    # (common practice). So even the tall cylinder is flagged.
    arr = build_arrangement("cylinder", (10e-3, 20e-3), br=N42_BR)
    t = 150 + C
    res = demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [20 + C, t], alpha_pct_per_k=NDFEB_ALPHA)
    lower_bound = 0.5 * br_at(N42_BR, NDFEB_ALPHA, t) / MU0 / (
        KNEE_FRACTION["NdFeB"][0] * hcj_at(N_HCJ, NDFEB_BETA, t))
    assert lower_bound > 1
    assert res.risk and res.worst_temp_k == t
    assert res.worst_ratio >= lower_bound
    assert "150 C" in res.message and "hot" in res.message


def _flat_face_centre_n(a, b, t):
    """H_rev / M at the face centre of an a x b x t plate magnetised through t.

    The near face contributes 1/2 (sheet seen from just beside it); the far face, a
    rectangle at distance t, contributes Omega / (4 pi) with Omega = 4 atan(ab/4 /
    (t sqrt(a^2/4 + b^2/4 + t^2))) (four corner rectangles; Jackson s. 5.9).
    """
    om = 4 * math.atan((a / 2) * (b / 2) / (t * math.sqrt(a * a / 4 + b * b / 4 + t * t)))
    return 0.5 + om / (4 * math.pi)


def test_flat_ndfeb_plate_is_flagged_at_150c_but_not_at_20c():
    # 12 x 12 x 3 mm N35 plate. In a flat magnet the largest reverse field is at the
    # face centres (the demagnetising factor there approaches 1 as the plate thins).
    a, t = 12e-3, 3e-3
    arr = build_arrangement("cuboid", (a, a, t), br=N35_BR)
    n_face = _flat_face_centre_n(a, a, t)
    k = KNEE_FRACTION["NdFeB"][0]

    def expected(t_k):
        return n_face * br_at(N35_BR, NDFEB_ALPHA, t_k) / MU0 / (k * hcj_at(N_HCJ, NDFEB_BETA, t_k))

    assert expected(20 + C) < 0.95 and expected(150 + C) > 1.5  # the physics of the case
    cold = demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [20 + C], alpha_pct_per_k=NDFEB_ALPHA)
    hot = demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [150 + C], alpha_pct_per_k=NDFEB_ALPHA)
    assert not cold.risk and hot.risk
    assert cold.worst_ratio == pytest.approx(expected(20 + C), rel=1e-6)
    assert hot.worst_ratio == pytest.approx(expected(150 + C), rel=1e-6)
    # magpylib over the same kind of grid finds the same largest reverse field
    ref = _magpylib_sample_max([(arr.magnets[0].position, (a, a, t), (0, 0, N35_BR))])
    assert cold.worst_ratio * k * N_HCJ == pytest.approx(ref, rel=1e-4)


def test_thin_ferrite_disc_fails_cold_not_warm():
    # 20 mm x 2 mm hard-ferrite disc magnetised through its thickness: its face-centre
    # demagnetising factor 1 - t / (2 sqrt(t^2 + R^2)) = 0.90 is close to the thin-plate
    # limit N -> 1 (textbook). Hard ferrite's Hcj falls when cold (beta > 0) while its
    # Br rises (MMPA 0100-00; common practice), so the disc fails below some temperature
    # T*, solved here from that demagnetising factor.
    d, t = 20e-3, 2e-3
    arr = build_arrangement("cylinder", (d, t), br=FERRITE_BR)
    n_face = 1 - t / (2 * math.hypot(t, d / 2))
    k = KNEE_FRACTION["ferrite"][0]
    r20 = n_face * FERRITE_BR / MU0 / (k * FERRITE_HCJ)
    a, b = FERRITE_ALPHA / 100, FERRITE_BETA / 100
    t_star = T_REF_K + (1 - r20) / (r20 * a - b)  # r20 (1 + a dT) = 1 + b dT
    assert t_star < 20 + C  # the physics of the case: this disc is fine at room temperature
    warm = [20 + C, 60 + C]
    cold = [-40 + C]
    assert t_star > cold[0]

    res_warm = demag_check(arr, FERRITE_HCJ, FERRITE_BETA, "ferrite", warm, alpha_pct_per_k=FERRITE_ALPHA)
    res_cold = demag_check(arr, FERRITE_HCJ, FERRITE_BETA, "ferrite", cold, alpha_pct_per_k=FERRITE_ALPHA)
    res_all = demag_check(arr, FERRITE_HCJ, FERRITE_BETA, "ferrite", warm + cold, alpha_pct_per_k=FERRITE_ALPHA)
    assert not res_warm.risk
    assert res_cold.risk
    assert res_all.risk and res_all.worst_temp_k == cold[0]
    assert res_warm.worst_ratio == pytest.approx(r20, rel=1e-6)
    assert "-40 C" in res_all.message and "cold" in res_all.message
    # just either side of T* (ratio continuous in T)
    assert demag_check(arr, FERRITE_HCJ, FERRITE_BETA, "ferrite", [t_star - 2],
                       alpha_pct_per_k=FERRITE_ALPHA).risk
    assert not demag_check(arr, FERRITE_HCJ, FERRITE_BETA, "ferrite", [t_star + 2],
                           alpha_pct_per_k=FERRITE_ALPHA).risk


def test_corner_samples_match_the_corner_field():
    # n_per_axis = 2 samples the eight corners only. Approached along the diagonal (the
    # same small distance from each face), the face carrying the charge sheet subtends
    # 2 pi - pi/2 - pi/2 + pi/6 = 7 pi / 6 and the opposite face, an a x b rectangle at
    # distance t seen from above a corner, atan(ab / (t sqrt(a^2 + b^2 + t^2))), so
    # H_rev / M = 7/24 + atan(...) / (4 pi) (Jackson s. 5.9). A cube gives 1/3.
    a, b, t = 12e-3, 12e-3, 3e-3
    arr = build_arrangement("cuboid", (a, b, t), br=N35_BR)
    k = KNEE_FRACTION["NdFeB"][0]
    res = demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [20 + C], n_per_axis=2)
    n_corner = 7 / 24 + math.atan(a * b / (t * math.sqrt(a * a + b * b + t * t))) / (4 * math.pi)
    m = N35_BR / MU0
    assert res.worst_ratio * k * N_HCJ == pytest.approx(n_corner * m, rel=1e-6)
    # the arrangement's own H at the reported point, and magpylib there
    h_arr = -float(arr.H(np.array([res.worst_point]))[0, 2])
    assert res.worst_ratio * k * N_HCJ == pytest.approx(h_arr, rel=1e-9)
    assert "corner" in res.message
    # a corner of a flat magnet sees far less reverse field than its face centre
    centre = demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [20 + C], n_per_axis=3)
    assert centre.worst_ratio == pytest.approx(_flat_face_centre_n(a, b, t) * m / (k * N_HCJ), rel=1e-6)
    assert res.worst_ratio < 0.6 * centre.worst_ratio


def test_cube_corner_value_agrees_with_magpylib():
    # the 7/24 + 1/24 = 1/3 corner value of a cube (derivation above), checked with
    # magpylib at the same diagonal approach
    s = 10e-3
    arr = build_arrangement("cuboid", (s, s, s), br=1.0)
    res = demag_check(arr, 1e6, 0.0, "NdFeB", [20 + C], n_per_axis=2)
    h = res.worst_ratio * KNEE_FRACTION["NdFeB"][0] * 1e6
    assert h == pytest.approx((1.0 / MU0) / 3, rel=1e-6)
    cube = magpylib.magnet.Cuboid(dimension=(s, s, s), polarization=(0, 0, 1.0),
                                  position=arr.magnets[0].position)
    p = np.asarray(arr.magnets[0].position) + (s / 2) * (1 - 1e-6) * np.array([1.0, 1.0, 1.0])
    assert -float(cube.getH(p[None, :]).reshape(-1, 3)[0, 2]) == pytest.approx(h, rel=1e-5)


@pytest.mark.parametrize("pattern", ["grid", "checkerboard"])
def test_neighbours_are_included(pattern):
    # superposition over a 3 x 3 array of 10 mm cubes; magpylib's sum over the nine
    # cubes, sampled the same way, is the reference
    s = 10e-3
    arr = build_arrangement("cuboid", (s, s, s), pattern=pattern, rows=3, cols=3, br=N42_BR)
    res = demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [20 + C])
    boxes = [(mg.position, mg.size, mg.polarization) for mg in arr.magnets]
    ref = _magpylib_sample_max(boxes)
    h = res.worst_ratio * KNEE_FRACTION["NdFeB"][0] * N_HCJ
    assert h == pytest.approx(ref, rel=1e-4)
    if pattern == "grid":
        # parallel side-by-side neighbours push their field back through each other
        # (a dipole's equatorial field is antiparallel to its moment, Jackson 5.56), so
        # the reverse field exceeds that of a lone cube
        lone = demag_check(build_arrangement("cuboid", (s, s, s), br=N42_BR), N_HCJ, NDFEB_BETA,
                           "NdFeB", [20 + C])
        assert res.worst_ratio > lone.worst_ratio


def test_remanence_coefficient_scales_the_field_linearly():
    # the field is linear in J (superposition), so using Br(T) scales H_rev by Br(T)/Br20
    arr = build_arrangement("cuboid", (10e-3, 10e-3, 4e-3), pattern="grid", rows=2, cols=2, br=N42_BR)
    t = 80 + C
    plain = demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [t])
    scaled = demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [t], alpha_pct_per_k=NDFEB_ALPHA)
    assert scaled.worst_ratio == pytest.approx(plain.worst_ratio * br_at(1.0, NDFEB_ALPHA, t), rel=1e-9)
    # per-magnet coefficients, all equal, give the same answer
    per = demag_check(arr, [N_HCJ] * 4, [NDFEB_BETA] * 4, ["NdFeB"] * 4, [t],
                      alpha_pct_per_k=[NDFEB_ALPHA, NDFEB_ALPHA, NDFEB_ALPHA, -0.1200000000001])
    assert per.worst_ratio == pytest.approx(scaled.worst_ratio, rel=1e-9)


def test_demag_check_refuses_bad_inputs():
    arr = build_arrangement("cuboid", (10e-3, 10e-3, 4e-3), pattern="grid", rows=1, cols=2, br=1.3)
    with pytest.raises(InputError, match="family"):
        demag_check(arr, N_HCJ, NDFEB_BETA, "unobtainium", [300.0])
    with pytest.raises(InputError, match="hcj_20_a_m"):
        demag_check(arr, [N_HCJ] * 3, NDFEB_BETA, "NdFeB", [300.0])
    with pytest.raises(InputError, match="temps_k"):
        demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [])
    # beta -0.6 %/K: Hcj -> 0 at ~187 C; beyond that the verdict is "at risk", not a crash
    assert demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [250 + C]).risk


# ---------------------------------------------------------------------------
# safety distance
# ---------------------------------------------------------------------------
def _dipole_axis_distance(br, volume, b_thr):
    """On-axis distance from a dipole where |B| = b_thr: B = mu0 m / (2 pi r^3) (Jackson 5.56)."""
    m = br * volume / MU0
    return (MU0 * m / (2 * math.pi * b_thr)) ** (1 / 3)


def test_small_magnet_matches_the_dipole_estimate():
    # 2 mm x 2 mm cylinder at a 10 uT threshold: r / size ~ 20, so the dipole field
    # (Jackson eq. 5.56) holds to well under a percent; distance is from the top face
    d, h, br, thr = 2e-3, 2e-3, 1.3, 1e-5
    arr = build_arrangement("cylinder", (d, h), br=br)
    r = _dipole_axis_distance(br, math.pi / 4 * d * d * h, thr)
    assert r / h > 10
    assert safe_distance(arr, thr) + h / 2 == pytest.approx(r, rel=0.02)


def test_10mm_n42_cube_is_several_centimetres():
    # on-axis dipole estimate (Jackson 5.56) for a 10 mm cube, Br 1.30 T, at 0.5 mT:
    # about 7.5 cm from the centre; the exact cube field is within a few percent there
    s = 10e-3
    arr = build_arrangement("cuboid", (s, s, s), br=N42_BR)
    dist = safe_distance(arr)
    estimate = _dipole_axis_distance(N42_BR, s ** 3, 5e-4) - s / 2
    assert dist == pytest.approx(estimate, rel=0.05)
    assert 0.03 < dist < 0.15
    # magpylib confirms |B| is at the threshold at that distance above the top face
    cube = magpylib.magnet.Cuboid(dimension=(s, s, s), polarization=(0, 0, N42_BR),
                                  position=arr.magnets[0].position)
    b = np.linalg.norm(cube.getB(np.array([[0.0, 0.0, arr.top_z + dist]])))
    assert b == pytest.approx(5e-4, rel=1e-6)


def test_horizontal_rays_are_searched():
    # a cube magnetised along x has its strong (axial) direction horizontally; by the
    # cube's symmetry its safe distance equals that of the same cube magnetised along z
    # (common practice, no source: symmetry)
    s = 10e-3
    up = build_arrangement("cuboid", (s, s, s), br=N42_BR)
    side = build_arrangement("cuboid", (s, s, s), pattern="list", br=N42_BR,
                             items=[{"position": (0.0, 0.0, -s / 2), "direction": (1.0, 0.0, 0.0)}])
    assert safe_distance(side) == pytest.approx(safe_distance(up), rel=1e-6)


def test_safe_distance_refuses_a_bad_threshold():
    arr = build_arrangement("cuboid", (5e-3, 5e-3, 5e-3), br=1.3)
    with pytest.raises(InputError, match="threshold_t"):
        safe_distance(arr, 0.0)


# ---------------------------------------------------------------------------
# cautions
# ---------------------------------------------------------------------------
def test_safety_text_covers_the_usual_cautions():
    # the usual cautions for strong magnets (common practice, no source)
    text = SAFETY_TEXT.lower()
    for word in ("finger", "eye protection", "swallow", "children", "pacemaker",
                 "defibrillator", "insulin pump", "0.5 mt", "card", "watch", "electronics",
                 "local codes", "licensed"):
        assert word in text, word


def test_missing_coercivity_coefficient_holds_hcj():
    # AlNiCo rows may have no beta: Hcj is then held at its 20 C value. Even a long
    # AlNiCo 5 rod (Br 1.25 T, Hcj 51 kA/m, from memory of MMPA 0100-00) is flagged:
    # just inside a pole face H_rev >= M/2 = 497 kA/m (charge sheet, Jackson s. 5.9),
    # far above its knee; bare AlNiCo demagnetises at its ends (common practice)
    arr = build_arrangement("cylinder", (5e-3, 40e-3), br=1.25)
    res = demag_check(arr, 51e3, None, "AlNiCo", [20 + C, 100 + C])
    assert res.risk
    assert res.worst_ratio >= 0.5 * 1.25 / MU0 / (KNEE_FRACTION["AlNiCo"][0] * 51e3)
    same = demag_check(arr, 51e3, 0.0, "AlNiCo", [20 + C, 100 + C])
    assert same.worst_ratio == res.worst_ratio


def test_ring_sample_agrees_with_magpylib():
    # a ring's worst point (inner or outer rim, faces) checked against magpylib's ring
    # (CylinderSegment over 360 degrees) at the same point
    od, idia, h = 20e-3, 8e-3, 3e-3
    arr = build_arrangement("ring", (od, idia, h), br=N42_BR)
    res = demag_check(arr, N_HCJ, NDFEB_BETA, "NdFeB", [20 + C])
    ring = magpylib.magnet.CylinderSegment(dimension=(idia / 2, od / 2, h, 0, 360),
                                           polarization=(0, 0, N42_BR), position=arr.magnets[0].position)
    h_ref = -float(ring.getH(np.array([res.worst_point])).reshape(-1, 3)[0, 2])
    assert res.worst_ratio * KNEE_FRACTION["NdFeB"][0] * N_HCJ == pytest.approx(h_ref, rel=1e-5)
    # a flat ring sees at least the M/2 of its own pole face (Jackson s. 5.9)
    assert res.worst_ratio * KNEE_FRACTION["NdFeB"][0] * N_HCJ > 0.5 * N42_BR / MU0


def test_back_plate_images_are_included():
    # an ideal steel back plate acts as a mirror image magnet with the same J_z below the
    # plate surface (method of images for a high-permeability half-space, a standard
    # magnetostatics result; the model of matdb.physics.arrangement): magpylib with the explicit image
    # is the reference; the image adds forward field, so the reverse field falls
    s, t = 10e-3, 3e-3
    bare = build_arrangement("cuboid", (s, s, t), br=N42_BR)
    plate = build_arrangement("cuboid", (s, s, t), br=N42_BR, back_plate=True)
    r_bare = demag_check(bare, N_HCJ, NDFEB_BETA, "NdFeB", [20 + C])
    r_plate = demag_check(plate, N_HCJ, NDFEB_BETA, "NdFeB", [20 + C])
    pos = np.asarray(plate.magnets[0].position)
    image = pos.copy()
    image[2] = 2 * plate.bottom_z - pos[2]
    boxes = [(pos, (s, s, t), (0, 0, N42_BR)), (image, (s, s, t), (0, 0, N42_BR))]
    ref = _magpylib_sample_max(boxes, sampled=1)
    assert r_plate.worst_ratio * KNEE_FRACTION["NdFeB"][0] * N_HCJ == pytest.approx(ref, rel=1e-4)
    assert r_plate.worst_ratio < r_bare.worst_ratio


def test_coefficient_extrapolated_past_zero_is_a_risk_not_a_crash():
    # Arithmetic of the reversible coefficient (IEC 60404-8-1 definition): beta = -0.5 %/K
    # from 20 C reaches Hcj = 0 at 220 C, so at 230 C there is no knee left: flag, don't raise.
    arr = build_arrangement("cuboid", (0.01, 0.01, 0.01), br=1.1)
    res = demag_check(arr, 2785e3, -0.5, "NdFeB", [293.15, 503.15], alpha_pct_per_k=-0.10)
    assert res.risk and "extrapolates Hcj to zero" in res.message
