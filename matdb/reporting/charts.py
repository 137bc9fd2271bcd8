"""Altair chart specifications shared by the web page and the design report.

Each function takes the plain tables of :mod:`matdb.reporting.presentation` (or a levitate result)
and returns an Altair chart; the page shows it with ``st.altair_chart`` and the report
turns the very same specification into a static SVG with :func:`to_svg`
(vl-convert-python, no browser). Nothing here computes physics and nothing imports
Streamlit.
"""

from __future__ import annotations

import math

import altair as alt
import numpy as np
import pandas as pd
import vl_convert as vlc

from matdb.reporting.presentation import lift_curve_df

LIFT_COLOUR = "#3d6fb6"
WEIGHT_COLOUR = "#b2182b"
EQUILIBRIUM_COLOUR = "#1b7837"
POLARITY_DOMAIN = ["north up", "north down", "sideways"]
POLARITY_RANGE = ["#d6604d", "#4393c3", "#bbbbbb"]


def lift_chart(result: dict, height: int = 300, width: int | str = "container") -> alt.LayerChart:
    """Lift F(gap) of a plate result with the weight line and the equilibrium point.

    ``result`` is :func:`matdb.analysis.levitate.levitate_plate` output.
    """
    curve = lift_curve_df(result)
    lift = alt.Chart(curve).mark_line(color=LIFT_COLOUR, strokeWidth=2).encode(
        x=alt.X("gap_mm:Q", title="gap above the magnets (mm)"),
        y=alt.Y("force_mn:Q", title="force (mN)"),
        tooltip=[alt.Tooltip("gap_mm:Q", title="gap (mm)", format=".3f"),
                 alt.Tooltip("force_mn:Q", title="lift (mN)", format=".3g")])
    weight = alt.Chart(curve).mark_line(color=WEIGHT_COLOUR, strokeDash=[5, 3]).encode(
        x="gap_mm:Q", y="weight_mn:Q",
        tooltip=[alt.Tooltip("weight_mn:Q", title="weight, plate + payload (mN)", format=".3g")])
    layers = [lift, weight]
    if result.get("gap_m") is not None:
        eq = pd.DataFrame({"gap_mm": [result["gap_m"] * 1e3], "force_mn": [result["weight_n"] * 1e3]})
        layers.append(alt.Chart(eq).mark_point(size=140, filled=True, color=EQUILIBRIUM_COLOUR).encode(
            x="gap_mm:Q", y="force_mn:Q",
            tooltip=[alt.Tooltip("gap_mm:Q", title="equilibrium gap (mm)", format=".3f")]))
    return alt.layer(*layers).properties(height=height, width=width)


def plate_outline_df(design, n: int = 73) -> pd.DataFrame:
    """Closed outline of a design's plate seen from above: ``x_mm``, ``y_mm``, ``order``."""
    p = design.plate
    cx, cy = (float(v) for v in p.center_m[:2])
    if p.shape == "disc":
        r = p.size[0] / 2
        t = np.linspace(0.0, 2 * math.pi, n)
        xs, ys = cx + r * np.cos(t), cy + r * np.sin(t)
    else:
        hx, hy = p.size[0] / 2, p.size[1] / 2
        xs = cx + np.array([-hx, hx, hx, -hx, -hx])
        ys = cy + np.array([-hy, -hy, hy, hy, -hy])
    return pd.DataFrame({"x_mm": xs * 1e3, "y_mm": ys * 1e3, "order": np.arange(len(xs))})


def _cells(fmap: pd.DataFrame) -> pd.DataFrame:
    """Grid points -> cells with edges (x0_mm, x1_mm, y0_mm, y1_mm) for a quantitative map."""
    out = fmap.copy()
    for c in ("x", "y"):
        vals = np.unique(out[f"{c}_mm"].to_numpy())
        half = 0.5 * (float(np.min(np.diff(vals))) if len(vals) > 1 else 1.0)
        out[f"{c}0_mm"] = out[f"{c}_mm"] - half
        out[f"{c}1_mm"] = out[f"{c}_mm"] + half
    return out


def field_map_chart(fmap: pd.DataFrame, gap_mm: float, quantity: str = "|B| (T)",
                    outline: pd.DataFrame | None = None, size: int = 340) -> alt.LayerChart:
    """|B| (or B^2) map over the footprint at ``gap_mm`` with the plate outline.

    ``fmap`` is :func:`matdb.reporting.presentation.field_map_df` output; ``quantity`` is
    ``"|B| (T)"`` or ``"B^2 (T^2)"``; ``outline`` is :func:`plate_outline_df` output.
    """
    field = "b_t" if quantity.startswith("|B|") else "b2_t2"
    cells = _cells(fmap)
    heat = alt.Chart(cells).mark_rect().encode(
        x=alt.X("x0_mm:Q", title="x (mm)", scale=alt.Scale(nice=False)), x2="x1_mm:Q",
        y=alt.Y("y0_mm:Q", title="y (mm)", scale=alt.Scale(nice=False)), y2="y1_mm:Q",
        color=alt.Color(f"{field}:Q", title=quantity, scale=alt.Scale(scheme="viridis")),
        tooltip=[alt.Tooltip("x_mm:Q", format=".2f", title="x (mm)"),
                 alt.Tooltip("y_mm:Q", format=".2f", title="y (mm)"),
                 alt.Tooltip("b_t:Q", format=".3f", title="|B| (T)"),
                 alt.Tooltip("bz_t:Q", format=".3f", title="Bz (T)")])
    layers = [heat]
    if outline is not None and len(outline):
        layers.append(alt.Chart(outline).mark_line(color="white", strokeWidth=2, strokeDash=[6, 3]).encode(
            x="x_mm:Q", y="y_mm:Q", order="order:Q"))
    return alt.layer(*layers).properties(
        height=size, width=size, title=f"{quantity} at {gap_mm:.2f} mm (dashed: plate outline)")


