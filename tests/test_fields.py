"""Tests of matdb.physics.fields against references outside matdb.

References used:
- magpylib (independent implementation, test-only reference): M. Ortner and
  L. G. Coliado Bandeira, SoftwareX 11, 100466 (2020).
- handbook on-axis formulas for a rectangular block and a cylinder;
- the point-dipole formula, J. D. Jackson, Classical Electrodynamics 3rd ed., eq. (5.56);
- scipy.special / scipy.integrate for the elliptic integral;
- Maxwell's equations div B = 0, curl B = 0 in a current-free region.
"""

from __future__ import annotations

import math

import magpylib as magpy
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, special

from matdb.errors import InputError
from matdb.physics.fields import CuboidSet, cel, cuboid_B, cylinder_B, dipole_B, ring_B
from matdb.constants import MU0

RNG = np.random.default_rng(20260202)


def _tol(ref: np.ndarray) -> float:
    # tolerance of the field comparisons (regression check): 1e-9 of the largest |B|
    # plus 1e-12 T
    return 1e-9 * float(np.max(np.linalg.norm(ref, axis=-1))) + 1e-12


def _near_cuboid_edges(p, dims, positions, delta):
    """True where a point is within delta of an edge line of any cuboid (two coordinates
    on boundary planes)."""
    p = np.asarray(p)[:, None, :]
    lo = np.asarray(positions) - np.asarray(dims) / 2
    hi = np.asarray(positions) + np.asarray(dims) / 2
    d = np.minimum(np.abs(p - lo[None]), np.abs(p - hi[None]))  # (n,m,3)
    near = d < delta
    return np.any(near.sum(axis=2) >= 2, axis=1)


def _on_cuboid_surface(p, dims, positions, delta=1e-8):
    """True where a point lies on (within delta of) the surface of any cuboid: there the
    value follows the owner convention and face snapping, not plain superposition."""
    p = np.asarray(p)[:, None, :]
    lo = np.asarray(positions) - np.asarray(dims) / 2
    hi = np.asarray(positions) + np.asarray(dims) / 2
    closed = np.all((p >= lo[None] - delta) & (p <= hi[None] + delta), axis=2)
    on = np.any((np.abs(p - lo[None]) <= delta) | (np.abs(p - hi[None]) <= delta), axis=2)
    return np.any(closed & on, axis=1)


def _points(n, scale, center=(0, 0, 0)):
    """Random points near (within scale) and far (up to 10 scale) of a centre."""
    near = RNG.uniform(-scale, scale, (n, 3))
    far = RNG.normal(size=(n, 3))
    far *= (RNG.uniform(1.5, 10, n) * scale / np.linalg.norm(far, axis=1))[:, None]
    return np.vstack([near, far]) + np.asarray(center)


# ---------------------------------------------------------------------------
# magpylib comparisons
# ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "pol",
    [(0, 0, 1.3), (0, 0, -1.1), (1.2, 0, 0), (0, 0.9, 0), (0.4, -0.7, 0.8)],
    ids=["z", "minus-z", "x", "y", "oblique"],
)
def test_cuboid_matches_magpylib(pol):
    # reference: magpylib.magnet.Cuboid (independent closed form), near/far/inside points
    dims = np.array([[0.010, 0.006, 0.004]])
    pos = np.array([[0.001, -0.002, -0.002]])
    p = _points(3000, 0.012, pos[0])
    p = p[~_near_cuboid_edges(p, dims, pos, 1e-7)]
    ref = magpy.getB(magpy.magnet.Cuboid(polarization=pol, dimension=dims[0], position=pos[0]), p)
    got = cuboid_B(p, dims, [pol], pos)
    assert got.shape == p.shape
    assert np.max(np.abs(got - ref)) < _tol(ref)


def test_several_cuboids_touching_and_apart_match_magpylib():
    # reference: magpylib Collection of Cuboids; touching neighbours share corners
    dims = np.array([[0.01, 0.01, 0.01], [0.01, 0.01, 0.01], [0.004, 0.01, 0.002], [0.02, 0.003, 0.005]])
    pos = np.array([[-0.005, 0, -0.005], [0.005, 0, -0.005], [0.012, 0.0, -0.001], [0.0, 0.02, -0.0025]])
    pols = np.array([[0, 0, 1.3], [0, 0, -1.3], [0.3, 0.2, 1.0], [1.0, -0.2, 0.1]])
    srcs = [magpy.magnet.Cuboid(polarization=j, dimension=d, position=c) for d, j, c in zip(dims, pols, pos)]
    p = _points(3000, 0.03)
    p = p[~_near_cuboid_edges(p, dims, pos, 1e-7)]
    ref = magpy.getB(magpy.Collection(*srcs), p)
    got = cuboid_B(p, dims, pols, pos)
    assert np.max(np.abs(got - ref)) < _tol(ref)


