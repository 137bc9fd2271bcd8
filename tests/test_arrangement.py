"""Tests of matdb.physics.arrangement.

References: magpylib (independent test-only implementation, M. Ortner and L. G. Coliado
Bandeira, SoftwareX 11, 100466 (2020)) built magnet by magnet, including explicit image
magnets; the method of images at a mu -> infinity surface (J. D. Jackson, Classical
Electrodynamics 3rd ed., section 5.9); the matdb layout conventions (DEVELOPERS.md).
"""

from __future__ import annotations

import math

import magpylib as magpy
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matdb.errors import InputError
from matdb.physics.arrangement import Arrangement, Magnet, build_arrangement
from matdb.constants import MU0
from matdb.physics.fields import dipole_B

RNG = np.random.default_rng(7)
CUBE = (0.01, 0.01, 0.01)


def _magpy_source(m: Magnet, position=None, pol=None):
    pos = m.position if position is None else position
    j = m.polarization if pol is None else pol
    if m.shape == "cuboid":
        return magpy.magnet.Cuboid(polarization=j, dimension=m.size, position=pos)
    if m.shape == "cylinder":
        return magpy.magnet.Cylinder(polarization=j, dimension=m.size, position=pos)
    return magpy.magnet.CylinderSegment(
        polarization=j, dimension=(m.size[1] / 2, m.size[0] / 2, m.size[2], 0, 360), position=pos
    )


def _magpy_collection(arr: Arrangement, images: bool = False):
    srcs = [_magpy_source(m) for m in arr.magnets]
    if images:
        zp = arr.bottom_z
        for m in arr.magnets:
            x, y, z = m.position
            jx, jy, jz = m.polarization
            srcs.append(_magpy_source(m, (x, y, 2 * zp - z), (-jx, -jy, jz)))
    return magpy.Collection(*srcs)


def _points(arr: Arrangement, n=2000, above_plate=False):
    xmin, xmax, ymin, ymax, zmin, zmax = arr.bounds()
    span = max(xmax - xmin, ymax - ymin, zmax - zmin)
    lo = np.array([xmin, ymin, zmin]) - 0.5 * span
    hi = np.array([xmax, ymax, zmax]) + 0.5 * span
    if above_plate:
        lo[2] = zmin
    return RNG.uniform(lo, hi, (n, 3))


def _tol(ref):
    # tolerance of the field comparisons (regression check): 1e-9 max|B| + 1e-12 T
    return 1e-9 * float(np.max(np.linalg.norm(ref, axis=1))) + 1e-12


# ---------------------------------------------------------------------------
# conventions of build_arrangement
# ---------------------------------------------------------------------------
def test_checkerboard_2x2_positions_and_signs():
    # matdb convention (DEVELOPERS.md): cols along x, rows along y, (row 0, col 0) at -x,-y
    # is +z, sign (-1)^(row+col), top faces at z = 0, centred on the z axis
    a = build_arrangement("cuboid", CUBE, "checkerboard", rows=2, cols=2, spacing=0.002, br=1.3)
    assert a.count == 4 and a.rows == 2 and a.cols == 2 and a.pattern == "checkerboard"
    got = {(round(m.position[0], 9), round(m.position[1], 9)): m.direction[2] for m in a.magnets}
    pitch = 0.012
    assert got == {
        (-pitch / 2, -pitch / 2): 1.0,
        (pitch / 2, -pitch / 2): -1.0,
        (-pitch / 2, pitch / 2): -1.0,
        (pitch / 2, pitch / 2): 1.0,
    }
    for m in a.magnets:
        assert m.top_z == pytest.approx(0.0, abs=1e-15)
        assert m.br == 1.3 and m.polarization[2] == pytest.approx(1.3 * m.direction[2])


