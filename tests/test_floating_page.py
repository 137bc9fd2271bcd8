"""Design page, floating-magnet mode: the payload-range input gives the schedule over
that range (Streamlit AppTest, in-process; database of tests/conftest.py)."""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("streamlit")
from streamlit.testing.v1 import AppTest

from matdb.analysis import magnet_synthesis as M  # noqa: E402 (after the streamlit skip)
from matdb.design import parse_stabilized  # noqa: E402

REPO = Path(__file__).resolve().parent.parent
APP = str(REPO / "webapp" / "app.py")


def _table(at, column):
    for d in at.dataframe:
        if column in d.value.columns:
            return d.value
    raise AssertionError(f"no table with column {column!r}")


def test_design_page_payload_range_schedule():
    at = AppTest.from_file(APP, default_timeout=180).run()
    at.switch_page("views/design.py").run()
    at.radio(key="design_source").set_value("design file").run()
    at.text_area(key="design_text").set_value((REPO / "examples" / "floating_magnet.toml").read_text()).run()
    assert not at.exception, [e.message for e in at.exception]
    at.text_input(key="d_payload_range").set_value("0 g..1 g").run()
    at.number_input(key="d_payload_steps").set_value(3).run()
    assert not at.exception, [e.message for e in at.exception]
    sched = _table(at, "lifter_travel_mm").sort_values("payload_g")
    assert sched["payload_g"].to_numpy() == pytest.approx([0.0, 0.5, 1.0])
    # common practice, no source: more payload, the lifter comes closer (travel grows)
    assert (np.diff(sched["lifter_travel_mm"].to_numpy()) > 0).all()
    assert any("Narrowest window" in c.value for c in at.caption)
    # a bad range is shown beside the field, the page keeps working
    at.text_input(key="d_payload_range").set_value("2 g..1 g").run()
    assert not at.exception
    assert any("payload range" in e.value for e in at.error)


def test_design_page_suggests_designs_with_progress(monkeypatch, tmp_path):
    # the search from the page (a reduced size list keeps the test short); every shown
    # design carries feasible and its reasons
    monkeypatch.setenv("MATDB_CACHE_DIR", str(tmp_path / "cache"))
    monkeypatch.setattr(M, "FLOATERS", (("cylinder", (6.35, 3.175)), ("ring", (12.7, 6.35, 6.35))))
    monkeypatch.setattr(M, "LIFTERS", (("cylinder", (25.4, 25.4)), ("cylinder", (50.8, 25.4))))
    at = AppTest.from_file(APP, default_timeout=300).run()
    at.switch_page("views/design.py").run()
    at.radio(key="design_source").set_value("design file").run()
    at.text_area(key="design_text").set_value((REPO / "examples" / "floating_magnet.toml").read_text()).run()
    at.text_input(key="fm_s_range").set_value("0 g..1 g").run()
    at.button(key="fm_s_go").click().run()
    assert not at.exception, [e.message for e in at.exception]
    designs = _table(at, "travel_mm")
    assert len(designs) >= 1 and "feasible" in designs.columns
    assert designs["feasible"].iloc[0]
    # the best design is offered as a design file that parses back (the saved-file contract)
    best_text = at.session_state["fm_search"][3]
    d = parse_stabilized(tomllib.loads(best_text))
    assert d.payload_range == pytest.approx((0.0, 1e-3))