def test_stacked_polarisation_sets_match_magpylib_set_by_set():
    # reference: magpylib Collections of Cuboids and Cylinders, one per polarisation set;
    # matdb evaluates the k sets of the same magnets together (the field is linear in J)
    from matdb.physics.fields.cylinder import _cyl_sum

    dims = np.array([[0.01, 0.01, 0.01], [0.01, 0.01, 0.01], [0.004, 0.01, 0.002]])
    pos = np.array([[-0.005, 0, -0.005], [0.005, 0, -0.005], [0.012, 0.0, -0.001]])
    rng = np.random.default_rng(3)
    stack = rng.uniform(-1.3, 1.3, (4, 3, 3))
    stack[1, :, :2] = 0.0  # a set along z only beside sets with every component
    p = _points(2000, 0.03)
    p = p[~_near_cuboid_edges(p, dims, pos, 1e-7)]
    from matdb.physics.fields import CuboidSet

    got = CuboidSet(dims, stack, pos).mu0_h_mean(p)
    assert got.shape == (4, p.shape[0], 3)
    outside = ~np.any(np.all(np.abs(p[:, None, :] - pos[None]) < dims[None] / 2, axis=2), axis=1)
    for j, b in zip(stack, got):
        ref = magpy.getB(magpy.Collection(*[magpy.magnet.Cuboid(polarization=jj, dimension=d, position=c)
                                            for d, jj, c in zip(dims, j, pos)]), p)
        assert np.max(np.abs(b[outside] - ref[outside])) < _tol(ref)
    d = np.array([0.010, 0.004])
    h = np.array([0.005, 0.012])
    cpos = np.array([[0.0, 0.0, -0.0025], [0.012, -0.003, 0.004]])
    jz = rng.uniform(-1.3, 1.3, (3, 2))
    got = _cyl_sum(p, d / 2, h / 2, jz, cpos, 1e-6 * np.minimum(d, h))
    for j, b in zip(jz, got):
        ref = magpy.getB(magpy.Collection(*[magpy.magnet.Cylinder(polarization=(0, 0, jj), dimension=(dd, hh), position=c)
                                            for dd, hh, jj, c in zip(d, h, j, cpos)]), p)
        assert np.max(np.abs(b - ref)) < _tol(ref)


def test_cylinders_match_magpylib():
    # reference: magpylib.magnet.Cylinder, axial polarisation, signed
    d = np.array([0.010, 0.004, 0.020])
    h = np.array([0.005, 0.012, 0.002])
    j = np.array([1.2, -1.0, 0.4])
    pos = np.array([[0.0, 0.0, -0.0025], [0.012, -0.003, 0.004], [-0.02, 0.01, 0.0]])
    srcs = [magpy.magnet.Cylinder(polarization=(0, 0, jj), dimension=(dd, hh), position=c)
            for dd, hh, jj, c in zip(d, h, j, pos)]
    p = _points(3000, 0.03)
    ref = magpy.getB(magpy.Collection(*srcs), p)
    got = cylinder_B(p, d, h, j, pos)
    assert np.max(np.abs(got - ref)) < _tol(ref)


def test_rings_match_magpylib():
    # reference: magpylib.magnet.CylinderSegment over 360 degrees (r_in, r_out, h, 0, 360)
    do = np.array([0.020, 0.010])
    di = np.array([0.008, 0.002])
    h = np.array([0.005, 0.003])
    j = np.array([1.3, -0.8])
    pos = np.array([[0.0, 0.0, -0.0025], [0.005, 0.015, 0.003]])
    srcs = [magpy.magnet.CylinderSegment(polarization=(0, 0, jj), dimension=(a / 2, b / 2, hh, 0, 360), position=c)
            for b, a, hh, jj, c in zip(do, di, h, j, pos)]
    p = _points(3000, 0.03)
    ref = magpy.getB(magpy.Collection(*srcs), p)
    got = ring_B(p, do, di, h, j, pos)
    assert np.max(np.abs(got - ref)) < _tol(ref)


def test_dipole_matches_magpylib():
    # reference: magpylib.misc.Dipole. magpylib uses mu0 from CODATA 2022, matdb CODATA 2018
    # (relative difference 7e-10), hence the 2e-9 relative tolerance.
    mom = np.array([[0.1, 0.2, -0.3], [0.0, 0.0, 1.0]])
    pos = np.array([[0.0, 0.0, 0.0], [0.01, 0.0, 0.02]])
    p = _points(1000, 0.05)
    ref = magpy.getB(magpy.Collection(*[magpy.misc.Dipole(moment=m, position=c) for m, c in zip(mom, pos)]), p)
    got = dipole_B(p, mom, pos)
    assert np.all(np.abs(got - ref) <= 2e-9 * np.abs(ref) + 1e-15 * np.max(np.abs(ref)) + 1e-300)


