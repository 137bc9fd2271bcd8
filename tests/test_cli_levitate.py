"""``matdb field`` and ``matdb levitate`` (matdb.cli.physics, matdb.analysis.levitate).

References: magpylib (independent field library) for ``field``; a regression check of the JSON
key contract; the linear reversible temperature coefficient of Br (IEC 60404-8-1) and the
Br^2 |chi| scaling of diamagnetic lift (Berry & Geim, Eur. J. Phys. 18, 307 (1997)) for
the thermal figures; standard gravity 9.80665 m/s^2 (CGPM 1901) for the weight.
"""

from __future__ import annotations

import csv
import io
import json
import math
import sys
import types
from pathlib import Path

import magpylib as magpy
import numpy as np
import pytest

from matdb.design import load_design
from matdb.analysis.levitate import CONTRACT_KEYS, STATE_KEYS, levitate, levitate_plate, plate_geometry
from matdb.physics import plate as P
from matdb.physics.thermal import SAFETY_TEXT
from matdb.physics import thermal as TH

DATA = Path(__file__).parent / "data"
DEMO = str(DATA / "plate_checkerboard.toml")
A = 0.0127


@pytest.fixture(scope="module")
def demo_result():
    return levitate_plate(load_design(DEMO))


def _magpy_checker(br):
    c = magpy.Collection()
    for r in range(2):
        for col in range(2):
            c.add(magpy.magnet.Cuboid(polarization=(0, 0, (-1) ** (r + col) * br),
                                      dimension=(A, A, A),
                                      position=((col - 0.5) * A, (r - 0.5) * A, -A / 2)))
    return c


# ---------------------------------------------------------------------------
# field
# ---------------------------------------------------------------------------
def test_field_json_matches_magpylib(run_cli):
    code, out, err = run_cli("field", DEMO, "--at", "3,2,1 mm", "--at", "-4 mm, 5 mm, 0.2 cm",
                             "--format", "json")
    assert code == 0, err
    rows = json.loads(out)
    assert [list(r) for r in rows] == [["x_m", "y_m", "z_m", "bx_t", "by_t", "bz_t"]] * 2
    pts = np.array([[r["x_m"], r["y_m"], r["z_m"]] for r in rows])
    np.testing.assert_allclose(pts, [[3e-3, 2e-3, 1e-3], [-4e-3, 5e-3, 2e-3]], rtol=1e-12)
    ref = _magpy_checker(load_design(DEMO).magnets.grade_props.br_t).getB(pts)  # magpylib
    got = np.array([[r["bx_t"], r["by_t"], r["bz_t"]] for r in rows])
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-9 * np.abs(ref).max())


def test_field_points_csv_in_and_out(run_cli, tmp_path):
    f = tmp_path / "pts.csv"
    f.write_text("x_m,y_m,z_m\n0.001,0.002,0.001\n0,0,0.005\n-0.003,0.004,0.0015\n")
    code, out, err = run_cli("field", DEMO, "--points", str(f), "--format", "csv")
    assert code == 0, err
    rows = list(csv.DictReader(io.StringIO(out)))
    assert list(rows[0]) == ["x_m", "y_m", "z_m", "bx_t", "by_t", "bz_t"] and len(rows) == 3
    pts = np.array([[float(r[c]) for c in ("x_m", "y_m", "z_m")] for r in rows])
    ref = _magpy_checker(1.3).getB(pts)  # N42 Br 1.3 T (seed_data/magnet_grades.csv)
    got = np.array([[float(r[c]) for c in ("bx_t", "by_t", "bz_t")] for r in rows])
    np.testing.assert_allclose(got, ref, atol=1e-8)


