"""The local web page, in-process with Streamlit's AppTest: every page renders without an
exception and shows the numbers the library computes. Uses the temporary database of
tests/conftest.py (MATDB_URL)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from matdb import catalog
from matdb.units import G_STANDARD, MU0

pytest.importorskip("streamlit")
from streamlit.dataframe_util import convert_arrow_bytes_to_pandas_df  # noqa: E402
from streamlit.testing.v1 import AppTest  # noqa: E402

APP = str(Path(__file__).resolve().parent.parent / "webapp" / "app.py")
PAGES = ["pages/materials.py", "pages/magnets.py", "pages/design.py", "pages/advisor.py", "pages/lab_values.py"]


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
    at.switch_page("pages/magnets.py").run()
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