# ---------------------------------------------------------------------------
# closed-form on-axis formulas
# ---------------------------------------------------------------------------
def test_cuboid_on_axis_handbook_formula():
    # common handbook formula for a block a x b x h on the axis through the centre of the
    # pole face, z measured from the face:
    # Bz = Br/pi [atan(ab/(2z sqrt(4z^2+a^2+b^2))) - atan(ab/(2(z+h) sqrt(4(z+h)^2+a^2+b^2)))]
    a, b, h, br = 0.02, 0.01, 0.005, 1.32
    z = np.geomspace(1e-5, 0.2, 60)
    zz = z + h
    expected = br / math.pi * (
        np.arctan(a * b / (2 * z * np.sqrt(4 * z**2 + a**2 + b**2)))
        - np.arctan(a * b / (2 * zz * np.sqrt(4 * zz**2 + a**2 + b**2)))
    )
    p = np.column_stack([np.zeros_like(z), np.zeros_like(z), z])
    got = cuboid_B(p, [(a, b, h)], [(0, 0, br)], [(0, 0, -h / 2)])
    np.testing.assert_allclose(got[:, 2], expected, rtol=1e-11, atol=1e-14)
    np.testing.assert_allclose(got[:, :2], 0.0, atol=1e-13)


def test_cylinder_on_axis_formula():
    # common handbook formula: Bz = Br/2 [(h+z)/sqrt(R^2+(h+z)^2) - z/sqrt(R^2+z^2)],
    # z measured from the pole face (also the on-axis limit in Derby & Olbert, Am. J. Phys. 78, 229 (2010))
    R, h, br = 0.006, 0.004, 1.2
    z = np.geomspace(1e-5, 0.2, 60)
    expected = br / 2 * ((h + z) / np.sqrt(R**2 + (h + z) ** 2) - z / np.sqrt(R**2 + z**2))
    p = np.column_stack([np.zeros_like(z), np.zeros_like(z), z])
    got = cylinder_B(p, [2 * R], [h], [br], [(0, 0, -h / 2)])
    np.testing.assert_allclose(got[:, 2], expected, rtol=1e-11, atol=1e-14)
    np.testing.assert_allclose(got[:, :2], 0.0, atol=1e-14)


def test_ring_on_axis_formula():
    # ring = outer cylinder minus inner one: difference of the two handbook on-axis formulas
    Ro, Ri, h, br = 0.01, 0.004, 0.005, 1.3
    z = np.geomspace(1e-5, 0.2, 40)

    def cyl(R):
        return br / 2 * ((h + z) / np.sqrt(R**2 + (h + z) ** 2) - z / np.sqrt(R**2 + z**2))

    p = np.column_stack([np.zeros_like(z), np.zeros_like(z), z])
    got = ring_B(p, [2 * Ro], [2 * Ri], [h], [br], [(0, 0, -h / 2)])
    np.testing.assert_allclose(got[:, 2], cyl(Ro) - cyl(Ri), rtol=1e-10, atol=1e-14)


def test_n40_cube_probe_reading():
    # fact of the trade (common practice, no source): a 10 mm N40 cube (Br ~ 1.26 T) reads
    # roughly 0.5 T on a probe just above the centre of its pole face
    b = cuboid_B([(0, 0, 0.5e-3)], [(0.01, 0.01, 0.01)], [(0, 0, 1.26)], [(0, 0, -0.005)])
    assert 0.40 < b[0, 2] < 0.55


# ---------------------------------------------------------------------------
# far field -> dipole
# ---------------------------------------------------------------------------
def _far_points(r, n=40):
    d = RNG.normal(size=(n, 3))
    return r * d / np.linalg.norm(d, axis=1)[:, None]


@pytest.mark.parametrize("shape", ["cuboid", "cylinder", "ring"])
def test_far_field_is_dipole(shape):
    # point-dipole limit (Jackson eq. 5.56) with m = J V / mu0; multipole corrections are
    # of relative order (size / r)^2
    if shape == "cuboid":
        size, vol, j = 0.01, 0.01 * 0.006 * 0.004, np.array([0.3, -0.5, 1.1])

        def field(p):
            return cuboid_B(p, [(0.01, 0.006, 0.004)], [j], [(0, 0, 0)])
    elif shape == "cylinder":
        size, vol, j = 0.01, math.pi / 4 * 0.01**2 * 0.004, np.array([0, 0, 1.2])

        def field(p):
            return cylinder_B(p, [0.01], [0.004], [1.2], [(0, 0, 0)])
    else:
        size, vol, j = 0.012, math.pi / 4 * (0.012**2 - 0.005**2) * 0.003, np.array([0, 0, -1.2])

        def field(p):
            return ring_B(p, [0.012], [0.005], [0.003], [-1.2], [(0, 0, 0)])

    r = 20 * size
    p = _far_points(r)
    ref = dipole_B(p, [j * vol / MU0], [(0, 0, 0)])
    got = field(p)
    err = np.linalg.norm(got - ref, axis=1) / np.linalg.norm(ref, axis=1)
    assert np.max(err) < (size / r) ** 2


