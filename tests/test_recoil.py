"""Recoil permeability (matdb.physics.recoil) against outside references.

References used below:
- A. Aharoni, "Demagnetizing factors for rectangular ferromagnetic prisms", J. Appl.
  Phys. 83, 3432 (1998): the magnetometric factor of a cube is 1/3 (by symmetry).
- D.-X. Chen, J. A. Brug and R. B. Goldfarb, "Demagnetizing factors for cylinders",
  IEEE Trans. Magn. 27, 3601 (1991): magnetometric N_m = 0.3116 for length/diameter 1
  (from memory of their table; verify).
- magpylib-material-response (a general-purpose package, test-only): the moment method
  on magnets meshed into cells (Chadebec et al., IEEE Trans. Magn. 42, 515 (2006)).
"""

from __future__ import annotations

import tomllib
import warnings
from pathlib import Path

import magpylib as magpy
import numpy as np
import pytest

from matdb.design import design_to_toml, load_design_text, parse_stabilized
from matdb.physics import plate as P
from matdb.physics import recoil as R
from matdb.physics.arrangement import build_arrangement
from matdb.constants import MU0

A = 0.0127  # 1/2 inch cube [m]
BR = 1.3
CHI = 0.05  # sintered NdFeB, mu_rec 1.05 (seed_data magnet_grades.csv)


def test_single_cube_follows_the_magnetometric_factor():
    # the one-cell model: uniform J on the recoil line with N = 1/3 (Aharoni 1998):
    # J = Br / (1 + chi N) (the subdivided default differs at order chi^2, tested below)
    arr = build_arrangement("cuboid", (A, A, A), "single", br=BR).with_recoil([CHI], subdivision=1)
    assert arr.magnets[0].br == pytest.approx(BR / (1 + CHI / 3), rel=1e-9)
    assert arr.magnets[0].direction == pytest.approx((0.0, 0.0, 1.0))


def test_cylinder_follows_the_magnetometric_factor():
    # Chen, Brug & Goldfarb (1991): N_m = 0.3116 for length = diameter
    arr = build_arrangement("cylinder", (A, A), "single", br=BR).with_recoil([CHI])
    assert arr.magnets[0].br == pytest.approx(BR / (1 + CHI * 0.3116), rel=2e-4)


def test_response_is_linear_in_remanence_and_cached():
    # the field equations are linear in J_r: one solve serves every Br (regression check)
    arr = build_arrangement("cuboid", (A, A, A), "checkerboard", 2, 2, br=1.0)
    j1 = R.effective_polarizations(arr.magnets, [CHI] * 4)
    j2 = R.effective_polarizations(arr.scaled(1.17).magnets, [CHI] * 4)
    np.testing.assert_allclose(j2, 1.17 * j1, rtol=1e-12)
    assert R.response_matrix(arr.magnets, [CHI] * 4) is R.response_matrix(arr.magnets, [CHI] * 4)


def _reference(arr, cells=5):
    # lazy: the reference library is heavy and only the slow comparisons need it
    from magpylib_material_response.demag import apply_demag
    from magpylib_material_response.meshing import mesh_Cuboid

    c = magpy.Collection()
    for m in arr.magnets:
        c.add(mesh_Cuboid(magpy.magnet.Cuboid(polarization=m.polarization, dimension=m.size,
                                              position=m.position), (cells,) * 3))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return apply_demag(c, susceptibility=CHI, interaction="newell")


