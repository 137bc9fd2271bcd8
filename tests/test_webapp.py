"""The local web page, in-process with Streamlit's AppTest: every page renders without an
exception and shows the numbers the library computes. Uses the temporary database of
tests/conftest.py (MATDB_URL)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from matdb.data import catalog
from matdb.reporting import presentation
from matdb.constants import G_STANDARD, MU0

pytest.importorskip("streamlit")
from streamlit.dataframe_util import convert_arrow_bytes_to_pandas_df  # noqa: E402
from streamlit.testing.v1 import AppTest  # noqa: E402

APP = str(Path(__file__).resolve().parent.parent / "webapp" / "app.py")
PAGES = ["views/materials.py", "views/magnets.py", "views/design.py", "views/advisor.py", "views/lab_values.py"]


def _app() -> AppTest:
    at = AppTest.from_file(APP, default_timeout=120).run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def _charts(at: AppTest):
    return at.get("vega_lite_chart")


def _chart_frames(el) -> list:
    return [convert_arrow_bytes_to_pandas_df(ds.data.data) for ds in el.proto.datasets]


def _frame_with(el, column: str):
    for df in _chart_frames(el):
        if column in df.columns:
            return df
    raise AssertionError(f"no chart dataset with column {column!r}")


def _table(at: AppTest, column: str):
    """The (first) table on the page that has ``column`` (tables that are not widgets
    carry no key in the page protocol)."""
    for d in at.dataframe:
        if column in d.value.columns:
            return d.value
    raise AssertionError(f"no table with column {column!r}")


@pytest.fixture(scope="module")
def materials_page():
    return _app()


# ---------------------------------------------------------------------------
# every page
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("page", PAGES)
def test_every_page_renders_without_exception(page):
    at = _app()
    at.switch_page(page).run()
    assert not at.exception, [e.message for e in at.exception]
    assert len(at.title) == 1 and at.title[0].value  # a heading, plain words


# ---------------------------------------------------------------------------
# Materials
# ---------------------------------------------------------------------------

def test_materials_lead_chart_is_the_levitation_requirement(materials_page):
    at = materials_page
    chart = _charts(at)[0]
    need = _frame_with(chart, "required_t2_m")
    # Berry and Geim, Eur. J. Phys. 18, 307 (1997): water needs about 1400 T^2/m
    water = need.set_index("id").loc["water", "required_t2_m"]
    assert water == pytest.approx(1400, rel=0.05)
    # every value is mu0 rho g / |chi| of the value in use (Berry and Geim, eq. for a free diamagnet)
    props = {m.id: m for m in catalog.list_materials()}
    for _, row in need.iterrows():
        m = props[row["id"]]
        assert row["required_t2_m"] == pytest.approx(MU0 * m.density_kg_m3 * G_STANDARD / abs(m.chi_si), rel=1e-12)
    # sorted easiest first; pyrolytic graphite leads (|chi|/rho about ten times bismuth's: handbook values)
    assert list(need["required_t2_m"]) == sorted(need["required_t2_m"])
    assert need["id"].iloc[0] == "pyrolytic-graphite"
    # the axis is logarithmic and labelled with its unit
    spec = json.loads(chart.proto.spec)
    text = json.dumps(spec)
    assert '"type": "log"' in text and "T^2/m" in text


def test_materials_reach_band_separates_graphite_from_bismuth(materials_page):
    """Common practice: a ~1 mm pyrolytic graphite plate floats over a 2x2 NdFeB
    checkerboard; a bismuth plate of similar size does not (it needs more than any
    plate average, only small pieces near the magnet edges can float)."""
    at = materials_page
    need = _frame_with(_charts(at)[0], "verdict").set_index("id")
    assert need.loc["pyrolytic-graphite", "verdict"] == "plate floats"
    assert need.loc["bismuth", "verdict"] != "plate floats"
    at.session_state["reach_panel"] = True  # the table's panel is built when opened
    at.run()
    reach = _table(at, "peak_t2_m")
    assert len(reach) >= 3
    assert (reach["peak_t2_m"] > reach["plate_avg_t2_m"]).all()
    assert not any("paramagnetic" in v for v in need["verdict"] if v != "pulled in (paramagnetic)")


def test_materials_paramagnets_are_named_not_charted(materials_page):
    at = materials_page
    need = _frame_with(_charts(at)[0], "required_t2_m")
    para = [m.id for m in catalog.list_materials() if m.chi_si > 0]
    assert para, "seed data has paramagnetic references (aluminium, titanium, air)"
    assert not set(para) & set(need["id"])
    caption = " ".join(c.value for c in at.caption)
    assert "paramagnetic" in caption


def test_materials_unit_selector_shows_handbook_molar_value():
    at = _app()
    at.selectbox(key="chi_unit").set_value("cgs-molar").run()
    assert not at.exception
    table = _table(at, "chi_shown").set_index("id")
    # CRC Handbook, magnetic susceptibility of the elements: Bi -280.1e-6 cm^3/mol
    assert table.loc["bismuth", "chi_shown"] == pytest.approx(-280.1e-6, rel=1e-3)
    at.selectbox(key="chi_unit").set_value("cgs-volume").run()
    table = _table(at, "chi_shown").set_index("id")
    # Goldfarb and Fickett, NBS SP 696: chi_SI = 4 pi chi_CGS (volume)
    bi = catalog.get_material("bismuth")
    assert table.loc["bismuth", "chi_shown"] == pytest.approx(bi.chi_si / (4 * math.pi), rel=1e-12)
    # column label carries the unit
    assert any("emu/(cm^3 Oe)" in json.dumps(d.proto.columns) for d in at.dataframe)


def test_materials_filter_sort_and_compare():
    at = _app()
    at.text_input(key="mat_filter").set_value("graphite").run()
    table = _table(at, "chi_shown")
    assert len(table) >= 1 and all("graphite" in (i + n).lower() for i, n in zip(table["id"], table["name"]))
    at.text_input(key="mat_filter").set_value("").run()
    at.selectbox(key="mat_sort").set_value("density (lightest first)").run()
    table = _table(at, "chi_shown")
    assert list(table["density_kg_m3"]) == sorted(table["density_kg_m3"])
    at.multiselect(key="mat_compare").set_value(["bismuth", "pyrolytic-graphite"]).run()
    assert not at.exception
    comp = _table(at, "pyrolytic-graphite")
    assert list(comp.columns) == ["bismuth", "pyrolytic-graphite"]
    assert any("T^2/m" in str(i) for i in comp.index)


def test_materials_diamagnets_only():
    at = _app()
    at.checkbox(key="mat_diamag_only").check().run()
    table = _table(at, "chi_shown")
    ids = set(table["id"])
    # handbook: aluminium is paramagnetic, bismuth diamagnetic
    assert "bismuth" in ids and "aluminium" not in ids


# ---------------------------------------------------------------------------
# Magnets
# ---------------------------------------------------------------------------

def _magnets_page():
    at = _app()
    at.switch_page("views/magnets.py").run()
    assert not at.exception
    return at


def test_magnets_chart_br_and_relative_lift_against_temperature():
    at = _magnets_page()
    at.multiselect(key="mag_grades").set_value(["N42", "N42SH"]).run()
    at.slider(key="mag_trange").set_value((0, 200)).run()
    assert not at.exception
    chart = _charts(at)[0]
    curves = _frame_with(chart, "relative_lift")
    assert set(curves["grade"]) == {"N42", "N42SH"}
    for grade in ("N42", "N42SH"):
        g = catalog.get_grade(grade)
        part = curves[curves["grade"] == grade]
        # IEC 60404-8-1 reversible temperature coefficient: Br(T) = Br20 (1 + alpha/100 (T - 20 C))
        expected = g.br_t * (1 + g.alpha_br_pct_per_k / 100 * (part["temp_c"] - 20.0))
        assert part["br_t"].to_numpy() == pytest.approx(expected.to_numpy(), rel=1e-12)
        # lift over a diamagnet goes with B^2 (force density chi/(2 mu0) grad B^2)
        assert part["relative_lift"].to_numpy() == pytest.approx(((part["br_t"] / g.br_t) ** 2).to_numpy(), rel=1e-12)
        assert part["beyond_max"].to_numpy().tolist() == (part["temp_c"] > g.max_temp_c).tolist()
    marks = _frame_with(chart, "max_temp_c")
    marks = marks[[c for c in ("grade", "max_temp_c") if c in marks.columns]].drop_duplicates()
    tmax = dict(zip(marks["grade"], marks["max_temp_c"]))
    assert tmax["N42"] == catalog.get_grade("N42").max_temp_c
    assert tmax["N42SH"] == catalog.get_grade("N42SH").max_temp_c
    # common practice: the SH suffix allows a higher working temperature than plain N
    assert tmax["N42SH"] > tmax["N42"]
    text = json.dumps(json.loads(chart.proto.spec))
    assert "temperature (degC)" in text and "Br (T)" in text


def test_magnets_table_and_family_filter():
    at = _magnets_page()
    at.multiselect(key="mag_family").set_value(["SmCo"]).run()
    table = _table(at, "hcj_ka_m")
    assert len(table) >= 1 and set(table["family"]) == {"SmCo"}
    # common practice: SmCo alpha(Br) near -0.035 %/K
    assert table["alpha_br_pct_per_k"].between(-0.05, -0.02).all()
    labels = json.dumps([d.proto.columns for d in at.dataframe])
    assert "Br (T)" in labels and "illustrative" in labels


def test_magnets_empty_selection_is_a_message_not_a_crash():
    at = _magnets_page()
    at.multiselect(key="mag_grades").set_value([]).run()
    assert not at.exception
    assert any("Choose" in i.value for i in at.info)


# ---------------------------------------------------------------------------
# Design
# ---------------------------------------------------------------------------

def _design_page():
    at = _app()
    at.switch_page("views/design.py").run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def _view(at, name: str):
    """Open one of the Design page's views (tabs built only when chosen)."""
    at.session_state["d_view"] = name
    at.run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def _saved_panel(at):
    """Open the Design page's saved-designs panel (built only when opened)."""
    at.session_state["d_saved_panel"] = True
    at.run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def _metric(at, label):
    for m in at.metric:
        if m.label == label:
            return m.value
    raise AssertionError(f"no metric {label!r}")