def polarity_chart(pol: pd.DataFrame, size: int = 340) -> alt.LayerChart:
    """Top view of the magnets, each marked N (north pole up) or S (north pole down).

    ``pol`` is :func:`matdb.reporting.presentation.polarity_df` output.
    """
    boxes = alt.Chart(pol).mark_rect(stroke="black", strokeWidth=1).encode(
        x=alt.X("x0_mm:Q", title="x (mm)"), x2="x1_mm:Q", y=alt.Y("y0_mm:Q", title="y (mm)"), y2="y1_mm:Q",
        color=alt.Color("points:N", title="magnetisation",
                        scale=alt.Scale(domain=POLARITY_DOMAIN, range=POLARITY_RANGE)),
        tooltip=["magnet:Q", "points:N", "grade:N", alt.Tooltip("x_mm:Q", format=".2f"),
                 alt.Tooltip("y_mm:Q", format=".2f")])
    labels = alt.Chart(pol).mark_text(fontSize=14, fontWeight="bold").encode(
        x="x_mm:Q", y="y_mm:Q", text="label:N")
    return alt.layer(boxes, labels).properties(height=size, width=size,
                                               title="top view: N = north pole up")


def field_and_polarity_chart(fmap: pd.DataFrame, pol: pd.DataFrame, gap_mm: float,
                             quantity: str = "|B| (T)", outline: pd.DataFrame | None = None
                             ) -> alt.HConcatChart:
    """The field map beside the polarity layout (as the Design page shows them)."""
    return alt.hconcat(field_map_chart(fmap, gap_mm, quantity, outline), polarity_chart(pol)
                       ).resolve_scale(color="independent")


def schedule_chart(sched: pd.DataFrame, width: int = 420, height: int = 240) -> alt.VConcatChart:
    """Floating-magnet schedule: lifter distance (top) and stable plate-distance band
    (bottom) against payload. ``sched`` is :func:`matdb.reporting.presentation.stabilized_window_df`."""
    colour = alt.Color("station:N", title="station")
    base = alt.Chart(sched).encode(x=alt.X("payload_g:Q", title="payload (g)"), color=colour)
    lifter = base.mark_line(point=True).encode(
        y=alt.Y("lifter_distance_mm:Q", title="lifter distance, floater centre to lifter face (mm)",
                scale=alt.Scale(zero=False)),
        tooltip=["station:N", alt.Tooltip("payload_g:Q", title="payload (g)", format=".3g"),
                 alt.Tooltip("lifter_distance_mm:Q", title="lifter distance (mm)", format=".2f")])
    window = base.mark_area(opacity=0.25).encode(
        y=alt.Y("min_plate_distance_mm:Q", title="stable plate distance, floater centre to plate (mm)",
                scale=alt.Scale(zero=False)), y2="max_plate_distance_mm:Q",
        tooltip=["station:N", alt.Tooltip("payload_g:Q", title="payload (g)", format=".3g"),
                 alt.Tooltip("min_plate_distance_mm:Q", title="smallest plate distance (mm)", format=".2f"),
                 alt.Tooltip("max_plate_distance_mm:Q", title="largest stable plate distance (mm)",
                             format=".2f")])
    return alt.vconcat(lifter.properties(height=height, width=width),
                       window.properties(height=height, width=width))


def stability_chart(scan: pd.DataFrame, height: int = 260, width: int | str = "container") -> alt.LayerChart:
    """Equilibrium gap of a square plate against its side, each point marked stable or
    not. ``scan`` is :func:`matdb.reporting.presentation.stability_scan_df` output."""
    data = scan.copy()
    data["verdict"] = np.where(~data["floats"], "does not float",
                               np.where(data["laterally_stable"], "floats, stable", "floats, unstable"))
    data["gap_shown_mm"] = data["gap_mm"].fillna(0.0)
    domain = ["floats, stable", "floats, unstable", "does not float"]
    colours = [EQUILIBRIUM_COLOUR, "#d98c00", "#8c8c8c"]
    line = alt.Chart(data).mark_line(color="#999999").encode(
        x=alt.X("side_mm:Q", title="side of a square plate (mm)"),
        y=alt.Y("gap_shown_mm:Q", title="equilibrium gap (mm; 0: does not float)"))
    pts = alt.Chart(data).mark_point(filled=True, size=90).encode(
        x="side_mm:Q", y="gap_shown_mm:Q",
        color=alt.Color("verdict:N", title="", scale=alt.Scale(domain=domain, range=colours)),
        shape=alt.Shape("verdict:N", title="", scale=alt.Scale(domain=domain,
                                                               range=["circle", "triangle", "cross"])),
        tooltip=[alt.Tooltip("side_mm:Q", title="side (mm)", format=".2f"),
                 alt.Tooltip("gap_mm:Q", title="gap (mm)", format=".3f"), "verdict:N"])
    return alt.layer(line, pts).properties(height=height, width=width)


def to_svg(chart, width: int | None = None) -> str:
    """A chart as a standalone SVG string (vl-convert-python; no browser, no network).

    ``"container"`` widths (which need a page around them) become ``width`` pixels.
    """
    spec = chart.to_dict()
    spec = _fixed_width(spec, width or 560)
    svg = vlc.vegalite_to_svg(spec)
    return svg


def _fixed_width(spec, width: int):
    if isinstance(spec, dict):
        return {k: (width if k == "width" and v == "container" else _fixed_width(v, width))
                for k, v in spec.items()}
    if isinstance(spec, list):
        return [_fixed_width(v, width) for v in spec]
    return spec