@pytest.mark.slow
@pytest.mark.parametrize("pattern,n", [("single", 1), ("checkerboard", 2)])
def test_default_against_the_moment_method_on_meshed_magnets(pattern, n):
    rigid = build_arrangement("cuboid", (A, A, A), pattern, n, n, br=BR)
    mine = rigid.with_recoil([CHI] * rigid.count)
    ref = _reference(rigid)
    # 1. each magnet's mean polarisation equals the mean over the reference's cells
    #    (5 x 5 x 5 per magnet) to 5e-4 of Br
    for cells, m in zip(ref.children, mine.magnets):
        jm = np.mean([s.polarization for s in cells.children], axis=0)
        np.testing.assert_allclose(m.polarization, jm, atol=5e-4 * BR)
    # 2. the field 3-10 mm above the magnets: nearer the reference than the rigid model,
    #    within 1.5 %
    pts = np.array([[x, y, z] for x in (-6e-3, 0.0, 4e-3) for y in (-3e-3, 2e-3)
                    for z in (3e-3, 5e-3, 1e-2)])
    b_ref = magpy.getB(ref, pts)
    err = np.linalg.norm(mine.B(pts) - b_ref, axis=1) / np.linalg.norm(b_ref, axis=1)
    err_rigid = np.linalg.norm(rigid.B(pts) - b_ref, axis=1) / np.linalg.norm(b_ref, axis=1)
    assert err.max() < 0.015 and err.max() < 0.6 * err_rigid.max()
    # 3. the lift of a graphite plate at 0.5 and 1 mm: the default removes part of the
    #    rigid model's excess; the reference, which resolves the stronger demagnetisation
    #    near the edges, lifts less still (the default stays optimistic, see README)
    bx, by = P.edge_lines(rigid.magnets)
    side = 0.6 * A if n == 1 else 0.010
    geom = P.PlateGeometry("rectangle", side, side, 1e-3, 0.0, 0.0, bx, by)
    gaps = [5e-4, 1e-3]
    f_rigid = P.lift_force(rigid.B, geom, gaps, 4.5e-4, 8.5e-5)
    f_mine = P.lift_force(mine.B, geom, gaps, 4.5e-4, 8.5e-5)
    f_ref = P.lift_force(lambda p: magpy.getB(ref, p), geom, gaps, 4.5e-4, 8.5e-5)
    assert np.all(f_rigid > f_mine) and np.all(f_mine > f_ref)


def test_subdivided_mean_follows_the_magnetometric_factor_to_first_order():
    # the cube's volume-mean demagnetising field is -N J with N = 1/3 (Aharoni 1998), so
    # any subdivision gives the mean J = Br (1 - chi / 3) + O(chi^2)
    arr = build_arrangement("cuboid", (A, A, A), "single", br=BR)
    for n in (2, 3):
        j = R.effective_polarizations(arr.magnets, [CHI], subdivision=n)[0]
        assert abs(j[2] / BR - (1 - CHI / 3)) < CHI ** 2
        np.testing.assert_allclose(j[:2], 0.0, atol=1e-12)


def test_subdivided_cells_satisfy_the_recoil_equation():
    # the defining equation of the moment method (Chadebec et al. 2006): each cell's J is
    # J_r + chi <mu0 H> over the cell, with H from Arrangement.H (magnets and cells);
    # same Gauss rule as the solve, so equal to rounding (regression check of assembly)
    n = 3
    rigid = build_arrangement("cuboid", (A, A, A), "checkerboard", 2, 1, br=BR)
    arr = rigid.with_recoil([CHI] * 2, subdivision=n)
    sizes, centres, dj, owner = arr.cells
    assert sizes.shape == (2 * n ** 3, 3)
    for c in (0, 13, 2 * n ** 3 - 1):
        q, w = R.volume_quadrature("cuboid", sizes[c], centres[c], R.N_QUAD_CELL)
        mu0h = w @ (arr.H(q) * MU0)
        j_cell = np.asarray(arr.magnets[owner[c]].polarization) + dj[c]
        j_r = np.asarray(rigid.magnets[owner[c]].polarization)
        np.testing.assert_allclose(j_cell, j_r + CHI * mu0h, atol=1e-9)


def test_subdivided_field_is_linear_in_remanence():
    # one solve serves every Br: the cells scale with the magnets (regression check)
    arr = build_arrangement("cuboid", (A, A, A), "checkerboard", 2, 2, br=1.0).with_recoil([CHI] * 4, subdivision=2)
    pts = np.array([[1e-3, 2e-3, 5e-4], [-4e-3, 3e-3, 2e-3]])
    np.testing.assert_allclose(arr.scaled(1.21).B(pts), 1.21 * arr.B(pts), rtol=1e-12)
    # by symmetry the four magnets share one |J|: unit polarisation divides B by it
    np.testing.assert_allclose(arr.with_unit_polarization().B(pts), arr.B(pts) / arr.magnets[0].br,
                               rtol=1e-9)


