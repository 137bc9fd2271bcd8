"""Batch import and export of lab values (matdb import / matdb export)."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matdb.data import catalog
from matdb.data import db
from matdb.data import exchange
from matdb.data import lab_store
from matdb import output

DATA = Path(__file__).resolve().parent / "data"


def _import(run_cli, path) -> dict:
    code, out, err = run_cli("import", str(path), "--format", "json")
    assert code == 0, err
    return json.loads(out)


def _measured(export_json: str) -> list[dict]:
    """Measured rows of an export without the database-local ids."""
    rows = [r for r in json.loads(export_json)["values"] if r["value_kind"] == "measured"]
    return sorted(({k: v for k, v in r.items() if k != "value_id"} for r in rows),
                  key=lambda r: (r["record"], r["id"], r["entered_at"], r["source"]))


def test_import_good_file_then_reimport_adds_nothing(fresh_db, run_cli, export_text):
    n_rows = sum(1 for _ in csv.DictReader((DATA / "lab_good.csv").open(encoding="utf-8")))
    first = _import(run_cli, DATA / "lab_good.csv")
    assert first["added"] == n_rows and first["already_present"] == 0
    snapshot = export_text()
    again = _import(run_cli, DATA / "lab_good.csv")
    assert again["added"] == 0 and again["already_present"] == n_rows
    assert export_text() == snapshot
    # a row typed in a convention is converted like 'matdb record' (IUPAC Green Book 7.4: x 4 pi)
    sb = catalog.get_material("antimony")
    assert sb.value_kind == "measured" and sb.source.startswith("=HYPERLINK(")


def test_bad_file_names_every_bad_row_and_writes_nothing(fresh_db, run_cli, export_text):
    before = export_text()
    code, _, err = run_cli("import", str(DATA / "lab_bad.csv"))
    assert code == 2 and err.count("\n") == 1
    # lines 3-7 are bad (chi '5 kg', temperature without unit, unknown material, empty source, NaN)
    for line, field in ((3, "chi"), (4, "temperature"), (5, "unobtainium"), (6, "source"), (7, "chi")):
        assert f"line {line}: " in err and field in err.split(f"line {line}: ")[1].split(";")[0], (line, err)
    assert "line 2:" not in err and "5 bad rows" in err
    assert export_text() == before


def test_import_creates_a_new_material_once(fresh_db, run_cli):
    s = _import(run_cli, DATA / "lab_new_material.csv")
    assert s["materials_added"] == 1 and s["added"] == 2
    m = catalog.get_material("bismuth-tin-eutectic")
    assert m.density_kg_m3 == pytest.approx(8560.0) and m.chi_si == pytest.approx(-9.7e-5)  # newest by date


@pytest.mark.parametrize("content,expect", [
    (b"material_id,chi,source\nbismuth,-1.6e-4,caf\xe9 balance\n", "not UTF-8"),
    (b"material_id,chi,chi,source\nbismuth,-1.6e-4,-1.5e-4,x\n", "duplicated column"),
    (b"material_id,chi\nbismuth,-1.6e-4\n", "missing columns source"),
    (b"material,chi,source\nbismuth,-1.6e-4,x\n", "unknown columns material"),
    (b"material_id,chi,source\nbismuth,-1.6e-4\n", "line 2: expected 3 cells"),
    (b"", "empty"),
    (b"{not json", "not valid JSON"),
])
def test_malformed_files_are_refused(fresh_db, run_cli, tmp_path, content, expect, export_text):
    path = tmp_path / "in.csv"
    path.write_bytes(content)
    before = export_text()
    code, _, err = run_cli("import", str(path))
    assert code == 2 and expect in err, err
    assert export_text() == before


def test_excel_bom_is_accepted(fresh_db, run_cli, tmp_path):
    # spreadsheet programs write 'CSV UTF-8' with a byte-order mark (common practice, no source)
    path = tmp_path / "bom.csv"
    path.write_bytes("\ufeffmaterial_id,chi,source\nbismuth,-1.6e-4,Gouy\n".encode("utf-8"))
    assert _import(run_cli, path)["added"] == 1


def test_dry_run_writes_nothing(fresh_db, run_cli, export_text):
    before = export_text()
    code, out, err = run_cli("import", str(DATA / "lab_good.csv"), "--dry-run")
    assert code == 0 and "dry run" in out, err
    assert export_text() == before


def _populate(run_cli):
    argv = [
        ("material", "bismuth", "--chi", "-1.6e-4", "--date", "2026-10-01", "--temperature", "21 degC",
         "--uncertainty", "4%", "--source", '=HYPERLINK("http://example.invalid","x")', "--measured-by=-me"),
        ("material", "bismuth", "--chi", "-1.4e-4", "--date", "2026-10-02", "--source", "@wrong holder",
         "--method", 'Gouy, two "points"\nsecond line; ünïcode'),
        ("material", "pyrolytic-graphite", "--chi-perp", "-4.2e-4", "--chi-par", "-8e-5", "--source", "sheet 2"),
        ("material", "own-alloy", "--name", "Own alloy", "--density", "9 g/cm^3", "--chi", "-5e-5",
         "--source", "'quoted note"),
        ("magnet", "N42", "--br", "1.27 T", "--source", "+batch 7"),
        ("magnet", "X1", "--family", "SmCo", "--br", "1.05 T", "--hcj", "1500 kA/m", "--alpha", "-0.035",
         "--max-temp", "250 degC", "--density", "8.3 g/cm^3", "--source", "own grade"),
    ]
    ids = []
    for a in argv:
        code, out, err = run_cli("record", *a, "--format", "json")
        assert code == 0, err
        ids.append(json.loads(out)["value_id"])
    code, _, err = run_cli("retract", str(ids[1]), "--id", "bismuth", "--reason=-holder was magnetic")
    assert code == 0, err
    hb = next(r for r in catalog.material_values("antimony") if r["value_kind"] != "measured")
    code, _, err = run_cli("prefer", "antimony", str(hb["value_id"]))
    assert code == 0, err
    code, _, err = run_cli("prefer", "bismuth", str(ids[0]))
    assert code == 0, err


def test_csv_export_escapes_formulas_but_not_numbers(fresh_db, run_cli, export_text):
    _populate(run_cli)
    text = export_text("csv")
    rows = list(csv.DictReader(io.StringIO(text)))
    bi = [r for r in rows if r["record"] == "chi" and r["id"] == "bismuth" and r["value_kind"] == "measured"]
    # OWASP "CSV Injection": cells starting with = + - @ are prefixed with a single quote
    assert {r["source"] for r in bi} == {"'=HYPERLINK(\"http://example.invalid\",\"x\")", "'@wrong holder"}
    assert {r["measured_by"] for r in bi} == {"'-me", ""}
    assert any(r["retract_reason"] == "'-holder was magnetic" for r in bi)
    assert all(r["chi_si"].startswith("-") for r in bi)  # numeric columns are never escaped
    assert all(float(r["chi_si"]) < 0 for r in rows if r["record"] == "chi" and r["id"] == "bismuth")
    own = next(r for r in rows if r["record"] == "chi" and r["id"] == "own-alloy")
    assert own["source"] == "''quoted note"  # a leading quote is doubled so import restores it
    for r in rows:
        for col, cell in r.items():
            if cell and col not in exchange.NUMERIC_COLUMNS:
                assert cell[0] not in "=+-@", (col, cell)
    # JSON keeps notes as typed
    hist = {r["value_id"]: r for r in lab_store.history("bismuth")}
    assert any(r["source"] == '=HYPERLINK("http://example.invalid","x")' for r in hist.values())


@pytest.mark.parametrize("fmt", ["csv", "json"])
def test_round_trip_restores_measured_rows_into_a_fresh_database(fresh_db, run_cli, tmp_path, monkeypatch, fmt, export_text):
    _populate(run_cli)
    dump = tmp_path / f"dump.{fmt}"
    code, _, err = run_cli("export", "--format", fmt, "--out", str(dump))
    assert code == 0, err
    original = export_text()
    # into the same (identical) database: nothing new
    s = _import(run_cli, dump)
    assert s["added"] == 0 and s["materials_added"] == 0 and s["grades_added"] == 0 and s["preferences_set"] == 0
    assert export_text() == original

    other = f"sqlite:///{tmp_path / 'other.sqlite'}"
    monkeypatch.setenv("MATDB_URL", other)
    db.reset_engines()
    s = _import(run_cli, dump)
    assert s["materials_added"] == 1 and s["grades_added"] == 1 and s["added"] == 6
    restored = export_text()
    assert _measured(restored) == _measured(original)  # lossless: every field, retraction, note
    assert [m for m in json.loads(restored)["materials"]] == json.loads(original)["materials"]
    assert catalog.get_material("bismuth").chi_si == pytest.approx(-1.6e-4)
    assert catalog.get_material("antimony").value_kind == "handbook"  # explicit preference restored
    assert catalog.get_grade("X1").br_t == pytest.approx(1.05)
    again = _import(run_cli, dump)
    assert again["added"] == 0 and export_text() == restored
    db.reset_engines()


def test_retraction_travels_with_an_import(fresh_db, run_cli, tmp_path):
    _import(run_cli, DATA / "lab_good.csv")
    vid = next(r["value_id"] for r in lab_store.history("graphite") if r["value_kind"] == "measured")
    dump = tmp_path / "d.csv"
    lab_store.retract(vid, "machined surface contaminated", "graphite")
    dump.write_text(exchange.export("csv"), encoding="utf-8")
    # an export that says retracted, imported where it is not retracted, retracts it there
    with db.session_scope() as s:
        from matdb.data.models import SusceptibilityValue

        v = s.get(SusceptibilityValue, vid)
        v.retracted, v.retract_reason = False, None
    s = _import(run_cli, dump)
    assert s["retracted"] == 1 and s["added"] == 0
    assert next(r for r in lab_store.history("graphite") if r["value_id"] == vid)["retracted"] is True


@settings(max_examples=300, deadline=None)
@given(st.text(max_size=30))
def test_escape_round_trip_and_neutralises_formulas(text):
    # OWASP "CSV Injection": a cell must not begin with = + - @ tab or CR when a spreadsheet opens it
    esc = output.escape_cell(text)
    assert output.unescape_cell(esc) == text
    assert not esc.startswith(tuple("=+-@\t\r"))


def test_history_csv_is_escaped_too(fresh_db, run_cli):
    code, _, err = run_cli("record", "material", "bismuth", "--chi", "-1.6e-4", "--source", "=1+2", "--date",
                           "2026-11-01")
    assert code == 0, err
    code, out, _ = run_cli("history", "bismuth", "--format", "csv")
    row = next(r for r in csv.DictReader(io.StringIO(out)) if r["value_kind"] == "measured")
    assert row["source"] == "'=1+2" and float(row["chi_si"]) == pytest.approx(-1.6e-4)