# ---------------------------------------------------------------------------
# inside, faces, edges, corners
# ---------------------------------------------------------------------------
def _grid_through(lo, hi, n=9):
    """Grid whose coordinates include the boundary planes, the centre and points outside."""
    axes = []
    for a, b in zip(lo, hi):
        w = b - a
        axes.append(np.unique(np.concatenate([np.linspace(a - 0.5 * w, b + 0.5 * w, n), [a, b, (a + b) / 2]])))
    g = np.meshgrid(*axes, indexing="ij")
    return np.stack([x.ravel() for x in g], axis=1)


def test_cuboids_finite_on_faces_edges_corners():
    # a field value is a number everywhere; edge/corner lines are regularised (module notes)
    dims = [(0.01, 0.01, 0.01), (0.01, 0.01, 0.01), (0.01, 0.01, 0.005)]
    pos = [(-0.005, 0, -0.005), (0.005, 0, -0.005), (0.005, 0.0, -0.0125)]
    pols = [(0, 0, 1.3), (0.3, -0.4, -1.0), (1.0, 0.2, 0.0)]
    p = _grid_through((-0.01, -0.005, -0.015), (0.01, 0.005, 0.0))
    b = cuboid_B(p, dims, pols, pos)
    assert np.all(np.isfinite(b))


def test_cylinders_and_rings_finite_on_faces_rims_axis():
    # rims (rho = R, z = +-h/2), walls, axis and faces included on purpose
    R, Ri, h = 0.005, 0.002, 0.004
    rho = np.array([0, Ri, R, 0.5 * (R + Ri), 1.5 * R, 0.001])
    z = np.array([-h, -h / 2, -h / 4, 0, h / 2, h])
    phi = np.array([0, 0.7, math.pi / 2])
    rr, zz, pp = np.meshgrid(rho, z, phi, indexing="ij")
    p = np.column_stack([(rr * np.cos(pp)).ravel(), (rr * np.sin(pp)).ravel(), zz.ravel()])
    assert np.all(np.isfinite(cylinder_B(p, [2 * R], [h], [1.3], [(0, 0, 0)])))
    assert np.all(np.isfinite(ring_B(p, [2 * R], [2 * Ri], [h], [-1.3], [(0, 0, 0)])))


@pytest.mark.parametrize("lam", [1e-3, 7.0, 1e3])
def test_scale_invariance_including_edges_and_corners(lam):
    # dimensional analysis: the B of uniformly polarised bodies depends only on J and on
    # ratios of lengths, so scaling every length (magnets and points) by the same factor
    # leaves B unchanged -- on faces, edges and corners too (the edge regularisation is a
    # fraction of the magnet size, not a fixed length)
    dims = np.array([(0.01, 0.01, 0.01), (0.01, 0.01, 0.01), (0.01, 0.01, 0.005)])
    pos = np.array([(-0.005, 0, -0.005), (0.005, 0, -0.005), (0.005, 0.0, -0.0125)])
    pols = np.array([(0, 0, 1.3), (0.3, -0.4, -1.0), (1.0, 0.2, 0.0)])
    p = _grid_through((-0.01, -0.005, -0.015), (0.01, 0.005, 0.0), n=5)
    b1 = cuboid_B(p, dims, pols, pos)
    b2 = cuboid_B(lam * p, lam * dims, pols, lam * pos)
    # edge values are limits taken numerically 1e-7 of the size inside: rounding-level 1e-8
    np.testing.assert_allclose(b2, b1, rtol=1e-7, atol=1e-8)
    rho = np.array([0.0, 0.002, 0.005, 0.007])
    z = np.array([-0.004, -0.002, 0.0, 0.002])
    rr, zz = np.meshgrid(rho, z, indexing="ij")
    q = np.column_stack([rr.ravel(), np.zeros(rr.size), zz.ravel()])
    for fn, lengths in ((cylinder_B, ([0.01], [0.004])), (ring_B, ([0.01], [0.004], [0.004]))):
        c1 = fn(q, *lengths, [1.2], [(0, 0, -0.002)])
        c2 = fn(lam * q, *[lam * np.asarray(x) for x in lengths], [1.2], [(0, 0, -0.002 * lam)])
        np.testing.assert_allclose(c2, c1, rtol=1e-7, atol=1e-8)


