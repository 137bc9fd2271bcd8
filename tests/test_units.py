"""Units and susceptibility conventions, checked against published values and against
pint's own Gaussian-system conversions (an outside reference for the 4 pi)."""

from __future__ import annotations

import math

import pint
import pytest
from hypothesis import given
from hypothesis import strategies as st

from matdb.errors import InputError
from matdb.units import (
    CONVENTIONS,
    Q_,
    chi_from_si_volume,
    chi_to_si_volume,
    parse_chi,
    parse_convention,
    parse_density,
    parse_flux_density,
    parse_length,
    parse_quantity,
    parse_temperature,
    protect_negative_numbers,
    tesla_to_gauss,
)

# CRC Handbook of Chemistry and Physics, "Magnetic susceptibility of the elements and
# inorganic compounds" (molar CGS, 1e-6 cm^3/mol) -- from memory of the CRC table; verify.
# Published SI volume values: J. F. Schenck, Med. Phys. 23, 815 (1996), Table I (from memory).
HANDBOOK = [
    # name, chi_mol cgs [cm^3/mol], density [kg/m^3], molar mass [kg/mol], published SI volume
    ("bismuth", -280.1e-6, 9780.0, 0.20898, -1.66e-4),
    ("water", -12.96e-6, 998.0, 0.018015, -9.05e-6),
    ("copper", -5.46e-6, 8960.0, 0.063546, -9.63e-6),
]


@pytest.mark.parametrize("name,chi_mol,rho,molar,published", HANDBOOK)
def test_molar_cgs_to_si_volume_matches_published(name, chi_mol, rho, molar, published):
    # Source: CRC molar values converted, compared with Schenck (1996) SI volume values.
    chi = chi_to_si_volume(chi_mol, "cgs-molar", rho, molar)
    assert chi == pytest.approx(published, rel=0.03)


def test_four_pi_agrees_with_pint_gaussian_context():
    # Outside reference: pint's Gaussian system. chi_SI / chi_cgs = (dM_SI/dH_SI)/(dM_cgs/dH_cgs)
    # with M in A/m vs emu/cm^3 (=1e3 A/m) and H in A/m vs Oe (=1e3/(4 pi) A/m).
    ureg = pint.UnitRegistry()
    oe_in_a_m = ureg.Quantity(1, "oersted").to("A/m", "Gaussian").magnitude
    emu_cm3_in_a_m = 1e3  # emu/cm^3 of magnetisation in A/m (Goldfarb and Fickett, NBS SP 696)
    factor = emu_cm3_in_a_m / oe_in_a_m
    assert chi_to_si_volume(1.0, "cgs-volume") == pytest.approx(factor, rel=1e-9)
    assert factor == pytest.approx(4 * math.pi, rel=1e-9)


def test_mass_conventions_both_routes():
    # Bismuth mass susceptibility: chi_g = chi_mol / M = -280.1e-6 / 208.98 cm^3/g (CRC).
    chi_g_cgs = -280.1e-6 / 208.98
    via_mass = chi_to_si_volume(chi_g_cgs, "cgs-mass", 9780.0)
    via_molar = chi_to_si_volume(-280.1e-6, "cgs-molar", 9780.0, 0.20898)
    assert via_mass == pytest.approx(via_molar, rel=1e-9)
    # SI mass = 4 pi 1e-3 x CGS mass (m^3/kg vs cm^3/g), Goldfarb and Fickett, NBS SP 696.
    si_mass = chi_from_si_volume(via_mass, "si-mass", 9780.0)
    assert si_mass == pytest.approx(4 * math.pi * 1e-3 * chi_g_cgs, rel=1e-12)


@given(
    st.floats(min_value=-1e-2, max_value=1e-2, allow_nan=False),
    st.sampled_from(CONVENTIONS),
    st.floats(min_value=1.0, max_value=25000.0),
    st.floats(min_value=1e-3, max_value=0.5),
)
def test_round_trip_every_convention(chi, conv, rho, molar):
    # Internal consistency: to SI and back is the identity.
    back = chi_from_si_volume(chi_to_si_volume(chi, conv, rho, molar), conv, rho, molar)
    assert back == pytest.approx(chi, rel=1e-12, abs=1e-300)


@pytest.mark.parametrize(
    "text,conv",
    [
        ("m^3/kg", "si-mass"), ("m3/kg", "si-mass"), ("m^3/mol", "si-molar"),
        ("cm^3/g", "cgs-mass"), ("cm^3/mol", "cgs-molar"), ("emu/(g Oe)", "cgs-mass"),
        ("emu/(mol Oe)", "cgs-molar"), ("cgs-volume", "cgs-volume"), ("si-volume", "si-volume"),
    ],
)
def test_accepted_unit_forms(text, conv):
    assert parse_convention(text) == conv


