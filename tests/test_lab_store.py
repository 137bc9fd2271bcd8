"""Recording, preferring, retracting lab-measured values (matdb.data.lab_store, matdb record/prefer/
history/retract)."""

from __future__ import annotations

import json
import math

import pytest

from matdb.data import catalog
from matdb.data import lab_store
from matdb.errors import InputError, NotFoundError


def _handbook_rows(material_id: str) -> list[dict]:
    """The published rows as stored (the 'preferred' flag is derived, not stored in the row)."""
    return [{k: v for k, v in r.items() if k != "preferred"}
            for r in catalog.material_values(material_id) if r["value_kind"] != "measured"]


# ---------------------------------------------------------------------------
# negative numbers as typed, conventions
# ---------------------------------------------------------------------------
def test_negative_chi_three_ways(fresh_db, run_cli, record_json):
    bi = catalog.get_material("bismuth")
    a = record_json("material", "bismuth", "--chi", "-1.6e-4", "--source", "Gouy balance, casting B3")
    b = record_json("material", "bismuth", "--chi=-1.6e-4", "--source", "Gouy balance, casting B4")
    c = record_json("material", "bismuth", "--chi", "-280e-6 cm^3/mol", "--molar-mass", "208.98 g/mol",
             "--source", "Faraday balance, casting B5")
    # a bare number is the SI volume susceptibility (matdb convention, DEVELOPERS.md)
    assert a["chi_si"] == pytest.approx(-1.6e-4, rel=1e-12)
    assert b["chi_si"] == pytest.approx(-1.6e-4, rel=1e-12)
    # CGS-emu molar -> SI volume: chi_v = 4 pi 1e-6 chi_m rho / M (IUPAC Green Book 3rd ed., 7.4)
    expected = 4 * math.pi * 1e-6 * -280e-6 * bi.density_kg_m3 / 0.20898
    assert c["chi_si"] == pytest.approx(expected, rel=1e-12)
    assert c["convention"] == "cgs-molar" and c["value_published"] == pytest.approx(-280e-6)
    assert {a["value_kind"], b["value_kind"], c["value_kind"]} == {"measured"}
    assert a["source_key"] == "lab" and a["source"] == "Gouy balance, casting B3"


def test_cgs_volume_and_uncertainty_in_the_same_convention(fresh_db, run_cli, record_json):
    r = record_json("material", "antimony", "--chi", "-1.31e-5 cgs-volume", "--uncertainty", "0.05e-5",
             "--temperature", "22 degC", "--source", "SQUID, sample S2", "--measured-by", "R. Ivanova",
             "--date", "2026-11-20", "--method", "SQUID magnetometer")
    # CGS volume -> SI volume: factor 4 pi (IUPAC Green Book 3rd ed., 7.4)
    assert r["chi_si"] == pytest.approx(4 * math.pi * -1.31e-5, rel=1e-12)
    assert r["uncertainty"] == pytest.approx(4 * math.pi * 0.05e-5, rel=1e-12)
    # 22 degC = 295.15 K (SI brochure, definition of the degree Celsius)
    assert r["temperature_c"] == pytest.approx(22.0)
    assert (r["measured_by"], r["date"], r["method"]) == ("R. Ivanova", "2026-11-20", "SQUID magnetometer")


def test_percentage_uncertainty(fresh_db, run_cli, record_json):
    r = record_json("material", "bismuth", "--chi", "-1.60e-4", "--uncertainty", "5%", "--source", "balance")
    # a percentage is relative to |chi| (common practice, no source)
    assert r["uncertainty"] == pytest.approx(0.05 * 1.60e-4, rel=1e-12)


def test_anisotropic_record_keeps_both_axes(fresh_db, run_cli, record_json):
    r = record_json("material", "pyrolytic-graphite", "--chi-perp", "-4.1e-4", "--chi-par", "-7.9e-5",
             "--source", "supplier X sheet, torque magnetometer")
    m = catalog.get_material("pyrolytic-graphite")
    assert m.value_id == r["value_id"] and m.value_kind == "measured"
    # chi_perp: field along the c axis, seen by a level plate's vertical field (DEVELOPERS.md glossary)
    assert m.chi_vertical == pytest.approx(-4.1e-4) and m.chi_horizontal == pytest.approx(-7.9e-5)


def test_anisotropic_without_in_plane_value_is_refused(fresh_db, run_cli, export_text):
    before = export_text()
    code, _, err = run_cli("record", "material", "pyrolytic-graphite", "--chi", "-4.1e-4", "--source", "x")
    assert code == 2 and "--chi-par" in err and "anisotropic" in err
    assert export_text() == before