def test_rounding_of_inputs_does_not_move_edge_values():
    # robustness (common practice, no source): a corner or edge point computed with a
    # rounding error of a few ulp (e.g. centre + size/2 done another way) gets the same value
    dims = np.array([(0.01, 0.006, 0.004), (0.01, 0.006, 0.004)])
    pos = np.array([(0.0013, -0.0021, -0.002), (0.0113, -0.0021, -0.002)])
    pols = np.array([(0.2, 0.1, 1.3), (0.0, 0.5, -1.1)])
    lo, hi = pos[0] - dims[0] / 2, pos[0] + dims[0] / 2
    pts = np.array([hi, lo, (hi[0], lo[1], 0.0), (hi[0], 0.0, hi[2]), (0.0, lo[1], lo[2])])
    jiggle = pts * (1 + 3e-16) + 1e-19
    np.testing.assert_allclose(cuboid_B(jiggle, dims, pols, pos), cuboid_B(pts, dims, pols, pos), atol=1e-9)
    rim = np.array([(0.005, 0.0, 0.0), (0.005 * math.cos(0.3), 0.005 * math.sin(0.3), -0.004)])
    for fn, args in ((cylinder_B, ([0.01], [0.004], [1.2], [(0, 0, -0.002)])),
                     (ring_B, ([0.01], [0.004], [0.004], [1.2], [(0, 0, -0.002)]))):
        np.testing.assert_allclose(fn(rim * (1 + 3e-16), *args), fn(rim, *args), atol=1e-9)


def test_cube_corner_value_is_the_diagonal_limit():
    # on a corner the bounded component is the limit from inside along the bisector. The
    # local demagnetising tensor has trace 1 inside a body (from memory of D. J. Newell,
    # W. Williams and D. J. Dunlop, J. Geophys. Res. 98, 9551 (1993)); on a cube's
    # diagonal the three-fold symmetry makes N_zz = 1/3, so B_z = J - J/3 = 2J/3 at every
    # corner; magpylib at 1e-6 inside along the diagonal agrees
    dims, pos, j = (0.01, 0.01, 0.01), (0.001, 0.002, -0.005), 1.3
    signs = np.array([(sx, sy, sz) for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)], float)
    corners = np.array(pos) + 0.005 * signs
    b = cuboid_B(corners, [dims], [(0, 0, j)], [pos])
    np.testing.assert_allclose(b[:, 2], 2 * j / 3, rtol=1e-7)
    near = np.array(pos) + 0.005 * (1 - 1e-6) * signs
    ref = magpy.getB(magpy.magnet.Cuboid(polarization=(0, 0, j), dimension=dims, position=pos), near)
    np.testing.assert_allclose(b[:, 2], ref[:, 2], rtol=1e-5)


def test_dipole_finite_at_its_position():
    assert np.all(np.isfinite(dipole_B([(0, 0, 0), (1, 0, 0)], [(0, 0, 1)], [(0, 0, 0)])))


@pytest.mark.parametrize("pol", [(0, 0, 1.3), (1.3, 0, 0), (0.3, 0.5, -0.9)])
def test_cuboid_face_values_are_inside_limits(pol):
    # on a face B is the limit from inside the magnet; the normal component is continuous
    # across the face (div B = 0, Jackson section 5.9) so it also matches the outside limit
    dims, pos = np.array([0.01, 0.008, 0.006]), np.array([0.001, 0.002, -0.003])
    eps = 1e-10
    for axis in range(3):
        for side in (-1, 1):
            f = pos.copy()
            f[axis] += side * dims[axis] / 2
            n = np.zeros(3)
            n[axis] = side
            on, inner, outer = (cuboid_B([q], [dims], [pol], [pos])[0] for q in (f, f - eps * n, f + eps * n))
            np.testing.assert_allclose(on, inner, atol=1e-6)
            assert abs(on[axis] - outer[axis]) < 1e-6


def test_cylinder_and_ring_wall_values_are_inside_limits():
    # as above for the side walls and pole faces of a cylinder and a ring
    args_c = ([0.01], [0.006], [1.2], [(0, 0, -0.003)])
    args_r = ([0.01], [0.004], [0.006], [1.2], [(0, 0, -0.003)])
    eps = 1e-10
    cases = [
        (cylinder_B, args_c, (0.005, 0, -0.002), (1, 0, 0)),
        (cylinder_B, args_c, (0.0, 0.002, 0.0), (0, 0, 1)),
        (ring_B, args_r, (0.0, 0.005, -0.002), (0, 1, 0)),
        (ring_B, args_r, (0.002, 0.0, -0.002), (-1, 0, 0)),
        (ring_B, args_r, (0.003, 0.0, -0.006), (0, 0, -1)),
    ]
    for fn, args, f, n in cases:
        f, n = np.array(f, float), np.array(n, float)
        on, inner = fn([f], *args)[0], fn([f - eps * n], *args)[0]
        np.testing.assert_allclose(on, inner, atol=1e-6)


