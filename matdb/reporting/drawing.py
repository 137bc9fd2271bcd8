"""Workshop drawings of a design: DXF (ezdxf) and SVG, 1:1 in millimetres.

Floating plate (one sheet, top view): the plate outline, each magnet's outline with its
polarity written on it ("N" = north pole up, "S" = north pole down), the base the
magnets sit on, the centre-of-mass mark, the plate's dimensions and a title.
Floating magnet (two sheets): sheet 1 is the top view of lifters and floaters, sheet 2
a side view of lifter, plates and floater per station with the distances of the
nominal balance and the schedule (lifter distance against payload).

Layers (one per kind of thing, a contract for anyone post-processing the DXF):

``PLATE``     the plate outline with its slots and holes, nothing else
``MAGNETS``   one closed outline per magnet (a ring's bore is on ``MAGNET_BORES``)
``POLARITY``  the N/S marks
``BASE``      the base outline under the magnets
``MARKS``     centre of mass, dimensions, title, notes
``SIDE``      the side view of the floating-magnet sheet (outlines of lifter, floater)

Drawing units are millimetres (``$INSUNITS`` = 4); model-space coordinates put the
design's origin (the arrangement's centre) at (0, 0) for sheet 1. The SVG is rendered
from the same DXF document by ezdxf's drawing add-on, at 1:1 on a page in mm.
"""

from __future__ import annotations

import io
from typing import Any

import ezdxf
from ezdxf import units
from ezdxf.addons.drawing import Frontend, RenderContext, layout, svg
from ezdxf.addons.drawing.config import BackgroundPolicy, ColorPolicy, Configuration
from ezdxf.enums import TextEntityAlignment

from matdb.analysis.floating import levitate_stabilized
from matdb.design import load_design_text
from matdb.errors import InputError
from matdb.physics.dynamics import plate_outline

LAYERS = {  # name: ACI colour
    "PLATE": 5, "MAGNETS": 7, "MAGNET_BORES": 8, "POLARITY": 1, "BASE": 3, "MARKS": 6, "SIDE": 7,
}
BASE_MARGIN_MM = 5.0  # the base outline is the magnets' footprint plus this margin [mm]
SHEET_GAP_MM = 40.0  # space between the two sheets of the floating-magnet drawing [mm]


def _new_doc():
    doc = ezdxf.new("R2010", setup=True, units=units.MM)
    doc.header["$MEASUREMENT"] = 1  # metric
    for name, colour in LAYERS.items():
        if name not in doc.layers:
            doc.layers.add(name, color=colour)
    return doc


def _mm(v: float) -> float:
    return float(v) * 1e3


def _text(msp, text: str, x: float, y: float, height: float, layer: str, align: str = "MIDDLE_CENTER"):
    t = msp.add_text(text, height=height, dxfattribs={"layer": layer})
    t.set_placement((x, y), align=getattr(TextEntityAlignment, align))
    return t


def _rect(msp, x0: float, y0: float, x1: float, y1: float, layer: str):
    return msp.add_lwpolyline([(x0, y0), (x1, y0), (x1, y1), (x0, y1)], close=True,
                              dxfattribs={"layer": layer})


def _com_mark(msp, x: float, y: float, r: float, label: str = "centre of mass") -> None:
    msp.add_circle((x, y), r, dxfattribs={"layer": "MARKS"})
    msp.add_line((x - 1.6 * r, y), (x + 1.6 * r, y), dxfattribs={"layer": "MARKS"})
    msp.add_line((x, y - 1.6 * r), (x, y + 1.6 * r), dxfattribs={"layer": "MARKS"})
    _text(msp, label, x + 1.8 * r, y + 1.8 * r, max(1.2, 0.8 * r), "MARKS", "BOTTOM_LEFT")


def _magnet_outline(msp, shape: str, size_mm, cx: float, cy: float, label: str) -> None:
    """One magnet seen from above: closed outline on MAGNETS, label on POLARITY."""
    if shape == "cuboid":
        hx, hy = size_mm[0] / 2, size_mm[1] / 2
        _rect(msp, cx - hx, cy - hy, cx + hx, cy + hy, "MAGNETS")
        small = min(hx, hy)
    else:
        r = size_mm[0] / 2
        msp.add_circle((cx, cy), r, dxfattribs={"layer": "MAGNETS"})
        if shape == "ring":
            msp.add_circle((cx, cy), size_mm[1] / 2, dxfattribs={"layer": "MAGNET_BORES"})
        small = r
    if label:
        h = max(0.8, min(0.6 * small, 6.0))
        y = cy if shape != "ring" else cy + (size_mm[0] + size_mm[1]) / 4
        _text(msp, label, cx, y, h, "POLARITY")