@pytest.mark.parametrize("content,needle", [
    ("x,y,z\n1,2,3\n", "line 1: missing column(s) x_m, y_m, z_m"),
    ("x_m,y_m,z_m\n0.001,abc,0.001\n", "line 2, column y_m"),
    ("x_m,y_m,z_m\n0.001,0.002,0.001\n0.001,,0.001\n", "line 3, column y_m: missing value"),
    ("x_m,y_m,z_m\n", "no points"),
])
def test_field_points_errors_name_file_line_column(run_cli, tmp_path, content, needle):
    f = tmp_path / "bad.csv"
    f.write_text(content)
    code, out, err = run_cli("field", DEMO, "--points", str(f), "--format", "json")
    assert code == 2 and out == ""
    assert needle in err and "bad.csv" in err
    assert err.count("\n") == 1


@pytest.mark.parametrize("args,needle", [
    (["--at", "0,0,1"], "--at: missing unit"),
    (["--at", "0,0"], "--at: expected three coordinates"),
    (["--at", "0,0,1 kg"], "--at x"),
    ([], "--at: give at least one point"),
])
def test_field_bad_points(run_cli, args, needle):
    code, out, err = run_cli("field", DEMO, *args)
    assert code == 2 and needle in err and err.count("\n") == 1


# ---------------------------------------------------------------------------
# levitate
# ---------------------------------------------------------------------------
def test_levitate_json_has_contract_keys(run_cli):
    code, out, err = run_cli("levitate", DEMO, "--format", "json")
    assert code == 0, err
    r = json.loads(out)
    for k in CONTRACT_KEYS:
        assert k in r, k
    assert r["mode"] == "plate"
    assert isinstance(r["floats"], bool) and isinstance(r["laterally_stable"], bool)
    assert isinstance(r["demag_risk"], bool) and isinstance(r["warnings"], list)
    assert all(isinstance(w, str) and "\n" not in w for w in r["warnings"])
    curve = r["lift_curve"]
    assert len(curve) >= 50 and set(curve[0]) == {"gap_m", "force_n"}
    assert curve[0]["gap_m"] == pytest.approx(5e-5) and curve[-1]["gap_m"] >= 3e-3


def test_demo_floats_and_is_stable(demo_result):
    # common practice, no source: a 10 mm x 1 mm graphite square floats over the 2 x 2
    # checkerboard of 12.7 mm cubes, a fraction of a millimetre up, and stays put
    r = demo_result
    assert r["floats"] and 1e-4 < r["gap_m"] < 3e-3
    assert r["laterally_stable"] and r["k_x_n_m"] > 0 and r["k_y_n_m"] > 0
    assert r["k_tilt_n_m_per_rad"] == min(r["k_pitch_n_m_per_rad"], r["k_roll_n_m_per_rad"]) > 0
    assert r["k_z_n_m"] > 0
    # f_z = sqrt(k/m)/(2 pi) for a mass on a spring (any mechanics text)
    m = r["plate_mass_kg"] + r["payload_kg"]
    assert r["f_z_hz"] == pytest.approx(math.sqrt(r["k_z_n_m"] / m) / (2 * math.pi))
    # weight of a 10 x 10 x 1 mm plate at 2200 kg/m^3 (Simon & Geim 2000), g = 9.80665
    assert r["weight_n"] == pytest.approx(2200 * 1e-7 * 9.80665, rel=1e-12)
    assert r["stable_plate_side_max_m"] > 0.010
    assert r["safe_distance_m"] > 0 and r["demag_risk"] is False


def test_direct_path_equals_unit_polarisation_scaling(demo_result):
    # the advisor's separable path: integrals at unit polarisation times Br^2 must give
    # the direct real-Br lift to 1e-9 (linearity of B in J, Berry & Geim force law)
    d = load_design(DEMO)
    arr = d.arrangement()
    geom = plate_geometry(d, arr)
    gaps = [c["gap_m"] for c in demo_result["lift_curve"]]
    iz, ixy = P.plate_surface_integrals(arr.with_unit_polarization().B, geom, gaps)
    f = P.lift_from_integrals(iz, ixy, 4.5e-4, 8.5e-5, br_scale=1.3)
    np.testing.assert_allclose([c["force_n"] for c in demo_result["lift_curve"]], f, rtol=1e-9)


