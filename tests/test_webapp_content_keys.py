"""The page's tables and results follow the catalogue's content, wherever a value is
recorded: a value recorded through the library (as ``matdb record`` or an import does,
not through the page) shows on the next run of a page that is already open, and a result
that does not use the changed value is not computed again. Streamlit AppTest, in-process."""

from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace

import pytest

from matdb.data import catalog
from matdb.data import lab_store

pytest.importorskip("streamlit")
from streamlit.testing.v1 import AppTest  # noqa: E402

APP = str(Path(__file__).resolve().parent.parent / "webapp" / "app.py")


def _app(page: str | None = None, timeout: float = 180) -> AppTest:
    at = AppTest.from_file(APP, default_timeout=timeout).run()
    if page:
        at.switch_page(page).run()
    assert not at.exception, [e.message for e in at.exception]
    return at


def _reach_table(at):
    at.session_state["reach_panel"] = True  # the table's panel is built when opened
    at.run()
    return next(d.value for d in at.dataframe if "plate_avg_t2_m" in d.value.columns)


def test_materials_reach_and_table_follow_a_value_recorded_elsewhere(fresh_db, monkeypatch):
    """The reach of the common arrangements is keyed on the values of the grades they use:
    a measured N42 remanence recorded outside the page recomputes it (at a fixed geometry
    B scales with Br, so -B dB/dz scales with Br^2: Furlani, Permanent Magnet and
    Electromechanical Devices (2001), ch. 4, field linear in the magnetisation); a bismuth
    value recorded elsewhere shows in the properties table without recomputing the reach."""
    from matdb.analysis import reach

    calls = []
    real = reach.arrangement_reach
    monkeypatch.setattr(reach, "arrangement_reach", lambda **kw: calls.append(1) or real(**kw))
    at = _app()
    before = _reach_table(at)
    n_first = len(calls)
    assert n_first == 1
    n42 = catalog.get_grade("N42", fresh_db)
    lab_store.record_magnet_value("N42", br=f"{n42.br_t * 0.9!r} T", source="regression check: weaker N42 bar",
                                  date="2026-11-02", url=fresh_db)
    at.run()
    assert not at.exception, [e.message for e in at.exception]
    after = _reach_table(at)
    assert len(calls) == 2
    n42_rows = before["grade"] == "N42"
    assert n42_rows.any()
    ratio = after.loc[n42_rows, "plate_avg_t2_m"].to_numpy() / before.loc[n42_rows, "plate_avg_t2_m"].to_numpy()
    assert ratio == pytest.approx(0.81, rel=1e-6)
    # a material value: the table shows it, the reach (grades only) is not computed again
    lab_store.record_material_value("bismuth", chi="-1.234e-4", source="regression check: demo bismuth bar",
                                    date="2026-11-02", url=fresh_db)
    at.run()
    assert not at.exception, [e.message for e in at.exception]
    table = next(d.value for d in at.dataframe if "chi_shown" in getattr(d.value, "columns", []))
    assert table.set_index("id").loc["bismuth", "chi_shown"] == pytest.approx(-1.234e-4)
    assert len(calls) == 2


def test_magnets_table_follows_a_value_recorded_elsewhere(fresh_db):
    at = _app("views/magnets.py")
    lab_store.record_magnet_value("N52", br="1.111 T", source="regression check: demo N52 bar",
                                  date="2026-11-02", url=fresh_db)
    at.run()
    assert not at.exception, [e.message for e in at.exception]
    table = next(d.value for d in at.dataframe if "br_t" in getattr(d.value, "columns", []))
    assert table.set_index("grade").loc["N52", "br_t"] == pytest.approx(1.111)


@pytest.mark.slow
def test_design_dynamics_recompute_only_when_the_plate_values_change(fresh_db, monkeypatch):
    """Dynamics are keyed on the design's content and the catalogue values it uses: a run
    of the page again reuses them, a measured plate susceptibility recorded elsewhere
    (not by the page) computes them afresh."""
    from webapp import _results

    prepared = []
    real = _results.prepare_dynamics
    monkeypatch.setattr(_results, "prepare_dynamics", lambda d, *a, **kw: prepared.append(1) or real(d, *a, **kw))
    _results._dynamics_prep.clear()
    _results._pressure_sweep.clear()
    at = _app("views/design.py")
    at.session_state["d_view"] = "Dynamics: modes, damping, Q, noise"  # a view built when chosen
    at.run()
    at.checkbox(key="d_dyn_run").check().run()
    assert not at.exception, [e.message for e in at.exception]
    assert len(prepared) == 1
    at.run()
    assert len(prepared) == 1
    pg = catalog.get_material("pyrolytic-graphite", fresh_db)
    row = lab_store.record_material_value(
        "pyrolytic-graphite", chi_perp=repr(pg.chi_perp_si * 0.95), chi_par=repr(pg.chi_par_si),
        source="regression check: measured plate", date="2026-11-02", url=fresh_db)
    at.run()
    assert not at.exception, [e.message for e in at.exception]
    assert len(prepared) == 2
    lab_store.retract(row["value_id"], "regression check done", "pyrolytic-graphite", url=fresh_db)
    at.run()
    assert len(prepared) == 2  # the handbook value again: its dynamics are still held


@pytest.mark.slow
def test_optimiser_result_follows_the_catalogue(fresh_db, monkeypatch):
    """The optimiser's result on the Advisor page is kept for the form values and the
    catalogue in force: shown again without running, run afresh after a value recorded
    elsewhere. (The optimiser itself is replaced by a stand-in that counts its runs.)"""
    from matdb.analysis import synthesis
    from webapp import _results

    runs = []

    def fake_optimise(req, **kw):
        runs.append(req)
        return SimpleNamespace(rows=[], notes=["regression check stand-in"], improvement=None, objective="margin")

    monkeypatch.setattr(synthesis, "optimise", fake_optimise)
    _results._OPTIMISED.clear()
    at = _app("views/advisor.py", timeout=900)  # a new catalogue ranks afresh: minutes on a loaded machine
    at.session_state["opt_panel"] = True  # the optimiser's panel is built when opened
    at.run()
    at.button(key="opt_run").click().run()
    assert not at.exception, [e.message for e in at.exception]
    assert len(runs) == 1 and any("No sized design" in w.value for w in at.warning)
    at.run()
    assert len(runs) == 1 and any("No sized design" in w.value for w in at.warning)
    lab_store.record_magnet_value("N52", br="1.35 T", source="regression check: demo N52 bar",
                                  date="2026-11-02", url=fresh_db)
    at.run()  # the stored result belongs to the old catalogue: nothing shown until asked again
    assert len(runs) == 1 and not any("No sized design" in w.value for w in at.warning)
    at.button(key="opt_run").click().run()
    assert len(runs) == 2
    _results._OPTIMISED.clear()
