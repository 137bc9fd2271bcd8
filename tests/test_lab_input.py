"""What people type for a lab value (matdb.data.lab_input), parsed and checked.

Outside references: NIST SP 811 (2008) for 1 G = 1e-4 T and 1 Oe = 1000/(4 pi) A/m; the
IUPAC Green Book, 3rd ed., 7.4, for the 4 pi between CGS-emu and SI susceptibilities;
CRC Handbook bismuth (chi_v = -1.66e-4 SI, density 9780 kg/m^3, M = 208.98 g/mol).
"""

from __future__ import annotations

import datetime as dt
import math

import pytest

from matdb.constants import DENSITY_RANGE_KG_M3
from matdb.data import lab_input as LI
from matdb.data.models import Material
from matdb.errors import InputError

BISMUTH = LI.MaterialFacts("bismuth", "Bismuth", "diamagnetic", 9780.0, 0.20898, False)


def test_remanence_and_coercivity_units():
    # NIST SP 811: 1 G = 1e-4 T; 1 Oe = 1000 / (4 pi) A/m (pint's Gaussian context goes
    # through the measured mu_0, about 1e-10 off these exact factors)
    assert LI.parse_br("12900 G", "br") == pytest.approx(1.29, rel=1e-9)
    assert LI.parse_hcj("12 kOe", "hcj") == pytest.approx(12e3 * 1000 / (4 * math.pi) / 1e3, rel=1e-9)
    assert LI.parse_alpha("-0.12 %/K", "alpha") == pytest.approx(-0.12)


def test_cgs_conventions_take_the_four_pi():
    # IUPAC Green Book 7.4: chi_v(SI) = 4 pi chi_v(CGS); molar: 4 pi 1e-6 chi_m rho / M
    chi, typed, conv = LI.parse_chi_text("-1.31e-5 cgs-volume", "chi", None, None, "density", "molar_mass")
    assert (typed, conv) == (-1.31e-5, "cgs-volume") and chi == pytest.approx(4 * math.pi * -1.31e-5, rel=1e-12)
    chi, _, conv = LI.parse_chi_text("-280e-6 cm^3/mol", "chi", 9780.0, 0.20898, "density", "molar_mass")
    assert conv == "cgs-molar" and chi == pytest.approx(4 * math.pi * 1e-6 * -280e-6 * 9780 / 0.20898, rel=1e-12)


def test_percentage_and_absolute_uncertainty():
    assert LI.parse_uncertainty("5 %", "uncertainty", -1.6e-4, "si-volume", None, None) == pytest.approx(8e-6)
    assert LI.parse_uncertainty("0.05e-5", "uncertainty", -1.6e-4, "cgs-volume", None, None) == \
        pytest.approx(4 * math.pi * 0.05e-5, rel=1e-12)


def test_build_chi_value_is_a_measured_unsaved_row():
    v = LI.build_chi_value(BISMUTH, {"chi": "-1.66e-4", "source": "Gouy balance, demo sample", "date": "2026-10-01",
                                     "temperature": "22 degC"})
    assert v.id is None and v.quality == "measured" and v.source_key == LI.LAB_SOURCE_KEY
    assert v.chi_si == pytest.approx(-1.66e-4) and v.temperature_k == pytest.approx(295.15)
    assert v.measured_on == dt.date(2026, 10, 1)


@pytest.mark.parametrize("fields,field", [
    ({"chi": "-1.6e-4"}, "source"),                                     # where it comes from is required
    ({"chi": "1.6e-4", "source": "s"}, "chi"),                          # a diamagnet's chi is negative
    ({"chi": "-0.5", "source": "s"}, "chi"),                            # not a dia- or paramagnet
    ({"chi": "0", "source": "s"}, "chi"),                               # zero is not a measurement
    ({"chi": "-1.6e-4", "chi_par": "-1e-5", "source": "s"}, "chi_par"),  # bismuth is isotropic
    ({"chi": "-1.6e-4", "source": "s", "date": "2999-01-01"}, "date"),  # in the future
    ({"chi": "-1.6e-4", "source": "s", "density": "0.5 kg/m^3"}, "density"),
])
def test_refusals_name_the_field(fields, field):
    with pytest.raises(InputError) as exc:
        LI.build_chi_value(BISMUTH, fields)
    assert exc.value.field == field


def test_plausibility_checks_are_the_constants():
    lo, hi = DENSITY_RANGE_KG_M3
    assert LI.check_density(lo, "d") == lo and LI.check_density(hi, "d") == hi
    for bad, check in ((lo * 0.99, LI.check_density), (2.0, LI.check_br), (-1.0, LI.check_hcj),
                       (5.0, LI.check_temp_coeff), (0.5, LI.check_chi_magnitude)):
        with pytest.raises(InputError, match="implausible") as exc:
            check(bad, "x")
        assert exc.value.field == "x"


def test_new_material_and_its_row():
    m = LI.new_material("bismuth-casting-b3", {"name": "Bismuth casting B3", "density": "9.75 g/cm^3",
                                               "chi": "-1.6e-4"})
    assert m.new and m.kind == "diamagnetic" and m.density == pytest.approx(9750.0)
    row = m.to_row()
    assert isinstance(row, Material) and row.origin == "user" and row.price_illustrative
    with pytest.raises(InputError) as exc:
        LI.new_material("Not A Slug", {"name": "x", "density": "1 g/cm^3"})
    assert exc.value.field == "material"