def test_design_default_floats_with_weight_line_and_equilibrium():
    """Common practice: a ~1 mm pyrolytic graphite plate floats over a 2x2 NdFeB
    checkerboard of 1/2 inch cubes."""
    at = _design_page()
    assert _metric(at, "Floats") == "yes"
    assert _metric(at, "Laterally stable") == "yes"
    lift = _frame_with(_charts(at)[0], "force_mn")
    # weight = (plate volume x density + payload) g, plate 12 x 12 x 1 mm of the catalogue's graphite
    pg = catalog.get_material("pyrolytic-graphite")
    weight_mn = (12e-3 * 12e-3 * 1e-3 * pg.density_kg_m3 + 0.1e-3) * G_STANDARD * 1e3
    assert lift["weight_mn"].iloc[0] == pytest.approx(weight_mn, rel=1e-9)
    gap_mm = float(_metric(at, "Equilibrium gap").split()[0])
    # at the equilibrium the lift equals the weight (definition of the float gap)
    f_at_gap = float(np.interp(gap_mm, lift["gap_mm"], lift["force_mn"]))
    assert f_at_gap == pytest.approx(weight_mn, rel=0.02)
    text = json.dumps(json.loads(_charts(at)[0].proto.spec))
    assert "gap above the magnets (mm)" in text and "force (mN)" in text


