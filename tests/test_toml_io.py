"""matdb.design.toml_io: the one design-file reader and writer, both modes.

Property checks (hypothesis): for any design the reader accepts, writing it and reading
the text back gives the same design, and writing that again gives the same text. Unit
definitions used by the generated files: 1 in = 25.4 mm exactly (NIST SP 811), 1 G =
1e-4 T, 0 degC = 273.15 K and 1 degF = 5/9 K (SI Brochure 9th ed.).
"""

from __future__ import annotations

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from matdb.design import (PlateDesign, StabilizedDesign, design_to_toml, exact_quantity, exact_temperature,
                          load_design_text, parse_design, parse_payload_range)
from matdb.errors import InputError
from matdb.units import parse_length, parse_mass, parse_quantity, parse_temperature

SETTINGS = settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])

LENGTH_UNITS = {"mm": 1.0, "cm": 0.1, "in": 1 / 25.4}  # unit per mm


def length(lo_mm: float, hi_mm: float):
    """A length between lo_mm and hi_mm, typed in mm, cm or inches with any float digits."""
    return st.tuples(st.floats(lo_mm, hi_mm, allow_nan=False), st.sampled_from(sorted(LENGTH_UNITS))).map(
        lambda t: f"{t[0] * LENGTH_UNITS[t[1]]!r} {t[1]}")


def mass(hi_g: float):
    return st.tuples(st.floats(0.0, hi_g, allow_nan=False), st.sampled_from(["g", "mg", "kg"])).map(
        lambda t: f"{t[0] * {'g': 1.0, 'mg': 1e3, 'kg': 1e-3}[t[1]]!r} {t[1]}")


temperature = st.one_of(
    st.floats(-40.0, 150.0, allow_nan=False).map(lambda c: f"{c!r} degC"),
    st.floats(233.15, 423.15, allow_nan=False).map(lambda k: f"{k!r} K"),
    st.floats(-40.0, 300.0, allow_nan=False).map(lambda f: f"{f!r} degF"),
)
chi = st.floats(-1e-3, -1e-7, allow_nan=False).map(repr)
br = st.one_of(st.floats(0.3, 1.5).map(lambda b: f"{b!r} T"), st.floats(3000.0, 15000.0).map(lambda g: f"{g!r} G"))
grade = st.sampled_from(["N42", "N50", "N52"])
material = st.sampled_from(["pyrolytic-graphite", "bismuth"])


@st.composite
def magnet_size(draw, shape: str):
    if shape == "cuboid":
        return [draw(length(1, 30)) for _ in range(3)]
    if shape == "cylinder":
        return [draw(length(1, 30)), draw(length(1, 30))]
    outer = draw(st.floats(5, 30))
    inner = draw(st.floats(0.5, outer * 0.9))
    return [f"{outer!r} mm", f"{inner!r} mm", draw(length(1, 10))]


@st.composite
def conditions(draw, paired: bool):
    kind = draw(st.sampled_from(["none", "temperature", "range", "both"] + ([] if paired else ["min"])))
    if kind == "none":
        return None
    a, b = sorted([parse_temperature(draw(temperature), "t"), parse_temperature(draw(temperature), "t")])
    c: dict = {}
    if kind in ("temperature", "both"):
        c["temperature"] = f"{a!r} K"
    if kind in ("range", "both"):
        c["temp_min"], c["temp_max"] = f"{a!r} K", f"{b!r} K"
    if kind == "min":
        c["temp_min"] = f"{a!r} K"
    return c


@st.composite
def plate_documents(draw):
    shape = draw(st.sampled_from(["cuboid", "cylinder", "ring"]))
    pattern = draw(st.sampled_from(["single", "checkerboard", "stripes", "grid", "list"]))
    mags: dict = {"shape": shape, "size": draw(magnet_size(shape)), "grade": draw(grade), "pattern": pattern}
    if draw(st.booleans()):
        mags["br"] = draw(br)
    if pattern in ("checkerboard", "stripes", "grid"):
        mags["rows"], mags["cols"] = draw(st.integers(1, 3)), draw(st.integers(1, 3))
        mags["spacing"] = draw(length(0, 2))
    if pattern == "list":
        items = []
        for i in range(draw(st.integers(1, 3))):
            it = {"position": [f"{30.0 * i!r} mm", draw(length(0, 5)), "0 mm"],
                  "direction": [0, 0, draw(st.sampled_from([1, -1]))]}
            if draw(st.booleans()):
                it["grade"] = draw(grade)
            if draw(st.booleans()):
                it["br"] = draw(br)
            items.append(it)
        mags["item"] = items
    mags["back_plate"] = draw(st.booleans())
    mags["cover"] = draw(length(0, 1))
    if draw(st.booleans()):
        mags["rigid"] = True
    pshape = draw(st.sampled_from(["rectangle", "disc"]))
    psize = [draw(length(5, 40)) for _ in range(2 if pshape == "rectangle" else 1)] + [draw(length(0.2, 3))]
    plate: dict = {"material": draw(material), "shape": pshape, "size": psize, "payload": draw(mass(2.0)),
                   "payload_height": draw(length(0, 5)), "min_gap": draw(length(0.05, 1))}
    over = draw(st.sampled_from(["none", "chi", "pair"]))
    if over == "chi":
        plate["chi"] = draw(chi)
    elif over == "pair":
        plate["chi_perp"], plate["chi_par"] = draw(chi), draw(chi)
    if draw(st.booleans()):
        plate["center"] = [draw(length(0, 3)), draw(length(0, 3))]
    if draw(st.booleans()):
        plate["sigma_in_plane"] = f"{draw(st.floats(0, 3e5))!r} S/m"
    doc: dict = {"magnets": mags, "plate": plate}
    if draw(st.booleans()):
        doc["name"] = "demo: " + draw(st.text(min_size=1, max_size=12))
    cond = draw(conditions(paired=False))
    if cond:
        doc["conditions"] = cond
    return doc


