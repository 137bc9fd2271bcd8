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
from dataclasses import replace
from pathlib import Path

import magpylib as magpy
import numpy as np
import pytest

from matdb.design import design_to_toml, load_design_text, parse_stabilized
from matdb.physics import plate as P
from matdb.physics import recoil as R
from matdb.physics import recoil_field as RF
from matdb.physics.arrangement import build_arrangement
from matdb.constants import MU0
from matdb.errors import InputError

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
    np.testing.assert_allclose(j2, 1.17 * j1, rtol=1e-12, atol=1e-12 * BR)
    assert R.response_matrix(arr.magnets, [CHI] * 4) is R.response_matrix(arr.magnets, [CHI] * 4)


def _reference(arr, cells):
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


def _drops(rigid, fields, n):
    bx, by = P.edge_lines(rigid.magnets)
    side = 0.6 * A if n == 1 else 0.010
    geom = P.PlateGeometry("rectangle", side, side, 1e-3, 0.0, 0.0, bx, by)
    gaps = [5e-4, 1e-3]
    f_rigid = P.lift_force(rigid.B, geom, gaps, 4.5e-4, 8.5e-5)
    return [1 - P.lift_force(f, geom, gaps, 4.5e-4, 8.5e-5) / f_rigid for f in fields]


@pytest.mark.slow
@pytest.mark.parametrize("pattern,n", [("single", 1), ("checkerboard", 2)])
def test_default_model_against_the_moment_method_on_meshed_magnets(pattern, n):
    """The default model (recoil.SUBDIVISION = 5 cells along each cube edge, departure
    field tabulated) against magpylib-material-response (Chadebec et al. 2006) on the
    same 5^3 meshing and on a finer 7^3 one.

    Measured lift reduction of the plate at 0.5 / 1 mm (default; reference 5^3; 7^3):
    single cube 5.81 / 5.50 %; 5.81 / 5.50 %; 5.78 / 5.56 %; 2 x 2 checkerboard
    3.55 / 3.81 %; 3.55 / 3.81 %; 4.03 / 4.25 % (the reference itself moves by half a
    point from 5^3 to 7^3 next to the shared edges of opposite neighbours). Field 0.5-3 mm
    above the magnets: within 1e-4 of the 5^3 reference (the rigid model: 2.8 %)."""
    rigid = build_arrangement("cuboid", (A, A, A), pattern, n, n, br=BR)
    assert R.SUBDIVISION == 5
    mine = rigid.with_recoil([CHI] * rigid.count)  # the default
    ref = _reference(rigid, 5)
    # 1. each magnet's mean polarisation equals the mean over the reference's cells
    for cells, m in zip(ref.children, mine.magnets):
        jm = np.mean([s.polarization for s in cells.children], axis=0)
        np.testing.assert_allclose(m.polarization, jm, atol=5e-4 * BR)
    # 2. the field 0.5-3 mm above the magnets, tabulated departures included
    pts = np.array([[x, y, z] for x in (-6e-3, 0.0, 4e-3) for y in (-3e-3, 2e-3)
                    for z in (5e-4, 1e-3, 3e-3)])
    b_ref = magpy.getB(ref, pts)
    err = np.linalg.norm(mine.B(pts) - b_ref, axis=1) / np.linalg.norm(b_ref, axis=1)
    assert err.max() < 3e-4
    # 3. the lift drop of a graphite plate at 0.5 and 1 mm: equal at the same meshing
    d_mine, d_ref = _drops(rigid, [mine.B, lambda p: magpy.getB(ref, p)], n)
    np.testing.assert_allclose(d_mine, d_ref, rtol=0.01)
    # 4. and at least 85 % of the finer reference's drop (see the docstring)
    fine = _reference(rigid, 7)
    (d_fine,) = _drops(rigid, [lambda p: magpy.getB(fine, p)], n)
    assert np.all(d_mine >= 0.85 * d_fine)


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


# -- the tabulated departure field (matdb.physics.recoil_field) ------------------------
def test_prism_spectrum_against_the_closed_form_field(monkeypatch):
    # two uniformly polarised prisms with opposite polarisation along each axis (no net
    # moment, as each magnet's departures have none; a net moment would alias across the
    # FFT period), their field above the top face from the Fourier-domain form
    # (Bhattacharyya, Geophysics 31, 97 (1966); Blakely 1995 ch. 11) against the closed
    # form of Engel-Herbert and Hesjedal (J. Appl. Phys. 97, 074504 (2005)) as
    # matdb.physics.fields evaluates it, at the table's nodes (no interpolation there)
    # from 3 grid spacings up: within 3e-3 of the peak (measured 1.4e-3 at 0.6 mm, 2e-3
    # at 1-2.5 mm: the periodic copies of the FFT, largest at the table's edge)
    # grid spacing 0.25 mm (12 nodes across the 3 mm cells), at which the bounds were measured
    monkeypatch.setattr(RF, "CELL_NODES", 12)
    size = np.array([[4e-3, 3e-3, 2e-3], [4e-3, 3e-3, 1e-3]])
    centre = np.array([[0.5e-3, -0.3e-3, -1e-3], [-1.5e-3, 2.7e-3, -0.5e-3]])
    rng = np.random.default_rng(3)
    for axis in range(3):
        dj = np.zeros((2, 3))
        dj[0, axis] = 1.0
        dj[1, axis] = -2.0  # half the volume: opposite moment
        RF.clear_tables()
        cf = RF.CorrectionField(size, centre, dj, None, 0.0)
        t = cf.table()
        levels = t.z0 * np.expm1(RF.Z_RATIO * np.arange(t.nz))
        ix = rng.integers(0, t.nb[0], 400)
        iy = rng.integers(0, t.nb[1], 400)
        iz = rng.choice(np.nonzero((levels >= 3 * t.h) & (levels <= 5e-3 / cf.scale))[0], 400)
        pts = cf.scale * np.column_stack([t.origin[0] + ix * t.h, t.origin[1] + iy * t.h, t.top + levels[iz]])
        exact = cf.exact_set().B(pts)
        np.testing.assert_allclose(cf.B(pts), exact, atol=3e-3 * np.abs(exact).max())


