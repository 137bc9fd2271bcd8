"""Floating-magnet payload ranges: the schedule over a payload range, its window,
lifter travel, positioning resolution, drift and dF/dd (matdb levitate --payload-range).
Each check names what it is checked against."""

from __future__ import annotations

import csv
import io
import itertools
import json
import math
import re
import tomllib
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hst
from scipy import integrate
from scipy.optimize import brentq

from matdb.design import parse_payload_range, parse_stabilized, design_to_toml
from matdb.errors import InputError
from matdb.analysis.floating import levitate_stabilized
from matdb.constants import MU0
from matdb.physics import floating as S
from matdb.reporting.floating_text import format_table

REPO = Path(__file__).resolve().parent.parent
EXAMPLE = REPO / "examples" / "floating_magnet.toml"
TWO = REPO / "examples" / "floating_magnet_two_stations.toml"
G = 9.80665  # standard gravity, CODATA / scipy.constants.g


@pytest.fixture(scope="module")
def demo():
    return parse_stabilized(tomllib.loads(EXAMPLE.read_text()), source=str(EXAMPLE))


@pytest.fixture(scope="module")
def ranged(demo):
    return levitate_stabilized(demo, payloads_kg=np.linspace(0.0, 1.5e-3, 6))


def test_range_rows_keys_and_narrowest_window(ranged):
    # contract of the schedule: every row has both plate-distance keys and the new keys;
    # window_min_m is the smallest window over the rows
    rows = ranged["window"]
    assert [r["payload_kg"] for r in rows] == pytest.approx(np.linspace(0.0, 1.5e-3, 6))
    for r in rows:
        assert {"payload_kg", "lifter_distance_m", "min_plate_distance_m", "max_plate_distance_m",
                "lifter_travel_m", "resolution_m", "lifter_distance_drift_um_per_k", "dforce_dd_n_m"} <= set(r)
    widths = [r["max_plate_distance_m"] - r["min_plate_distance_m"] for r in rows]
    assert ranged["window_min_m"] == pytest.approx(min(widths), rel=1e-12)
    assert ranged["payload_range_kg"] == pytest.approx([0.0, 1.5e-3])
    assert json.loads(json.dumps(ranged)) == ranged


def test_payload_brings_the_lifter_closer_and_narrows_the_window(ranged):
    # common practice, no source: more payload, lifter closer, window narrower, lifter
    # travel from the empty float grows (and is zero at no payload)
    rows = ranged["window"]
    d = np.array([r["lifter_distance_m"] for r in rows])
    w = np.array([r["max_plate_distance_m"] - r["min_plate_distance_m"] for r in rows])
    travel = np.array([r["lifter_travel_m"] for r in rows])
    assert np.all(np.diff(d) < 0) and np.all(np.diff(w) < 0)
    assert travel[0] == pytest.approx(0.0, abs=1e-12)
    assert travel == pytest.approx(d[0] - d, rel=1e-9, abs=1e-12)


def test_dforce_dd_is_the_slope_of_the_pull(demo, ranged):
    # definition: dF/dd by a central difference of the pull against the lifter distance
    model = S.station_model(demo.stations[0], demo.temperature_k)
    r = ranged["window"][2]
    D, h = r["lifter_distance_m"], 1e-5
    slope = (model.force(D + h) - model.force(D - h)) / (2 * h)
    assert r["dforce_dd_n_m"] == pytest.approx(slope, rel=1e-4)
    assert r["dforce_dd_n_m"] < 0  # falling branch


def test_resolution_step_moves_the_floater_a_tenth_of_its_clearance(demo, ranged):
    # statics: move the lifter closer by the reported step and solve the floater's new
    # equilibrium with the lifter's real pull and the plates' restoring force; the floater
    # rises by a tenth of its clearance to the nearer plate (small-step linearisation)
    st = demo.stations[0]
    model = S.station_model(st, demo.temperature_k)
    r = ranged["window"][0]
    a = st.plates.distance
    clearance = a - st.floater.size[-1] / 2
    kp = model.k_plates(a)
    D, step = r["lifter_distance_m"], r["resolution_m"]
    w = st.floater.mass_kg * G

    def net(z):  # floater raised by z: lifter face at D - step - z above it
        return model.force(D - step - z) - w - kp * z

    z = brentq(net, 0.0, clearance)
    assert z == pytest.approx(0.1 * clearance, rel=0.05)


