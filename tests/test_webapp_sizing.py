"""The Advisor page asks the question as people pose it (total mass, plate size, magnet
envelope) and sizes designs beyond the catalogue with a progress bar (Streamlit AppTest)."""

from __future__ import annotations

from pathlib import Path

import pytest

pytest.importorskip("streamlit")
from streamlit.testing.v1 import AppTest  # noqa: E402

APP = str(Path(__file__).resolve().parent.parent / "webapp" / "app.py")


def _advisor(timeout: int = 600) -> AppTest:
    at = AppTest.from_file(APP, default_timeout=timeout).run()
    at.switch_page("views/advisor.py").run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def _table(at, column):
    for d in at.dataframe:
        if column in d.value.columns:
            return d.value
    raise AssertionError(f"no table with column {column!r}")


def _request(at, envelope="24 x 24 x 15 mm"):
    at.text_input(key="adv_mass").set_value("0.3 g")
    at.radio(key="adv_mass_kind").set_value("total: plate and payload")
    at.text_input(key="adv_footprint").set_value("20 by 20 mm")
    at.text_input(key="adv_min_gap").set_value("0.5 mm")
    at.text_input(key="adv_temp_min").set_value("0 degC")
    at.text_input(key="adv_temp_max").set_value("50 degC")
    at.text_input(key="adv_budget").set_value("30 USD")
    at.text_input(key="adv_envelope").set_value(envelope)
    at.multiselect(key="adv_materials").set_value(["pyrolytic-graphite"])
    at.button(key="adv_submit").click().run()
    assert not at.exception, [e.message for e in at.exception]


@pytest.mark.slow
def test_total_mass_and_envelope_on_the_page():
    at = _advisor()
    _request(at)
    table = _table(at, "array_mm")
    assert {"plate_g", "magnet_count", "plate_mm"} <= set(table.columns)
    ok = table[table["feasible"].astype(bool)]
    assert not ok.empty
    # plate + payload = 0.3 g: no feasible plate weighs more than the total
    assert (ok["plate_g"] <= 0.3 + 1e-9).all()
    # arrays outside the envelope are rejected and say so
    out = table[table["reasons_text"].str.contains("outside the magnet envelope")]
    assert not out["feasible"].astype(bool).any()


def test_bad_envelope_is_a_message_next_to_the_form():
    at = _advisor()
    at.text_input(key="adv_envelope").set_value("24 x 24 mm")
    at.button(key="adv_submit").click().run()
    assert not at.exception
    assert any("magnet envelope" in e.value for e in at.error)


@pytest.mark.slow
def test_optimiser_on_the_page():
    at = _advisor()
    _request(at)
    at.session_state["opt_panel"] = True  # the optimiser's panel is built when opened
    at.run()
    at.button(key="opt_run").click().run()
    assert not at.exception, [e.message for e in at.exception]
    table = _table(at, "source")
    assert len(table) >= 1 and table["feasible"].astype(bool).all()
    assert any(d.label.startswith("Download the best sized design") for d in at.get("download_button"))
