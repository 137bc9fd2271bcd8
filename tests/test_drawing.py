"""Workshop drawings: the DXF read back with ezdxf (an independent reader of the format)
and the SVG parsed as XML.

Expected geometry comes from the design files as typed (lengths in mm) and the
arrangement convention of DEVELOPERS.md (magnets on a grid centred on the z axis, pitch
= size + spacing; magnet (row 0, col 0) at -x, -y points north up; checkerboard sign
(-1)^(row + col)).
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import ezdxf
import pytest
from ezdxf import bbox

from matdb.reporting.drawing import drawing_bytes

REPO_EXAMPLES = __import__("pathlib").Path(__file__).resolve().parent.parent / "examples"
UM_IN_MM = 1e-3  # one micrometre in drawing units (mm)


def _read(tmp_path, name: str):
    text = (REPO_EXAMPLES / name).read_text(encoding="utf-8")
    path = tmp_path / (name + ".dxf")
    path.write_bytes(drawing_bytes(text, "dxf", source_name=name))
    return ezdxf.readfile(path)


def _layer(doc, layer: str):
    return [e for e in doc.modelspace() if e.dxf.layer == layer]


def _centre(e):
    if e.dxftype() == "CIRCLE":
        c = e.dxf.center
        return float(c.x), float(c.y)
    pts = [(p[0], p[1]) for p in e.get_points("xy")]
    return sum(p[0] for p in pts) / len(pts), sum(p[1] for p in pts) / len(pts)


@pytest.fixture(scope="module")
def checker(tmp_path_factory):
    """examples/plate_checkerboard_2x2.toml: 12 mm x 12 mm x 1 mm plate over a 2 x 2
    checkerboard of 12.7 mm cubes, spacing 0 mm."""
    return _read(tmp_path_factory.mktemp("dxf"), "plate_checkerboard_2x2.toml")


def test_units_are_millimetres(checker):
    # DXF reference: $INSUNITS 4 = millimetres
    assert checker.header["$INSUNITS"] == 4


def test_plate_outline_width_and_length(checker):
    plate = _layer(checker, "PLATE")
    assert plate, "no PLATE entities"
    assert all(e.dxftype() in ("LWPOLYLINE", "CIRCLE") for e in plate)
    ext = bbox.extents(plate)
    # design file: size = ["12 mm", "12 mm", "1 mm"]
    assert abs(ext.size.x - 12.0) < UM_IN_MM
    assert abs(ext.size.y - 12.0) < UM_IN_MM
    # centred over the arrangement (no plate offset in the design)
    assert abs(ext.center.x) < UM_IN_MM and abs(ext.center.y) < UM_IN_MM


def test_one_closed_outline_per_magnet_at_its_centre(checker):
    mags = _layer(checker, "MAGNETS")
    assert len(mags) == 4
    assert all(e.dxftype() == "LWPOLYLINE" and e.closed for e in mags)
    pitch = 12.7  # cube size + 0 mm spacing
    expected = {(round((c - 0.5) * pitch, 6), round((r - 0.5) * pitch, 6)) for r in range(2) for c in range(2)}
    got = {tuple(round(v, 6) for v in _centre(e)) for e in mags}
    assert got == expected
    for e in mags:  # each outline is a 12.7 mm square
        ext = bbox.extents([e])
        assert abs(ext.size.x - 12.7) < UM_IN_MM and abs(ext.size.y - 12.7) < UM_IN_MM


def test_as_many_n_as_s_on_an_even_checkerboard(checker):
    marks = [e for e in _layer(checker, "POLARITY") if e.dxftype() == "TEXT"]
    texts = [e.dxf.text for e in marks]
    assert texts.count("N") == texts.count("S") == 2
    # convention: magnet (row 0, col 0) at -x, -y points north up, sign (-1)^(row+col)
    for e in marks:
        x, y = e.dxf.align_point.x, e.dxf.align_point.y
        col, row = int(x > 0), int(y > 0)
        assert e.dxf.text == ("N" if (row + col) % 2 == 0 else "S")


def test_layers_hold_their_kind(checker):
    names = {layer.dxf.name for layer in checker.layers}
    assert {"PLATE", "MAGNETS", "POLARITY", "MARKS", "BASE"} <= names
    marks = _layer(checker, "MARKS")
    assert any(e.dxftype() == "DIMENSION" for e in marks)
    assert any(e.dxftype() == "CIRCLE" for e in marks)  # centre-of-mass mark
    assert any(e.dxftype() == "TEXT" and "centre of mass" in e.dxf.text for e in marks)
    base = bbox.extents(_layer(checker, "BASE"))
    assert base.size.x > 25.4 and base.size.y > 25.4  # around the 2 x 25.4 mm footprint


def test_disc_plate_diameter(tmp_path):
    # examples/plate_disc_4x4.toml gives the plate as a disc; read its diameter as typed
    import tomllib

    from matdb.units import parse_length

    text = (REPO_EXAMPLES / "plate_disc_4x4.toml").read_text(encoding="utf-8")
    size = tomllib.loads(text)["plate"]["size"]
    dia_mm = parse_length(size[0], "size") * 1e3
    doc = _read(tmp_path, "plate_disc_4x4.toml")
    plate = _layer(doc, "PLATE")
    ext = bbox.extents(plate)
    assert abs(ext.size.x - dia_mm) < UM_IN_MM and abs(ext.size.y - dia_mm) < UM_IN_MM
    assert len(_layer(doc, "MAGNETS")) == 16


@pytest.mark.slow
def test_floating_magnet_second_sheet(tmp_path):
    import tomllib

    text = (REPO_EXAMPLES / "floating_magnet.toml").read_text(encoding="utf-8")
    doc = _read(tmp_path, "floating_magnet.toml")
    texts = [e.dxf.text for e in doc.modelspace() if e.dxftype() == "TEXT"]
    assert any(t.startswith("SHEET 2") for t in texts)
    plates = _layer(doc, "PLATE")
    assert len(plates) == 2  # the two plates in side view
    t_mm = float(tomllib.loads(text)["plates"]["thickness"].split()[0])
    for e in plates:
        assert abs(bbox.extents([e]).size.y - t_mm) < UM_IN_MM
    assert any(e.dxftype() == "DIMENSION" for e in _layer(doc, "MARKS"))
    assert any("schedule" in t for t in texts)


def test_svg_is_millimetres_and_parses(tmp_path):
    text = (REPO_EXAMPLES / "plate_checkerboard_2x2.toml").read_text(encoding="utf-8")
    svg = drawing_bytes(text, "svg")
    root = ET.fromstring(svg)
    assert root.tag.endswith("svg")
    assert root.attrib["width"].endswith("mm") and root.attrib["height"].endswith("mm")
    # 1:1: the page is at least the base outline (25.4 mm + 2 x 5 mm margin) wide
    assert float(root.attrib["width"][:-2]) >= 35.4


def test_cli_drawing_bad_extension_writes_nothing(tmp_path, run_cli):
    out = tmp_path / "d.png"
    code, _o, err = run_cli("drawing", str(REPO_EXAMPLES / "plate_checkerboard_2x2.toml"), "-o", str(out))
    assert code == 2 and "-o" in err and not out.exists()


def test_cli_drawing_bad_design_writes_nothing(tmp_path, run_cli):
    bad = tmp_path / "bad.toml"
    bad.write_text('[magnets]\nshape = "cuboid"\nsize = ["-3 mm", "1 mm", "1 mm"]\n', encoding="utf-8")
    out = tmp_path / "d.dxf"
    code, _o, err = run_cli("drawing", str(bad), "-o", str(out))
    assert code == 2 and err.count("\n") == 1 and not out.exists()
    assert list(tmp_path.iterdir()) == [bad]


def test_cli_drawing_writes_dxf(tmp_path, run_cli):
    out = tmp_path / "d.dxf"
    code, _o, _e = run_cli("drawing", str(REPO_EXAMPLES / "plate_checkerboard_2x2.toml"), "-o", str(out))
    assert code == 0
    assert len(_layer(ezdxf.readfile(out), "MAGNETS")) == 4


def test_slotted_plate_outline(tmp_path):
    """examples/plate_slotted_10mm.toml: a 10 mm square with six 0.2 mm x 8.5 mm slots cut
    from alternate edges; the outline keeps the 10 mm extent and loses the slots' area."""
    import numpy as np

    doc = _read(tmp_path, "plate_slotted_10mm.toml")
    plate = _layer(doc, "PLATE")
    ext = bbox.extents(plate)
    assert abs(ext.size.x - 10.0) < UM_IN_MM and abs(ext.size.y - 10.0) < UM_IN_MM

    def area(e):  # shoelace formula
        xy = np.array([(p[0], p[1]) for p in e.get_points("xy")])
        x, y = xy[:, 0], xy[:, 1]
        return 0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))

    outer = max(plate, key=area)
    holes = sum(area(e) for e in plate if e is not outer)
    assert area(outer) - holes == pytest.approx(10 * 10 - 6 * 0.2 * 8.5, abs=1e-6)
