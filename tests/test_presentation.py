"""matdb.reporting.presentation: the tables and curves the page shows, checked against outside
formulas and handbook values (source beside each check)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from matdb.data import catalog
from matdb.reporting import presentation as P
from matdb.errors import InputError


def test_chi_in_convention_handbook_molar_and_missing_molar_mass():
    bi = catalog.get_material("bismuth")
    # CRC Handbook, magnetic susceptibility of the elements: Bi -280.1e-6 cm^3/mol
    v = P.chi_in_convention(bi.chi_si, bi.density_kg_m3, bi.molar_mass_kg_mol, "cgs-molar")
    assert v == pytest.approx(-280.1e-6, rel=1e-3)
    # a polymer has no molar mass: the molar column is empty, not invented
    assert math.isnan(P.chi_in_convention(-9.0e-6, 1190.0, None, "si-molar"))
    with pytest.raises(InputError, match="unit"):
        P.chi_in_convention(-9.0e-6, 1190.0, None, "gauss")


def test_materials_table_filter_and_compare():
    df = P.materials_table("si-mass")
    # si-mass is chi_v / rho (IUPAC Green Book sec. 7.4)
    assert df["chi_shown"].to_numpy() == pytest.approx((df["chi_si"] / df["density_kg_m3"]).to_numpy(), rel=1e-12)
    sub = P.filter_materials(df, "BISM")
    assert list(sub["id"]) == ["bismuth"]
    dia = P.filter_materials(df, diamagnets_only=True)
    assert (dia["chi_si"] < 0).all()
    comp = P.compare_materials(df, ["bismuth", "pyrolytic-graphite"], rounded=True)
    assert list(comp.columns) == ["bismuth", "pyrolytic-graphite"]
    assert all(isinstance(v, str) for v in comp.to_numpy().ravel())
    with pytest.raises(InputError, match="unknown"):
        P.compare_materials(df, ["unobtainium"])


def test_grade_curves_validation_and_marks():
    grades = catalog.magnets_df()
    curves = P.grade_temperature_curves(grades, ["N42"], 0, 150, n=31)
    g = catalog.get_grade("N42")
    # IEC 60404-8-1: Br(T) = Br20 (1 + alpha/100 (T - 20 C)); at 20 C exactly Br20
    at20 = np.interp(20.0, curves["temp_c"], curves["br_t"])
    assert at20 == pytest.approx(g.br_t, rel=1e-12)
    # lift over a diamagnet scales with B^2 (Berry and Geim 1997), hence with (Br/Br20)^2
    assert curves["relative_lift"].to_numpy() == pytest.approx((curves["br_t"] / g.br_t).to_numpy() ** 2, rel=1e-12)
    marks = P.grade_max_temp_marks(curves)
    assert list(marks["max_temp_c"]) == [g.max_temp_c]
    with pytest.raises(InputError, match="min < max"):
        P.grade_temperature_curves(grades, ["N42"], 100, 50)
    with pytest.raises(InputError, match="unknown grade"):
        P.grade_temperature_curves(grades, ["N99"], 0, 50)


# ---------------------------------------------------------------------------
# the one number format of the page
# ---------------------------------------------------------------------------

def test_fmt_chi_reads_the_same_as_table_columns_and_keeps_four_digits():
    # CRC Handbook, bismuth: -280.1e-6 cm^3/mol; the page and the table columns print it alike
    for v in (-1.7e-4, -280.1e-6, -9.05e-6, 2.2e-5):
        assert P.fmt_chi(v) == P.CHI_PRINTF % v
        assert float(P.fmt_chi(v)) == pytest.approx(v, rel=5e-4)
    assert P.fmt_chi(-1.7e-4) == "-1.700e-04"
    assert P.fmt_chi(None) == P.MISSING and P.fmt_chi(float("nan")) == P.MISSING


@pytest.mark.parametrize("value", [0.6412, 12.71, 0.0123456, 1399.7, 9.996, 0.5, 7.0, -3.14159, 123456.0, 4.2e-5])
def test_fmt_number_three_significant_digits(value):
    # significant-figure rounding as Python's own "%.3g" does it (the value read back agrees)
    text = P.fmt_number(value)
    assert float(text) == pytest.approx(float("%.3g" % value), rel=1e-12)


@pytest.mark.parametrize("value", [0.6412, 12.71, 0.0123456, 9.996, 0.5, 7.0, -3.14159, 123456.0, 4.2e-5])
def test_fmt_number_shows_three_digits(value):
    # three significant digits on screen, trailing zeros kept ("0.500", "7.00")
    digits = P.fmt_number(value).lstrip("-").split("e")[0].replace(".", "").lstrip("0")
    assert len(digits) == 3


def test_fmt_number_whole_numbers_print_without_a_decimal_point():
    # 1399.7 to three significant digits is 1400 ("%.3g" gives 1.4e+03): printed as a whole number
    assert P.fmt_number(1399.7) == "1400"


def test_fmt_number_units_and_missing():
    assert P.fmt_number(0.6412, "mm") == "0.641 mm"
    assert P.fmt_number(0.25, "1") == "0.250"
    assert P.fmt_number(None, "mm") == P.MISSING
    assert P.fmt_number(True) == "yes"
    assert P.fmt_length_mm(0.64e-3) == "0.640 mm"
    assert P.fmt_temperature_c(293.15) == "20.0 degC"
    assert P.unit_label("chi", "1") == "chi (dimensionless)"


def test_form_fields_give_back_the_same_design():
    """Regression check: a design put into the Design form and read back is the same design."""
    from dataclasses import replace

    from matdb.design import load_design_text

    fields = dict(P.DESIGN_FORM_DEFAULTS, size="6 mm, 6 mm, 3 mm", payload="0.35 g", temp_min="-5 degC",
                  temp_max="45 degC", back_plate=True, spacing="0.5 mm")
    design = load_design_text(P.design_text_from_fields(fields))
    back = P.form_fields_from_design(design)
    assert back["size"] == "6 mm, 6 mm, 3 mm" and back["payload"] == "0.35 g" and back["temp_min"] == "-5 degC"
    again = load_design_text(P.design_text_from_fields(back))
    assert replace(again, name=None, description=None) == replace(design, name=None, description=None)
    assert P.canonical_design_text(again, "") == P.canonical_design_text(design, "x")
    # the form cannot show a chi override: the editor takes it instead
    text = P.design_text_from_fields(P.DESIGN_FORM_DEFAULTS).replace('material = "pyrolytic-graphite"',
                                                                     'material = "pyrolytic-graphite"\nchi = -4e-4')
    assert P.form_fields_from_design(load_design_text(text)) is None