# ---------------------------------------------------------------------------
# bad inputs: clear error naming the field, database unchanged
# ---------------------------------------------------------------------------
BAD_RECORDS = [
    (["bismuth", "--chi", "-1.6e-4", "--source", ""], "--source"),
    (["bismuth", "--chi", "-1.6e-4", "--source", "   "], "--source"),
    (["bismuth", "--chi", "5 kg", "--source", "x"], "--chi"),
    (["bismuth", "--chi", "nan", "--source", "x"], "--chi"),
    (["bismuth", "--chi", "NaN cgs-volume", "--source", "x"], "--chi"),
    (["bismuth", "--chi", "1e400", "--source", "x"], "--chi"),
    (["bismuth", "--chi", "-1e300", "--source", "x"], "--chi"),
    (["bismuth", "--chi", "-0.5", "--source", "x"], "--chi"),
    (["bismuth", "--chi", "1.6e-4", "--source", "x"], "allow_paramagnetic"),  # the override, named by its field
    (["bismuth", "--chi", "-1.6e-4", "--temperature", "20", "--source", "x"], "--temperature"),
    (["bismuth", "--chi", "-1.6e-4", "--temperature", "5 kg", "--source", "x"], "--temperature"),
    (["bismuth", "--chi", "-1.6e-4", "--density", "9780", "--source", "x"], "--density"),
    (["bismuth", "--chi", "-1.6e-4", "--density", "30000 kg/m^3", "--source", "x"], "--density"),
    (["bismuth", "--chi", "-1.6e-4", "--density", "0.5 kg/m^3", "--source", "x"], "--density"),
    (["bismuth", "--chi", "-1.6e-4", "--uncertainty", "150%", "--source", "x"], "--uncertainty"),
    (["bismuth", "--chi", "-1.6e-4", "--uncertainty", "-1e-6", "--source", "x"], "--uncertainty"),
    (["bismuth", "--chi", "-1.6e-4", "--date", "30/11/2026", "--source", "x"], "--date"),
    (["bismuth", "--chi", "-1.6e-4", "--date", "2026-02-30", "--source", "x"], "--date"),
    (["bismuth", "--chi", "-1.6e-4", "--date", "2999-01-01", "--source", "x"], "--date"),
    (["bismuth", "--chi", "-2e-5 cm^3/g", "--density", "1e9 g/cm^3", "--source", "x"], "--density"),
    (["bismuth", "--chi-par", "-1e-5", "--chi", "-1e-4", "--source", "x"], "--chi-par"),
    (["bismuth", "--source", "x"], "--chi"),
    (["bismuth", "--chi", "-1.6e-4", "--name", "Not bismuth", "--source", "x"], "--name"),
    (["bismuthh", "--chi", "-1.6e-4", "--source", "x"], "bismuth"),
    (["new-alloy", "--chi", "-1e-5", "--name", "New alloy", "--source", "x"], "--density"),
    (["New Alloy", "--chi", "-1e-5", "--name", "New alloy", "--density", "8 g/cm^3", "--source", "x"], "slug"),
]


@pytest.mark.parametrize("argv,field", BAD_RECORDS, ids=[" ".join(a[1:3]) + f" [{f}]" for a, f in BAD_RECORDS])
def test_bad_record_is_refused_and_writes_nothing(fresh_db, run_cli, argv, field, export_text):
    before = export_text()
    code, out, err = run_cli("record", "material", *argv)
    assert code == 2, out
    assert err.startswith("matdb: error:") and err.count("\n") == 1  # one line
    assert field in err
    assert export_text() == before  # matdb export --format json unchanged


def test_bad_magnet_records_write_nothing(fresh_db, run_cli, export_text):
    before = export_text()
    cases = [
        (["N42", "--br", "1.25", "--source", "g"], "--br"),            # missing unit
        (["N42", "--br", "5 kg", "--source", "g"], "--br"),            # wrong dimension
        (["N42", "--br", "3 T", "--source", "g"], "--br"),             # absurd remanence
        (["N42", "--br", "1.25 T", "--source", ""], "--source"),
        (["N42", "--source", "g"], "--br"),
        (["N42", "--hcj", "-900 kA/m", "--source", "g"], "--hcj"),
        (["N42", "--alpha", "-12", "--source", "g"], "--alpha"),
        (["N77Q", "--br", "1.25 T", "--source", "g"], "--family"),
        (["N77Q", "--br", "1.25 T", "--family", "NdFeB", "--source", "g"], "--hcj"),
        (["N77Q", "--br", "1.25 T", "--family", "unobtainium", "--source", "g"], "--family"),
        (["N42", "--surface-field", "0.5 T", "--shape", "cuboid", "--source", "g"], "--size"),
        (["N42", "--surface-field", "0.5 T", "--shape", "cuboid", "--size", "10 mm,10 mm", "--source", "g"], "--size"),
        (["N42", "--surface-field", "3 T", "--shape", "cylinder", "--size", "10 mm,5 mm", "--source", "g"],
         "--surface-field"),
        (["N42", "--br", "1.2 T", "--surface-field", "0.5 T", "--shape", "cuboid", "--size", "1 mm,1 mm,1 mm",
          "--source", "g"], "--surface-field"),
    ]
    for argv, field in cases:
        code, _, err = run_cli("record", "magnet", *argv)
        assert code == 2 and field in err, (argv, err)
    assert export_text() == before


