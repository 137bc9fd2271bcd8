"""`matdb materials | magnets | show | convert`: the JSON contract, formats, and errors."""

from __future__ import annotations

import io
import json
import math
import subprocess
import sys

import pandas as pd
import pytest

MATERIAL_KEYS = {"id", "name", "chi_si", "chi_perp_si", "chi_par_si", "density_kg_m3", "source", "value_kind"}
MAGNET_KEYS = {"grade", "family", "br_t", "br_min_t", "hcb_ka_m", "hcj_ka_m", "bhmax_kj_m3",
               "alpha_br_pct_per_k", "beta_hcj_pct_per_k", "max_temp_c", "density_kg_m3", "source"}


def test_materials_json_contract(run_cli):
    code, out, err = run_cli("materials", "--format", "json")
    assert code == 0, err
    rows = json.loads(out)
    assert all(MATERIAL_KEYS <= set(r) for r in rows)
    by_id = {r["id"]: r for r in rows}
    # Required coverage (issue 2) and anisotropy of pyrolytic graphite.
    for mid in ["pyrolytic-graphite", "bismuth", "antimony", "graphite", "diamond", "mercury", "silver",
                "gold", "lead", "copper", "zinc", "water", "fused-silica", "sodium-chloride", "pmma",
                "ptfe", "polyethylene", "polycarbonate", "aluminium", "titanium", "air"]:
        assert mid in by_id, mid
    pg = by_id["pyrolytic-graphite"]
    assert pg["chi_si"] == pg["chi_perp_si"] and pg["chi_par_si"] is not None
    assert abs(pg["chi_perp_si"]) > abs(pg["chi_par_si"])  # c-axis value is the large one (Simon & Geim 2000)
    assert by_id["bismuth"]["chi_perp_si"] is None and by_id["bismuth"]["chi_par_si"] is None
    # Schenck (1996): bismuth about -1.66e-4, water about -9.0e-6 (SI volume)
    assert by_id["bismuth"]["chi_si"] == pytest.approx(-1.66e-4, rel=0.04)
    assert by_id["water"]["chi_si"] == pytest.approx(-9.0e-6, rel=0.03)
    assert by_id["aluminium"]["chi_si"] > 0 and by_id["air"]["chi_si"] > 0  # paramagnetic references
    assert all(r["value_kind"] in ("handbook", "standard", "measured", "estimate") for r in rows)


def test_materials_csv_is_pandas_readable(run_cli):
    code, out, _ = run_cli("materials", "--format", "csv")
    assert code == 0
    df = pd.read_csv(io.StringIO(out))
    assert "chi_si" in df and df["chi_si"].dtype.kind == "f"
    assert (df.loc[df["id"] == "bismuth", "chi_si"] < 0).all()


def test_materials_table_is_aligned(run_cli):
    code, out, _ = run_cli("materials")
    assert code == 0
    lines = out.splitlines()
    header = next(i for i, l in enumerate(lines) if l.startswith("id"))
    assert set(lines[header + 1]) <= {"-", " "}
    assert any(l.startswith("bismuth") for l in lines)


def test_magnets_json_contract(run_cli):
    code, out, err = run_cli("magnets", "--format", "json")
    assert code == 0, err
    rows = json.loads(out)
    assert all(MAGNET_KEYS <= set(r) for r in rows)
    grades = {r["grade"]: r for r in rows}
    for g in ["N35", "N42", "N52", "N42SH"]:
        assert g in grades
    assert {r["family"] for r in rows} == {"NdFeB", "SmCo", "ferrite", "AlNiCo", "bonded-NdFeB"}
    # Common practice, no source: sintered NdFeB alpha(Br) about -0.12 %/K, SmCo about -0.035 %/K,
    # hard ferrite about -0.2 %/K with a positive coefficient of Hcj.
    for r in rows:
        if r["family"] == "NdFeB":
            assert -0.13 <= r["alpha_br_pct_per_k"] <= -0.09
        if r["family"] == "ferrite":
            assert r["alpha_br_pct_per_k"] == pytest.approx(-0.2, abs=0.03) and r["beta_hcj_pct_per_k"] > 0
    code, out, _ = run_cli("magnets", "--family", "SmCo", "--format", "json")
    assert {r["family"] for r in json.loads(out)} == {"SmCo"}