def test_design_polarity_map_bill_of_materials_and_cautions():
    at = _view(_design_page(), "Field map and polarity")
    pol = None
    for el in _charts(at):
        for df in _chart_frames(el):
            if "label" in df.columns and "points" in df.columns:
                pol = df
    assert pol is not None
    # DEVELOPERS.md convention: magnet (row 0, col 0) at -x, -y points +z; checkerboard alternates
    first = pol.sort_values(["y_mm", "x_mm"]).iloc[0]
    assert first["points"] == "north up"
    assert sorted(pol["label"]) == ["N", "N", "S", "S"]
    _view(at, "Numbers and bill of materials")
    bom = _table(at, "grade_or_material").set_index("item")
    n50 = catalog.get_grade("N50")
    assert bom.loc["magnet", "count"] == 4
    assert bom.loc["magnet", "mass_g"] == pytest.approx(4 * 12.7e-3**3 * n50.density_kg_m3 * 1e3, rel=1e-9)
    summary = _table(at, "quantity").set_index("quantity")
    assert summary.loc["distance to 0.5 mT", "unit"] == "cm"
    labels = json.dumps([d.proto.columns for d in at.dataframe])
    assert "illustrative" in labels
    assert any(e.label == "Strong-magnet cautions" for e in at.expander)