@pytest.fixture(scope="module")
def checker():
    return build_arrangement("cuboid", (A, A, A), "checkerboard", 2, 2, br=BR)


@pytest.mark.parametrize("back_plate", [False, True])
def test_table_against_direct_cell_evaluation(checker, back_plate):
    # interpolation error of the table against the cells evaluated one by one (the same
    # departures, tabulated=False): pointwise at 0.5-5 mm above the magnets, measured at
    # most 2.4e-4 of |B| (0.5 mm) falling to 1e-5 (2 mm); beside the magnets exact
    arr = replace(checker, back_plate=back_plate).with_recoil([CHI] * 4, subdivision=R.ACCURATE_SUBDIVISION)
    exact = replace(arr, tabulated=False)
    rng = np.random.default_rng(7)
    for z, tol in ((5e-4, 5e-4), (1e-3, 2e-4), (2e-3, 5e-5), (5e-3, 5e-5)):
        pts = rng.uniform([-0.015, -0.015, z], [0.015, 0.015, z], (2000, 3))
        b = exact.B(pts)
        err = np.linalg.norm(arr.B(pts) - b, axis=1) / np.linalg.norm(b, axis=1)
        assert err.max() < tol, (z, err.max())
    near = np.array([[0.02, 0.0, -1e-3], [0.0, 0.0, -2e-3], [3e-3, 1e-3, 0.0]])  # not tabulated
    want = exact.correction().B(near)
    np.testing.assert_allclose(arr.correction().B(near), want, rtol=1e-12, atol=1e-12 * np.abs(want).max())


def test_table_lift_equals_direct_cells(checker):
    # the plate's lift at 0.5 and 1 mm with the tabulated departures equals the lift with
    # the cells evaluated one by one to 1e-4 (measured 2e-5)
    arr = checker.with_recoil([CHI] * 4, subdivision=R.ACCURATE_SUBDIVISION)
    exact = replace(arr, tabulated=False)
    bx, by = P.edge_lines(checker.magnets)
    geom = P.PlateGeometry("rectangle", 0.010, 0.010, 1e-3, 0.0, 0.0, bx, by)
    f_tab = P.lift_force(arr.B, geom, [5e-4, 1e-3], 4.5e-4, 8.5e-5)
    f_exact = P.lift_force(exact.B, geom, [5e-4, 1e-3], 4.5e-4, 8.5e-5)
    np.testing.assert_allclose(f_tab, f_exact, rtol=1e-4)


def test_table_is_shared_across_remanences(checker):
    # the departures are linear in Br: one table serves every temperature (regression check)
    arr = checker.with_recoil([CHI] * 4, subdivision=R.ACCURATE_SUBDIVISION)
    assert arr.scaled(0.93).correction().table() is arr.correction().table()


def test_far_cells_as_point_dipoles(checker):
    # beyond one magnet extent from the magnets the cells are point dipoles of their
    # moments (Jackson 3rd ed. eq. 5.56): against the cells' closed-form field, within
    # 5e-3 of the departure field (measured 3e-3 at the nearest corner of that box, 2e-4
    # 20 % further out; below 1e-5 of |B|)
    arr = checker.with_recoil([CHI] * 4, subdivision=R.ACCURATE_SUBDIVISION)
    cf = arr.correction()
    mom, pos, lo, hi = cf.far_set()
    d = np.random.default_rng(5).normal(size=(500, 3))
    d /= np.linalg.norm(d, axis=1)[:, None]
    radius = float(np.max(np.abs(np.concatenate([lo, hi]))))
    p = d * radius * np.random.default_rng(6).uniform(1.0, 2.0, (500, 1))  # beyond the box
    p = p[~cf.table().covers(p / cf.scale)]  # (the rest is tabulated)
    exact = cf.exact_set().B(p)
    err = np.linalg.norm(cf.B(p) - exact, axis=1) / np.linalg.norm(exact, axis=1)
    assert p.shape[0] > 100 and err.max() < 5e-3