def _plate_top_view(msp, design) -> None:
    """The plate outline on PLATE: a circle or rectangle, or, with slots and holes, every
    ring of the outline with them cut out (:func:`matdb.physics.dynamics.plate_outline`)."""
    p = design.plate
    cx, cy = _mm(p.center_m[0]), _mm(p.center_m[1])
    slots, holes = getattr(p, "slots", None), tuple(getattr(p, "holes", ()) or ())
    if slots is None and not holes:
        if p.shape == "disc":
            msp.add_circle((cx, cy), _mm(p.size[0]) / 2, dxfattribs={"layer": "PLATE"})
        else:
            hx, hy = _mm(p.size[0]) / 2, _mm(p.size[1]) / 2
            _rect(msp, cx - hx, cy - hy, cx + hx, cy + hy, "PLATE")
        return
    geom = plate_outline(p.shape, p.lx_m, p.ly_m, p.center_m[0], p.center_m[1], slots, holes)
    polys = list(getattr(geom, "geoms", [geom]))
    for poly in polys:
        for ring in (poly.exterior, *poly.interiors):
            pts = [(_mm(x), _mm(y)) for x, y in list(ring.coords)[:-1]]
            msp.add_lwpolyline(pts, close=True, dxfattribs={"layer": "PLATE"})


def plate_drawing(design, title: str = ""):
    """The DXF document of a floating-plate design (sheet 1, top view)."""
    doc = _new_doc()
    msp = doc.modelspace()
    arr = design.arrangement(rigid=True)  # geometry only
    xs0, xs1, ys0, ys1 = [], [], [], []
    for m in arr.magnets:
        x, y = _mm(m.position[0]), _mm(m.position[1])
        dz = float(m.direction[2])
        label = "N" if dz > 0.5 else "S" if dz < -0.5 else "-"
        size = [_mm(v) for v in m.size]
        _magnet_outline(msp, m.shape, size, x, y, label)
        hx = size[0] / 2
        hy = (size[1] / 2) if m.shape == "cuboid" else hx
        xs0.append(x - hx)
        xs1.append(x + hx)
        ys0.append(y - hy)
        ys1.append(y + hy)
    bx0, bx1 = min(xs0) - BASE_MARGIN_MM, max(xs1) + BASE_MARGIN_MM
    by0, by1 = min(ys0) - BASE_MARGIN_MM, max(ys1) + BASE_MARGIN_MM
    _rect(msp, bx0, by0, bx1, by1, "BASE")
    _plate_top_view(msp, design)

    # centre of mass of plate and payload (the payload sits on the plate's centre)
    p = design.plate
    cx, cy = _mm(p.center_m[0]), _mm(p.center_m[1])
    span = max(bx1 - bx0, by1 - by0)
    _com_mark(msp, cx, cy, max(0.6, span / 60))

    # dimensions of the plate (on MARKS)
    lx = _mm(p.size[0])
    ly = _mm(p.size[1]) if p.shape == "rectangle" else lx
    off = max(4.0, span / 12)
    style = {"dimtxt": max(1.5, span / 45), "dimasz": max(1.0, span / 60), "dimdec": 2, "dimlfac": 1.0,
             "dimexe": 1.0, "dimexo": 0.5, "dimgap": 0.5}
    d1 = msp.add_linear_dim(base=(cx, by0 - off), p1=(cx - lx / 2, cy - ly / 2), p2=(cx + lx / 2, cy - ly / 2),
                            angle=0, dimstyle="Standard", override=style, dxfattribs={"layer": "MARKS"})
    d1.render()
    if p.shape == "rectangle":
        d2 = msp.add_linear_dim(base=(bx1 + off, cy), p1=(cx + lx / 2, cy - ly / 2),
                                p2=(cx + lx / 2, cy + ly / 2), angle=90, dimstyle="Standard", override=style,
                                dxfattribs={"layer": "MARKS"})
        d2.render()

    # title block
    th = max(1.8, span / 30)
    lines = [title or (design.name or "design"),
             f"plate: {p.material} {p.shape} " + " x ".join(f"{_mm(v):.4g}" for v in p.size) + " mm",
             f"magnets: {len(arr.magnets)} x {design.magnets.grade}, {design.magnets.pattern}",
             "top view, scale 1:1, millimetres; N = north pole up, S = north pole down",
             f"base outline: magnets' footprint + {BASE_MARGIN_MM:g} mm"]
    y = by0 - 2 * off - th
    for i, line in enumerate(lines):
        _text(msp, line, bx0, y - i * 1.6 * th, th if i == 0 else 0.7 * th, "MARKS", "TOP_LEFT")
    return doc