def test_show_material_and_grade(run_cli):
    code, out, _ = run_cli("show", "pyrolytic-graphite", "--format", "json")
    assert code == 0
    d = json.loads(out)
    assert d["type"] == "material" and d["values"] and d["values"][0]["source"]
    assert sum(v["preferred"] for v in d["values"]) == 1
    code, out, _ = run_cli("show", "N42SH", "--format", "json")
    assert code == 0 and json.loads(out)["grade"] == "N42SH"
    code, out, _ = run_cli("show", "bismuth")
    assert code == 0 and "values" in out
    code, out, err = run_cli("show", "bismut")
    assert code == 2 and "bismuth" in err and err.count("\n") == 1


# -- convert ---------------------------------------------------------------------------------
def test_convert_bismuth_molar_to_si(run_cli):
    # CRC molar value -280.1e-6 cm^3/mol, rho 9.78 g/cm^3, M 208.98 g/mol -> Schenck's -1.66e-4
    code, out, err = run_cli("convert", "-280.1e-6", "cm^3/mol", "--density", "9.78 g/cm^3",
                             "--molar-mass", "208.98 g/mol", "--to", "si-volume", "--format", "json")
    assert code == 0, err
    d = json.loads(out)
    assert d["chi_si"] == pytest.approx(-1.66e-4, rel=0.01)
    assert d["value"] == -280.1e-6 and d["from"] == "cgs-molar"


def test_convert_negative_exponent_forms(run_cli):
    a = run_cli("convert", "-1.31e-5", "cgs-volume", "--format", "json")
    b = run_cli("convert", "--format", "json", "--", "-1.31e-5", "cgs-volume")
    c = run_cli("convert", "-1.31e-5 cgs-volume", "--format", "json")
    for code, out, err in (a, b, c):
        assert code == 0, err
        assert json.loads(out)["chi_si"] == pytest.approx(-1.31e-5 * 4 * math.pi)


def test_convert_to_other_conventions_with_material(run_cli):
    code, out, err = run_cli("convert", "-1.66e-4", "si-volume", "--material", "bismuth", "--to", "cgs-molar",
                             "--format", "json")
    assert code == 0, err
    # back to CRC's molar value, within the rounding of the density and published SI figure
    assert json.loads(out)["result"] == pytest.approx(-280.1e-6, rel=0.02)


@pytest.mark.parametrize(
    "argv,needle",
    [
        (("convert", "-280.1e-6", "cm^3/mol"), "--density"),
        (("convert", "-280.1e-6", "cm^3/mol", "--density", "9.78 g/cm^3"), "--molar-mass"),
        (("convert", "-280.1e-6", "cm^3"), "accepted"),
        (("convert", "-280.1e-6", "cm^3/mol", "--density", "9.78 kg"), "--density"),
        (("convert", "-1e-5 cgs-volume", "cm^3/mol"), "unit"),
        (("convert", "-1e-5", "cgs-volume", "--material", "bismuth", "--density", "2 g/cm^3"), "contradicts"),
        (("convert", "abc", "si-volume"), "value"),
    ],
)
def test_convert_errors_one_line(run_cli, argv, needle):
    code, out, err = run_cli(*argv)
    assert code == 2 and out == ""
    assert needle in err and err.count("\n") == 1


def test_real_entry_point_subprocess():
    # the installed console script path: python -m matdb
    r = subprocess.run([sys.executable, "-m", "matdb", "convert", "-280.1e-6", "cm^3/mol", "--material", "bismuth",
                        "--format", "json"], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["chi_si"] < 0


def test_csv_output_neutralises_formulas_but_not_numbers(fresh_db, run_cli):
    # OWASP "CSV injection" guidance: text cells starting with = + - @ are escaped.
    code, _, err = run_cli("record", "material", "bismuth", "--chi", "-1.6e-4",
                           "--source", "=HYPERLINK(\"http://x\",\"y\")", "--date", "2026-01-05")
    assert code == 0, err
    code, out, _ = run_cli("materials", "--format", "csv")
    df = pd.read_csv(io.StringIO(out))
    row = df[df["id"] == "bismuth"].iloc[0]
    assert row["source"].startswith("'=HYPERLINK")
    assert row["chi_si"] == pytest.approx(-1.6e-4)  # negative number stays a number