def test_stripes_3x2_signs_and_spacing():
    # stripes: sign (-1)^row; rows along y; spacing is the clear gap between neighbours
    a = build_arrangement("cuboid", (0.02, 0.005, 0.003), "stripes", rows=3, cols=2, spacing=0.001)
    ys = sorted({round(m.position[1], 12) for m in a.magnets})
    xs = sorted({round(m.position[0], 12) for m in a.magnets})
    assert ys == pytest.approx([-0.006, 0.0, 0.006])
    assert xs == pytest.approx([-0.0105, 0.0105])
    for m in a.magnets:
        row = ys.index(round(m.position[1], 12))
        assert m.direction == (0.0, 0.0, float((-1) ** row))
        assert m.position[2] == pytest.approx(-0.0015)
    xmin, xmax, ymin, ymax, zmin, zmax = a.bounds()
    assert (xmin, xmax, ymin, ymax) == pytest.approx((-0.0205, 0.0205, -0.0085, 0.0085))
    assert a.top_z == pytest.approx(0.0, abs=1e-15) and a.bottom_z == pytest.approx(-0.003)
    assert (zmin, zmax) == pytest.approx((-0.003, 0.0), abs=1e-15)


def test_single_ignores_rows_and_cols():
    a = build_arrangement("cylinder", (0.01, 0.005), "single", rows=3, cols=4, br=1.2)
    assert a.count == 1
    m = a.magnets[0]
    assert m.position == pytest.approx((0.0, 0.0, -0.0025))
    assert m.volume == pytest.approx(math.pi / 4 * 0.01**2 * 0.005)


def test_cylinder_grid_pitch_uses_diameter():
    a = build_arrangement("ring", (0.01, 0.004, 0.003), "grid", rows=1, cols=3, spacing=0.002)
    xs = sorted(m.position[0] for m in a.magnets)
    assert xs == pytest.approx([-0.012, 0.0, 0.012])
    assert all(m.direction == (0.0, 0.0, 1.0) for m in a.magnets)
    assert a.magnet_volume_m3 == pytest.approx(3 * math.pi / 4 * (0.01**2 - 0.004**2) * 0.003)


def test_list_is_shifted_so_highest_top_face_is_zero():
    items = [
        {"position": (0.0, 0.0, 0.010), "direction": (0, 0, 2.0)},
        {"position": (0.02, 0.0, 0.004), "direction": (0, 0, -1), "size": (0.01, 0.01, 0.02), "br": 1.0},
        {"position": (-0.02, 0.01, 0.0), "direction": (3, 4, 0), "grade": "N52"},
    ]
    a = build_arrangement("cuboid", CUBE, "list", br=1.3, items=items, grade="N42")
    assert a.top_z == pytest.approx(0.0, abs=1e-15)
    # the first magnet's top (0.015) was the highest: everything moves down by 15 mm
    assert a.magnets[0].position == pytest.approx((0.0, 0.0, -0.005))
    assert a.magnets[1].position == pytest.approx((0.02, 0.0, -0.011))
    assert a.magnets[2].position == pytest.approx((-0.02, 0.01, -0.015))
    assert a.magnets[0].direction == (0.0, 0.0, 1.0)
    assert a.magnets[2].direction == pytest.approx((0.6, 0.8, 0.0))
    assert [m.br for m in a.magnets] == [1.3, 1.0, 1.3]
    assert [m.grade for m in a.magnets] == ["N42", "N42", "N52"]
    assert a.magnets[1].size == (0.01, 0.01, 0.02)


@pytest.mark.parametrize(
    "kwargs, field",
    [
        ({"shape": "sphere", "size": CUBE}, "shape"),
        ({"shape": "cuboid", "size": (0.01, 0.01)}, "size"),
        ({"shape": "cuboid", "size": (0.01, -0.01, 0.01)}, "size"),
        ({"shape": "ring", "size": (0.01, 0.01, 0.01)}, "size"),
        ({"shape": "cylinder", "size": (0.01, 0.01, 0.01)}, "size"),
        ({"shape": "cuboid", "size": CUBE, "pattern": "spiral"}, "pattern"),
        ({"shape": "cuboid", "size": CUBE, "pattern": "grid", "rows": 0}, "rows"),
        ({"shape": "cuboid", "size": CUBE, "pattern": "grid", "cols": 1.5}, "cols"),
        ({"shape": "cuboid", "size": CUBE, "spacing": -0.001}, "spacing"),
        ({"shape": "cuboid", "size": CUBE, "br": -1.0}, "br"),
        ({"shape": "cuboid", "size": CUBE, "pattern": "list"}, "items"),
        ({"shape": "cuboid", "size": CUBE, "pattern": "list", "items": [{"position": (0, 0, 0), "direction": (0, 0, 0)}]},
         "direction"),
        ({"shape": "cylinder", "size": (0.01, 0.01), "pattern": "list",
          "items": [{"position": (0, 0, 0), "direction": (1, 0, 0)}]}, "direction"),
    ],
)
def test_bad_inputs_name_the_field(kwargs, field):
    with pytest.raises(InputError, match=field):
        build_arrangement(**kwargs)


