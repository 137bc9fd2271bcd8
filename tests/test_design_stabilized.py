"""Floating-magnet design files (matdb.design.toml_io, matdb.design.model): parsing, refusals, round trip.

Unit conversions are checked against their definitions (1 in = 25.4 mm exactly, by the
1959 international yard and pound agreement; 1 g = 1e-3 kg; 0 degC = 273.15 K, SI
Brochure 9th ed.), catalogue values against the seed data the catalogue serves.
"""

from __future__ import annotations

import copy
import math
import tomllib
from pathlib import Path

import pytest
import tomli_w

from matdb.design import (
    DEFAULT_CLEARANCE_M,
    StabilizedDesign,
    parse_stabilized,
    design_to_toml,
    load_design,
)
from matdb.errors import InputError
from matdb.data.catalog import get_grade, get_material

REPO = Path(__file__).resolve().parent.parent
EXAMPLES = sorted((REPO / "examples").glob("floating_magnet*.toml"))


def base() -> dict:
    return {
        "lifter": {"shape": "cylinder", "size": ["1 in", "1 in"], "grade": "N42"},
        "floater": {"shape": "cuboid", "size": ["5 mm", "4 mm", "3 mm"], "grade": "N42", "payload": "0.5 g"},
        "plates": {"material": "pyrolytic-graphite", "thickness": "1 mm", "distance": "2.5 mm"},
    }


def test_parse_gives_si_floats():
    d = parse_stabilized(base())
    assert isinstance(d, StabilizedDesign) and not d.multi and d.mode == "stabilized"
    st = d.stations[0]
    assert st.lifter.size == pytest.approx((0.0254, 0.0254))  # 1 in = 25.4 mm (definition)
    assert st.floater.size == pytest.approx((5e-3, 4e-3, 3e-3))
    assert st.payload_kg == pytest.approx(0.5e-3)  # 1 g = 1e-3 kg
    assert st.plates.distance == pytest.approx(2.5e-3)
    assert st.plates.clearance == DEFAULT_CLEARANCE_M
    assert d.temperature_k == pytest.approx(293.15)  # 20 degC default (catalogue reference)
    assert st.floater.volume == pytest.approx(5e-3 * 4e-3 * 3e-3)
    assert st.lifter.volume == pytest.approx(math.pi / 4 * 0.0254**3)


def test_catalogue_values_are_used():
    # the grade's Br and the graphite's chi_perp/chi_par as the catalogue serves them
    d = parse_stabilized(base())
    st = d.stations[0]
    assert st.lifter.br_t == get_grade("N42").br_t and not st.lifter.br_override
    m = get_material("pyrolytic-graphite")
    assert st.plates.chi_perp == m.chi_vertical and st.plates.chi_par == m.chi_horizontal
    assert st.plates.chi_dipole == pytest.approx((m.chi_vertical + m.chi_horizontal) / 2)


def test_overrides():
    doc = base()
    doc["lifter"]["br"] = "13000 G"  # 1 G = 1e-4 T (definition of the gauss)
    doc["plates"]["chi"] = "-1.6e-4"
    d = parse_stabilized(doc)
    assert d.stations[0].lifter.br_t == pytest.approx(1.3) and d.stations[0].lifter.br_override
    assert d.stations[0].plates.chi_perp == d.stations[0].plates.chi_par == pytest.approx(-1.6e-4)
    doc = base()
    doc["plates"].update(chi_perp="-4.1e-4", chi_par="-7e-5")
    p = parse_stabilized(doc).stations[0].plates
    assert (p.chi_perp, p.chi_par) == pytest.approx((-4.1e-4, -7e-5))


def test_temperature():
    doc = base()
    doc["conditions"] = {"temperature": "60 degC"}
    assert parse_stabilized(doc).temperature_k == pytest.approx(333.15)  # 0 degC = 273.15 K