def test_given_resolution_scales_the_step(demo):
    # the step is proportional to the allowed floater shift (linear statics)
    a = levitate_stabilized(demo, payloads_kg=[0.0], resolution_m=10e-6)["window"][0]["resolution_m"]
    b = levitate_stabilized(demo, payloads_kg=[0.0], resolution_m=20e-6)["window"][0]["resolution_m"]
    assert b == pytest.approx(2 * a, rel=1e-9)


def test_row_drift_matches_rebalancing_at_another_temperature(demo, ranged):
    # the row's drift per kelvin against the lifter distance solved again with both
    # magnets' Br at T +- 5 K (IEC 60404-8-1 linear law): warmer magnets pull less, the
    # lifter must come closer
    st = demo.stations[0]
    r = ranged["window"][3]
    w = st.floater.mass_kg * G + r["payload_kg"] * G
    t = demo.temperature_k
    d_hot = S.station_model(st, t + 5).balance(w)
    d_cold = S.station_model(st, t - 5).balance(w)
    assert r["lifter_distance_drift_um_per_k"] == pytest.approx((d_hot - d_cold) / 10 * 1e6, rel=2e-3)
    assert r["lifter_distance_drift_um_per_k"] < 0


def test_far_limit_window_edge_matches_the_image_dipole_analysis():
    # Simon, Heflinger and Geim, Am. J. Phys. 69, 702 (2001): two thick plates at a
    # from a point dipole give k = 3 mu0 |chi| m^2 / (8 pi a^5); the window edge is
    # where that equals -k_lifter. A tiny floater far from its plates is that dipole.
    lifter = S.Body("cylinder", (100e-3, 100e-3), 1.3)
    f, t, chi = 0.2e-3, 2e-3, 4.5e-4
    floater = S.Body("cuboid", (f, f, f), 1.3)
    mass = 7500 * f**3
    model = S.StationModel(lifter, floater, mass, -chi, -chi, t, 0.1 * f)
    D = model.balance(mass * G)
    kz, _ = model.stiffness(D)
    m = floater.moment

    def k_total(a):  # SHG eq. for two slabs of thickness t (half-space minus half-space)
        return 3 * MU0 * chi * m**2 / (8 * math.pi) * (a**-5 - (a + t) ** -5) + kz

    a_shg = brentq(k_total, f, 1.0)
    row = S.schedule_row(model, mass * G, D, 0.0)
    assert a_shg > 4 * f  # far limit
    assert row["max_plate_distance_m"] == pytest.approx(a_shg, rel=1e-2)


def test_two_stations_rows_are_lists_and_window_min_over_stations():
    d = parse_stabilized(tomllib.loads(TWO.read_text()))
    r = levitate_stabilized(d, payloads_kg=[0.0, 1e-3])
    for row in r["window"]:
        for k in ("lifter_distance_m", "min_plate_distance_m", "max_plate_distance_m", "lifter_travel_m",
                  "resolution_m", "lifter_distance_drift_um_per_k", "dforce_dd_n_m"):
            assert isinstance(row[k], list) and len(row[k]) == 2
    widths = [hi - lo for row in r["window"] for lo, hi in zip(row["min_plate_distance_m"], row["max_plate_distance_m"])]
    assert r["window_min_m"] == pytest.approx(min(widths), rel=1e-12)


def test_no_window_is_null_and_none_in_text(demo):
    # plates too weak for this lifter (thin bismuth on a large floater): no stable plate
    # distance at any payload, window_min_m null, the table says "none"
    st = demo.stations[0]
    weak = replace(st, plates=replace(st.plates, chi_perp=-1e-6, chi_par=-1e-6, distance=None))
    r = levitate_stabilized(replace(demo, stations=(weak,)), payloads_kg=[0.0, 1e-4])
    assert r["window_min_m"] is None
    assert all(row["max_plate_distance_m"] is None and row["min_plate_distance_m"] is None for row in r["window"])
    text = format_table(r)
    assert re.search(r"stable plate distance, finite-size\s+none", text)
    assert " to -" not in text