def test_shared_faces_take_the_first_magnets_side():
    # touching magnets: on the shared face the value is the limit from inside the first
    # magnet listed; the normal component of B is continuous across the face (div B = 0,
    # Jackson section 5.9), so it equals the limit from the other side as well
    eps = 1e-10
    dims = [(0.01, 0.01, 0.01), (0.01, 0.01, 0.01)]
    pos = [(-0.005, 0, -0.005), (0.005, 0, -0.005)]
    for pols in ([(0, 0, 1.3), (0, 0, -1.3)], [(0.4, -0.2, 1.0), (1.1, 0.3, -0.2)]):
        for f in [(0.0, 0.001, -0.004), (0.0, -0.002, -0.007)]:
            f = np.array(f)
            on = cuboid_B([f], dims, pols, pos)[0]
            left = cuboid_B([f - (eps, 0, 0)], dims, pols, pos)[0]
            right = cuboid_B([f + (eps, 0, 0)], dims, pols, pos)[0]
            np.testing.assert_allclose(on, left, atol=1e-6)
            assert abs(on[0] - right[0]) < 1e-6
            # swapping the order moves the value to the other side
            swapped = cuboid_B([f], dims[::-1], pols[::-1], pos[::-1])[0]
            np.testing.assert_allclose(swapped, right, atol=1e-6)


def test_stacked_cylinders_face_value():
    # a cylinder standing on another one with the same J acts as one cylinder of the summed
    # height (superposition); on the joint plane the value equals that cylinder's field
    eps = 1e-10
    args = ([0.01, 0.01], [0.004, 0.004], [1.2, 1.2], [(0, 0, -0.002), (0, 0, -0.006)])
    tall = ([0.01], [0.008], [1.2], [(0, 0, -0.004)])
    for f in [(0.001, 0.002, -0.004), (0.005, 0.0, -0.004 + eps)]:
        np.testing.assert_allclose(cylinder_B([f], *args), cylinder_B([f], *tall), atol=1e-6)


def test_cube_centre_demagnetising_field():
    # a uniformly magnetised cube has demagnetising factor 1/3 along each axis by symmetry
    # (A. Aharoni, J. Appl. Phys. 83, 3432 (1998)): at its centre B = J - J/3 = 2J/3
    for pol in [(0, 0, 1.2), (0.5, -0.3, 0.4)]:
        b = cuboid_B([(0.0, 0.0, 0.0)], [(0.01, 0.01, 0.01)], [pol], [(0, 0, 0)])[0]
        np.testing.assert_allclose(b, 2 / 3 * np.array(pol), atol=1e-14)


# ---------------------------------------------------------------------------
# Bulirsch's cel against scipy
# ---------------------------------------------------------------------------
def test_cel_special_cases_match_scipy():
    # cel(kc,1,1,1) = K(m), cel(kc,1,1,kc^2) = E(m) with m = 1 - kc^2 (Bulirsch 1969;
    # DLMF 19.2) -- scipy.special.ellipk / ellipe as the reference
    kc = np.geomspace(1e-6, 1.0, 50)
    m = 1 - kc**2
    one = np.ones_like(kc)
    np.testing.assert_allclose(cel(kc, one, one, one), special.ellipkm1(kc**2), rtol=1e-13)  # K via 1 - m = kc^2
    np.testing.assert_allclose(cel(kc, one, one, kc**2), special.ellipe(m), rtol=1e-13)


@pytest.mark.parametrize("p", [0.05, 0.7, 3.0, -0.4, -5.0])
def test_cel_matches_quadrature(p):
    # definition of cel integrated with scipy.integrate.quad (principal value for p < 0)
    for kc, c, s in [(0.3, 1.0, -1.0), (0.8, 0.4, 2.0), (1.0, 1.0, 0.5)]:
        def f(phi):
            co, si = math.cos(phi) ** 2, math.sin(phi) ** 2
            return (c * co + s * si) / ((co + p * si) * math.sqrt(co + kc**2 * si))

        if p > 0:
            ref = integrate.quad(f, 0, math.pi / 2, epsabs=1e-14, epsrel=1e-13)[0]
        else:
            phi0 = math.atan(math.sqrt(-1 / p))  # pole where cos^2 + p sin^2 = 0

            def g(phi):
                co, si = math.cos(phi) ** 2, math.sin(phi) ** 2
                return (c * co + s * si) / math.sqrt(co + kc**2 * si)

            # f = g / (cos^2 + p sin^2); weight 1/(phi - phi0) handled by quad's cauchy rule
            def h(phi):
                den = math.cos(phi) ** 2 + p * math.sin(phi) ** 2
                return g(phi) * (phi - phi0) / den if phi != phi0 else g(phi) / (-(1 - p) * math.sin(2 * phi0))

            ref = integrate.quad(h, 0, math.pi / 2, weight="cauchy", wvar=phi0, epsabs=1e-14, epsrel=1e-12)[0]
        got = float(cel(kc, p, c, s))
        assert got == pytest.approx(ref, rel=1e-10, abs=1e-12)


# ---------------------------------------------------------------------------
# properties (hypothesis)
# ---------------------------------------------------------------------------
coord = st.floats(-0.03, 0.03, allow_nan=False)
point = st.tuples(coord, coord, coord)
pol_c = st.floats(-1.5, 1.5, allow_nan=False)


