"""Persistent results cache (matdb.analysis.cache): a result is computed once per design
content and catalogue values, and a new lab value that takes over, a retraction or an
import computes afresh. Regression checks (the cache's own contract; the physics it
stores is checked against outside references in test_plate.py and test_advisor.py)."""

from __future__ import annotations

import pytest

from matdb.analysis import cache
from matdb.data import exchange, lab_store
from matdb.design import load_design_text
from matdb.reporting import presentation


def _bismuth_design_text(**changes) -> str:
    fields = dict(presentation.DESIGN_FORM_DEFAULTS, material="bismuth", **changes)
    return presentation.design_text_from_fields(fields)


@pytest.fixture
def counted(monkeypatch, tmp_path):
    """A fresh cache folder and a stand-in for the analysis that counts its calls."""
    monkeypatch.setenv("MATDB_CACHE_DIR", str(tmp_path / "cache"))
    calls = []

    def fake_levitate(design, temp_k=None, gap_m=None, payloads_kg=None, resolution_m=None):
        calls.append(design.plate.chi_perp)
        return {"chi_used": design.plate.chi_perp, "temp_k": temp_k}

    monkeypatch.setattr(cache, "_levitate_fn", fake_levitate)
    return calls


def test_same_content_computes_once_and_names_do_not_matter(fresh_db, counted):
    text = _bismuth_design_text()
    first = cache.levitate_call(load_design_text(text))
    assert not first.cached()
    out = first()
    assert counted == [out["chi_used"]]
    # the same design again, with a name and a description: read from disk, not computed
    named = load_design_text('name = "demo copy"\ndescription = "demo"\n' + text)
    again = cache.levitate_call(named)
    assert again.key == first.key and again.cached()
    assert again() == out and len(counted) == 1
    # another argument or another design content is another result
    assert cache.levitate_call(named, temp_k=300.0).key != first.key
    other = cache.levitate_call(load_design_text(_bismuth_design_text(payload="0.3 g")))
    assert other.key != first.key and not other.cached()


def test_lab_value_retraction_and_import_change_the_key(fresh_db, counted, tmp_path):
    text = _bismuth_design_text()
    key0 = cache.levitate_call(load_design_text(text)).key
    adv0 = cache.advise_call((("mass", "0.2 g"), ("footprint", "17 mm x 17 mm")), fresh_db).key
    cache.levitate_call(load_design_text(text))()
    assert len(counted) == 1

    # a value for another material leaves this design's result alone
    lab_store.record_material_value("copper", chi="-9.6e-6", source="regression check: other material",
                                    date="2026-10-01", url=fresh_db)
    assert cache.levitate_call(load_design_text(text)).key == key0

    # a new measured value of the plate material takes over: new key, computed afresh
    row = lab_store.record_material_value("bismuth", chi="-1.5e-4", source="regression check: new value",
                                          date="2026-10-02", url=fresh_db)
    call1 = cache.levitate_call(load_design_text(text))
    assert call1.key != key0 and not call1.cached()
    assert call1()["chi_used"] == pytest.approx(-1.5e-4)
    assert cache.advise_call((("mass", "0.2 g"), ("footprint", "17 mm x 17 mm")), fresh_db).key != adv0

    # retracting it brings the handbook value back: the first key again, read from disk
    lab_store.retract(row["value_id"], "regression check: retracted", "bismuth", url=fresh_db)
    call2 = cache.levitate_call(load_design_text(text))
    assert call2.key == key0 and call2.cached()

    # an import that adds a newer measured value: another key
    f = tmp_path / "lab.csv"
    f.write_text("material_id,chi,source,date\nbismuth,-1.55e-4,regression check: imported,2026-10-03\n",
                 encoding="utf-8")
    exchange.import_file(f, url=fresh_db)
    call3 = cache.levitate_call(load_design_text(text))
    assert call3.key not in (key0, call1.key) and not call3.cached()
    assert call3()["chi_used"] == pytest.approx(-1.55e-4)
    assert len(counted) == 3


def test_grade_values_are_part_of_the_key(fresh_db, counted):
    """A measured remanence of the design's grade changes the key (the magnets' field)."""
    text = _bismuth_design_text()
    design = load_design_text(text)
    key0 = cache.levitate_call(design).key
    grade = design.magnets.grade
    lab_store.record_magnet_value(grade, br="1.2 T", source="regression check: measured Br", date="2026-10-04",
                                  url=fresh_db)
    assert cache.levitate_call(load_design_text(text)).key != key0


def test_cache_folder_follows_the_environment(monkeypatch, tmp_path):
    monkeypatch.setenv("MATDB_CACHE_DIR", str(tmp_path / "c"))
    assert cache.cache_dir() == tmp_path / "c" / "results"
    assert cache.memory().location == str(tmp_path / "c" / "results")
