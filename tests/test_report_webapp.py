"""Report and drawing downloads on the Design page (Streamlit AppTest, in-process)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

pytest.importorskip("streamlit")
from streamlit.testing.v1 import AppTest  # noqa: E402

APP = str(Path(__file__).resolve().parent.parent / "webapp" / "app.py")


@pytest.mark.slow
def test_design_page_offers_report_and_drawing_downloads():
    at = AppTest.from_file(APP, default_timeout=600).run()
    at.switch_page("views/design.py").run()
    assert not at.exception, [e.message for e in at.exception]
    labels = [d.label for d in at.get("download_button")]
    assert not any(lbl.startswith("Report") for lbl in labels)  # made on request only
    at.session_state["d_report_panel"] = True  # the panel is built when opened
    at.session_state["d_view"] = "Field map and polarity"
    at.run()
    at.button(key="design_prepare").click().run()
    assert not at.exception, [e.message for e in at.exception]
    labels = [d.label for d in at.get("download_button")]
    for want in ("Report (HTML)", "Report (PDF, A4)", "Drawing (DXF)", "Drawing (SVG)"):
        assert want in labels, labels
    # the map on the page and the report share one chart specification (matdb.reporting.charts):
    # the field map carries the plate outline layer
    specs = [json.dumps(json.loads(c.proto.spec)) for c in at.get("vega_lite_chart")]
    assert any("plate outline" in s for s in specs)


@pytest.mark.slow
def test_advisor_page_offers_the_report_of_the_chosen_candidate():
    at = AppTest.from_file(APP, default_timeout=600).run()
    at.switch_page("views/advisor.py").run()
    assert not at.exception, [e.message for e in at.exception]
    at.session_state["adv_report_panel"] = True  # the panel is built when opened
    at.run()
    assert any(b.key == "adv_prepare" for b in at.button)
    assert any(s.key == "adv_paper" for s in at.selectbox)