def test_design_heavy_payload_does_not_float_and_bad_input_is_a_message():
    at = _design_page()
    at.text_input(key="d_payload").set_value("1 kg").run()
    assert not at.exception
    assert _metric(at, "Floats") == "no"
    at.text_input(key="d_size").set_value("-3 mm, 12.7 mm, 12.7 mm").run()
    assert not at.exception
    assert any("magnet size" in e.value for e in at.error)


def test_design_file_mode_bad_toml_and_floating_magnet_schedule():
    at = _design_page()
    at.radio(key="design_source").set_value("design file").run()
    at.text_area(key="design_text").set_value("[magnets\nshape = 1").run()
    assert not at.exception
    assert any("design" in e.value for e in at.error)
    text = (Path(__file__).resolve().parent.parent / "examples" / "floating_magnet.toml").read_text()
    at.text_area(key="design_text").set_value(text).run()
    assert not at.exception, [e.message for e in at.exception]
    sched = _table(at, "lifter_distance_mm").sort_values("payload_g")
    # common practice: a floater sits closer to the lifter as its payload grows
    assert (np.diff(sched["lifter_distance_mm"].to_numpy()) < 0).all()


# ---------------------------------------------------------------------------
# Advisor
# ---------------------------------------------------------------------------

def _advisor_page():
    at = _app()
    at.switch_page("views/advisor.py").run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def test_advisor_ranks_pyrolytic_graphite_first_for_a_small_payload():
    """Issue 5 ordering fact: pyrolytic graphite outranks bismuth for floating plates
    (|chi|/density about ten times larger: handbook values)."""
    at = _advisor_page()
    table = _table(at, "reasons_text")
    assert table["material"].iloc[0] == "pyrolytic-graphite"
    assert bool(table["feasible"].iloc[0])
    chart = _charts(at)[0]
    pts = _frame_with(chart, "cost_usd")
    assert {"material", "margin", "pareto"} <= set(pts.columns)
    text = json.dumps(json.loads(chart.proto.spec))
    assert "illustrative" in text and "worst-case margin" in text
    assert any(d.label.startswith("Download the ranking") for d in at.get("download_button"))


def test_advisor_bad_input_is_a_message_next_to_the_form():
    at = _advisor_page()
    at.text_input(key="adv_mass").set_value("-1 g")
    at.button(key="adv_submit").click().run()
    assert not at.exception
    assert any("payload mass" in e.value for e in at.error)
    at.text_input(key="adv_mass").set_value("0.2 g")
    at.text_input(key="adv_footprint").set_value("17 x 17")
    at.button(key="adv_submit").click().run()
    assert not at.exception
    assert any("footprint" in e.value for e in at.error)


def test_advisor_choice_opens_on_the_design_page():
    at = _advisor_page()
    table = _table(at, "reasons_text")
    second = int(table["rank"].iloc[1])
    _candidate_box(at).set_value(second).run()
    at.button(key="adv_open").click().run(timeout=600)  # computes the candidate: minutes on a loaded machine
    assert not at.exception, [e.message for e in at.exception]
    assert at.title[0].value == "Design"
    row = table.iloc[1]
    # "Open" fills the form (the candidate key of the box changed with each ranking: contract updated)
    assert at.radio(key="design_source").value == "form"
    assert at.selectbox(key="d_material").value == row["material"]
    assert at.selectbox(key="d_grade").value == row["grade"]
    assert _metric(at, "Floats") == ("yes" if row["feasible"] else _metric(at, "Floats"))


def _candidate_box(at):
    return [s for s in at.selectbox if s.label == "Candidate"][0]