# ---------------------------------------------------------------------------
# preferred value, prefer, retract, history
# ---------------------------------------------------------------------------
def test_materials_json_shows_the_measured_value_in_use(fresh_db, run_cli, record_json):
    hb_before = _handbook_rows("bismuth")
    r = record_json("material", "bismuth", "--chi", "-1.58e-4", "--source", "casting B3, Gouy balance")
    code, out, _ = run_cli("materials", "--format", "json")
    assert code == 0
    bi = next(m for m in json.loads(out) if m["id"] == "bismuth")
    assert bi["value_kind"] == "measured" and bi["source"] == "casting B3, Gouy balance"
    assert bi["chi_si"] == pytest.approx(-1.58e-4) and bi["value_id"] == r["value_id"]
    assert _handbook_rows("bismuth") == hb_before  # handbook rows never change


def test_newest_measurement_by_date_then_entry_is_used(fresh_db, run_cli, record_json):
    # rule of matdb.data.catalog.choose_preferred (regression check)
    new = record_json("material", "bismuth", "--chi", "-1.60e-4", "--date", "2026-10-01", "--source", "a")
    old = record_json("material", "bismuth", "--chi", "-1.50e-4", "--date", "2025-10-01", "--source", "b")
    assert catalog.get_material("bismuth").value_id == new["value_id"]
    same_day = record_json("material", "bismuth", "--chi", "-1.55e-4", "--date", "2026-10-01", "--source", "c")
    assert catalog.get_material("bismuth").value_id == same_day["value_id"]  # later entry wins the tie
    assert old["preferred"] is False


def test_prefer_and_retract_cycle(fresh_db, run_cli, record_json):
    hb = _handbook_rows("bismuth")[0]
    m1 = record_json("material", "bismuth", "--chi", "-1.60e-4", "--date", "2026-10-01", "--source", "a")
    m2 = record_json("material", "bismuth", "--chi", "-1.20e-4", "--date", "2026-11-01", "--source", "bad run")
    assert catalog.get_material("bismuth").value_id == m2["value_id"]

    code, _, err = run_cli("prefer", "bismuth", str(m1["value_id"]))
    assert code == 0, err
    assert catalog.get_material("bismuth").value_id == m1["value_id"]
    code, _, err = run_cli("prefer", "bismuth", str(hb["value_id"]))
    assert code == 0, err
    assert catalog.get_material("bismuth").value_kind == hb["value_kind"]

    code, _, err = run_cli("retract", str(m2["value_id"]), "--reason", "sample holder was magnetic")
    assert code == 0, err
    code, out, _ = run_cli("history", "bismuth", "--format", "json")
    rows = {r["value_id"]: r for r in json.loads(out)}
    assert rows[m2["value_id"]]["retracted"] is True
    assert rows[m2["value_id"]]["retract_reason"] == "sample holder was magnetic"
    assert rows[hb["value_id"]]["preferred"] is True and rows[hb["value_id"]]["preference_set"] is True

    # a retracted value is never used, even when preferred explicitly
    code, _, err = run_cli("prefer", "bismuth", str(m2["value_id"]))
    assert code == 2 and "retracted" in err
    code, _, _ = run_cli("prefer", "bismuth", str(m1["value_id"]))
    code, _, err = run_cli("retract", str(m1["value_id"]), "--reason", "wrong sample")
    assert code == 0, err
    assert catalog.get_material("bismuth").value_id == hb["value_id"]  # back to the handbook value
    assert _handbook_rows("bismuth")[0] == hb


