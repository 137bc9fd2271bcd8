"""Floating-plate design files (matdb.design.toml_io, matdb.design.model): parsing into SI,
errors naming the key, round trip.

Values compared against: unit definitions (1 in = 25.4 mm exactly, NIST SP 811;
0 degC = 273.15 K, SI Brochure 9th ed.), the database rows (seed_data, cited there),
and the design-file key contract of the README.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import replace
from pathlib import Path

import pytest

from matdb.design import (PlateDesign, StabilizedDesign, design_to_toml, load_design, load_design_text,
                          parse_design, write_design)
from matdb.errors import InputError

DATA = Path(__file__).parent / "data"

BASE = """
[magnets]
shape = "cuboid"
size = ["12.7 mm", "12.7 mm", "12.7 mm"]
grade = "N50"
pattern = "checkerboard"
rows = 2
cols = 2
spacing = "0 mm"
back_plate = false
cover = "0 mm"

[plate]
material = "pyrolytic-graphite"
shape = "rectangle"
size = ["17 mm", "17 mm", "1 mm"]
payload = "0.2 g"
payload_height = "2 mm"
min_gap = "0.2 mm"

[conditions]
temperature = "20 degC"
"""


def _doc():
    return tomllib.loads(BASE)


def test_readme_example_parses_to_si():
    # design-file key contract (README); 12.7 mm = 0.0127 m, 20 degC = 293.15 K (SI Brochure)
    d = load_design_text(BASE)
    assert isinstance(d, PlateDesign) and d.mode == "plate"
    assert d.magnets.size == pytest.approx((0.0127,) * 3, rel=1e-15)
    assert (d.magnets.pattern, d.magnets.rows, d.magnets.cols) == ("checkerboard", 2, 2)
    assert d.plate.size == pytest.approx((0.017, 0.017, 0.001), rel=1e-15)
    assert d.plate.payload_kg == pytest.approx(2e-4, rel=1e-12)
    assert d.plate.payload_height_m == pytest.approx(2e-3, rel=1e-12)
    assert d.plate.min_gap_m == pytest.approx(2e-4, rel=1e-12)
    assert d.conditions.temperature_k == pytest.approx(293.15, abs=1e-9)
    # chi of pyrolytic graphite from the database (Simon & Geim 2000, cited in seed_data)
    assert d.plate.chi_perp == pytest.approx(-4.5e-4)
    assert d.plate.chi_par == pytest.approx(-8.5e-5)
    assert d.plate.mass_kg == pytest.approx(2200 * 0.017 * 0.017 * 0.001)


def test_arrangement_follows_the_conventions():
    # DEVELOPERS.md conventions: top faces at z = 0, (row 0, col 0) at -x, -y is +z,
    # checkerboard sign (-1)^(row+col); Br of the grade (seed_data/magnet_grades.csv)
    d = load_design_text(BASE)
    arr = d.arrangement(rigid=True)  # Br itself: the idealised model
    assert arr.count == 4
    assert arr.top_z == pytest.approx(0.0, abs=1e-15)
    first = min(arr.magnets, key=lambda m: (m.position[1], m.position[0]))
    assert first.position[0] < 0 and first.position[1] < 0 and first.direction[2] > 0
    assert {m.br for m in arr.magnets} == {d.magnets.grade_props.br_t}


def test_br_override_and_temperature():
    # the override replaces Br at 20 C; alpha of the grade still applies (IEC 60404-8-1)
    doc = _doc()
    doc["magnets"]["br"] = "14500 G"  # 1 G = 1e-4 T (Gaussian units, pint context)
    d = parse_design(doc)
    assert d.magnets.br_t == pytest.approx(1.45)
    alpha = d.magnets.grade_props.alpha_br_pct_per_k
    hot = d.arrangement(333.15, rigid=True)
    assert hot.magnets[0].br == pytest.approx(1.45 * (1 + alpha / 100 * 40))


def test_inch_sizes_and_disc_plate():
    # 1 in = 25.4 mm exactly (NIST SP 811)
    doc = _doc()
    doc["magnets"]["size"] = ["0.5 in", "0.5 in", "0.5 in"]
    doc["plate"].update(shape="disc", size=["12 mm", "0.5 mm"])
    d = parse_design(doc)
    assert d.magnets.size[0] == pytest.approx(0.0127, rel=1e-14)
    assert d.plate.volume_m3 == pytest.approx(math.pi / 4 * 0.012 ** 2 * 0.0005)


def test_chi_overrides_are_si_volume():
    doc = _doc()
    doc["plate"]["chi"] = "-1.6e-4"
    d = parse_design(doc)
    assert d.plate.chi_perp == d.plate.chi_par == pytest.approx(-1.6e-4)
    doc = _doc()
    doc["plate"].update(chi_perp="-4e-4", chi_par="-9e-5")
    d = parse_design(doc)
    assert (d.plate.chi_perp, d.plate.chi_par) == pytest.approx((-4e-4, -9e-5))


def test_conditions_range():
    doc = _doc()
    doc["conditions"] = {"temp_min": "-20 degC", "temp_max": "60 degC"}
    d = parse_design(doc)
    assert d.conditions.extremes() == pytest.approx((253.15, 333.15))
    assert d.conditions.nominal_k == pytest.approx(333.15)


def test_list_pattern():
    doc = _doc()
    m = doc["magnets"]
    m["pattern"] = "list"
    del m["rows"], m["cols"]
    m["item"] = [
        {"position": ["-5 mm", "0 mm", "0 mm"], "direction": [0, 0, 1]},
        {"position": ["5 mm", "0 mm", "-2 mm"], "direction": [0, 0, -1], "grade": "N42",
         "size": ["10 mm", "10 mm", "8 mm"]},
    ]
    d = parse_design(doc)
    arr = d.arrangement(rigid=True)
    assert arr.count == 2
    assert arr.top_z == pytest.approx(0.0, abs=1e-15)
    assert sorted(m.br for m in arr.magnets) == sorted(
        [d.magnets.grades["N50"].br_t, d.magnets.grades["N42"].br_t])


def test_round_trip_is_exact(tmp_path):
    d = load_design(DATA / "plate_checkerboard.toml")
    p = write_design(d, tmp_path / "copy.toml")
    back = load_design(p)
    assert replace(back, source=None) == replace(d, source=None)
    doc = _doc()
    doc["conditions"] = {"temp_min": "-20 degC", "temp_max": "60 degC"}
    doc["plate"]["chi_perp"], doc["plate"]["chi_par"] = "-4.1e-4", "-8e-5"
    doc["magnets"]["br"] = "1.41 T"
    d2 = parse_design(doc)
    assert load_design_text(design_to_toml(d2)) == d2
    # list items, plate centre, disc
    doc = _doc()
    doc["magnets"].update(pattern="list", item=[
        {"position": ["-5 mm", "0 mm", "0 mm"], "direction": [0, 0, 1]},
        {"position": ["5 mm", "1 mm", "0 mm"], "direction": [0, 0, -1], "grade": "N42",
         "br": "1.31 T", "shape": "cylinder", "size": ["9 mm", "9 mm"]}])
    del doc["magnets"]["rows"], doc["magnets"]["cols"]
    doc["plate"].update(shape="disc", size=["9 mm", "0.7 mm"], center=["0.5 mm", "-1 mm"])
    d3 = parse_design(doc)
    assert load_design_text(design_to_toml(d3)) == d3


@pytest.mark.parametrize("edit,key", [
    (lambda d: d["plate"].update(size=["17 mm", "1 mm"]),
     "plate.size: expected 3 lengths [x, y, thickness] for a rectangle"),
    (lambda d: d["plate"].update(shape="disc"), "plate.size: expected 2 lengths [diameter, thickness]"),
    (lambda d: d["magnets"].update(size=["12.7 mm", "12.7 mm"]), "magnets.size: expected 3 lengths"),
    (lambda d: d["magnets"].update(colour="red"), "magnets.colour: unknown key"),
    (lambda d: d["plate"].update(thicknes="1 mm"), "plate.thicknes: unknown key"),
    (lambda d: d.update(extra={}), "extra: unknown key"),
    (lambda d: d["conditions"].update(humidity="50 %"), "conditions.humidity: unknown key"),
    (lambda d: d["magnets"].update(spacing="1"), "magnets.spacing: missing unit"),
    (lambda d: d["plate"].update(size=["17 mm", "-17 mm", "1 mm"]), "plate.size[1]"),
    (lambda d: d["plate"].update(material="unobtainium"), "plate.material: unknown"),
    (lambda d: d["magnets"].update(grade="N99"), "magnets.grade: unknown"),
    (lambda d: d["magnets"].update(pattern="spiral"), "magnets.pattern: expected one of"),
    (lambda d: d["magnets"].update(rows=0), "magnets.rows: expected a positive whole number"),
    (lambda d: d["magnets"].update(back_plate="yes"), "magnets.back_plate: expected true or false"),
    (lambda d: d["plate"].update(chi="4e-4"), "plate.chi: expected a negative"),
    (lambda d: d["plate"].update(chi_perp="-4e-4"), "plate.chi_par: missing"),
    (lambda d: d["plate"].update(payload="2 mm"), "plate.payload"),
    (lambda d: d["conditions"].update(temperature="20"), "conditions.temperature: missing unit"),
    (lambda d: d["plate"].update(material="aluminium"), "plate.material: aluminium is not diamagnetic"),
    (lambda d: d["magnets"].update(pattern="list"), "magnets.item"),
    (lambda d: d.pop("plate"), "plate: missing table"),
])
def test_errors_name_the_key(edit, key):
    doc = _doc()
    edit(doc)
    with pytest.raises(InputError) as exc:
        parse_design(doc)
    msg = str(exc.value)
    assert key in msg
    assert "\n" not in msg
    # the key is the error's field (each front end shows it in its own words)
    assert exc.value.field == key.split(":")[0]


def test_bad_toml_and_missing_file(tmp_path):
    with pytest.raises(InputError, match="not valid TOML"):
        load_design_text("[magnets\nsize = 1")
    with pytest.raises(InputError, match="no such file"):
        load_design(tmp_path / "nope.toml")


def test_floating_magnet_tables_dispatch():
    # designs with [lifter]/[floater]/[[station]] are floating-magnet designs (regression check)
    text = ('[lifter]\nshape = "cylinder"\nsize = ["25.4 mm", "25.4 mm"]\ngrade = "N42"\n'
            '[floater]\nshape = "cylinder"\nsize = ["6 mm", "3 mm"]\ngrade = "N42"\n'
            '[plates]\nmaterial = "pyrolytic-graphite"\nthickness = "1 mm"\n')
    d = load_design_text(text, source="s.toml")
    assert isinstance(d, StabilizedDesign) and d.mode == "stabilized"
    assert d.source == "s.toml"
    with pytest.raises(InputError, match="lifter.x: unknown key"):
        load_design_text('[lifter]\nx = 1\n', source="s.toml")


def test_demo_files_load():
    for p in sorted(DATA.glob("plate_*.toml")) + sorted((DATA.parent.parent / "examples").glob("plate_*.toml")):
        assert isinstance(load_design(p), PlateDesign), p