def test_advisor_second_ranking_resets_the_candidate_box_and_says_by_how_much():
    at = _advisor_page()
    first = _table(at, "reasons_text")
    _candidate_box(at).set_value(int(first["rank"].iloc[2])).run()
    at.text_input(key="adv_mass").set_value("3 g")
    at.button(key="adv_submit").click().run()
    assert not at.exception, [e.message for e in at.exception]
    table = _table(at, "reasons_text")
    box = _candidate_box(at)
    assert box.value == int(table["rank"].iloc[0])
    assert box.options[box.index].startswith(f"#{int(table['rank'].iloc[0])}: {table['material'].iloc[0]}")
    # a rejected candidate says by how much it missed (worst-case margin against the 1.00 it needs)
    rejected = table[~table["feasible"].astype(bool)]
    short = [t for t in rejected["reasons_text"] if "worst-case margin" in t]
    assert short and all("needs 1.00" in t for t in short)



# ---------------------------------------------------------------------------
# Lab values
# ---------------------------------------------------------------------------

def test_lab_values_record_needs_a_source_and_then_is_in_use(fresh_db):
    at = _app()
    at.switch_page("views/lab_values.py").run()
    assert not at.exception, [e.message for e in at.exception]
    at.selectbox(key="lab_material").set_value("bismuth").run()
    before = len(_table(at, "value_kind"))
    at.text_input(key="lab_chi").set_value("-1.6e-4")
    at.button(key="lab_submit").click().run()
    assert not at.exception
    assert any("source" in e.value for e in at.error)
    assert len(_table(at, "value_kind")) == before  # nothing written
    at.text_input(key="lab_chi").set_value("-1.6e-4")
    at.text_input(key="lab_source").set_value("cast plate B3, Gouy balance, notebook 4 p. 12")
    at.button(key="lab_submit").click().run()
    assert not at.exception
    hist = _table(at, "value_kind")
    assert len(hist) == before + 1
    new = hist[hist["value_kind"] == "measured"].iloc[-1]
    assert new["chi_si"] == pytest.approx(-1.6e-4) and bool(new["preferred"])
    assert any("measured" in i.value for i in at.info)
    # the value in use is the measured one everywhere (issue 7: newest measured value preferred)
    assert catalog.get_material("bismuth", fresh_db).value_kind == "measured"


def test_design_large_magnets_show_the_strong_magnet_cautions():
    """Issue 6: cautions visible where large magnets are proposed (matdb.analysis.levitate marks a
    magnet over 25 mm as large)."""
    at = _design_page()
    at.text_input(key="d_size").set_value("30 mm, 30 mm, 15 mm").run()
    at.text_input(key="d_psize").set_value("30 mm, 30 mm, 1 mm").run()
    assert not at.exception, [e.message for e in at.exception]
    assert any("Strong magnets need care" in w.value for w in at.warning)
    exp = [e for e in at.expander if e.label == "Strong-magnet cautions"]
    assert exp and exp[0].proto.expanded


# ---------------------------------------------------------------------------
# matdb serve
# ---------------------------------------------------------------------------

def test_serve_command_is_local_and_without_telemetry(run_cli):
    from matdb.cli.serve import APP as SERVED, serve_command
    from matdb.errors import InputError

    cmd = serve_command(8765)
    assert cmd[1:4] == ["-m", "streamlit", "run"] and Path(cmd[4]) == SERVED and SERVED.is_file()
    opts = dict(zip(cmd[5::2], cmd[6::2]))
    assert opts == {"--server.headless": "true", "--server.port": "8765", "--server.address": "127.0.0.1",
                    "--browser.gatherUsageStats": "false", "--client.showErrorDetails": "none"}
    with pytest.raises(InputError, match="port"):
        serve_command(70000)
    code, out, _err = run_cli("serve", "--help")
    assert code == 0 and "--port" in out


def test_lab_values_chart_marks_the_value_in_use():
    at = _app()
    at.switch_page("views/lab_values.py").run()
    at.selectbox(key="lab_material").set_value("pyrolytic-graphite").run()
    assert not at.exception, [e.message for e in at.exception]
    pts = _frame_with(_charts(at)[0], "status")
    pg = catalog.get_material("pyrolytic-graphite")
    in_use = pts[pts["status"] == "in use"]
    assert list(in_use["value_id"]) == [pg.value_id]
    assert float(in_use["chi_si"].iloc[0]) == pytest.approx(pg.chi_si, rel=1e-12)