@settings(max_examples=30, deadline=None)
@given(pts=st.lists(point, min_size=1, max_size=20), j1=pol_c, j2=pol_c, j3=pol_c, k=st.floats(-3, 3))
def test_superposition_and_linearity(pts, j1, j2, j3, k):
    # linear superposition of fields (Maxwell's equations are linear in the sources):
    # touching cuboids evaluated together (shared corners merged) equal the sum of each alone
    dims = np.array([[0.01, 0.01, 0.01], [0.01, 0.01, 0.01], [0.01, 0.01, 0.005]])
    pos = np.array([[-0.005, 0, -0.005], [0.005, 0, -0.005], [0.005, 0.0, -0.0125]])
    pols = np.array([[0, 0, j1], [j2, 0, -j1], [j3, j2, j1]])
    p = np.array(pts)
    p = p[~_on_cuboid_surface(p, dims, pos)]
    if p.shape[0] == 0:
        return
    together = cuboid_B(p, dims, pols, pos)
    alone = sum(cuboid_B(p, dims[i : i + 1], pols[i : i + 1], pos[i : i + 1]) for i in range(3))
    # points within 1e-9 of the size of a face plane are put on it (face snapping), which
    # moves B by at most ~1e-9 of its size; corner-merging mistakes would be of order 1
    assert np.max(np.abs(together - alone)) < 2e-9 * float(np.max(np.abs(alone))) + 1e-12
    np.testing.assert_allclose(cuboid_B(p, dims, k * pols, pos), k * together, rtol=1e-12, atol=1e-13)
    np.testing.assert_allclose(
        cylinder_B(p, [0.01], [0.004], [k * j1], [(0, 0, 0)]),
        k * cylinder_B(p, [0.01], [0.004], [j1], [(0, 0, 0)]),
        rtol=1e-12,
        atol=1e-13,
    )


def _jacobian(fn, p, h):
    jac = np.empty((p.shape[0], 3, 3))  # jac[:, i, k] = dB_i / dx_k
    for k in range(3):
        e = np.zeros(3)
        e[k] = h
        jac[:, :, k] = (fn(p + e) - fn(p - e)) / (2 * h)
    return jac


outside_pt = st.tuples(st.floats(-0.02, 0.02), st.floats(-0.02, 0.02), st.floats(0.001, 0.02))


@settings(max_examples=20, deadline=None)
@given(pts=st.lists(outside_pt, min_size=1, max_size=10))
def test_div_and_curl_vanish_outside(pts):
    # Maxwell: div B = 0 everywhere, curl B = 0 where there is no current (outside the
    # magnets); central finite differences, truncation error O(h^2)
    p = np.array(pts)
    h = 2e-6
    sources = [
        lambda q: cuboid_B(q, [(0.01, 0.01, 0.01), (0.01, 0.01, 0.01)], [(0.2, 0.3, 1.3), (0, 0, -1.3)],
                           [(-0.005, 0, -0.005), (0.005, 0, -0.005)]),
        lambda q: cylinder_B(q, [0.01], [0.005], [1.2], [(0.002, 0, -0.0025)]),
        lambda q: ring_B(q, [0.012], [0.004], [0.005], [-1.2], [(0, 0.001, -0.0025)]),
    ]
    for fn in sources:
        jac = _jacobian(fn, p, h)
        norm = np.linalg.norm(jac, axis=(1, 2))
        div = np.trace(jac, axis1=1, axis2=2)
        curl = np.stack([jac[:, 2, 1] - jac[:, 1, 2], jac[:, 0, 2] - jac[:, 2, 0], jac[:, 1, 0] - jac[:, 0, 1]], 1)
        assert np.all(np.abs(div) <= 1e-5 * norm + 1e-6)
        assert np.all(np.linalg.norm(curl, axis=1) <= 1e-5 * norm + 1e-6)


@settings(max_examples=30, deadline=None)
@given(pts=st.lists(point, min_size=1, max_size=20))
def test_mirror_symmetry_of_opposite_pair(pts):
    # symmetry (Neumann's principle): two z-polarised cubes at x = -+5 mm with opposite J
    # map onto each other under x -> -x with J -> -J, so B(-x, y, z) = (Bx, -By, -Bz)(x, y, z)
    dims = [(0.01, 0.01, 0.01)] * 2
    pos = [(-0.005, 0, -0.005), (0.005, 0, -0.005)]
    pols = [(0, 0, 1.3), (0, 0, -1.3)]
    p = np.array(pts)
    p = p[~_on_cuboid_surface(p, dims, pos)]  # on faces B is the owner's one-sided limit
    q = p * np.array([-1, 1, 1])
    b, bq = cuboid_B(p, dims, pols, pos), cuboid_B(q, dims, pols, pos)
    np.testing.assert_allclose(bq, b * np.array([1, -1, -1]), atol=1e-12)


