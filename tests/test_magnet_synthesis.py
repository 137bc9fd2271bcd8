"""Floating-magnet synthesis (matdb.analysis.magnet_synthesis, matdb optimise --floating-magnet):
tables against outside references, the search against the exact levitate path."""

from __future__ import annotations

import argparse
import json
import math
import os
import tomllib

import numpy as np
import pytest

from matdb.analysis import magnet_synthesis as M
from matdb.cli import optimise_fm
from matdb.design import parse_stabilized, design_to_toml
from matdb.constants import MU0
from matdb.physics import floating as S

G = 9.80665  # standard gravity (scipy.constants.g)
SMALL = dict(floaters=(("cylinder", (6.35, 3.175)), ("cuboid", (5.0, 5.0, 5.0)), ("ring", (12.7, 6.35, 6.35))),
             lifters=(("cylinder", (25.4, 25.4)), ("cylinder", (50.8, 25.4))), thicknesses=(1e-3, 2e-3))


@pytest.fixture(autouse=True)
def _cache_dir(tmp_path_factory, monkeypatch):
    monkeypatch.setenv("MATDB_CACHE_DIR", str(tmp_path_factory.getbasetemp() / "synthesis-cache"))


@pytest.mark.parametrize("lifter,floater", [
    (("cylinder", (25.4e-3, 25.4e-3)), ("cuboid", (5e-3, 5e-3, 5e-3))),
    (("cuboid", (25.4e-3, 25.4e-3, 25.4e-3)), ("ring", (12.7e-3, 6.35e-3, 6.35e-3))),
    (("ring", (50.8e-3, 25.4e-3, 25.4e-3)), ("cylinder", (6.35e-3, 3.175e-3))),
])
def test_pull_table_vs_magpylib(lifter, floater):
    # the lifter's pull against magpylib's force between the same magnets (independent
    # field and force code), at distances from close to far
    magpy = pytest.importorskip("magpylib")
    lb, fb = S.Body(lifter[0], lifter[1], 1.3), S.Body(floater[0], floater[1], 1.2)
    d = np.array([5e-3, 15e-3, 40e-3])
    ours = S.axial_pull(lb, fb, d)

    def magnet(shape, size, j, z):
        if shape == "cuboid":
            return magpy.magnet.Cuboid(dimension=size, polarization=(0, 0, j), position=(0, 0, z))
        if shape == "cylinder":
            return magpy.magnet.Cylinder(dimension=size, polarization=(0, 0, j), position=(0, 0, z))
        return magpy.magnet.CylinderSegment(dimension=(size[1] / 2, size[0] / 2, size[2], 0, 360),
                                            polarization=(0, 0, j), position=(0, 0, z))

    for di, f in zip(d, ours):
        src = magnet(*lifter, 1.3, di + lb.half_height)
        tgt = magnet(*floater, 1.2, 0.0)
        F, _ = magpy.getFT(src, tgt, meshing=4000)
        assert f == pytest.approx(F[2], rel=2e-3)


def test_pull_interpolation_error_is_checked_and_small():
    # the tabulated pull (spline in log-log) against the direct quadrature between nodes,
    # and the balance it gives against the direct pull (statics)
    p = M.unit_pull("cylinder", (25.4e-3, 25.4e-3), "cylinder", (6.35e-3, 3.175e-3))
    assert p.error < 2e-3
    lifter, floater = S.Body("cylinder", (25.4e-3, 25.4e-3), 1.0), S.Body("cylinder", (6.35e-3, 3.175e-3), 1.0)
    target = 0.3 * p.f_peak
    D = float(p.balance(np.array([target]))[0])
    direct = S.lifter_force(lifter.at((0, 0, D + lifter.half_height)), floater)[2]
    assert direct == pytest.approx(target, rel=2e-3)
    h = 1e-5
    slope = (S.lifter_force(lifter.at((0, 0, D + h + lifter.half_height)), floater)[2]
             - S.lifter_force(lifter.at((0, 0, D - h + lifter.half_height)), floater)[2]) / (2 * h)
    assert float(p.slope(D)) == pytest.approx(slope, rel=5e-3)
    assert np.isnan(p.balance(np.array([1.1 * p.f_peak]))[0])


@pytest.mark.parametrize("shape,size", [("cylinder", (6.35e-3, 3.175e-3)), ("cuboid", (10e-3, 10e-3, 5e-3)),
                                        ("ring", (20e-3, 10e-3, 10e-3))])
def test_scaled_plate_table_matches_the_direct_finite_size_model(shape, size):
    # one table per proportion, scaled (the field of a magnet scaled by L at points scaled
    # by L is unchanged): against FinitePlates evaluated directly at the real size
    t, cz, ch = 1.5e-3, -4.5e-4, -0.85e-4
    body = S.Body(shape, size, 1.0)
    fp = S.FinitePlates(body, cz, ch, t)
    for a in (body.half_height + 0.5e-3, body.half_height + 3e-3):
        assert M.plate_stiffness_unit(shape, size, cz, ch, t, a) == pytest.approx(fp.stiffness_direct(a), rel=3e-3)


def test_plate_table_far_limit_is_the_image_dipole_result():
    # Simon, Heflinger and Geim, Am. J. Phys. 69, 702 (2001): k = 3 mu0 |chi| m^2 / (8 pi)
    # [a^-5 - (a+t)^-5] for a point dipole between two slabs (isotropic chi)
    body = S.Body("cylinder", (2e-3, 1e-3), 1.0)
    chi, t, a = -1.7e-4, 2e-3, 30e-3
    k = M.plate_stiffness_unit("cylinder", body.size, chi, chi, t, a)
    shg = 3 * MU0 * abs(chi) * body.moment**2 / (8 * math.pi) * (a**-5 - (a + t) ** -5)
    assert k == pytest.approx(shg, rel=1e-2)