def _shown(markdown_source: str) -> str:
    """The text a message displays: the page backslash-escapes punctuation in user text."""
    import re

    return re.sub(r"\\(.)", r"\1", markdown_source)


def test_design_bad_payload_and_temperature_are_messages_next_to_the_fields():
    at = _design_page()
    at.text_input(key="d_payload").set_value("heavy").run()
    assert not at.exception
    assert any(_shown(e.value).startswith("payload mass:") for e in at.error)
    at.text_input(key="d_payload").set_value("0.1 g")
    at.text_input(key="d_temp_min").set_value("-300 degC").run()
    assert not at.exception
    assert any(_shown(e.value).startswith("coldest temperature:") for e in at.error)


def test_design_two_floaters_schedule_and_weight_shares():
    at = _design_page()
    at.radio(key="design_source").set_value("design file").run()
    text = (Path(__file__).resolve().parent.parent / "examples" / "floating_magnet_two_stations.toml").read_text()
    at.text_area(key="design_text").set_value(text).run()
    assert not at.exception, [e.message for e in at.exception]
    sched = _table(at, "min_plate_distance_mm")
    assert sched["station"].nunique() == 2
    stations = _table(at, "share_pct")
    # statics of a rigid body on supports: the shares of the weight add up to all of it
    assert stations["share_pct"].sum() == pytest.approx(100.0, rel=1e-9)
    # common practice: each floater sits closer to its lifter as the payload grows
    for _, part in sched.groupby("station"):
        assert (np.diff(part.sort_values("payload_g")["lifter_distance_mm"].to_numpy()) < 0).all()


# ---------------------------------------------------------------------------
# Saved designs on the Design page
# ---------------------------------------------------------------------------

def _saved_names(url=None):
    from matdb.data import saved_designs

    return list(saved_designs.list_designs(url)["name"])


def test_design_save_list_reopen_and_bad_input_writes_nothing(fresh_db):
    at = _saved_panel(_design_page())
    # a bad name: a message, nothing written
    at.text_input(key="d_save_name").set_value("   ")
    at.button(key="d_save").click().run()
    assert not at.exception
    assert any(_shown(e.value).startswith("not saved: name:") for e in at.error)
    assert _saved_names(fresh_db) == []
    # a bad design: no save at all (the button is off and nothing is written)
    at.text_input(key="d_size").set_value("-3 mm, 12.7 mm, 12.7 mm").run()
    assert not at.exception
    assert _saved_names(fresh_db) == []
    at.text_input(key="d_size").set_value("6 mm, 6 mm, 6 mm").run()
    at.text_input(key="d_save_name").set_value("demo small cubes")
    at.text_area(key="d_save_note").set_value("demo: 6 mm cubes")
    at.button(key="d_save").click().run()
    assert not at.exception, [e.message for e in at.exception]
    assert _saved_names(fresh_db) == ["demo small cubes"]
    assert "demo small cubes" in list(_table(at, "note")["name"])
    # the same name again is refused without the replace box; nothing changes
    at.text_input(key="d_save_name").set_value("demo small cubes")
    at.button(key="d_save").click().run()
    assert any("exists" in e.value for e in at.error)
    assert _saved_names(fresh_db) == ["demo small cubes"]
    # change the form, then reopen the saved design: the form gets its values back
    at.text_input(key="d_size").set_value("12.7 mm, 12.7 mm, 12.7 mm").run()
    at.selectbox(key="d_saved_pick").set_value("demo small cubes")
    at.button(key="d_saved_open").click().run()
    assert not at.exception, [e.message for e in at.exception]
    assert at.text_input(key="d_size").value == "6 mm, 6 mm, 6 mm"
    assert at.radio(key="design_source").value == "form"