def test_history_json_contract_keys(fresh_db, run_cli, record_json):
    record_json("material", "bismuth", "--chi", "-1.6e-4", "--uncertainty", "2%", "--source", "s",
         "--measured-by", "me", "--date", "2026-11-01", "--method", "Gouy")
    code, out, _ = run_cli("history", "bismuth", "--format", "json")
    assert code == 0
    rows = json.loads(out)
    for key in ("value_id", "value_kind", "chi_si", "source", "measured_by", "date", "method", "uncertainty",
                "preferred", "retracted"):  # JSON contract keys (regression check)
        assert all(key in r for r in rows), key
    assert sum(r["preferred"] for r in rows) == 1
    assert [r["value_id"] for r in rows] == sorted(r["value_id"] for r in rows)
    code, out, _ = run_cli("history", "N42", "--format", "json")
    assert code == 0 and all("br_t" in r and "preferred" in r for r in json.loads(out))
    code, out, _ = run_cli("history", "bismuth")
    assert code == 0 and "Gouy" in out


def test_prefer_and_retract_errors_write_nothing(fresh_db, run_cli, export_text):
    bi_hb = _handbook_rows("bismuth")[0]
    sb_hb = _handbook_rows("antimony")[0]
    before = export_text()
    cases = [
        (("prefer", "bismuth", str(sb_hb["value_id"])), "VALUE-ID"),  # a value of another material
        (("prefer", "bismuth", "abc"), "VALUE-ID"),
        (("prefer", "bismuth", "999999"), "VALUE-ID"),
        (("prefer", "unobtainium", "1"), "unobtainium"),
        (("retract", str(bi_hb["value_id"]), "--reason", "x", "--id", "bismuth"), "published"),
        (("retract", "999999", "--reason", "x"), "VALUE-ID"),
        (("retract", "1", "--reason", " "), "--reason"),
    ]
    for argv, field in cases:
        code, _, err = run_cli(*argv)
        assert code == 2 and field in err, (argv, err)
    assert export_text() == before


def test_library_record_and_retract(fresh_db):
    r = lab_store.record_material_value("bismuth", chi=-1.6e-4, source="lib call", date="2026-11-02")
    assert r["value_kind"] == "measured" and r["preferred"]
    out = lab_store.retract(r["value_id"], "x", "bismuth")
    assert out["retracted"] and out["retract_reason"] == "x"
    with pytest.raises(InputError, match="already retracted"):
        lab_store.retract(r["value_id"], "x", "bismuth")
    with pytest.raises(NotFoundError):
        lab_store.history("no-such-thing")


def test_allow_paramagnetic_and_new_material(fresh_db, run_cli, record_json):
    code, _, err = run_cli("record", "material", "bismuth", "--chi", "2e-6", "--allow-paramagnetic",
                           "--source", "contaminated casting (iron inclusions)")
    assert code == 0, err
    r = record_json("material", "bismuth-tin-eutectic", "--name", "Bi-Sn eutectic", "--density", "8.56 g/cm^3",
             "--chi", "-9.5e-5", "--source", "own casting, Gouy balance")
    assert r["created_material"] is True
    m = catalog.get_material("bismuth-tin-eutectic")
    # 8.56 g/cm^3 = 8560 kg/m^3 (SI prefixes)
    assert m.density_kg_m3 == pytest.approx(8560.0) and m.value_kind == "measured" and m.kind == "diamagnetic"
    code, out, _ = run_cli("materials", "--format", "json")
    assert "bismuth-tin-eutectic" in {x["id"] for x in json.loads(out)}


# ---------------------------------------------------------------------------
# magnets
# ---------------------------------------------------------------------------
def test_record_magnet_br_merges_with_published(fresh_db, run_cli, record_json):
    pub = catalog.get_grade("N42")
    r = record_json("magnet", "N42", "--br", "12650 G", "--source", "batch 7, gaussmeter + fluxmeter")
    g = catalog.get_grade("N42")
    # 1 G = 1e-4 T (CGS-emu definition)
    assert g.br_t == pytest.approx(1.265) and g.value_kind == "measured" and g.value_id == r["value_id"]
    assert g.hcj_ka_m == pub.hcj_ka_m  # the rest comes from the published row
    r2 = record_json("magnet", "N77Q", "--family", "ndfeb", "--br", "1.27 T", "--hcj", "12 kOe",
              "--alpha", "-0.12 %/K", "--max-temp", "80 degC", "--density", "7.5 g/cm^3", "--source", "s")
    assert r2["created_grade"] is True
    g2 = catalog.get_grade("N77Q")
    # 1 Oe = 1000/(4 pi) A/m (CGS-emu definition)
    assert g2.family == "NdFeB" and g2.hcj_ka_m == pytest.approx(12 * 1000 / (4 * math.pi), rel=1e-9)