def test_payload_range_parsing():
    assert parse_payload_range("0 g..5 g") == pytest.approx((0.0, 5e-3))
    assert parse_payload_range("0..5 g") == pytest.approx((0.0, 5e-3))
    assert parse_payload_range("1 g .. 0.002 kg") == pytest.approx((1e-3, 2e-3))
    for bad in ("5 g", "5 g..1 g", "-1 g..2 g", "a..b", "..2 g"):
        with pytest.raises(InputError, match="payload"):
            parse_payload_range(bad, "--payload-range")


def test_design_file_payload_range_round_trip(demo):
    d = replace(demo, payload_range=(0.0, 1e-3))
    back = parse_stabilized(tomllib.loads(design_to_toml(d)))
    assert back.payload_range == pytest.approx((0.0, 1e-3))
    r = levitate_stabilized(back, n_window=3)
    assert [row["payload_kg"] for row in r["window"]] == pytest.approx([0.0, 5e-4, 1e-3])


# ---------------------------------------------------------------------------
# CLI
# ---------------------------------------------------------------------------
def test_cli_payload_range_json_csv_and_table(run_cli):
    code, out, err = run_cli("levitate", str(EXAMPLE), "--payload-range", "0 g..1 g", "--steps", "3",
                             "--format", "json")
    assert code == 0, err
    r = json.loads(out)
    assert [w["payload_kg"] for w in r["window"]] == pytest.approx([0.0, 5e-4, 1e-3])
    assert r["window_min_m"] is not None
    code, out, err = run_cli("levitate", str(EXAMPLE), "--payload-range", "0 g..1 g", "--steps", "3",
                             "--format", "csv")
    assert code == 0, err
    rows = list(csv.DictReader(io.StringIO(out)))
    assert len(rows) == 3 and {"lifter_distance_m", "lifter_travel_m", "resolution_m"} <= set(rows[0])
    assert float(rows[1]["lifter_distance_m"]) == pytest.approx(r["window"][1]["lifter_distance_m"], rel=1e-8)
    code, out, err = run_cli("levitate", str(EXAMPLE), "--payload-range", "0 g..1 g", "--steps", "3")
    assert code == 0 and "narrowest window" in out


def test_cli_payload_range_errors(run_cli):
    code, out, err = run_cli("levitate", str(EXAMPLE), "--payload-range", "2 g..1 g")
    assert code == 2 and "--payload-range" in err and out == "" and err.count("\n") == 1
    code, out, err = run_cli("levitate", str(EXAMPLE), "--steps", "4")
    assert code == 2 and "--steps" in err
    code, out, err = run_cli("levitate", str(EXAMPLE), "--resolution", "-1 um")
    assert code == 2 and "--resolution" in err


# ---------------------------------------------------------------------------
# image-dipole idealisation, labelled; finite plate width
# ---------------------------------------------------------------------------
def test_dipole_values_are_labelled_comparisons(demo):
    # Simon, Heflinger and Geim (2001) point-dipole images overstate the plates'
    # stiffness near a real (finite) floater; the verdict keeps the finite-size model
    r = levitate_stabilized(demo)
    assert r["verdict_model"] == "finite-size"
    assert r["plate_stiffness_dipole_ratio"] == pytest.approx(r["k_plates_dipole_n_m"] / r["k_plates_n_m"], rel=1e-9)
    assert r["plate_stiffness_dipole_ratio"] > 1
    assert r["max_plate_distance_dipole_m"] > r["max_plate_distance_m"]
    text = format_table(r)
    assert "image-dipole idealisation" in text and "unsafe" in text and "comparison only" in text
    assert any("image-dipole idealisation" in w for w in r["warnings"])


def _dipole_square_integral(m, s, w, chi_perp, chi_par):
    """Weighted B^2 of Jackson's vertical point dipole (eq. 5.56) over a w x w square at
    height s, by scipy's dblquad (quarter square times 4)."""
    C = MU0 / (4 * math.pi)

    def f(y, x):
        r2 = x * x + y * y + s * s
        bz = C * m * (3 * s * s / r2 - 1) / r2**1.5
        bh2 = (C * m * 3 * s / r2**2.5) ** 2 * (x * x + y * y)
        return abs(chi_perp) * bz * bz + abs(chi_par) * bh2

    val, _ = integrate.dblquad(f, 0, w / 2, 0, w / 2, epsabs=0, epsrel=1e-9)
    return 4 * val