def test_magnet_validation_and_volume():
    m = Magnet("cuboid", (0.01, 0.02, 0.005), (0, 0, 0), (0, 0, -5), 1.2)
    assert m.direction == (0.0, 0.0, -1.0)
    assert m.volume == pytest.approx(1e-6)
    with pytest.raises(InputError, match="direction"):
        Magnet("ring", (0.02, 0.01, 0.005), (0, 0, 0), (0, 1, 1), 1.2)
    with pytest.raises(InputError, match="shape"):
        Magnet("disc", (0.02, 0.005), (0, 0, 0), (0, 0, 1), 1.2)
    r = Magnet("ring", (0.02, 0.01, 0.005), (0, 0, 0), (0, 0, 1), 1.2)
    assert r.volume == pytest.approx(math.pi / 4 * (0.02**2 - 0.01**2) * 0.005)


# ---------------------------------------------------------------------------
# fields against magpylib
# ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "shape, size, pattern, rows, cols, spacing",
    [
        ("cuboid", CUBE, "checkerboard", 2, 2, 0.0),
        ("cuboid", CUBE, "checkerboard", 4, 4, 0.0),
        ("cuboid", (0.02, 0.005, 0.004), "stripes", 3, 2, 0.001),
        ("cylinder", (0.01, 0.005), "checkerboard", 2, 3, 0.002),
        ("ring", (0.012, 0.004, 0.004), "stripes", 2, 2, 0.0),
    ],
)
@pytest.mark.parametrize("plate", [False, True], ids=["free", "back-plate"])
def test_arrangement_matches_magpylib(shape, size, pattern, rows, cols, spacing, plate):
    # reference: magpylib Collection of the same magnets; with a back plate the explicit
    # mirror images (J' = (-Jx, -Jy, Jz)) are added as magpylib magnets, and points are
    # taken above the plate surface only
    a = build_arrangement(shape, size, pattern, rows, cols, spacing, br=1.3, back_plate=plate)
    p = _points(a, above_plate=plate)
    ref = magpy.getB(_magpy_collection(a, images=plate), p)
    got = a.B(p)
    assert np.max(np.abs(got - ref)) < _tol(ref)


def test_oblique_list_with_back_plate_matches_magpylib_images():
    # reference: magpylib with explicit image magnets; oblique cuboid polarisations, mixed shapes
    items = [
        {"position": (0.0, 0.0, 0.0), "direction": (0.3, -0.2, 1.0)},
        {"position": (0.012, 0.003, -0.002), "direction": (1, 0, 0), "size": (0.006, 0.01, 0.006)},
        {"position": (-0.015, 0.0, 0.0), "direction": (0, 0, -1), "shape": "cylinder", "size": (0.008, 0.01)},
        {"position": (0.0, 0.02, 0.0), "direction": (0, 0, 1), "shape": "ring", "size": (0.012, 0.005, 0.01)},
    ]
    a = build_arrangement("cuboid", CUBE, "list", br=1.25, items=items, back_plate=True)
    p = _points(a, above_plate=True)
    ref = magpy.getB(_magpy_collection(a, images=True), p)
    assert np.max(np.abs(a.B(p) - ref)) < _tol(ref)