def test_hot_magnets_lose_lift_as_the_coefficients_say(run_cli, demo_result):
    # lift ~ Br(T)^2 |chi(T)|, Br(T) = Br20 (1 + alpha (T - 20 C)) (IEC 60404-8-1),
    # alpha = -0.12 %/K for N42 and -0.12 %/K for |chi| of graphite (seed_data, cited)
    code, out, err = run_cli("levitate", DEMO, "--temp", "60 degC", "--format", "json")
    assert code == 0, err
    hot = json.loads(out)
    expect = 100 * (1 - (1 - 0.0012 * 40) ** 2 * (1 - 0.0012 * 40))
    assert hot["lift_derating_pct"] == pytest.approx(expect, rel=1e-9)
    assert hot["gap_m"] < demo_result["gap_m"]
    assert demo_result["gap_drift_um_per_k"] < 0
    # drift x 40 K is roughly the change of gap (first order)
    dg = (hot["gap_m"] - demo_result["gap_m"]) * 1e6
    assert dg == pytest.approx(demo_result["gap_drift_um_per_k"] * 40, rel=0.2)


def test_worst_case_below_nominal(demo_result):
    # minimum-spec Br and |chi| minus its uncertainty lift less (IEC 60404-8-1 minimum
    # values; the force law is monotonic in both)
    r = demo_result
    assert r["gap_worst_m"] < r["gap_m"]
    assert r["max_payload_worst_kg"] < r["max_payload_kg"]


def test_required_gap_option(run_cli, demo_result):
    code, out, err = run_cli("levitate", DEMO, "--gap", "0.5 mm", "--format", "json")
    assert code == 0, err
    r = json.loads(out)
    assert r["required_gap_m"] == pytest.approx(5e-4)
    assert r["max_payload_kg"] < demo_result["max_payload_kg"]


def test_bismuth_does_not_float(run_cli):
    # common practice, no source: bismuth does not float over the 2 x 2 array
    code, out, err = run_cli("levitate", str(DATA / "plate_bismuth.toml"), "--format", "json")
    assert code == 0, err
    r = json.loads(out)
    assert r["floats"] is False and r["gap_m"] is None and r["k_z_n_m"] is None
    assert r["laterally_stable"] is False
    assert any("does not float" in w for w in r["warnings"])


def test_stripes_say_they_are_neutral_along_the_stripes():
    # common practice, no source: stripes barely hold a plate along their length
    r = levitate(load_design(DATA / "plate_stripes.toml"))
    assert any("along the stripes" in w for w in r["warnings"])
    assert abs(r["k_x_n_m"]) < 0.1 * r["k_y_n_m"]


def test_large_magnet_gets_the_cautions(tmp_path):
    # the strong-magnet cautions appear for a magnet larger than 25 mm (common practice, no
    # source: pinching, shattering, implanted devices)
    f = tmp_path / "big.toml"
    f.write_text('[magnets]\nsize = ["30 mm", "30 mm", "10 mm"]\ngrade = "N42"\n'
                 '[plate]\nmaterial = "pyrolytic-graphite"\nsize = ["5 mm", "5 mm", "0.5 mm"]\n')
    r = levitate(load_design(f))
    assert any("Pinching" in w for w in r["warnings"]) and "Pinching" in SAFETY_TEXT


def test_table_is_for_people(run_cli):
    code, out, err = run_cli("levitate", DEMO)
    assert code == 0, err
    for needle in ("floats", "mm", "Hz", "N/m", "mN", "g", "warnings:"):
        assert needle in out


@pytest.mark.parametrize("args,needle", [
    (["--temp", "60"], "--temp: missing unit"),
    (["--gap", "-1 mm"], "--gap"),
    (["--format", "xml"], "invalid choice"),
])
def test_levitate_bad_options(run_cli, args, needle):
    code, out, err = run_cli("levitate", DEMO, *args)
    assert code == 2 and needle in err and err.count("\n") == 1


