"""`matdb advise`: the JSON contract, csv and table formats, --save into `matdb levitate`,
and one-line errors with exit status 2."""

from __future__ import annotations

import io
import json

import pandas as pd
import pytest

# A small search: an 8 mm plate, magnets up to 10 mm, one material, two grades, 1 mm plates.
SMALL = ["--mass", "0.05 g", "--footprint", "8 mm x 8 mm", "--max-magnet-size", "10 mm",
         "--material", "pyrolytic-graphite", "--material", "bismuth", "--grade", "N42",
         "--grade", "N52", "--thickness", "1 mm", "--exact", "1"]
CONTRACT = {"rank", "material", "grade", "arrangement", "feasible", "lift_per_area_n_m2", "gap_m",
            "gap_worst_m", "margin", "laterally_stable", "derating_pct", "cost_usd", "score",
            "pareto", "reasons"}
ARRANGEMENT = {"description", "pattern", "shape", "size_m", "rows", "cols"}


def test_json_contract_and_order(run_cli):
    code, out, err = run_cli("advise", *SMALL, "--format", "json")
    assert code == 0, err
    rows = json.loads(out)
    assert rows and all(CONTRACT <= set(r) for r in rows)
    assert all(ARRANGEMENT <= set(r["arrangement"]) for r in rows)
    assert [r["rank"] for r in rows] == list(range(1, len(rows) + 1))
    feas = [r["feasible"] for r in rows]
    assert feas == sorted(feas, reverse=True)  # feasible first, then the rejected ones
    assert all(r["reasons"] for r in rows if not r["feasible"])
    assert all(not r["reasons"] for r in rows if r["feasible"])
    assert all(r["pareto"] is False for r in rows if not r["feasible"])
    assert {r["material"] for r in rows} == {"pyrolytic-graphite", "bismuth"}
    a = rows[0]["arrangement"]
    assert a["shape"] in ("cuboid", "cylinder") and a["pattern"] in ("checkerboard", "stripes")
    assert all(isinstance(v, float) for v in a["size_m"])
    scores = [r["score"] for r in rows if r["feasible"]]
    assert scores == sorted(scores, reverse=True)


def test_feasible_only_and_top(run_cli):
    code, out, _ = run_cli("advise", *SMALL, "--format", "json", "--feasible-only", "--top", "3")
    assert code == 0
    rows = json.loads(out)
    assert len(rows) <= 3 and all(r["feasible"] for r in rows)


def test_csv_is_pandas_readable(run_cli):
    code, out, _ = run_cli("advise", *SMALL, "--format", "csv", "--top", "5")
    assert code == 0
    df = pd.read_csv(io.StringIO(out))
    assert len(df) == 5 and {"margin", "gap_m", "cost_usd", "reasons"} <= set(df.columns)
    assert df["margin"].dtype.kind == "f"


def test_table_for_people(run_cli):
    code, out, _ = run_cli("advise", *SMALL, "--temp-max", "90 degC")
    assert code == 0
    assert "feasible of" in out and "illustrative" in out
    assert "rated to 80 C" in out or "rated to 60 C" in out  # N42 / N52 above their ratings


def test_save_writes_a_design_levitate_accepts(run_cli, tmp_path):
    path = tmp_path / "best.toml"
    code, out, err = run_cli("advise", *SMALL, "--format", "json", "--top", "1", "--save", str(path))
    assert code == 0, err
    best = json.loads(out)[0]
    assert path.exists()
    code, out, err = run_cli("levitate", str(path), "--format", "json")
    assert code == 0, err
    lev = json.loads(out)
    assert lev["mode"] == "plate" and lev["material"] == best["material"] and lev["grade"] == best["grade"]
    assert lev["floats"] == (best["gap_m"] is not None)
    if best["gap_m"] is not None:
        assert lev["gap_m"] == pytest.approx(best["gap_m"], rel=1e-6)


@pytest.mark.parametrize("argv, field", [
    (["--mass", "-2 g", "--footprint", "17 mm x 17 mm"], "--mass"),
    (["--mass", "2 g", "--footprint", "17 x 17"], "--footprint"),
    (["--mass", "2 g", "--footprint", "17 mm x 17 mm", "--min-gap", "-1 mm"], "--min-gap"),
    (["--mass", "2 g", "--footprint", "17 mm x 17 mm", "--temp-max", "60"], "--temp-max"),
    (["--mass", "2 g", "--footprint", "17 mm x 17 mm", "--material", "kryptonite"], "material"),
    (["--mass", "2 g", "--footprint", "17 mm x 17 mm", "--family", "Unobtainium"], "--family"),
    (["--mass", "2 g", "--footprint", "17 mm x 17 mm", "--weights", "margin=x"], "--weights"),
])
def test_errors_are_one_line_exit_2(run_cli, argv, field):
    code, out, err = run_cli("advise", *argv)
    assert code == 2
    assert err.startswith("matdb: error:") and field in err
    assert len(err.strip().splitlines()) == 1