@pytest.mark.parametrize("shape, size", [("cuboid", (0.01, 0.008, 0.005)), ("cylinder", (0.01, 0.004)),
                                         ("ring", (0.012, 0.005, 0.004))])
def test_back_plate_doubles_height_exactly(shape, size):
    # method of images (Jackson 5.9): a magnet standing on an ideal mu -> infinity plate acts
    # above the plate as a magnet of twice its height, its top face still at z = 0
    a = build_arrangement(shape, size, br=1.3, back_plate=True)
    tall = size[:-1] + (2 * size[-1],)
    b = build_arrangement(shape, tall, br=1.3)
    p = _points(a, above_plate=True)
    got, ref = a.B(p), b.B(p)
    assert np.max(np.abs(got - ref)) < 1e-12 * np.max(np.abs(ref)) + 1e-15


def test_far_field_of_arrangement_is_dipole():
    # point-dipole limit (Jackson eq. 5.56) with m = sum J V / mu0 for a 2 x 3 grid;
    # relative error of order (size / r)^2, size = the largest extent of the grid
    a = build_arrangement("cuboid", CUBE, "grid", rows=2, cols=3, spacing=0.002)
    mom = sum(np.array(m.polarization) * m.volume for m in a.magnets) / MU0
    centre = np.mean([m.position for m in a.magnets], axis=0)
    size = 0.034
    d = RNG.normal(size=(30, 3))
    p = centre + 20 * size * d / np.linalg.norm(d, axis=1)[:, None]
    ref = dipole_B(p, [mom], [centre])
    err = np.linalg.norm(a.B(p) - ref, axis=1) / np.linalg.norm(ref, axis=1)
    assert np.max(err) < (1 / 20) ** 2


# ---------------------------------------------------------------------------
# H, inside, scaling
# ---------------------------------------------------------------------------
def test_inside_and_H():
    a = build_arrangement("cuboid", CUBE, "checkerboard", 2, 2, spacing=0.002, br=1.3)
    p = np.array([
        [-0.006, -0.006, -0.005],  # centre of magnet (0, 0)
        [0.006, -0.006, 0.0],  # top face of magnet (0, 1)
        [0.0, 0.0, -0.005],  # in the gap
        [0.0, 0.0, 0.001],  # above
    ])
    idx = a.inside(p)
    assert idx[2] == -1 and idx[3] == -1
    assert a.magnets[idx[0]].position == pytest.approx((-0.006, -0.006, -0.005))
    assert a.magnets[idx[1]].position == pytest.approx((0.006, -0.006, -0.005))
    b, h = a.B(p), a.H(p)
    j = np.array([a.magnets[i].polarization if i >= 0 else (0, 0, 0) for i in idx])
    np.testing.assert_allclose(h, (b - j) / MU0, rtol=1e-14)
    # inside a magnet opposing its neighbours the demagnetising field opposes J
    assert h[0, 2] < 0


def test_H_on_shared_and_plate_faces_is_the_inside_limit():
    # the demagnetisation check samples faces: there H must be the limit from inside the
    # magnet that inside() reports (H tangential is continuous across a face and B normal
    # is continuous, Jackson section 5.9)
    eps = 1e-10
    a = build_arrangement("cuboid", CUBE, "checkerboard", 2, 2, br=1.3, back_plate=True)
    faces = [
        ((0.0, -0.005, -0.005), (-1, 0, 0)),  # shared side face, magnet (0,0) owns it
        ((-0.005, 0.0, -0.003), (0, -1, 0)),  # shared side face along y
        ((-0.004, -0.006, -0.01), (0, 0, 1)),  # bottom face on the plate
        ((0.003, 0.004, 0.0), (0, 0, -1)),  # top face
    ]
    for f, into in faces:
        f, into = np.array(f), np.array(into, float)
        idx = a.inside([f, f + eps * into])
        assert idx[0] == idx[1] >= 0
        np.testing.assert_allclose(a.H(f), a.H(f + eps * into), rtol=1e-5, atol=1.0)


