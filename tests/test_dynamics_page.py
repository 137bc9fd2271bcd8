"""Design page, Dynamics section (Streamlit AppTest): plate drawing, modes table and the
chart of Q against pressure come from matdb.analysis.dynamics (no physics in webapp/)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

pytest.importorskip("streamlit")
from streamlit.dataframe_util import convert_arrow_bytes_to_pandas_df  # noqa: E402
from streamlit.testing.v1 import AppTest  # noqa: E402

APP = str(Path(__file__).resolve().parent.parent / "webapp" / "app.py")


def _frames(at):
    out = []
    for el in at.get("vega_lite_chart"):
        out += [(el, convert_arrow_bytes_to_pandas_df(ds.data.data)) for ds in el.proto.datasets]
    return out


@pytest.mark.slow
def test_design_page_dynamics_section():
    at = AppTest.from_file(APP, default_timeout=180).run()
    at.switch_page("views/design.py").run()
    assert not at.exception, [e.message for e in at.exception]
    at.session_state["d_view"] = "Dynamics: modes, damping, Q, noise"  # a view built when chosen
    at.run()
    drawing = [df for _, df in _frames(at) if "ring" in df.columns and "x_mm" in df.columns]
    assert drawing, "no plate drawing"
    # the default 12 mm square: the outer ring spans 12 mm (design file), closed
    outer = drawing[0][drawing[0]["ring"] == 0]
    assert outer["x_mm"].max() - outer["x_mm"].min() == pytest.approx(12.0)
    at.checkbox(key="d_dyn_run").check().run()
    assert not at.exception, [e.message for e in at.exception]
    modes = next(d.value for d in at.dataframe if "frequency_hz" in d.value.columns)
    assert "vertical" in set(modes["mode"])
    sweep = [(el, df) for el, df in _frames(at) if "pressure_pa" in df.columns]
    assert sweep
    el, df = sweep[0]
    assert df["pressure_pa"].min() <= 1e-3 and df["pressure_pa"].max() >= 1e5
    spec = json.dumps(json.loads(el.proto.spec))
    assert "pressure (Pa)" in spec and '"log"' in spec
    # bad pressure: a message under the field, no exception
    at.text_input(key="d_dyn_pressure").set_value("fast").run()
    assert not at.exception and any("pressure" in e.value for e in at.error)


def test_lab_values_page_records_a_measured_q():
    """Lab values page: a measured Q needs a source note (nothing written without one) and
    then appears in the table."""
    at = AppTest.from_file(APP, default_timeout=120).run()
    at.switch_page("views/lab_values.py").run()
    assert not at.exception, [e.message for e in at.exception]
    at.session_state["lab_q_panel"] = True  # the panel is built when opened
    at.run()
    at.text_input(key="lab_q").set_value("40")
    at.text_input(key="lab_q_f").set_value("16 Hz")
    at.button(key="lab_q_submit").click().run()
    assert any("--source" in e.value or "source" in e.value for e in at.error)
    assert not any("frequency_hz" in d.value.columns for d in at.dataframe if hasattr(d.value, "columns"))
    at.text_input(key="lab_q_source").set_value("demo ring-down, notebook 5 p. 1")
    at.button(key="lab_q_submit").click().run()
    assert not at.exception, [e.message for e in at.exception]
    table = next(d.value for d in at.dataframe if "ring_down_s" in d.value.columns)
    assert table["q"].iloc[-1] == 40