@pytest.mark.parametrize(
    "edit,key",
    [
        (lambda d: d["floater"].update(colour="red"), "floater.colour"),
        (lambda d: d.update(magnets={}), "design.magnets"),
        (lambda d: d["plates"].update(thickness="1"), "plates.thickness"),
        (lambda d: d["floater"].update(size=["5 mm", "-4 mm", "3 mm"]), "floater.size[1]"),
        (lambda d: d["floater"].update(size=["5 mm", "3 mm"]), "floater.size"),
        (lambda d: d["lifter"].update(shape="sphere"), "lifter.shape"),
        (lambda d: d["lifter"].update(grade="N99"), "lifter.grade"),
        (lambda d: d["plates"].update(material="unobtainium"), "plates.material"),
        (lambda d: d["plates"].update(material="aluminium"), "plates.material"),
        (lambda d: d["plates"].update(chi="1e-5"), "plates.chi"),
        (lambda d: d["plates"].update(chi_perp="-4e-4"), "plates.chi_par"),
        (lambda d: d["plates"].update(distance="1 mm"), "plates.distance"),
        (lambda d: d["lifter"].update(payload="1 g"), "lifter.payload"),
        (lambda d: d["floater"].pop("grade"), "floater.grade"),
        (lambda d: d.pop("plates"), "plates"),
        (lambda d: d.update(payload={"mass": "1 g"}), "payload"),
        (lambda d: d.update(conditions={"temp_min": "0 degC"}), "conditions.temp_max"),
    ],
)
def test_refusals_name_the_key(edit, key):
    doc = copy.deepcopy(base())
    edit(doc)
    with pytest.raises(InputError) as exc:
        parse_stabilized(doc)
    assert key in str(exc.value)
    assert key in exc.value.field  # the design-file key, never a command-line flag


def test_stations_inherit_top_level_tables():
    doc = base()
    doc["station"] = [
        {"x": "-20 mm", "y": "0 mm"},
        {"x": "20 mm", "y": "0 mm", "floater": {"shape": "cylinder", "size": ["6 mm", "3 mm"], "grade": "N52"}},
    ]
    doc["payload"] = {"mass": "2 g", "centre_of_mass": ["1 mm", "0 mm", "-5 mm"]}
    d = parse_stabilized(doc)
    assert d.multi and len(d.stations) == 2
    assert d.stations[0].floater.shape == "cuboid" and d.stations[1].floater.grade == "N52"
    assert (d.stations[0].x, d.stations[1].x) == pytest.approx((-0.02, 0.02))
    assert d.payload.centre_of_mass == pytest.approx((1e-3, 0.0, -5e-3))
    assert d.payload.mass_kg == pytest.approx(2e-3)


def test_stations_refusals():
    doc = base()
    doc["station"] = [{"x": "0 mm", "y": "0 mm"}, {"x": "0 mm", "y": "0 mm"}]
    doc["payload"] = {"mass": "1 g"}
    with pytest.raises(InputError, match=r"station\[1\]"):
        parse_stabilized(doc)
    doc["station"] = [{"x": "0 mm"}]
    with pytest.raises(InputError, match=r"station\[0\]\.y"):
        parse_stabilized(doc)
    doc["station"] = [{"x": "0 mm", "y": "0 mm"}]
    del doc["payload"]
    with pytest.raises(InputError, match="payload"):
        parse_stabilized(doc)


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.name)
def test_examples_parse_and_round_trip(path):
    # every demo design parses, is marked demo, and survives TOML writing (tomllib reads
    # back what tomli_w wrote)
    text = path.read_text()
    assert "demo" in text
    d = parse_stabilized(tomllib.loads(text), source=str(path))
    again = parse_stabilized(tomllib.loads(design_to_toml(d)))
    assert again == d


def test_round_trip_with_overrides_and_range():
    doc = base()
    doc["lifter"]["br"] = "1.25 T"
    doc["plates"].update(chi_perp="-4.1e-4", chi_par="-7e-5", clearance="0.3 mm")
    doc["conditions"] = {"temp_min": "0 degC", "temp_max": "40 degC"}
    d = parse_stabilized(doc)
    assert d.temperature_k == pytest.approx(293.15)
    assert parse_stabilized(tomllib.loads(design_to_toml(d))) == d


def test_load_design_dispatches_here(tmp_path):
    # matdb.design.toml_io.load_design hands lifter/floater/station designs to this module
    p = tmp_path / "d.toml"
    p.write_text(tomli_w.dumps(base()))
    d = load_design(p)
    assert isinstance(d, StabilizedDesign)
