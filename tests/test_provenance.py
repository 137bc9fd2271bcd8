"""Provenance of the stored values: every published number carries a status
(verified | corrected | unverified) and, when checked, a locator; the commands show them."""

from __future__ import annotations

import csv
import json
import shutil

import pytest

from matdb.errors import DataError
from matdb.data.seed import coverage, parse_seed, seed_dir


def test_every_stored_number_has_a_provenance_row():
    # regression check: a number added to seed_data/ without a check fails here
    counts = coverage(parse_seed())
    assert counts["unchecked"] == 0
    assert sum(counts.values()) > 500


def test_most_of_the_original_tables_is_checked_against_a_source():
    # Issue 14, "done when": at least 80 % of the stored values of the grade, susceptibility
    # and material tables verified or corrected, with locators.
    rows = list(csv.DictReader((seed_dir() / "provenance.csv").read_text(encoding="utf-8").splitlines()))
    own = [r for r in rows if r["value_id"].split(":")[0] in ("grade", "chi", "material")]
    done = [r for r in own if r["status"] in ("verified", "corrected")]
    assert len(done) / len(own) >= 0.80
    assert all(r["locator"].strip() for r in done)


def test_no_verified_value_without_a_locator_in_the_database(fresh_db):
    from sqlmodel import select

    from matdb.data.db import read_session
    from matdb.data.models import ValueProvenance

    with read_session(fresh_db) as s:
        rows = s.exec(select(ValueProvenance)).all()
    assert rows
    assert not [r for r in rows if r.status in ("verified", "corrected") and not r.locator.strip()]
    # grade and susceptibility rows point at the value row they describe
    assert all(r.value_row_id is not None for r in rows if r.value_kind in ("magnet", "chi"))