# ---------------------------------------------------------------------------
# corner sharing and input checking
# ---------------------------------------------------------------------------
def test_checkerboard_corner_count():
    # a 4 x 4 checkerboard of touching cubes has 5 x 5 x 2 = 50 distinct corners, none
    # cancelling (counting argument, no source needed beyond geometry)
    xs = (np.arange(4) - 1.5) * 0.01
    pos = np.array([(x, y, -0.005) for y in xs for x in xs])
    signs = np.array([(-1) ** (i + j) for j in range(4) for i in range(4)])
    s = CuboidSet(np.full((16, 3), 0.01), np.outer(signs, [0, 0, 1.3]), pos)
    assert s.corners.shape == (50, 3)
    # a uniform 4 x 4 grid acts as one 40 x 40 x 10 mm block: every shared corner cancels
    # and only the block's 8 corners remain
    s2 = CuboidSet(np.full((16, 3), 0.01), np.tile([0, 0, 1.3], (16, 1)), pos)
    assert s2.corners.shape == (8, 3)


def test_bad_inputs_raise_input_error():
    with pytest.raises(InputError, match="observers"):
        cuboid_B(np.zeros((3, 2)), [(1, 1, 1)], [(0, 0, 1)], [(0, 0, 0)])
    with pytest.raises(InputError, match="dimensions"):
        cuboid_B(np.zeros((3, 3)), [(1, -1, 1)], [(0, 0, 1)], [(0, 0, 0)])
    with pytest.raises(InputError, match="magnets"):
        cuboid_B(np.zeros((3, 3)), [(1, 1, 1)], [(0, 0, 1), (0, 0, 1)], [(0, 0, 0)])
    with pytest.raises(InputError, match="inner_diameters"):
        ring_B(np.zeros((1, 3)), [0.01], [0.02], [0.01], [1.0], [(0, 0, 0)])
    with pytest.raises(InputError, match="observers"):
        dipole_B([(np.nan, 0, 0)], [(0, 0, 1)], [(0, 0, 0)])


def test_shapes_and_single_point():
    b = cuboid_B((0, 0, 0.01), [(0.01, 0.01, 0.01)], [(0, 0, 1)], [(0, 0, 0)])
    assert b.shape == (1, 3)
    assert cylinder_B(np.zeros((0, 3)), [0.01], [0.01], [1.0], [(0, 0, 0)]).shape == (0, 3)


def test_grouped_corner_sums_match_magpylib_near_edges_faces_corners_and_far():
    # the kernel combines logarithms of corners sharing coefficients (log of a product)
    # and pairs arctangents along corner lines (tangent of a difference, Abramowitz and
    # Stegun 4.4.34, with its branch); magpylib sums every corner term separately
    rows = cols = 4
    a = 0.01
    xs = (np.arange(cols) - 1.5) * a
    pos = np.array([[x, y, -a / 2] for y in xs for x in xs])
    dims = np.full((rows * cols, 3), a)
    sign = np.array([(-1) ** (i + j) for j in range(rows) for i in range(cols)], dtype=float)
    pols = np.column_stack([0.2 * sign, -0.1 * sign, 1.3 * sign])  # all three components
    coll = magpy.Collection(*[magpy.magnet.Cuboid(polarization=j, dimension=d, position=c)
                              for d, j, c in zip(dims, pols, pos)])
    corners = np.array([[x, y, z] for x in np.r_[xs - a / 2, xs[-1] + a / 2]
                        for y in np.r_[xs - a / 2, xs[-1] + a / 2] for z in (-a, 0.0)])
    pick = corners[RNG.choice(len(corners), 40)]
    offs = RNG.normal(size=(40, 3))
    pts = np.concatenate([
        pick + 1e-6 * a * offs,  # next to corners
        pick + np.array([0.3 * a, 1e-4 * a, 1e-4 * a]) * np.sign(offs),  # next to edge lines
        pick + np.array([3 * a, 1e-7 * a, 2e-7 * a]),  # on an edge's extension, off the magnets
        pick + np.array([0.2 * a, 0.3 * a, 1e-9 * a]) * np.sign(offs),  # next to faces
        RNG.uniform(-2.5 * a, 2.5 * a, (200, 3)) * np.array([1, 1, 0.4]),  # between the planes
        RNG.normal(size=(40, 3)) * 1e3 * a,  # far away
    ])
    keep = ~_on_cuboid_surface(pts, dims, pos, 1e-8 * a) & ~_near_cuboid_edges(pts, dims, pos, 1e-9 * a)
    pts = pts[keep]
    got = cuboid_B(pts, dims, pols, pos)
    ref = magpy.getB(coll, pts)
    assert np.max(np.abs(got - ref)) < _tol(ref)
    # where the field is not tiny, also per point (far away the sums cancel to rounding)
    norm = np.linalg.norm(ref, axis=1)
    big = norm > 1e-3
    assert np.all(np.linalg.norm(got - ref, axis=1)[big] <= 1e-9 * norm[big] + 1e-12)