def stabilized_drawing(design, result: dict | None = None, title: str = ""):
    """The DXF document of a floating-magnet design: sheet 1 (top view) and sheet 2
    (side view with the schedule's distances) side by side in model space."""
    if result is None:
        result = levitate_stabilized(design)
    doc = _new_doc()
    msp = doc.modelspace()
    stations = list(design.stations)
    rstations = result.get("stations") or [result] * len(stations)

    # sheet 1: top view of each station (lifter dashed-free outline around the floater)
    xs = []
    for st in stations:
        x, y = _mm(st.x), _mm(st.y)
        lf = [_mm(v) for v in st.lifter.size]
        fl = [_mm(v) for v in st.floater.size]
        _magnet_outline(msp, st.floater.shape, fl, x, y, "N")
        _magnet_outline(msp, st.lifter.shape, lf, x, y, "")
        xs += [x - lf[0] / 2, x + lf[0] / 2]
    s1x0, s1x1 = min(xs), max(xs)
    ys = [_mm(st.y) for st in stations]
    big = max(_mm(st.lifter.size[0]) for st in stations)
    s1y0, s1y1 = min(ys) - big / 2, max(ys) + big / 2
    _rect(msp, s1x0 - BASE_MARGIN_MM, s1y0 - BASE_MARGIN_MM, s1x1 + BASE_MARGIN_MM, s1y1 + BASE_MARGIN_MM, "BASE")
    span = max(s1x1 - s1x0, s1y1 - s1y0) + 2 * BASE_MARGIN_MM
    th = max(1.8, span / 30)
    com = getattr(getattr(design, "payload", None), "centre_of_mass", None)
    cx, cy = (_mm(com[0]), _mm(com[1])) if com else (sum(_mm(s.x) for s in stations) / len(stations),
                                                      sum(_mm(s.y) for s in stations) / len(stations))
    _com_mark(msp, cx, cy, max(0.6, span / 60))
    _text(msp, "SHEET 1: top view, scale 1:1, mm. Floaters N = north pole up (towards the lifter); "
          "lifters drawn around them, also north pole up.", s1x0 - BASE_MARGIN_MM,
          s1y0 - BASE_MARGIN_MM - 2 * th, 0.6 * th, "MARKS", "TOP_LEFT")
    _text(msp, title or (design.name or "design"), s1x0 - BASE_MARGIN_MM, s1y1 + BASE_MARGIN_MM + th, th,
          "MARKS", "BOTTOM_LEFT")

    # sheet 2: side view, one column per station
    x_cursor = s1x1 + BASE_MARGIN_MM + SHEET_GAP_MM
    top = s1y1
    _text(msp, "SHEET 2: side view (x-z), scale 1:1, mm: lifter, plates, floater", x_cursor, top + th, th,
          "MARKS", "BOTTOM_LEFT")
    style = {"dimtxt": max(1.2, th * 0.5), "dimasz": max(0.8, th * 0.35), "dimdec": 2, "dimlfac": 1.0,
             "dimexe": 1.0, "dimexo": 0.5, "dimgap": 0.5}
    for i, (st, rs) in enumerate(zip(stations, rstations)):
        fl = [_mm(v) for v in st.floater.size]
        lf = [_mm(v) for v in st.lifter.size]
        fh = fl[-1]
        D = _mm(rs.get("lifter_distance_m") or result.get("lifter_distance_m") or 0.0)
        a = rs.get("plate_distance_m") or result.get("plate_distance_m") or st.plates.distance
        a = _mm(a) if a is not None else fh / 2 + _mm(st.plates.clearance)
        t = _mm(st.plates.thickness)
        w = max(3 * fl[0], lf[0])
        cxs = x_cursor + w / 2 + 10
        z0 = top - (D + lf[-1]) - 10  # floater centre
        # floater and lifter (outlines), plates
        _rect(msp, cxs - fl[0] / 2, z0 - fh / 2, cxs + fl[0] / 2, z0 + fh / 2, "SIDE")
        _text(msp, "N", cxs, z0 + fh / 4, max(0.8, 0.35 * fh), "POLARITY")
        _text(msp, "S", cxs, z0 - fh / 4, max(0.8, 0.35 * fh), "POLARITY")
        if D > 0:
            _rect(msp, cxs - lf[0] / 2, z0 + D, cxs + lf[0] / 2, z0 + D + lf[-1], "SIDE")
            _text(msp, "N", cxs, z0 + D + lf[-1] * 0.75, max(0.8, min(0.3 * lf[-1], 5)), "POLARITY")
            _text(msp, "S", cxs, z0 + D + lf[-1] * 0.25, max(0.8, min(0.3 * lf[-1], 5)), "POLARITY")
        _rect(msp, cxs - w / 2, z0 + a, cxs + w / 2, z0 + a + t, "PLATE")
        _rect(msp, cxs - w / 2, z0 - a - t, cxs + w / 2, z0 - a, "PLATE")
        # distances
        dx = cxs + w / 2 + 4
        if D > 0:
            msp.add_linear_dim(base=(dx + 6, z0), p1=(cxs, z0), p2=(cxs + lf[0] / 2, z0 + D), angle=90,
                               dimstyle="Standard", override=style, dxfattribs={"layer": "MARKS"}).render()
        msp.add_linear_dim(base=(dx, z0), p1=(cxs, z0), p2=(cxs + w / 2, z0 + a), angle=90,
                           dimstyle="Standard", override=style, dxfattribs={"layer": "MARKS"}).render()
        _text(msp, f"{getattr(st, 'name', '') or f'station {i + 1}'}: lifter distance {D:.2f} mm "
              f"(floater centre to lifter face), plate distance {a:.2f} mm, plates {t:.3g} mm",
              cxs - w / 2, z0 - a - t - 2 * th * 0.6, 0.5 * th, "MARKS", "TOP_LEFT")
        x_cursor = dx + 30
    # schedule
    y = z0 - a - t - 5 * th * 0.6
    x0 = s1x1 + BASE_MARGIN_MM + SHEET_GAP_MM
    _text(msp, "schedule: payload (g) -> lifter distance (mm)", x0, y, 0.6 * th, "MARKS", "TOP_LEFT")
    for j, w in enumerate(result.get("window") or []):
        ld = w.get("lifter_distance_m")
        lds = ld if isinstance(ld, (list, tuple)) else [ld]
        txt = f"{w['payload_kg'] * 1e3:.3g} g: " + " / ".join("-" if v is None else f"{v * 1e3:.2f}" for v in lds)
        _text(msp, txt, x0, y - (j + 1) * 0.9 * th, 0.5 * th, "MARKS", "TOP_LEFT")
    return doc