@st.composite
def single(draw, floater: bool):
    shape = draw(st.sampled_from(["cuboid", "cylinder", "ring"]))
    t: dict = {"shape": shape, "size": draw(magnet_size(shape)), "grade": draw(grade)}
    if draw(st.booleans()):
        t["br"] = draw(br)
    if floater and draw(st.booleans()):
        t["payload"] = draw(mass(5.0))
    if draw(st.booleans()):
        t["rigid"] = True
    return t


@st.composite
def plates_table(draw, floater: dict):
    t: dict = {"material": draw(material), "thickness": draw(length(0.2, 3))}
    over = draw(st.sampled_from(["none", "chi", "pair"]))
    if over == "chi":
        t["chi"] = draw(chi)
    elif over == "pair":
        t["chi_perp"], t["chi_par"] = draw(chi), draw(chi)
    size_m = [parse_length(v, "size") for v in floater["size"]]
    if draw(st.booleans()):
        t["distance"] = f"{(size_m[-1] / 2 + draw(st.floats(1e-4, 5e-3))) * 1e3!r} mm"
    if draw(st.booleans()):
        t["clearance"] = draw(length(0.05, 1))
    if draw(st.booleans()):
        t["width"] = f"{max(size_m[:2] if floater['shape'] == 'cuboid' else size_m[:1]) * 1e3 * 1.5!r} mm"
    return t


@st.composite
def floating_documents(draw):
    floater = draw(single(True))
    doc: dict = {"lifter": draw(single(False)), "floater": floater, "plates": draw(plates_table(floater))}
    if draw(st.booleans()):
        lo, hi = sorted([parse_mass(draw(mass(5.0)), "m"), parse_mass(draw(mass(5.0)), "m")])
        doc["payload_range"] = f"{lo * 1e3!r} g..{hi * 1e3!r} g"
    if draw(st.booleans()):
        n = draw(st.integers(1, 3))
        doc["station"] = [{"x": f"{40.0 * i!r} mm", "y": draw(length(0, 10)), "name": f"s{i}"} for i in range(n)]
        doc["payload"] = {"mass": draw(mass(5.0)), "centre_of_mass": [draw(length(0, 5)), "0 mm", draw(length(0, 5))]}
        doc["floater"].pop("payload", None)
    if draw(st.booleans()):
        doc["description"] = "demo: generated"
    cond = draw(conditions(paired=True))
    if cond:
        doc["conditions"] = cond
    return doc


def _check_round_trip(doc: dict, kind: type) -> None:
    d = parse_design(doc)
    assert isinstance(d, kind)
    text = design_to_toml(d)
    back = load_design_text(text)
    assert back == d
    assert design_to_toml(back) == text


@SETTINGS
@given(plate_documents())
def test_plate_designs_round_trip_exactly(doc):
    _check_round_trip(doc, PlateDesign)


@SETTINGS
@given(floating_documents())
def test_floating_magnet_designs_round_trip_exactly(doc):
    _check_round_trip(doc, StabilizedDesign)


@SETTINGS
@given(st.floats(-1.0, 1.0, allow_nan=False))
def test_exact_quantity_reads_back(v):
    text = exact_quantity(v, "m", "mm", 1e-3)
    assert parse_quantity(text, "m", "x") == v
    assert "e+" not in text


def test_exact_texts_are_the_short_ones_people_type():
    # 0.35 g and -5 degC read back exactly (SI Brochure: 1 g = 1e-3 kg, 0 degC = 273.15 K),
    # so the writer keeps them as typed rather than as 17-digit floats (regression check)
    assert exact_quantity(parse_mass("0.35 g", "m"), "kg", "g", 1e-3) == "0.35 g"
    assert exact_quantity(parse_length("12.7 mm", "l"), "m", "mm", 1e-3) == "12.7 mm"
    assert exact_temperature(parse_temperature("-5 degC", "t")) == "-5 degC"
    assert exact_quantity(parse_length("0.5 in", "l"), "m", "mm", 1e-3) == "12.7 mm"


def test_written_floating_design_keeps_its_keys():
    # design-file keys are a contract (README): the writer uses the reader's keys
    doc = {"lifter": {"shape": "cylinder", "size": ["1 in", "1 in"], "grade": "N42"},
           "floater": {"shape": "cylinder", "size": ["6 mm", "3 mm"], "grade": "N42", "payload": "0.5 g"},
           "plates": {"material": "pyrolytic-graphite", "thickness": "1 mm", "distance": "2.5 mm"},
           "payload_range": "0 g..5 g"}
    text = design_to_toml(parse_design(doc))
    for key in ("[lifter]", "[floater]", "[plates]", "[conditions]", 'payload = "0.5 g"',
                'payload_range = "0 g..5 g"', 'size = [\n    "25.4 mm",', 'temperature = "20 degC"'):
        assert key in text, key


@pytest.mark.parametrize("bad", ["5 g", "0 g..", "5 g..1 g", "a..b"])
def test_payload_range_refusals_name_the_field(bad):
    with pytest.raises(InputError, match="payload_range"):
        parse_payload_range(bad)