def test_design_recoil_cells_key():
    # [magnets] recoil_cells = n chooses the subdivision of the moment method (Chadebec et
    # al. 2006): the default (no key) is the subdivided model (cells present), 1 is one
    # uniform polarisation per magnet (no cells); both lower the mean polarisation below
    # Br (own demagnetising field, N = 1/3 of a cube: Aharoni 1998); the key round-trips through the TOML writer, and a bad value is one error
    # naming the key
    text = (Path(__file__).resolve().parent.parent / "examples" / "plate_checkerboard_2x2.toml").read_text()
    plain = load_design_text(text)
    one = load_design_text(text.replace("[magnets]\n", "[magnets]\nrecoil_cells = 1\n", 1))
    assert plain.magnets.recoil_cells is None and plain.arrangement().cells is not None
    assert one.magnets.recoil_cells == 1 and one.arrangement().cells is None
    br = plain.arrangement(rigid=True).magnets[0].br
    assert one.arrangement().magnets[0].br < br and plain.arrangement().magnets[0].br < br
    assert "recoil_cells = 1" in design_to_toml(one)
    assert load_design_text(design_to_toml(one)) == one
    for bad in ("0", "2.5", "true", "99"):
        with pytest.raises(InputError) as err:
            load_design_text(text.replace("[magnets]\n", f"[magnets]\nrecoil_cells = {bad}\n", 1))
        assert err.value.field == "magnets.recoil_cells"


def test_tables_are_shared_by_every_magnet_size():
    # magnetostatics has no length of its own (Jackson 3rd ed. sec. 5.8: B of a uniformly
    # polarised body depends on the position in units of its size), so a 2 x 2 checkerboard
    # of 6.35 mm cubes reads the table of the 12.7 mm one at half-scaled points: one table,
    # the same field at corresponding points (to rounding), and the small one's tabulated
    # departures differ from its cells evaluated one by one exactly as the large one's do
    RF.clear_tables()
    big = build_arrangement("cuboid", (A, A, A), "checkerboard", 2, 2, br=BR).with_recoil([CHI] * 4)
    small = build_arrangement("cuboid", (A / 2,) * 3, "checkerboard", 2, 2, br=BR).with_recoil([CHI] * 4)
    assert small.correction().table() is big.correction().table()
    before = RF.table_count()
    pts = np.random.default_rng(11).uniform([-0.012, -0.012, 3e-4], [0.012, 0.012, 6e-3], (500, 3))
    np.testing.assert_allclose(small.B(pts / 2), big.B(pts), rtol=1e-9, atol=1e-9)
    assert RF.table_count() == before  # nothing new was built for the small one
    def err(arr, p):
        exact = replace(arr, tabulated=False).B(p)
        return np.linalg.norm(arr.B(p) - exact, axis=1) / np.linalg.norm(exact, axis=1)

    e_big = err(big, pts)
    np.testing.assert_allclose(err(small, pts / 2), e_big, rtol=1e-6, atol=1e-12)
    assert e_big[pts[:, 2] >= 5e-4].max() < 5e-4  # the bound of test_table_against_direct_cell_evaluation


@pytest.mark.parametrize("pattern", ["checkerboard", "stripes"])
def test_one_basis_serves_every_recoil_susceptibility(pattern):
    # the departures for the catalogue's recoil susceptibilities (mu_rec 1.05 NdFeB/SmCo,
    # 1.1 ferrite, 1.2 bonded NdFeB, 2 and 3.6 AlNiCo: seed_data/magnet_grades.csv) are
    # read from at most three tables of one geometry (the projection of each onto the
    # span of the earlier ones is within BASIS_TOL of it, or it adds a table); the field
    # from the tables against the cells evaluated one by one, 1-3 mm above the magnets:
    # within 1e-3 of |B| (1.5e-3 for AlNiCo, whose departures are up to 60 % of B and
    # carry the table's interpolation error) -- measured, checkerboard / stripes: chi_rec
    # 2.6: 1.2e-3 / 1.1e-3; 1.0: 5e-4 / 5e-4; 0.2: 7e-4 / 8e-4 (the projection: BASIS_TOL
    # times a departure of 5 % of B); 0.1: 5e-4; 0.05: 3e-4 / 3e-5
    RF.clear_tables()
    rigid = build_arrangement("cuboid", (A, A, A), pattern, 2, 2, br=BR)
    chis = (2.6, 1.0, 0.2, 0.1, 0.05)
    arrs = [rigid.with_recoil([c] * 4) for c in chis]
    from matdb.physics.arrangement import linear_fields

    fam = linear_fields(arrs)  # the largest departures first, as the advisor asks
    pts = np.random.default_rng(3).uniform([-0.012, -0.012, 1e-3], [0.012, 0.012, 3e-3], (300, 3))
    both = fam(pts)
    assert len(arrs[0].correction()._b.vectors) <= 3
    for chi, arr, b in zip(chis, arrs, both):
        np.testing.assert_allclose(b, arr.B(pts), rtol=1e-12, atol=1e-12)  # one path
        exact = replace(arr, tabulated=False).B(pts)
        err = np.linalg.norm(b - exact, axis=1) / np.linalg.norm(exact, axis=1)
        assert err.max() < (1.5e-3 if chi >= 1 else 1e-3), (chi, err.max())