def test_levitate_bad_design(run_cli, tmp_path):
    f = tmp_path / "bad.toml"
    f.write_text('[magnets]\nsize = ["1 mm", "1 mm"]\ngrade = "N42"\n[plate]\n'
                 'material = "bismuth"\nsize = ["1 mm", "1 mm", "1 mm"]\n')
    code, out, err = run_cli("levitate", str(f))
    assert code == 2 and "magnets.size: expected 3 lengths" in err
    code, out, err = run_cli("levitate", str(tmp_path / "missing.toml"))
    assert code == 2 and "no such file" in err


def test_floating_magnet_designs_dispatch(monkeypatch):
    # levitate hands non-plate designs to matdb.analysis.floating.levitate_stabilized
    fake = types.ModuleType("matdb.analysis.floating")
    fake.levitate_stabilized = lambda design, temp_k=None: {"mode": "stabilized", "t": temp_k}
    monkeypatch.setitem(sys.modules, "matdb.analysis.floating", fake)
    assert levitate(object(), temp_k=300.0) == {"mode": "stabilized", "t": 300.0}


def test_cover_sheet_moves_the_curve_and_the_clearance():
    # glossary (DEVELOPERS.md): gap from the magnets' top faces, clearance from the cover
    r = levitate(load_design(Path(__file__).parent.parent / "examples" / "plate_disc_4x4.toml"))
    assert r["lift_curve"][0]["gap_m"] == pytest.approx(0.5e-3 + 5e-5)
    assert r["clearance_m"] == pytest.approx(r["gap_m"] - 0.5e-3)


def test_back_plate_equals_a_magnet_of_twice_the_height(tmp_path):
    # method of images (Jackson, Classical Electrodynamics, 3rd ed., sec. 5.9): on an
    # ideal steel plate a magnet acts as one of twice its height, so the lift is the same
    text = ('[magnets]\nsize = ["12.7 mm", "12.7 mm", "{h}"]\ngrade = "N42"\n'
            'pattern = "checkerboard"\nrows = 2\ncols = 2\nback_plate = {bp}\n'
            '[plate]\nmaterial = "pyrolytic-graphite"\nsize = ["10 mm", "10 mm", "1 mm"]\n')
    forces = []
    for h, bp in (("3 mm", "true"), ("6 mm", "false")):
        f = tmp_path / f"d{bp}.toml"
        f.write_text(text.format(h=h, bp=bp))
        d = load_design(f)
        arr = d.arrangement(rigid=True)
        forces.append(P.lift_force(arr.B, plate_geometry(d, arr), [3e-4, 1e-3], 4.5e-4, 8.5e-5))
        # with recoil permeability (the default) the images polarise the magnets as the
        # lower half of the taller magnet would: equal to the volume rule's accuracy
        arr = d.arrangement()
        forces.append(P.lift_force(arr.B, plate_geometry(d, arr), [3e-4, 1e-3], 4.5e-4, 8.5e-5))
    np.testing.assert_allclose(forces[0], forces[2], rtol=1e-9)
    np.testing.assert_allclose(forces[1], forces[3], rtol=2e-4)


def test_demag_check_covers_coldest_and_hottest(tmp_path):
    # regression check: the knee is checked at the hottest and the coldest temperature (hard
    # ferrite loses coercivity when cold)
    f = tmp_path / "ferrite.toml"
    f.write_text('[magnets]\nsize = ["20 mm", "20 mm", "5 mm"]\ngrade = "Ferrite-C8"\n'
                 'pattern = "checkerboard"\nrows = 2\ncols = 2\n'
                 '[plate]\nmaterial = "pyrolytic-graphite"\nsize = ["5 mm", "5 mm", "0.5 mm"]\n'
                 '[conditions]\ntemp_min = "-40 degC"\ntemp_max = "60 degC"\n')
    r = levitate(load_design(f))
    assert r["demag_temperatures_k"] == pytest.approx([233.15, 333.15])
    assert isinstance(r["demag_risk"], bool) and r["demag_message"]