def design_drawing(design, title: str = "", result: dict | None = None):
    """The DXF document of either kind of design."""
    if getattr(design, "mode", "plate") == "stabilized":
        return stabilized_drawing(design, result, title)
    return plate_drawing(design, title)


def dxf_bytes(doc) -> bytes:
    stream = io.StringIO()
    doc.write(stream)
    return stream.getvalue().encode("utf-8")


def svg_text(doc) -> str:
    """The model space rendered as SVG at 1:1 on a page sized to the drawing (mm)."""
    msp = doc.modelspace()
    backend = svg.SVGBackend()
    cfg = Configuration(background_policy=BackgroundPolicy.WHITE, color_policy=ColorPolicy.COLOR)
    Frontend(RenderContext(doc), backend, config=cfg).draw_layout(msp)
    page = layout.Page(0, 0, layout.Units.mm, margins=layout.Margins.all(5))
    return backend.get_string(page, settings=layout.Settings(scale=1, fit_page=False))


def drawing_bytes(text: str, kind: str, source_name: str = "design.toml") -> bytes:
    """The drawing of a design's TOML text as ``dxf`` or ``svg`` bytes."""
    if kind not in ("dxf", "svg"):
        raise InputError(f"expected dxf or svg, got {kind!r}", field="format")
    design = load_design_text(text, source=source_name)
    doc = design_drawing(design)
    return dxf_bytes(doc) if kind == "dxf" else svg_text(doc).encode("utf-8")


def layer_summary(doc) -> dict[str, Any]:
    """Entity counts per layer (for a quick look and for tests)."""
    out: dict[str, int] = {}
    for e in doc.modelspace():
        out[e.dxf.layer] = out.get(e.dxf.layer, 0) + 1
    return out


__all__ = ["LAYERS", "plate_drawing", "stabilized_drawing", "design_drawing", "dxf_bytes", "svg_text",
           "drawing_bytes", "layer_summary"]