@pytest.mark.parametrize("bad", ["kg", "cm^3", "m^3/g", "emu", "T", ""])
def test_other_units_refused_with_list(bad):
    with pytest.raises(InputError, match="accepted"):
        parse_convention(bad)


def test_parse_chi_forms():
    assert parse_chi("-1.6e-4") == (-1.6e-4, -1.6e-4, "si-volume")
    chi, pub, conv = parse_chi("-1.31e-5 cgs-volume")
    assert conv == "cgs-volume" and chi == pytest.approx(-1.31e-5 * 4 * math.pi)
    with pytest.raises(InputError, match="molar_mass"):
        parse_chi("-280e-6 cm^3/mol", density_kg_m3=9780)
    with pytest.raises(InputError, match="density"):
        parse_chi("-1e-6 cm^3/g")
    with pytest.raises(InputError):
        parse_chi("5 kg")
    with pytest.raises(InputError):
        parse_chi("nan")


def test_quantities_people_type():
    assert parse_length("12.7 mm", "size") == pytest.approx(0.0127)
    assert parse_length("0.5 in", "size") == pytest.approx(0.0127)  # 1 in = 25.4 mm exactly (NIST SP 811)
    # 1 G = 1e-4 T (NIST SP 811, Appendix B.9), via pint's Gaussian context
    assert parse_flux_density("5000 G", "b") == pytest.approx(0.5, rel=1e-9)
    assert parse_flux_density("1320 mT", "b") == pytest.approx(1.32)
    assert tesla_to_gauss(1.0) == pytest.approx(1e4, rel=1e-9)
    assert parse_density("9.78 g/cm^3") == pytest.approx(9780.0)
    # 52 MGOe = 413.8 kJ/m^3 (1 MGOe = 7.9577 kJ/m^3, common practice)
    assert Q_("52 MGOe").to("kJ/m^3").magnitude == pytest.approx(413.8, rel=1e-3)


@pytest.mark.parametrize("text,kelvin", [("20 degC", 293.15), ("20 °C", 293.15), ("60 C", 333.15),
                                         ("293.15 K", 293.15), ("68 degF", 293.15), ("-40 degC", 233.15)])
def test_temperatures_with_offsets(text, kelvin):
    # Offset units: 0 degC = 273.15 K, degF = 5/9 K with 32 degF = 0 degC (ITS-90 / NIST SP 811).
    assert parse_temperature(text, "temperature") == pytest.approx(kelvin)


def test_temperature_errors():
    with pytest.raises(InputError, match="temperature"):
        parse_temperature("20", "temperature")
    with pytest.raises(InputError, match="absolute zero"):
        parse_temperature("-300 degC", "temperature")


@pytest.mark.parametrize("bad", ["12.7", "5 kg", "abc mm", "1e999 mm", "nan mm"])
def test_length_errors_name_field(bad):
    with pytest.raises(InputError, match="^size:"):
        parse_length(bad, "size")


def test_negative_length_refused():
    with pytest.raises(InputError, match="positive"):
        parse_length("-3 mm", "size")


def test_parse_quantity_dimension_error_message():
    with pytest.raises(InputError, match="expected a quantity with units"):
        parse_quantity("3 s", "kg", "mass")


def test_protect_negative_numbers():
    argv = ["convert", "-280.1e-6", "cm^3/mol", "--chi", "-1.6e-4", "--chi=-1.6e-4", "-h", "-280e-6 cm^3/mol"]
    out = protect_negative_numbers(argv)
    assert out[1] == " -280.1e-6" and out[4] == " -1.6e-4" and out[5] == "--chi=-1.6e-4"
    assert out[6] == "-h" and out[7] == " -280e-6 cm^3/mol"


@pytest.mark.parametrize("writable", [True, False])
def test_registry_built_with_or_without_its_definitions_cache(tmp_path, monkeypatch, writable):
    # pint's own cache of parsed definitions (cache_folder); a cache path that cannot be a
    # folder falls back to reading the definitions. 52 MGOe = 413.8 kJ/m^3 and 1 T = 10 kG in
    # the Gaussian context (common practice, no source)
    from matdb.units import registry

    target = tmp_path / "cache"
    if not writable:
        target.write_text("a file, not a folder")
    monkeypatch.setenv("MATDB_CACHE_DIR", str(target))
    for _ in range(2):  # the second build reads the cache when there is one
        ureg = registry.__wrapped__()
        assert ureg.Quantity("52 MGOe").to("kJ/m^3").magnitude == pytest.approx(413.8, rel=1e-3)
        assert ureg.Quantity(1, "T").to("gauss", "Gaussian").magnitude == pytest.approx(1e4, rel=1e-9)
        assert ureg.Quantity("20 degC").to("K").magnitude == pytest.approx(293.15)
    assert (target / "pint").is_dir() == writable
    if writable:
        assert any((target / "pint").iterdir())