def test_design_duplicate_delete_and_compare(fresh_db):
    from matdb.data import saved_designs
    from matdb.design import load_design_text
    from matdb.analysis.levitate import levitate
    from matdb.reporting.presentation import DESIGN_FORM_DEFAULTS, design_text_from_fields

    small = design_text_from_fields(dict(DESIGN_FORM_DEFAULTS, size="6 mm, 6 mm, 6 mm"))
    saved_designs.save_design("demo small", small, "demo", url=fresh_db)
    saved_designs.save_design("demo large", design_text_from_fields(DESIGN_FORM_DEFAULTS), "demo", url=fresh_db)
    at = _saved_panel(_design_page())
    at.selectbox(key="d_saved_pick").set_value("demo small")
    at.button(key="d_saved_dup").click().run()
    assert not at.exception
    assert sorted(_saved_names(fresh_db)) == ["demo large", "demo small", "demo small (copy)"]
    at.selectbox(key="d_saved_pick").set_value("demo small (copy)").run()
    assert at.button(key="d_saved_delete").disabled  # deleting needs the confirmation box first
    at.checkbox(key="d_saved_delete_confirm").check().run()
    at.button(key="d_saved_delete").click().run()
    assert not at.exception
    assert sorted(_saved_names(fresh_db)) == ["demo large", "demo small"]
    _view(at, "Compare saved designs")
    at.multiselect(key="d_compare").set_value(["demo small", "demo large"]).run()
    assert not at.exception, [e.message for e in at.exception]
    table = _table(at, "figure").set_index("figure")
    # regression check: the shown gap is the levitation result of the saved text, 3 significant digits
    res = levitate(load_design_text(small))
    assert float(table.loc["equilibrium gap (mm)", "demo small"]) == pytest.approx(res["gap_m"] * 1e3, rel=5e-3)
    chart = [c for c in _charts(at) if "saved designs" in json.dumps(json.loads(c.proto.spec))][0]
    curves = _frame_with(chart, "design")
    assert set(curves["design"]) == {"demo small", "demo large"}
    text = json.dumps(json.loads(chart.proto.spec))
    assert "gap above the magnets (mm)" in text and "lift (mN)" in text


# ---------------------------------------------------------------------------
# one number format, words beside colours, boxes that follow the state
# ---------------------------------------------------------------------------

def test_materials_table_shows_dashes_not_none_and_units_in_words():
    at = _app()
    assert not at.exception
    el = [d for d in at.dataframe if "chi_perp_shown" in d.value.columns][0]
    cols = json.dumps(el.proto.columns)
    assert "(1)" not in cols and "dimensionless" in cols
    df = el.value
    # numbers stay numbers (the table sorts by value); bismuth is isotropic: no perpendicular value
    assert df.set_index("id").loc["bismuth", "chi_perp_shown"] != df.set_index("id").loc["bismuth", "chi_perp_shown"]
    # the text shown: the page's scientific format, a dash where there is no value, never "None"
    shown = convert_arrow_bytes_to_pandas_df(el.proto.arrow_data.styler.display_values)
    shown.columns = df.columns
    shown = shown.set_index(df["id"])
    assert shown.loc["bismuth", "chi_perp_shown"] == presentation.MISSING
    # CRC Handbook: bismuth about -1.66e-4 (SI volume); four digits in exponent form, as every page prints it
    assert shown.loc["bismuth", "chi_shown"] == presentation.fmt_chi(df.set_index("id").loc["bismuth", "chi_shown"])
    assert "e-04" in shown.loc["bismuth", "chi_shown"]
    assert not shown.isin(["None", "nan", "NaN"]).any().any()
    spec = json.dumps(json.loads(_charts(at)[0].proto.spec))
    assert '"shape"' in spec  # verdicts carry a marker shape as well as a colour


def test_magnets_grades_differ_by_hue_and_shape_and_the_legend_speaks_words():
    at = _magnets_page()
    at.multiselect(key="mag_grades").set_value(["N42", "N42SH", "N52"]).run()
    assert not at.exception
    spec = json.loads(_charts(at)[0].proto.spec)
    text = json.dumps(spec)
    assert "within rating" in text and "above max working T" in text
    assert '"false"' not in text.lower().replace('"false": ', "")
    colours = shapes = None
    for layer in spec["layer"]:
        enc = layer.get("encoding", {})
        if "shape" in enc:
            shapes = enc["shape"]["scale"]["range"]
            colours = enc["color"]["scale"]["range"]
    assert len(set(colours)) == 3 and len(set(shapes)) == 3


