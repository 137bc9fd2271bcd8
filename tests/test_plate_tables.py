"""matdb.physics.plate_tables: the screening tables against the plate code and closed forms."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matdb.constants import MU0
from matdb.physics import plate as P
from matdb.physics import plate_tables as PT
from matdb.physics.arrangement import build_arrangement


def test_lateral_line_integrals_equal_the_stiffness_of_a_shifted_plate():
    # The lateral stiffness is the derivative of the plate's energy -chi B^2/(2 mu0) under a
    # sideways shift (Berry and Geim, Eur. J. Phys. 18, 307 (1997)); the line integrals across
    # the side faces, summed over the height, must equal the central difference of the
    # generalised force that matdb.physics.plate.stiffness_split takes (an independent path:
    # volume quadrature of the shifted plate). Both take central differences (1 um across a
    # face here, 4 um shifts there): they agree to about 4e-5; bound 1e-4.
    arr = build_arrangement("cuboid", (0.01, 0.01, 0.01), "checkerboard", 2, 2, 0.0, br=1.0)
    bx, by = P.edge_lines(arr.magnets)
    g, t, side = 1e-3, 1e-3, 0.008
    hs = np.linspace(g, g + t, 41)
    lat = PT.lateral_line_integrals(arr.B, side, side, bx, by, hs, 8, 1e-4, 1e-6)
    cum = PT.cumulative_over_height(lat, hs)[:, -1] / (2 * MU0)
    geom = P.PlateGeometry("rectangle", side, side, t, 0.0, 0.0, bx, by)
    k = P.stiffness_split(arr.B, geom, g, (0.0, 0.0, g + t / 2), 8, dofs=(0, 1))
    assert cum[0] == pytest.approx(k[0][0, 0], rel=1e-4)  # x, chi_perp part
    assert cum[1] == pytest.approx(k[1][0, 0], rel=1e-4)  # x, chi_par part
    assert cum[2] == pytest.approx(k[0][1, 1], rel=1e-4)  # y
    assert cum[3] == pytest.approx(k[1][1, 1], rel=1e-4)


def test_cumulative_over_height_of_a_linear_function_is_exact():
    # the trapezoid rule integrates a linear function exactly (any numerical analysis text)
    hs = np.array([0.0, 1e-4, 3e-4, 1e-3])
    lat = np.column_stack([2.0 * hs + 1.0] * 4)
    cum = PT.cumulative_over_height(lat, hs)
    assert np.allclose(cum[0], hs ** 2 + hs, rtol=1e-12, atol=1e-18)


@settings(max_examples=40, deadline=None)
@given(st.floats(1e-4, 5e-3), st.floats(0.0, 1e-2), st.integers(0, 2 ** 31 - 1))
def test_move_pivot_is_the_rigid_body_change_of_coordinates(h, weight, seed):
    # Rotating by pitch theta about the combined centre of mass C moves the point O a height h
    # below it by -h theta along x (roll phi: +h phi along y); so K_C = T^T K_O T with that T
    # (Goldstein, Classical Mechanics, 3rd ed., ch. 6), and the weight acting at C adds -h W
    # to each tilt stiffness.
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(4, 4))
    k = a + a.T
    T = np.eye(4)
    T[0, 3] = -h  # x_O = x_C - h pitch
    T[1, 2] = h  # y_O = y_C + h roll
    kc = T.T @ k @ T
    mv = PT.move_pivot(k, h, weight)
    assert mv["k_x"] == pytest.approx(kc[0, 0])
    assert mv["k_y"] == pytest.approx(kc[1, 1])
    assert mv["k_pitch"] == pytest.approx(kc[3, 3] - h * weight)
    assert mv["k_roll"] == pytest.approx(kc[2, 2] - h * weight)
    assert mv["k_x_pitch"] == pytest.approx(kc[0, 3])
    assert mv["k_y_roll"] == pytest.approx(kc[1, 2])


def test_highest_root_grid_is_exact_for_an_exponential_lift():
    # Lift of a periodic array decays as exp(-k g) far from it (Simon and Geim, J. Appl. Phys.
    # 87, 6200 (2000)); interpolation in log G is exact for such a curve.
    gaps = np.linspace(5e-5, 5e-3, 30)
    lam = np.array([1e-3, 2.5e-3])
    G = 3.0 * np.exp(-gaps[None, :] / lam[:, None])
    y = np.array([0.5, 1.2])
    gap, _, _ = PT.highest_root_grid(G, y, gaps)
    assert gap == pytest.approx(lam * np.log(3.0 / y), rel=1e-12)
    none, _, _ = PT.highest_root_grid(G, np.array([10.0, 1e-9]), gaps)
    assert np.isnan(none).all()  # above the curve, or below it everywhere on the grid


def test_mirror_symmetry_of_checkerboards_and_of_an_offset_magnet():
    # B and J are axial vectors (Jackson, Classical Electrodynamics, 3rd ed., sec. 6.10): a
    # checkerboard centred on the origin maps onto itself or its negative under x -> -x
    # and y -> -y, so |B|^2 is even; a magnet off the y axis breaks the x mirror only.
    arr = build_arrangement("cuboid", (0.005, 0.005, 0.005), "checkerboard", 3, 3, 0.0,
                            br=1.0).with_recoil([0.05] * 9)
    assert PT.mirror_symmetry(arr) == (True, True)
    one = build_arrangement("cuboid", (0.005, 0.004, 0.003), "single", 1, 1, 0.0, br=1.0)
    moved = type(one)(tuple(m.__class__(m.shape, m.size, (0.002, 0.0, m.position[2]), m.direction, m.br)
                            for m in one.magnets))
    assert PT.mirror_symmetry(moved) == (False, True)
    p = np.array([[0.003, 0.001, 0.004]])
    q = p * np.array([1.0, -1.0, 1.0])
    assert np.sum(moved.B(p) ** 2) == pytest.approx(np.sum(moved.B(q) ** 2), rel=1e-12)


@pytest.mark.parametrize("shape,size,pattern,n", [("cuboid", (0.00635,) * 3, "checkerboard", 3),
                                                  ("cuboid", (0.01,) * 3, "stripes", 2),
                                                  ("cylinder", (0.01, 0.005), "checkerboard", 2)])
def test_folded_rules_integrate_as_well_as_the_whole_plate(shape, size, pattern, n):
    # An even integrand integrates to twice its integral over one half (any calculus text);
    # the folded rule must be about as close to a converged reference (order 12, graded
    # to the lowest height: Davis and Rabinowitz, Methods of Numerical Integration, ch. 2)
    # as the rule over the whole plate (within twice its error; measured: 0.7-1.2 times).
    # One-cell recoil model: a smooth integrand (the subdivided default's cells leave steps
    # in the field 0.2 mm above their edges, where both rules' errors are then set by
    # where their nodes fall: 3.4 times for stripes at order 4, regression check)
    arr = build_arrangement(shape, size, pattern, n, n, 0.0, br=1.0).with_recoil([0.05] * n * n,
                                                                                 subdivision=1)
    even = PT.mirror_symmetry(arr)
    assert even == (True, True)
    bx, by = P.edge_lines(arr.magnets)
    hs = np.array([2e-4, 1e-3, 3e-3])
    ref = PT.plane_integrals(arr.B, 0.017, 0.017, bx, by, hs, 12, 5e-5)
    whole = PT.plane_integrals(arr.B, 0.017, 0.017, bx, by, hs, 4, 5e-4)
    fold = PT.plane_integrals(arr.B, 0.017, 0.017, bx, by, hs, 4, 5e-4, even)
    e_whole = np.max(np.abs(whole - ref) / np.abs(ref))
    e_fold = np.max(np.abs(fold - ref) / np.abs(ref))
    assert e_whole < 1e-2 and e_fold <= 2.0 * e_whole
    lref = PT.lateral_line_integrals(arr.B, 0.017, 0.017, bx, by, hs, 12, 5e-5, 1e-6)
    lwhole = PT.lateral_line_integrals(arr.B, 0.017, 0.017, bx, by, hs, 4, 5e-4, 1e-6)
    lfold = PT.lateral_line_integrals(arr.B, 0.017, 0.017, bx, by, hs, 4, 5e-4, 1e-6, even)
    scale = np.max(np.abs(lref))
    assert np.max(np.abs(lfold - lref)) <= 2.0 * np.max(np.abs(lwhole - lref)) + 1e-12 * scale


@pytest.mark.parametrize("shape,size", [("cuboid", (0.00635,) * 3), ("cylinder", (0.01, 0.005))])
def test_diagonal_fold_is_the_same_sum_as_the_quarter(shape, size):
    # B and J are axial vectors (Jackson, Classical Electrodynamics, 3rd ed., sec. 6.10): a
    # checkerboard maps onto its negative under x <-> y, so |B|^2 is symmetric there and the
    # quarter rule's sum over nodes (x_i, y_j) equals the sum over i <= j with the nodes off
    # the diagonal counted twice (regression check of the two sums); stripes are not
    # symmetric, and their fold is refused
    # (one cell per magnet: the default model's departure table is float32, mirror
    # symmetric to its rounding only, and this is an exact check of the two sums)
    arr = build_arrangement(shape, size, "checkerboard", 3, 3, 0.0, br=1.0).with_recoil([0.05] * 9, subdivision=1)
    assert PT.diagonal_symmetry(arr)
    p = np.array([[0.003, 0.001, 0.004], [0.007, -0.002, 0.0045]])
    assert np.sum(arr.B(p) ** 2, axis=1) == pytest.approx(np.sum(arr.B(p[:, [1, 0, 2]]) ** 2, axis=1), rel=1e-12)
    bx, by = P.edge_lines(arr.magnets)
    hs = np.array([2e-4, 1e-3, 3e-3])
    quarter = PT.plane_integrals(arr.B, 0.017, 0.017, bx, by, hs, 4, 5e-4, (True, True))
    eighth = PT.plane_integrals(arr.B, 0.017, 0.017, bx, by, hs, 4, 5e-4, (True, True, True))
    assert np.allclose(eighth, quarter, rtol=1e-12, atol=0)
    lq = PT.lateral_line_integrals(arr.B, 0.017, 0.017, bx, by, hs, 4, 5e-4, 1e-6, (True, True))
    le = PT.lateral_line_integrals(arr.B, 0.017, 0.017, bx, by, hs, 4, 5e-4, 1e-6, (True, True, True))
    assert np.allclose(le, lq, rtol=1e-9, atol=1e-12 * np.max(np.abs(lq)))
    stripes = build_arrangement(shape, size, "stripes", 3, 3, 0.0, br=1.0)
    assert not PT.diagonal_symmetry(stripes)
    assert PT.diagonal_symmetry(build_arrangement("cuboid", (0.005, 0.004, 0.003), "single", 1, 1, 0.0,
                                                  br=1.0)) is False  # not square


def test_plane_integrals_without_folding_equal_the_plate_code():
    # the same rule as matdb.physics.plate.plane_integrals (regression check of the two paths)
    arr = build_arrangement("cuboid", (0.01,) * 3, "checkerboard", 2, 2, 0.0, br=1.0)
    bx, by = P.edge_lines(arr.magnets)
    hs = np.array([2e-4, 1e-3])
    geom = P.PlateGeometry("rectangle", 0.012, 0.012, 1e-3, 0.0, 0.0, bx, by)
    iz, ixy = P.plane_integrals(arr.B, geom, hs, 4, rule_heights=np.maximum(hs, 5e-4))
    got = PT.plane_integrals(arr.B, 0.012, 0.012, bx, by, hs, 4, 5e-4)
    assert np.allclose(got, np.column_stack([iz, ixy]), rtol=1e-13, atol=0)


@pytest.mark.parametrize("pattern,n", [("checkerboard", 3), ("stripes", 3), ("checkerboard", 2)])
def test_linear_family_equals_each_field_on_its_own(pattern, n):
    # superposition: the field is linear in the sources' polarisations (Jackson, Classical
    # Electrodynamics, 3rd ed., sec. 5.8), so the basis combination equals each field
    chis = (0.05, 0.1, 0.2, 1.0, 2.6)
    arrs = [build_arrangement("cuboid", (0.00635,) * 3, pattern, n, n, 0.0, br=1.0).with_recoil([c] * n * n)
            for c in chis]
    fam = PT.linear_family(arrs)
    rng = np.random.default_rng(7)
    p = rng.uniform(-0.012, 0.012, (50, 3))
    p[:, 2] = np.abs(p[:, 2]) + 0.0033
    got = fam(p)
    for a, b in zip(arrs, got):
        want = a.B(p)
        assert np.max(np.abs(b - want)) <= 1e-11 * np.max(np.abs(want))


@pytest.mark.parametrize("shape,size,back", [("cylinder", (0.0127, 0.00635), False),
                                              ("cuboid", (0.00635,) * 3, True)])
def test_stacked_and_combined_families_equal_each_field(shape, size, back):
    # superposition (Jackson, Classical Electrodynamics, 3rd ed., sec. 5.8): one evaluation
    # weighted per arrangement equals each arrangement's own field, above the magnets and
    # (through the full model) at points beside and inside them; a back plate takes the
    # basis combination instead
    chis = (0.05, 0.2, 2.6)
    arrs = [build_arrangement(shape, size, "checkerboard", 3, 3, 0.0, br=1.0,
                              back_plate=back).with_recoil([c] * 9) for c in chis]
    assert (PT.stacked_field(arrs) is None) == back
    fam = PT.linear_family(arrs)
    rng = np.random.default_rng(11)
    top = arrs[0].top_z
    above = rng.uniform(-0.015, 0.015, (60, 3))
    above[:, 2] = top + np.abs(above[:, 2]) + 5e-5
    level = above.copy()
    level[:, 2] = rng.uniform(top - size[-1], top, 60)
    for p in (above, level):
        got = fam(p)
        for a, b in zip(arrs, got):
            want = a.B(p)
            assert np.max(np.abs(b - want)) <= 1e-11 * np.max(np.abs(want))


@settings(max_examples=40, deadline=None)
@given(st.integers(1, 40), st.integers(2, 40), st.integers(0, 2 ** 31 - 1))
def test_highest_root_grid_bisection_counts_as_the_direct_sum(u, n, seed):
    # regression check: the bisection over running maxima counts exactly what comparing
    # every tabulated node does (curves with ties, negative values and plateaus included)
    rng = np.random.default_rng(seed)
    G = np.round(rng.normal(size=(u, n)), 1)
    m = np.maximum.accumulate(G[:, ::-1], axis=1)[:, ::-1]
    rows = rng.integers(0, u, 3 * u)
    y = np.concatenate([np.round(rng.normal(size=3 * u - 2), 1), [np.inf, np.nan]])
    direct = np.sum(m[rows] >= y[:, None], axis=1)
    assert np.array_equal(PT._count_at_least(m, rows, y), direct)
    gaps = np.cumsum(rng.uniform(0.1, 1.0, n))
    G[0, 0] = np.nan  # a NaN takes the entry-by-entry path, with the same answer
    m = np.maximum.accumulate(G[:, ::-1], axis=1)[:, ::-1]
    assert np.array_equal(PT._count_at_least(m, rows, y), np.sum(m[rows] >= y[:, None], axis=1))
    assert PT.highest_root_grid(G, y, gaps, rows=rows)[0].shape == y.shape
