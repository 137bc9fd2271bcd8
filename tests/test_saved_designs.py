"""Saved designs: save with a note, list, reopen, duplicate, delete, compare; bad input
writes nothing."""

from __future__ import annotations

import pytest

from matdb.data import saved_designs as sd
from matdb.design import load_design_text
from matdb.errors import InputError, NotFoundError
from matdb.reporting.presentation import design_text_from_fields


def _text(size="12.7 mm, 12.7 mm, 12.7 mm", payload="0.1 g", temp_min="20 degC", temp_max="40 degC"):
    return design_text_from_fields(dict(
        shape="cuboid", size=size, grade="N50", pattern="checkerboard", rows=2, cols=2,
        material="pyrolytic-graphite", plate_shape="rectangle", plate_size="12 mm, 12 mm, 1 mm", payload=payload,
        payload_height="2 mm", min_gap="0.2 mm", temp_min=temp_min, temp_max=temp_max))


def test_save_list_reopen_duplicate_delete(fresh_db):
    text = _text()
    row = sd.save_design("  demo desk toy  ", text, "demo: a first try", url=fresh_db)
    assert row["name"] == "demo desk toy" and row["note"] == "demo: a first try"
    listed = sd.list_designs(fresh_db)
    assert list(listed.columns) == sd.LIST_COLUMNS and list(listed["name"]) == ["demo desk toy"]
    # reopening gives back exactly the saved text, by name or by id
    assert sd.get_design("demo desk toy", fresh_db)["design_toml"] == text
    assert sd.get_design(row["id"], fresh_db)["design_toml"] == text
    copy = sd.duplicate_design("demo desk toy", url=fresh_db)
    assert copy["name"] == "demo desk toy (copy)" and copy["design_toml"] == text and copy["note"] == row["note"]
    assert sd.duplicate_design("demo desk toy", url=fresh_db)["name"] == "demo desk toy (copy 2)"
    named = sd.duplicate_design("demo desk toy", "demo hotter", url=fresh_db)
    assert named["name"] == "demo hotter"
    assert set(sd.list_designs(fresh_db)["name"]) == {"demo desk toy", "demo desk toy (copy)",
                                                      "demo desk toy (copy 2)", "demo hotter"}
    gone = sd.delete_design("demo desk toy (copy 2)", fresh_db)
    assert gone["design_toml"] == text
    assert "demo desk toy (copy 2)" not in set(sd.list_designs(fresh_db)["name"])
    with pytest.raises(NotFoundError, match="design: no saved design"):
        sd.get_design("demo desk toy (copy 2)", fresh_db)


def test_overwrite_needs_asking_and_moves_updated_at(fresh_db):
    first = sd.save_design("demo", _text(), "one", url=fresh_db)
    with pytest.raises(InputError, match="^name: a saved design called 'demo' exists"):
        sd.save_design("demo", _text(payload="0.2 g"), "two", url=fresh_db)
    assert sd.get_design("demo", fresh_db)["note"] == "one"
    second = sd.save_design("demo", _text(payload="0.2 g"), "two", overwrite=True, url=fresh_db)
    assert second["id"] == first["id"] and second["note"] == "two" and second["updated_at"] >= first["updated_at"]
    assert 'payload = "0.2 g"' in sd.get_design("demo", fresh_db)["design_toml"]


@pytest.mark.parametrize("name,text,note,field", [
    ("", _text(), "", "name"),
    ("x" * (sd.NAME_MAX + 1), _text(), "", "name"),
    ("bad", "[magnets\nshape = 1", "", "design"),
    ("bad", _text(size="-3 mm, 12.7 mm, 12.7 mm"), "", "magnets.size"),
    ("bad", _text(), "n" * (sd.NOTE_MAX + 1), "note"),
])
def test_bad_input_names_the_field_and_writes_nothing(fresh_db, name, text, note, field):
    sd.save_design("demo kept", _text(), url=fresh_db)
    with pytest.raises(InputError) as exc:
        sd.save_design(name, text, note, url=fresh_db)
    assert str(exc.value).startswith(field), str(exc.value)
    assert "\n" not in str(exc.value)
    assert list(sd.list_designs(fresh_db)["name"]) == ["demo kept"]


def test_duplicate_onto_an_existing_name_writes_nothing(fresh_db):
    sd.save_design("demo a", _text(), url=fresh_db)
    sd.save_design("demo b", _text(), url=fresh_db)
    with pytest.raises(InputError, match="^new_name:"):
        sd.duplicate_design("demo a", "demo b", url=fresh_db)
    with pytest.raises(NotFoundError):
        sd.delete_design("demo c", fresh_db)
    assert sorted(sd.list_designs(fresh_db)["name"]) == ["demo a", "demo b"]


def test_compare_two_to_four_key_figures_and_curves(fresh_db):
    from matdb.analysis.levitate import levitate

    sd.save_design("demo small", _text(size="6 mm, 6 mm, 6 mm"), url=fresh_db)
    sd.save_design("demo large", _text(), url=fresh_db)
    with pytest.raises(InputError, match="^designs: expected 2 to 4"):
        sd.evaluate_saved(["demo small"], fresh_db)
    with pytest.raises(InputError, match="^designs: expected different"):
        sd.evaluate_saved(["demo small", "demo small"], fresh_db)
    ev = sd.evaluate_saved(["demo small", "demo large"], fresh_db)
    table = sd.compare_table(ev).set_index("figure")
    assert list(table.columns) == ["demo small", "demo large"]
    # regression check: the table holds the levitation result of each saved text, in the unit its label names
    res = levitate(load_design_text(sd.get_design("demo large", fresh_db)["design_toml"]))
    assert table.loc["equilibrium gap (mm)", "demo large"] == pytest.approx(res["gap_m"] * 1e3, rel=1e-12)
    assert table.loc["vertical stiffness k_z (N/m)", "demo large"] == pytest.approx(res["k_z_n_m"], rel=1e-12)
    # magnet-field scaling (a field pattern shrinks with the magnets; common practice, no source):
    # half-inch cubes carry a plate higher than 6 mm cubes
    assert table.loc["equilibrium gap (mm)", "demo large"] > table.loc["equilibrium gap (mm)", "demo small"]
    curves = sd.compare_curves(ev)
    assert set(curves["design"]) == {"demo small", "demo large"}
    assert {"gap_mm", "force_mn", "weight_mn"} <= set(curves.columns)
    big = curves[curves["design"] == "demo large"]
    assert big["force_mn"].to_numpy() == pytest.approx([p["force_n"] * 1e3 for p in res["lift_curve"]], rel=1e-12)