def test_lab_values_record_clears_the_form_and_asks_before_taking_over(fresh_db):
    at = _app()
    at.switch_page("views/lab_values.py").run()
    at.selectbox(key="lab_material").set_value("bismuth").run()
    old = catalog.get_material("bismuth", fresh_db)
    # first: record but keep the value in use (the box that asks is unticked)
    at.text_input(key="lab_chi").set_value("-1.6e-4")
    at.text_input(key="lab_source").set_value("demo bar A, Gouy balance")
    at.checkbox(key="lab_take_over").uncheck()
    at.button(key="lab_submit").click().run()
    assert not at.exception, [e.message for e in at.exception]
    assert catalog.get_material("bismuth", fresh_db).value_id == old.value_id
    msg = at.success[0].value.replace("\\", "")  # the page escapes Markdown characters in messages
    assert "-1.600e-04" in msg and "temperature not stated" in msg and f"value {old.value_id} stays in use" in msg
    # the form is empty again, the take-over box ticked again
    assert at.text_input(key="lab_chi").value == "" and at.text_input(key="lab_source").value == ""
    assert at.checkbox(key="lab_take_over").value is True
    # second: record and take over; the "value to use" box follows
    at.text_input(key="lab_chi").set_value("-1.65e-4")
    at.text_input(key="lab_source").set_value("demo bar B, Gouy balance")
    at.button(key="lab_submit").click().run()
    assert not at.exception
    hist = _table(at, "value_kind")
    new = hist[hist["value_kind"] == "measured"].iloc[-1]
    assert new["chi_si"] == pytest.approx(-1.65e-4) and bool(new["preferred"])
    assert catalog.get_material("bismuth", fresh_db).value_id == int(new["value_id"])
    assert at.selectbox(key="lab_prefer_id").value == int(new["value_id"])
    assert any("-1.650e-04" in i.value.replace("\\", "") for i in at.info)  # the info box: the same format
    chart = _charts(at)[0]
    pts = _frame_with(chart, "status")
    assert set(pts["status"]) >= {"in use", "kept"}
    spec = json.dumps(json.loads(chart.proto.spec))
    assert '"shape"' in spec and "dimensionless" in spec


# ---------------------------------------------------------------------------
# results cache: nothing recomputes unless its inputs changed
# ---------------------------------------------------------------------------

@pytest.fixture
def counted_levitate(fresh_db, monkeypatch, tmp_path):
    """A fresh database and results cache; counts the levitate analyses actually computed."""
    from matdb.analysis import cache
    from webapp import _results

    monkeypatch.setenv("MATDB_CACHE_DIR", str(tmp_path / "cache"))
    _results._RESULTS.clear()
    calls = []
    real = cache._levitate_fn

    def counting(design, **kw):
        calls.append(design.plate.material)
        return real(design, **kw)

    monkeypatch.setattr(cache, "_levitate_fn", counting)
    yield calls
    _results._RESULTS.clear()


def test_design_second_render_does_not_recompute_and_a_new_lab_value_does(counted_levitate, fresh_db):
    """Regression check of the results cache on the Design page: a second session, and a
    server restart (memory cleared, disk kept), show the result without computing it; a
    measured value of the plate material that takes over computes afresh."""
    from matdb.data import lab_store as labvalues
    from webapp import _results

    def gap_text():
        at = _design_page()
        assert not at.exception, [e.message for e in at.exception]
        return _metric(at, "Equilibrium gap")

    first = gap_text()
    assert len(counted_levitate) == 1
    assert gap_text() == first and len(counted_levitate) == 1  # another session: from memory
    _results._RESULTS.clear()
    assert gap_text() == first and len(counted_levitate) == 1  # a restarted server: from disk
    pg = catalog.get_material("pyrolytic-graphite")
    row = labvalues.record_material_value(
        "pyrolytic-graphite", chi_perp=repr(pg.chi_perp_si * 0.9), chi_par=repr(pg.chi_par_si),
        source="regression check: weaker measured chi_perp", date="2026-10-05", url=fresh_db)
    weaker = gap_text()
    assert len(counted_levitate) == 2
    assert float(weaker.split()[0]) < float(first.split()[0])  # weaker diamagnet floats lower (lift ~ |chi|)
    labvalues.retract(row["value_id"], "regression check done", "pyrolytic-graphite", url=fresh_db)
    assert gap_text() == first and len(counted_levitate) == 2  # the handbook value again: its stored result