def test_levitate_floating_magnet_design_through_the_cli(run_cli):
    # the same command serves floating-magnet designs (their own module does the physics)
    path = Path(__file__).parent.parent / "examples" / "floating_magnet.toml"
    if not path.exists():
        pytest.skip("no floating-magnet example in this tree")
    code, out, err = run_cli("levitate", str(path), "--format", "json")
    assert code == 0, err
    assert json.loads(out)["mode"] != "plate"


# ---------------------------------------------------------------------------
# coldest and hottest side by side; stable side intervals
# ---------------------------------------------------------------------------
def test_cold_and_hot_objects(tmp_path, run_cli):
    # lift ~ Br(T)^2 |chi(T)| (Berry & Geim 1997) with the linear reversible coefficients
    # (IEC 60404-8-1; seed_data, cited): at the coldest temperature the plate lifts more
    # and floats higher; each object equals a run at that temperature (regression check)
    f = tmp_path / "range.toml"
    f.write_text(Path(DEMO).read_text().split("[conditions]")[0]
                 + '[conditions]\ntemp_min = "0 degC"\ntemp_max = "50 degC"\n')
    d = load_design(f)
    r = levitate(d)
    for key in ("cold", "hot"):
        assert set(STATE_KEYS) <= set(r[key])
    cold, hot = r["cold"], r["hot"]
    assert cold["temperature_k"] == pytest.approx(273.15) and hot["temperature_k"] == pytest.approx(323.15)
    assert cold["gap_m"] > hot["gap_m"] > 0
    g = d.magnets.grade_props
    coeff = d.plate.material_props.temp_coeff_per_k
    ratio = float(TH.lift_factor(g.alpha_br_pct_per_k, 273.15, coeff)
                  / TH.lift_factor(g.alpha_br_pct_per_k, 323.15, coeff))
    assert cold["margin"] / hot["margin"] == pytest.approx(ratio, rel=1e-9)
    at_cold = levitate(d, temp_k=273.15)
    assert cold["gap_m"] == pytest.approx(at_cold["gap_m"], rel=1e-6)
    assert cold["k_z_n_m"] == pytest.approx(at_cold["k_z_n_m"], rel=1e-6)
    assert cold["k_x_n_m"] == pytest.approx(at_cold["k_x_n_m"], rel=1e-6)
    assert hot["gap_m"] == pytest.approx(r["gap_m"], rel=1e-12)  # the nominal is the hottest
    code, out, err = run_cli("levitate", str(f))
    assert code == 0, err
    assert "coldest and hottest" in out and "0 C (273.1" in out and "50 C (323.1" in out


def test_side_intervals_hold_the_design_side(demo_result):
    # the plate's own side is in the interval whose upper end is reported, and the
    # verdict agrees with laterally_stable (the text never contradicts itself)
    r = demo_result
    side = load_design(DEMO).plate.lx_m
    iv = r["stable_side_intervals_m"]
    assert isinstance(iv, list) and all(len(p) == 2 and p[0] <= p[1] for p in iv)
    holding = P.interval_holding(iv, side)
    assert r["laterally_stable"] == (holding is not None)
    assert r["stable_plate_side_max_m"] == (None if holding is None else holding[1])
    assert r["lateral_equilibrium_m"] == pytest.approx([0.0, 0.0], abs=1e-9)


def test_off_centre_plate_is_analysed_where_it_rests(tmp_path):
    # a plate placed off the middle of a 2 x 2 checkerboard is pushed back to the middle
    # (symmetry of the checkerboard, common practice, no source)
    f = tmp_path / "off.toml"
    f.write_text(Path(DEMO).read_text().replace("[plate]", '[plate]\ncenter = ["1.5 mm", "0.7 mm"]'))
    r = levitate(load_design(f))
    assert r["lateral_equilibrium_m"] == pytest.approx([0.0, 0.0], abs=1e-6)
    assert r["lateral_force_n"] > 1e-3 * r["weight_n"]
    assert any("comes to rest at (0, 0) mm" in w for w in r["warnings"])
    holding = P.interval_holding(r["stable_side_intervals_m"], 0.010)
    assert r["laterally_stable"] == (holding is not None)