def test_single_cube_centre_H_is_minus_M_over_3():
    # demagnetising factor of a cube is 1/3 (A. Aharoni, J. Appl. Phys. 83, 3432 (1998)):
    # H at the centre = -M/3 = -Br/(3 mu0)
    a = build_arrangement("cuboid", CUBE, br=1.2)
    h = a.H([0, 0, -0.005])
    np.testing.assert_allclose(h[0], [0, 0, -1.2 / (3 * MU0)], rtol=1e-12, atol=1e-6)


def test_inside_rings_and_cylinders():
    a = build_arrangement("ring", (0.01, 0.004, 0.003), "grid", 1, 2, spacing=0.002)
    x0 = a.magnets[0].position[0]
    p = np.array([[x0, 0, -0.001], [x0 + 0.003, 0, -0.001], [x0 + 0.002, 0, -0.003], [x0 + 0.0051, 0, -0.001]])
    assert list(a.inside(p)) == [-1, 0, 0, -1]


@settings(max_examples=25, deadline=None)
@given(k=st.floats(-5, 5, allow_nan=False), x=st.floats(-0.03, 0.03), y=st.floats(-0.03, 0.03),
       z=st.floats(-0.02, 0.02))
def test_scaled_is_linear(k, x, y, z):
    # B is linear in J (linearity of Maxwell's equations)
    a = build_arrangement("cuboid", CUBE, "checkerboard", 2, 3, br=1.3, back_plate=True)
    np.testing.assert_allclose(a.scaled(k).B([x, y, z]), k * a.B([x, y, z]), rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(a.with_unit_polarization().B([x, y, z]), a.B([x, y, z]) / 1.3, rtol=1e-12,
                               atol=1e-14)


@settings(max_examples=30, deadline=None)
@given(x=st.floats(-0.04, 0.04), y=st.floats(-0.04, 0.04), z=st.floats(-0.015, 0.02))
def test_checkerboard_and_stripes_symmetry(x, y, z):
    # symmetry of the sign pattern (Neumann's principle): for an even number of columns the
    # mirror x -> -x maps a checkerboard onto itself with J -> -J, so
    # B(-x, y, z) = (Bx, -By, -Bz)(x, y, z); stripes are mirrored with J unchanged, so
    # B(-x, y, z) = (-Bx, By, Bz)(x, y, z)
    cb = build_arrangement("cuboid", CUBE, "checkerboard", 3, 4, spacing=0.001)
    st_ = build_arrangement("cuboid", CUBE, "stripes", 3, 4, spacing=0.001)
    p = np.array([[x, y, z]])
    q = np.array([[-x, y, z]])
    np.testing.assert_allclose(cb.B(q), cb.B(p) * [1, -1, -1], atol=1e-12)
    np.testing.assert_allclose(st_.B(q), st_.B(p) * [-1, 1, 1], atol=1e-12)


def test_fields_finite_on_a_grid_through_faces_edges_corners():
    # the demagnetisation check samples faces, edges and corners: values must be numbers
    for a in [
        build_arrangement("cuboid", CUBE, "checkerboard", 2, 2, back_plate=True),
        build_arrangement("cylinder", (0.01, 0.005), "stripes", 2, 1, spacing=0.0),
        build_arrangement("ring", (0.01, 0.004, 0.005), "single"),
    ]:
        xmin, xmax, ymin, ymax, zmin, zmax = a.bounds()
        axes = [np.unique(np.concatenate([np.linspace(lo, hi, 11), [-0.002, 0.002, 0.0]]))
                for lo, hi in ((xmin, xmax), (ymin, ymax), (zmin, zmax))]
        g = np.stack(np.meshgrid(*axes, indexing="ij"), -1).reshape(-1, 3)
        assert np.all(np.isfinite(a.B(g))) and np.all(np.isfinite(a.H(g)))


def test_single_point_shape_and_geometry_helpers():
    a = build_arrangement("cuboid", CUBE, "checkerboard", 2, 2)
    assert a.B([0, 0, 0.001]).shape == (1, 3)
    assert a.magnet_volume_m3 == pytest.approx(4e-6)
    with pytest.raises(InputError, match="points"):
        a.B([[0, 0]])