@pytest.mark.slow
@pytest.mark.parametrize("pattern,n", [("single", 1), ("checkerboard", 2)])
def test_subdivided_against_the_reference_at_the_same_meshing(pattern, n):
    # magpylib-material-response with 5 x 5 x 5 cells per magnet against this module with
    # subdivision 5: the same discretisation, so the lift reductions agree (measured:
    # 5.81 / 5.50 % vs 5.81 / 5.50 % single, 3.55 / 3.81 % vs 3.55 / 3.81 % checkerboard)
    rigid = build_arrangement("cuboid", (A, A, A), pattern, n, n, br=BR)
    mine = rigid.with_recoil([CHI] * rigid.count, subdivision=5)
    ref = _reference(rigid, 5)
    for cells, m in zip(ref.children, mine.magnets):
        jm = np.mean([s.polarization for s in cells.children], axis=0)
        np.testing.assert_allclose(m.polarization, jm, atol=5e-4 * BR)
    bx, by = P.edge_lines(rigid.magnets)
    side = 0.6 * A if n == 1 else 0.010
    geom = P.PlateGeometry("rectangle", side, side, 1e-3, 0.0, 0.0, bx, by)
    gaps = [5e-4, 1e-3]
    f_rigid = P.lift_force(rigid.B, geom, gaps, 4.5e-4, 8.5e-5)
    drop_mine = 1 - P.lift_force(mine.B, geom, gaps, 4.5e-4, 8.5e-5) / f_rigid
    drop_ref = 1 - P.lift_force(lambda p: magpy.getB(ref, p), geom, gaps, 4.5e-4, 8.5e-5) / f_rigid
    np.testing.assert_allclose(drop_mine, drop_ref, rtol=0.03)


def test_back_plate_cube_is_a_prism_of_twice_the_height():
    # image method (Jackson 5.9) with recoil: a cube on ideal steel polarises like the
    # upper half of a 1:1:2 prism (regression check of the image terms)
    on = build_arrangement("cuboid", (A, A, A), "single", br=BR, back_plate=True).with_recoil([CHI])
    tall = build_arrangement("cuboid", (A, A, 2 * A), "single", br=BR).with_recoil([CHI])
    # (to the 5-point Gauss rule's accuracy across the face the image touches)
    assert on.magnets[0].br == pytest.approx(tall.magnets[0].br, rel=1e-4)


# demo design shared with the other plate tests: 2 x 2 N42 checkerboard, rigid = true
CHECKER_DESIGN = Path(__file__).parent / "data" / "plate_checkerboard.toml"


def test_design_default_and_rigid_switch():
    text = CHECKER_DESIGN.read_text(encoding="utf-8")
    assert "rigid = true" in text
    rigid = load_design_text(text)
    default = load_design_text(text.replace("rigid = true", ""))
    assert rigid.magnets.rigid and not default.magnets.rigid
    ideal = rigid.arrangement()
    br_20 = rigid.magnets.grade_props.br_t  # the catalogue's Br at 20 C
    assert all(m.br == pytest.approx(br_20, rel=1e-12) for m in ideal.magnets)
    assert [m.polarization for m in ideal.magnets] == \
        [m.polarization for m in default.arrangement(rigid=True).magnets]
    mu_rec = default.magnets.grade_props.mu_rec
    expect = default.arrangement(rigid=True).with_recoil([mu_rec - 1.0] * 4)
    np.testing.assert_allclose([m.polarization for m in default.arrangement().magnets],
                               [m.polarization for m in expect.magnets], rtol=1e-12)
    assert default.arrangement().magnets[0].br < ideal.magnets[0].br
    assert "rigid = true" in design_to_toml(rigid) and "rigid" not in design_to_toml(default)


def test_floating_magnet_rigid_key():
    path = Path(__file__).parent.parent / "examples" / "floating_magnet.toml"
    doc = tomllib.loads(path.read_text())
    d = parse_stabilized(doc)
    st = d.stations[0]
    assert st.lifter.recoil_factor < 1.0 and st.floater.recoil_factor < 1.0
    doc["lifter"]["rigid"] = True
    doc["floater"]["rigid"] = True
    d2 = parse_stabilized(doc)
    assert d2.stations[0].lifter.recoil_factor == 1.0 and d2.stations[0].floater.recoil_factor == 1.0