@pytest.mark.parametrize("field, value, message", [
    ("locator", "", "needs a locator"),
    ("status", "checked", "expected one of verified, corrected, unverified"),
    ("field", "br_max_t", "expected one of"),
])
def test_bad_provenance_row_is_refused_naming_the_field(tmp_path, field, value, message):
    dst = tmp_path / "seed"
    shutil.copytree(seed_dir(), dst)
    path = dst / "provenance.csv"
    rows = list(csv.DictReader(path.read_text(encoding="utf-8").splitlines()))
    first = next(i for i, r in enumerate(rows) if r["status"] == "verified")
    rows[first][field] = value
    with path.open("w", encoding="utf-8", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    with pytest.raises(DataError) as exc:
        parse_seed(dst)
    assert f"provenance.csv:{first + 2}: {field}:" in str(exc.value) and message in str(exc.value)


def test_show_json_gives_value_id_and_provenance_per_value(run_cli, fresh_db):
    code, out, _ = run_cli("show", "N42", "--format", "json")
    assert code == 0
    rec = json.loads(out)
    row = rec["values"][0]
    assert isinstance(row["value_id"], int)
    prov = {p["field"]: p for p in row["provenance"]}
    assert {"br_t", "br_min_t", "hcj_ka_m", "alpha_br_pct_per_k"} <= set(prov)
    for p in prov.values():
        assert p["status"] in ("verified", "corrected", "unverified")
        assert set(p) >= {"field", "status", "locator"}
    assert prov["br_t"]["locator"]
    code, out, _ = run_cli("show", "bismuth", "--format", "json")
    rec = json.loads(out)
    assert rec["values"][0]["provenance"] and rec["provenance"]  # the value row and the density


def test_show_table_prints_status_and_locator(run_cli, fresh_db):
    code, out, _ = run_cli("show", "N42SH")
    assert code == 0
    assert "c corrected" in out and "v verified" in out
    assert "N42SH technical specifications" in out  # a locator, printed in full


def test_sources_lists_counts_by_status(run_cli, fresh_db):
    code, out, _ = run_cli("sources", "--format", "json")
    assert code == 0
    data = json.loads(out)
    totals = data["totals"]
    assert set(totals) == {"verified", "corrected", "unverified"}
    by_key = {s["key"]: s for s in data["sources"]}
    assert by_key["ndfeb-cmf"]["verified"] > 50
    assert sum(s["values"] for s in data["sources"]) == sum(totals.values())
    code, out, _ = run_cli("sources", "--status", "unverified", "--format", "json")
    keys = {s["key"] for s in json.loads(out)["sources"]}
    assert "crc-magsus" in keys and "ndfeb-cmf" not in keys
    code, out, _ = run_cli("sources")
    assert code == 0 and "verified" in out and "% checked against a source" in out
    code, _, err = run_cli("sources", "--status", "maybe")
    assert code == 2 and "--status" in err


def test_tables_mark_each_value_with_its_status(run_cli, fresh_db):
    code, out, _ = run_cli("magnets", "--family", "NdFeB")
    assert code == 0
    line = next(ln for ln in out.splitlines() if ln.startswith("N42SH "))
    assert "1.31 c" in line and "1592 v" in line
    assert "status marks: v = verified" in out
    code, out, _ = run_cli("materials")
    line = next(ln for ln in out.splitlines() if ln.startswith("antimony "))
    assert " v" in line
    code, out, _ = run_cli("magnets", "--format", "json")
    rec = next(r for r in json.loads(out) if r["grade"] == "N42SH")
    assert rec["br_t"] == pytest.approx(1.31) and rec["provenance_status"]["br_t"] == "corrected"


def test_properties_give_both_axes_of_graphite_with_sources(run_cli, fresh_db):
    # Issue 14 item 3: electrical conductivity of graphite on both axes, with sources.
    code, out, _ = run_cli("properties", "pyrolytic-graphite", "--format", "json")
    assert code == 0
    rows = {(r["property"], r["axis"]): r for r in json.loads(out)}
    par, perp = rows[("resistivity", "par")], rows[("resistivity", "perp")]
    # Jaszczak's table (Powell and Childs 1972): 9.8e-6 and 4.1e-5 ohm m
    assert par["value_si"] == pytest.approx(9.8e-6) and perp["value_si"] == pytest.approx(4.1e-5)
    assert par["status"] == "verified" and par["locator"]
    code, _, err = run_cli("properties", "unobtainium")
    assert code == 2 and "id:" in err


def test_page_tables_show_a_status_mark_beside_each_value():
    # Issue 14: the page shows each value's status beside it, as a letter, not colour alone.
    pytest.importorskip("streamlit")
    from pathlib import Path

    from streamlit.testing.v1 import AppTest

    app = str(Path(__file__).resolve().parent.parent / "webapp" / "app.py")
    at = AppTest.from_file(app, default_timeout=120).run()
    assert not at.exception
    at.switch_page("views/magnets.py").run()
    assert not at.exception
    grades = next(d.value for d in at.dataframe if "br_t_check" in d.value.columns)
    cols = list(grades.columns)
    assert cols.index("br_t_check") == cols.index("br_t") + 1
    row = grades.set_index("grade").loc["N42SH"]
    assert row["br_t"] == pytest.approx(1.31) and row["br_t_check"] == "c" and row["hcj_ka_m_check"] == "v"
    assert set(grades["br_t_check"]) <= {"v", "c", "?", "m"}
    assert any("v = verified" in c.value for c in at.caption)
    at.session_state["grades_sources_panel"] = True  # the sources panel is built when opened
    at.run()
    sources = next(d.value for d in at.dataframe if "citation" in d.value.columns)
    assert {"verified", "corrected", "unverified"} <= set(sources.columns)
    at.switch_page("views/materials.py").run()
    assert not at.exception
    mats = next(d.value for d in at.dataframe if "chi_shown_check" in d.value.columns)
    row = mats.set_index("id").loc["antimony"]
    assert row["chi_shown_check"] == "v"


def test_compare_and_lab_tables_carry_the_marks_too():
    from matdb.data import catalog
    from matdb.reporting import presentation

    mats = presentation.materials_table("si-volume")
    table = presentation.compare_materials(mats, ["antimony", "pmma"], rounded=True, marks=catalog.status_marks()["material"])
    chi = table.loc["chi, SI volume"]
    assert chi["antimony"].endswith(" v") and chi["pmma"].endswith(" ?")
    from matdb.data import lab_store

    rows = lab_store.history("antimony")
    assert presentation.value_check_marks(rows) == ["v"]
