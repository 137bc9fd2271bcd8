"""Errors carry the field apart from the text (regression checks of the contract)."""

from __future__ import annotations

import pickle

import pytest

from matdb.errors import DataError, InputError, MatdbError, NotFoundError, PhysicsError
from matdb.units import parse_length
from webapp._shared import error_text


def test_field_kept_apart_and_named_in_text():
    e = InputError("expected a number such as -1.6e-4, got 'abc'", field="chi")
    assert e.field == "chi"
    assert e.message == "expected a number such as -1.6e-4, got 'abc'"
    assert str(e) == "chi: expected a number such as -1.6e-4, got 'abc'"
    assert e.shown_as("--chi") == "--chi: expected a number such as -1.6e-4, got 'abc'"
    assert e.shown_as("Susceptibility").startswith("Susceptibility: ")


def test_without_field():
    e = PhysicsError("no equilibrium gap")
    assert e.field is None and str(e) == "no equilibrium gap"
    assert e.shown_as("--gap") == "no equilibrium gap"


def test_shown_on_one_line():
    assert "\n" not in DataError("line one\nline two", field="seed").shown_as(None)


@pytest.mark.parametrize("cls", [MatdbError, InputError, NotFoundError, DataError, PhysicsError])
def test_pickle_keeps_field(cls):
    e = pickle.loads(pickle.dumps(cls("bad", field="magnets.size")))
    assert type(e) is cls and e.field == "magnets.size" and str(e) == "magnets.size: bad"


def test_units_errors_carry_the_field():
    with pytest.raises(InputError) as info:
        parse_length("12 kg", "magnets.size")
    assert info.value.field == "magnets.size"


def test_page_shows_the_field_by_its_label():
    # the page's words for a library field (regression check of webapp._shared's mapping)
    e = InputError("expected a temperature such as '20 degC', got 'hot'", field="conditions.temp_max")
    assert error_text(e) == "hottest temperature: expected a temperature such as '20 degC', got 'hot'"
    assert error_text(e, "compare").startswith("compare: hottest temperature: ")
    assert error_text(InputError("bad", field="some.key")) == "some.key: bad"
    assert error_text(PhysicsError("no equilibrium")) == "no equilibrium"
