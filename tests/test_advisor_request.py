"""matdb.advisor.request: footprints, weights and requests typed with units; errors name the field."""

from __future__ import annotations

import pytest

from matdb import advisor as A
from matdb.errors import InputError, NotFoundError

from advisor_cases import CUBE10_2X2, PLATE


def test_footprint_forms():
    assert A.parse_footprint("17 mm x 17 mm") == pytest.approx((0.017, 0.017))
    assert A.parse_footprint("17 x 12 mm") == pytest.approx((0.017, 0.012))
    assert A.parse_footprint("2 cm") == pytest.approx((0.02, 0.02))
    assert A.parse_footprint("0.5 in x 1 in") == pytest.approx((0.0127, 0.0254))  # 1 in = 25.4 mm (NIST SP 811)


@pytest.mark.parametrize("text", ["17 x 17", "17", "17 kg x 17 kg", "-3 mm x 4 mm", "mm x mm"])
def test_footprint_errors_name_the_field(text):
    with pytest.raises(InputError, match="--footprint"):
        A.parse_footprint(text)


def test_impossible_inputs_are_clear_errors():
    with pytest.raises(InputError, match=r"--mass: expected a mass of zero or more, got '-2 g'"):
        A.parse_request("-2 g", "17 mm x 17 mm")
    with pytest.raises(InputError, match="--mass"):
        A.parse_request("2", "17 mm x 17 mm")  # no unit
    with pytest.raises(InputError, match="--temp-min"):
        A.parse_request("1 g", "17 mm x 17 mm", temp_min="80 degC", temp_max="20 degC")
    with pytest.raises(InputError, match="--weights"):
        A.parse_weights("margin=1,colour=2")
    with pytest.raises(InputError, match="--thickness"):
        A.parse_request("1 g", "17 mm x 17 mm", thickness="0 mm")
    with pytest.raises(NotFoundError, match="material"):
        A.advise("1 g", PLATE, materials=["unobtainium"], arrangements=[CUBE10_2X2])


def test_weights_parse():
    w = A.parse_weights("cost=0.5, derating=0")
    assert (w.margin, w.cost, w.derating) == (1.0, 0.5, 0.0)