@pytest.fixture(scope="module")
def small_result(tmp_path_factory):
    os.environ.setdefault("MATDB_CACHE_DIR", str(tmp_path_factory.getbasetemp() / "synthesis-cache"))
    req = M.FMRequest(payload_range_kg=(0.0, 1e-3), top=1, stations=(1, 2))
    seen = []
    res = M.search(req, progress=lambda f, t="": seen.append(f), **SMALL)
    return req, res, seen


def test_search_confirms_its_best_design_exactly(small_result, tmp_path, run_cli):
    # a suggested design, saved and run through `matdb levitate`, keeps its window over
    # the range (the exact finite-size levitate path, not the search's tables)
    req, res, seen = small_result
    assert seen[-1] == 1.0 and all(b >= a for a, b in zip(seen, seen[1:]))
    best = res.rows[0]
    assert best["feasible"] and best["rank"] == 1 and best["exact_checked"]
    assert best["window_min_m"] >= req.min_window_m
    path = tmp_path / "best.toml"
    path.write_text(design_to_toml(res.designs[0]))
    code, out, err = run_cli("levitate", str(path), "--format", "json")
    assert code == 0, err
    r = json.loads(out)
    assert r["payload_range_kg"] == pytest.approx([0.0, 1e-3])
    assert r["window_min_m"] >= req.min_window_m
    assert r["floats"] is True


def test_common_practice_heavier_range_needs_more_travel(small_result):
    # common practice, no source: in the best design the lifter comes closer as the
    # payload grows (positive travel from the empty float)
    req, res, _ = small_result
    best = res.rows[0]
    assert best["lifter_distance_full_m"] < best["lifter_distance_empty_m"]
    assert best["lifter_travel_m"] == pytest.approx(best["lifter_distance_empty_m"] - best["lifter_distance_full_m"])


def test_nothing_works_names_the_closest_requirement():
    # a 1 mm tall envelope fits nothing: the message names the failing requirement and by how much
    req = M.FMRequest(payload_range_kg=(0.0, 1e-3), top=1, stations=(1,), envelope_m=(0.2, 1e-3))
    res = M.search(req, **SMALL)
    assert not any(r["feasible"] for r in res.rows)
    assert "closest" in res.message and "height" in res.message and "over the envelope" in res.message
    assert all(r["reasons"] for r in res.rows)
    assert res.rejected_by["height"] == res.n_candidates


def test_rejected_designs_keep_their_reasons():
    # asked for, the closest rejected designs come with every reason, each with by how much
    req = M.FMRequest(payload_range_kg=(0.0, 1e-3), top=1, stations=(1,), rejected=2, budget_usd=5.0)
    res = M.search(req, **SMALL)
    rejected = [r for r in res.rows if not r["feasible"]]
    assert rejected and all(r["reasons"] for r in rejected)
    assert res.rejected_by["budget"] > 0
    for r in res.rows:
        if r["feasible"]:
            assert r["cost_usd"] <= 5.0
        elif r["cost_usd"] is not None and r["cost_usd"] > 5.0:
            assert any("over the budget" in w for w in r["reasons"])


def test_add_arguments_adds_only_missing_options():
    p = argparse.ArgumentParser()
    p.add_argument("--format", choices=["table", "json", "csv"], default="table")
    p.add_argument("--budget")
    optimise_fm.add_arguments(p)  # no conflict with the options already there
    a = p.parse_args(["--floating-magnet", "--payload-range", "0 g..5 g", "--stations", "1", "2",
                      "--plates", "bismuth", "--envelope", "80 mm x 200 mm"])
    req = optimise_fm.request_from_args(a)
    assert req.stations == (1, 2) and req.materials == ("bismuth",)
    assert req.envelope_m == pytest.approx((0.08, 0.2))
    assert req.payload_range_kg == pytest.approx((0.0, 5e-3))


def test_cli_errors_are_one_line(run_cli):
    code, out, err = run_cli("optimise", "--floating-magnet")
    assert code == 2 and "--payload-range" in err and err.count("\n") == 1
    code, out, err = run_cli("optimise", "--floating-magnet", "--payload-range", "0 g..1 g", "--envelope", "80 mm")
    assert code == 2 and "--envelope" in err
    code, out, err = run_cli("optimise", "--floating-magnet", "--payload-range", "0 g..1 g", "--plates", "unobtainium")
    assert code == 2 and "--plates" in err


@pytest.mark.slow
def test_cli_suggestion_json_and_saved_design(run_cli, tmp_path):
    # the full default search: JSON list of designs with window_min_m and feasible; the
    # saved file keeps its window through `matdb levitate`
    path = tmp_path / "suggested.toml"
    code, out, err = run_cli("optimise", "--floating-magnet", "--payload-range", "0 g..5 g", "--top", "1",
                             "--format", "json", "--save", str(path), "--quiet")
    assert code == 0, err
    designs = json.loads(out)
    assert designs and all({"window_min_m", "feasible"} <= set(d) for d in designs)
    assert designs[0]["feasible"] and designs[0]["window_min_m"] >= 0.5e-3
    d = parse_stabilized(tomllib.loads(path.read_text()))
    assert d.payload_range == pytest.approx((0.0, 5e-3))
    code, out, err = run_cli("levitate", str(path), "--format", "json")
    assert code == 0, err
    assert json.loads(out)["window_min_m"] >= 0.5e-3
