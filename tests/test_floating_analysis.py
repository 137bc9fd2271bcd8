"""The whole floating-magnet analysis (matdb.analysis.floating.levitate_stabilized) and its
CLI: facts of the trade and outside references, named beside each check."""

from __future__ import annotations

import json
import tomllib
from dataclasses import replace
from pathlib import Path

import pytest

from matdb.analysis.floating import levitate_stabilized
from matdb.design import parse_stabilized
from matdb.errors import InputError
from matdb.physics import floating as S
from matdb.physics.thermal import SAFETY_TEXT


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


# ---------------------------------------------------------------------------
# the report: facts of the trade
# ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo():
    return parse_stabilized(_rigid_doc(EXAMPLE), source=str(EXAMPLE))


@pytest.fixture(scope="module")
def demo_result(demo):
    return levitate_stabilized(demo)


def test_result_keys_are_plain_json(demo_result):
    # regression check of the JSON key contract; round trip through the json module
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
    model = S.station_model(st, demo.temperature_k)
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
    st = demo.stations[0]
    far = replace(st, plates=replace(st.plates, distance=10e-3))
    r = levitate_stabilized(replace(demo, stations=(far,)))
    assert r["floats"] is False and r["plate_distance_in_window"] is False
    assert r["k_z_total_n_m"] < 0
    none = replace(st, plates=replace(st.plates, chi_perp=-1e-9, chi_par=-1e-9, distance=None))
    r = levitate_stabilized(replace(demo, stations=(none,)))
    assert r["floats"] is False and r["max_plate_distance_m"] is None


def test_lifter_that_cannot_clear_the_upper_plate_is_refused(demo):
    # geometry: the upper plate (distance + thickness) must fit below the lifter's face
    st = demo.stations[0]
    weak = replace(st, lifter=st.floater)  # a lifter as small as the floater sits close
    d = S.station_model(weak, demo.temperature_k).balance((st.floater.mass_kg + st.payload_kg) * 9.80665)
    bad = replace(weak, plates=replace(st.plates, distance=d - 0.5 * st.plates.thickness))
    with pytest.raises(InputError, match="cannot clear the upper plate"):
        levitate_stabilized(replace(demo, stations=(bad,)))


def test_warnings_carry_the_strong_magnet_cautions(demo_result):
    assert SAFETY_TEXT in demo_result["warnings"]
    assert demo_result["safe_distance_m"] > 0.05  # 0.5 mT farther than 5 cm from a 25 mm NdFeB magnet (Jackson 5.56 estimate)


# ---------------------------------------------------------------------------
# several stations
# ---------------------------------------------------------------------------
def test_two_station_demo_shares_and_tilt(tmp_path):
    # lever rule on the demo (centre of mass 5 mm towards the right of a 60 mm span) and
    # the heavier share set closer to its lifter (common practice, no source)
    d = parse_stabilized(_rigid_doc(TWO))
    r = levitate_stabilized(d)
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
    doc = _rigid_doc(TWO)
    doc["payload"]["centre_of_mass"] = ["0 mm", "0 mm"]
    r = levitate_stabilized(parse_stabilized(doc))
    a, b = r["stations"]
    assert a["share_n"] == pytest.approx(b["share_n"], rel=1e-12)
    assert a["lifter_distance_m"] == pytest.approx(b["lifter_distance_m"], rel=1e-9)


def test_three_station_disc_shares_and_tilt_mode():
    # statics: three supports at the corners of an equilateral triangle under a centred
    # payload carry a third each; a rigid body on three stable vertical supports not in a
    # line has positive tilt stiffness (K = sum k_i r_i r_i^T); its centre of mass below
    # the floaters only adds to it (pendulum)
    d = parse_stabilized(_rigid_doc(THREE))
    r = levitate_stabilized(d)
    assert [s["share_fraction"] for s in r["stations"]] == pytest.approx([1 / 3] * 3, rel=1e-5)
    assert all(s["stable"] for s in r["stations"])
    assert r["tilt_stable"] is True and min(r["body_stiffness_eigenvalues"]) > 0
    assert r["floats"] is True


# ---------------------------------------------------------------------------
# CLI
# ---------------------------------------------------------------------------
def test_cli_levitate_json(run_cli):
    # matdb levitate DESIGN --format json (regression check of the key contract)
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