@pytest.mark.parametrize("shape,size", [("cylinder", (0.2e-3, 0.2e-3)), ("cuboid", (0.2e-3, 0.2e-3, 0.2e-3))])
def test_square_plate_plane_integral_vs_dipole_dblquad(shape, size):
    # far from a tiny floater the plane integral over a square plate is that of the point
    # dipole (Jackson (1999) eq. 5.56) over the same square, integrated by scipy
    body = S.Body(shape, size, 1.3)
    s, w = 3e-3, 8e-3
    fp = S.FinitePlates(body, -4.5e-4, -0.85e-4, 1e-3, width=w)
    ref = _dipole_square_integral(body.moment, s, w, -4.5e-4, -0.85e-4)
    assert fp.plane_integral(s) == pytest.approx(ref, rel=2e-3)
    wide = S.FinitePlates(body, -4.5e-4, -0.85e-4, 1e-3)
    assert fp.plane_integral(s) < wide.plane_integral(s)


@pytest.mark.parametrize("shape,size", [("cylinder", (6.35e-3, 3.175e-3)), ("cuboid", (6e-3, 4e-3, 3e-3))])
def test_width_effect_vanishes_as_the_plate_widens(shape, size):
    # common practice, no source: a plate only a little wider than the floater stiffens
    # less, and the difference fades as the plate widens
    body = S.Body(shape, size, 1.3)
    a = body.half_height + 0.5e-3
    k_wide = S.FinitePlates(body, -4.5e-4, -0.85e-4, 1e-3).stiffness_direct(a)
    dev = []
    for w in (7e-3, 10e-3, 20e-3, 80e-3):
        k = S.FinitePlates(body, -4.5e-4, -0.85e-4, 1e-3, width=w).stiffness_direct(a)
        dev.append(abs(k / k_wide - 1))
    assert k_wide * (1 - dev[0]) < k_wide and dev[0] > 0.01
    assert all(x > y for x, y in itertools.pairwise(dev))
    assert dev[-1] < 1e-4


def test_plates_narrower_than_the_floater_are_refused_and_narrow_ones_warned():
    doc = tomllib.loads(EXAMPLE.read_text())
    doc["plates"]["width"] = "5 mm"  # floater is 6.35 mm across
    with pytest.raises(InputError, match="plates.width"):
        parse_stabilized(doc)
    doc["plates"]["width"] = "7 mm"
    d = parse_stabilized(doc)
    assert d.stations[0].plates.width == pytest.approx(7e-3)
    assert parse_stabilized(tomllib.loads(design_to_toml(d))).stations[0].plates.width == pytest.approx(7e-3)
    r = levitate_stabilized(d, payloads_kg=[0.0])
    wide = levitate_stabilized(parse_stabilized(tomllib.loads(EXAMPLE.read_text())), payloads_kg=[0.0])
    assert r["plate_width_m"] == pytest.approx(7e-3)
    assert r["k_plates_n_m"] < r["k_plates_wide_n_m"]
    assert r["k_plates_wide_n_m"] == pytest.approx(wide["k_plates_n_m"], rel=1e-3)
    # a narrower plate closes the window sooner
    assert r["window"][0]["max_plate_distance_m"] < wide["window"][0]["max_plate_distance_m"]
    assert any("mm wide" in w for w in r["warnings"])


@settings(max_examples=8, deadline=None)
@given(hst.floats(0.0, 1.4e-3), hst.floats(0.05e-3, 0.5e-3))
def test_property_more_payload_closer_lifter_narrower_window(p, dp):
    # common practice, no source: for any two payloads, the heavier one sits with the
    # lifter closer (more travel) and a window no wider
    demo = parse_stabilized(tomllib.loads(EXAMPLE.read_text()))
    st = demo.stations[0]
    model = _model_cached()
    w0 = st.floater.mass_kg * G
    d0 = model.balance(w0)
    a = S.schedule_row(model, w0 + p * G, d0, 0.0)
    b = S.schedule_row(model, w0 + (p + dp) * G, d0, 0.0)
    assert b["lifter_distance_m"] < a["lifter_distance_m"]
    assert b["lifter_travel_m"] > a["lifter_travel_m"] >= -1e-12
    assert b["window_m"] <= a["window_m"]


_MODEL = {}


def _model_cached():
    if "m" not in _MODEL:
        demo = parse_stabilized(tomllib.loads(EXAMPLE.read_text()))
        _MODEL["m"] = S.station_model(demo.stations[0], demo.temperature_k)
    return _MODEL["m"]
