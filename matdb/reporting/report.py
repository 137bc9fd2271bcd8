"""Design report: one self-contained HTML file (and a PDF of it) to hand over a design.

:func:`build_report` runs the same computation as ``matdb levitate`` at the coldest,
nominal and hottest temperature of the design, collects the provenance of every
property used, the bill of materials, charts (static SVG from the Altair
specifications the page shows, :mod:`matdb.reporting.charts`) and the strong-magnet cautions,
and :func:`render_html` fills the Jinja2 template ``templates/report.html.j2``. Every
number cell carries ``data-key`` (its path in the levitate JSON), ``data-case``
(``coldest``, ``nominal``, ``hottest``, ``worst``) and ``data-si`` (the exact SI value)
so the report can be checked against ``matdb levitate --format json``.
:func:`html_to_pdf` prints the HTML with WeasyPrint on A4 or Letter paper.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import html as _html
import importlib
import inspect
import json
import math
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

import jinja2
from sqlalchemy import select as sa_select
from sqlmodel import SQLModel

from matdb import __version__
from matdb.analysis.dynamics import analyse_dynamics
from matdb.analysis.levitate import levitate, stability_scan
from matdb.constants import kelvin_to_celsius
from matdb.data import catalog
from matdb.data.db import read_session
from matdb.design import load_design_text
from matdb.errors import InputError, PhysicsError
from matdb.physics.thermal import SAFETY_TEXT
from matdb.reporting import charts, presentation

PAPERS = ("A4", "Letter")
CASES = ("coldest", "nominal", "hottest", "worst")
REPORT_MAP_N = 31  # field-map grid of the report (n x n cells: the SVG and the PDF grow with n^2)
REPORT_SCAN_N = 8  # square sides of the stability chart (as stable_side_max scans)


# ---------------------------------------------------------------------------
# figures: label, display unit, scale from SI, method, the function whose docstring
# names the reference
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Figure:
    key: str
    label: str
    unit: str  # display unit ("" for a pure number, "yes/no" for a flag)
    scale: float
    method: str
    ref: str  # dotted name of the function whose References the figure follows
    worst: str | None = None  # key of the worst-case counterpart


FIGURES_FILE = Path(__file__).with_name("figures.toml")


def load_figures(path: Path = FIGURES_FILE) -> tuple[Figure, ...]:
    """The plate report's figures, in order, from ``figures.toml``.

    A figure's display unit and scale follow its key's SI suffix (:func:`_suffix_unit`)
    unless the file gives ``unit`` (and ``scale``).
    """
    figures = []
    for r in tomllib.loads(path.read_text(encoding="utf-8"))["figure"]:
        unit, scale = _suffix_unit(r["key"])
        figures.append(Figure(r["key"], r["label"], r.get("unit", unit), float(r.get("scale", scale)),
                              r["method"], r["ref"], r.get("worst")))
    return tuple(figures)


_ST = "matdb.analysis.floating"

STABILIZED_LABELS = {
    "floats": "floats",
    "lifter_distance_m": "lifter distance (floater centre to lifter face)",
    "k_lifter_z_n_m": "lifter vertical stiffness",
    "k_lifter_r_n_m": "lifter lateral stiffness",
    "k_plates_n_m": "plates' vertical stiffness (finite size)",
    "k_plates_dipole_n_m": "plates' vertical stiffness (dipole model)",
    "max_plate_distance_m": "largest stable plate distance (finite size)",
    "max_plate_distance_dipole_m": "largest stable plate distance (dipole model)",
    "min_plate_distance_m": "smallest plate distance",
    "max_payload_kg": "largest payload",
    "safe_distance_m": "distance to 0.5 mT",
    "tilt_stable": "stable in tilt",
    "k_z_total_n_m": "total vertical stiffness",
    "k_r_effective_n_m": "effective lateral stiffness",
    "lifter_distance_drift_um_per_k": "lifter distance drift",
    "temperature_k": "temperature of the analysis",
}

# units of a key, from its suffix (the levitate JSON names every key after its SI unit)
_SUFFIX_UNITS = (
    ("_s_m", "S/m", 1), ("_n_m_per_rad", "mN m/rad", 1e3), ("_um_per_k", "um/K", 1), ("_n_m", "N/m", 1), ("_hz", "Hz", 1),
    ("_pct", "%", 1), ("_kg", "g", 1e3), ("_n", "mN", 1e3), ("_m", "mm", 1e3), ("_t", "T", 1),
    ("_k", "degC", 1), ("_fraction", "", 1), ("_si", "", 1), ("_s", "s", 1),
)


def _suffix_unit(key: str) -> tuple[str, float]:
    for suf, unit, scale in _SUFFIX_UNITS:
        if key.endswith(suf):
            return unit, scale
    return "", 1.0


PLATE_FIGURES = load_figures()


# ---------------------------------------------------------------------------
# references from the docstrings
# ---------------------------------------------------------------------------

def _resolve(dotted: str):
    mod, _, name = dotted.rpartition(".")
    return getattr(importlib.import_module(mod), name)


def docstring_references(fn: Callable, _depth: int = 0) -> list[str]:
    """The entries of a numpydoc ``References`` section, one string each (a "See
    :func:`name`" entry is followed to that function's references)."""
    doc = inspect.getdoc(fn) or ""
    m = re.search(r"^References\n-+\n(.*?)(?:\n\S[^\n]*\n-+\n|\Z)", doc, re.S | re.M)
    if not m:
        return []
    refs: list[str] = []
    for part in re.split(r"^\.\. \[\d+\]\s*", m.group(1), flags=re.M):
        text = " ".join(part.split())
        if not text:
            continue
        see = re.match(r"See :(func|mod):`~?([\w.]+)`", text)
        if see and _depth < 3:
            kind, target = see.groups()
            mod = inspect.getmodule(fn)
            if kind == "mod":
                try:
                    obj = importlib.import_module(target)
                except ImportError:
                    obj = None
            else:
                obj = getattr(mod, target.rpartition(".")[2], None) if mod else None
            if obj is not None:
                refs.extend(docstring_references(obj, _depth + 1))
                continue
        refs.append(text)
    return refs


def references_of(dotted: str) -> list[str]:
    try:
        return docstring_references(_resolve(dotted))
    except (ImportError, AttributeError):
        return []


# ---------------------------------------------------------------------------
# fingerprints
# ---------------------------------------------------------------------------

def database_fingerprint(url: str | None = None) -> str:
    """SHA-256 over every stored row (all tables, primary-key order; entry timestamps
    left out, so two databases with the same content agree). 16 hex digits."""
    h = hashlib.sha256()
    with read_session(url) as s:
        for name in sorted(SQLModel.metadata.tables):
            table = SQLModel.metadata.tables[name]
            cols = [c for c in table.columns if c.name != "entered_at"]
            pk = list(table.primary_key.columns) or cols
            try:
                rows = s.execute(sa_select(*cols).order_by(*pk)).all()
            except Exception:  # a table this database does not have (older schema)
                continue
            h.update(name.encode())
            for r in rows:
                h.update(json.dumps([str(v) for v in r], ensure_ascii=False).encode())
    return h.hexdigest()[:16]


# ---------------------------------------------------------------------------
# cells
# ---------------------------------------------------------------------------

def fmt_number(v: float, digits: int = 4) -> str:
    """``digits`` significant digits, plain or exponent form as %g chooses."""
    return f"{v:.{digits}g}"


def cell(value: Any, key: str, case: str, unit: str, scale: float) -> dict:
    """One table cell: the text shown and its exact SI value."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return {"text": "-", "key": key, "case": case, "si": "null", "unit": unit}
    if isinstance(value, bool):
        return {"text": "yes" if value else "no", "key": key, "case": case,
                "si": "true" if value else "false", "unit": "yes/no"}
    if isinstance(value, (int, float)):
        if unit == "degC":
            shown = kelvin_to_celsius(float(value))
        else:
            shown = float(value) * scale
        text = str(int(value)) if isinstance(value, int) else fmt_number(shown)
        return {"text": text, "key": key, "case": case, "si": repr(value), "unit": unit}
    return {"text": str(value), "key": key, "case": case, "si": None, "unit": unit}


def _is_scalar(v) -> bool:
    return v is None or isinstance(v, (bool, int, float))


# ---------------------------------------------------------------------------
# building the report
# ---------------------------------------------------------------------------

def _temperatures(design) -> tuple[float, float, float]:
    """(coldest, nominal, hottest) of a design [K]."""
    if getattr(design, "mode", "") == "stabilized":
        ts = [t for t in (design.temperature_k, design.temp_min_k, design.temp_max_k) if t is not None]
        return min(ts), float(design.temperature_k), max(ts)
    c = design.conditions
    lo, hi = c.extremes()
    return lo, c.nominal_k, hi


def run_cases(design, levitate_fn=None) -> dict[str, dict]:
    """levitate results: ``nominal`` (the design as given, what ``matdb levitate``
    prints), ``coldest`` and ``hottest`` (``matdb levitate --temp``)."""

    fn = levitate_fn or levitate
    return _three(design, fn)


def _three(design, fn) -> dict[str, dict]:
    """``fn(design)`` at the design's conditions and ``fn(design, temp_k=...)`` at its
    coldest and hottest temperature (a case at the nominal temperature reuses it: the
    result is the same)."""
    t_cold, t_nom, t_hot = _temperatures(design)
    out = {"nominal": fn(design)}
    out["coldest"] = out["nominal"] if t_cold == t_nom else fn(design, temp_k=t_cold)
    if t_hot == t_nom:
        out["hottest"] = out["nominal"]
    elif t_hot == t_cold:
        out["hottest"] = out["coldest"]
    else:
        out["hottest"] = fn(design, temp_k=t_hot)
    return out


def _figure_rows(results: dict[str, dict], figures: tuple[Figure, ...], default_method: str = "",
                 default_ref: str = "") -> list[dict]:
    nom = results["nominal"]
    rows = []
    done = set()
    for f in figures:
        if f.key not in nom:
            continue
        done.add(f.key)
        cells = [cell(results[c].get(f.key), f.key, c, f.unit, f.scale) for c in ("coldest", "nominal", "hottest")]
        if f.worst and f.worst in nom:
            done.add(f.worst)
            cells.append(cell(nom.get(f.worst), f.worst, "worst", f.unit, f.scale))
        else:
            cells.append(None)
        rows.append({"key": f.key, "label": f.label, "unit": "" if f.unit == "yes/no" else f.unit,
                     "cells": cells, "method": f.method, "refs": references_of(f.ref)})
    # any further scalar the computation gives
    for key, v in nom.items():
        if key in done or not _is_scalar(v) or isinstance(v, str):
            continue
        unit, scale = ("yes/no", 1) if isinstance(v, bool) else _suffix_unit(key)
        cells = [cell(results[c].get(key), key, c, unit, scale) for c in ("coldest", "nominal", "hottest")]
        cells.append(None)
        rows.append({"key": key, "label": STABILIZED_LABELS.get(key, key.replace("_", " ")),
                     "unit": "" if unit == "yes/no" else unit, "cells": cells,
                     "method": default_method, "refs": references_of(default_ref) if default_ref else []})
    return rows


def _flatten(obj, prefix: str = "") -> dict[str, Any]:
    """Numeric leaves of nested dicts and lists, keyed ``a.0.b``."""
    out: dict[str, Any] = {}
    if isinstance(obj, dict):
        for k, v in obj.items():
            out.update(_flatten(v, f"{prefix}{k}."))
    elif isinstance(obj, (list, tuple)):
        for i, v in enumerate(obj):
            out.update(_flatten(v, f"{prefix}{i}."))
    elif _is_scalar(obj):
        out[prefix[:-1]] = obj
    return out


def _records_table(rows: list[dict], path: str, columns: list[tuple[str, str]], case: str = "nominal") -> dict:
    """A table of a list of records from the levitate JSON (``path`` its key)."""
    head = []
    for key, label in columns:
        unit, _scale = _suffix_unit(key)
        head.append(f"{label} ({unit})" if unit and unit != "yes/no" else label)
    body = []
    for i, r in enumerate(rows):
        line = []
        for key, _label in columns:
            v = r.get(key)
            if isinstance(v, (list, tuple)):
                parts = [cell(x, f"{path}.{i}.{key}.{j}", case, *_suffix_unit(key)) for j, x in enumerate(v)]
                line.append({"multi": parts})
            else:
                line.append(cell(v, f"{path}.{i}.{key}", case, *_suffix_unit(key)))
        body.append(line)
    return {"head": head, "rows": body}


def _inputs_as_typed(text: str) -> list[dict]:
    """(table, key, value as typed) of a design file."""
    doc = tomllib.loads(text)
    out = []

    def walk(d, where):
        for k, v in d.items():
            if isinstance(v, dict):
                walk(v, f"{where}{k}.")
            elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
                for i, x in enumerate(v):
                    walk(x, f"{where}{k}[{i + 1}].")
            else:
                shown = ", ".join(str(x) for x in v) if isinstance(v, list) else str(v)
                if isinstance(v, bool):
                    shown = "true" if v else "false"
                out.append({"key": f"{where}{k}", "value": shown})
    walk(doc, "")
    return out


def _provenance(design, url: str | None) -> list[dict]:
    """Every database property the design uses: the value in use, its kind, source
    (with the lab's source note and date for a measured value) and uncertainty."""

    rows: list[dict] = []
    mats: dict[str, Any] = {}
    grades: dict[str, Any] = {}
    if getattr(design, "mode", "") == "stabilized":
        for st in design.stations:
            for m in (st.lifter, st.floater):
                gp = getattr(m, "grade_props", None) or (catalog.get_grade(m.grade, url) if getattr(m, "grade", None) else None)
                if gp is not None:
                    grades[gp.grade] = gp
            pl = st.plates
            mid = getattr(pl, "material", None)
            if mid:
                mats[mid] = getattr(pl, "material_props", None) or catalog.get_material(mid, url)
    else:
        mat = design.plate.material_props
        if mat is not None:
            mats[mat.id] = mat
        for g in design.magnets.grades.values():
            grades[g.grade] = g

    for mid, mp in mats.items():
        if mp is None:
            continue
        values = catalog.material_values(mid, url)
        in_use = next((v for v in values if v["value_id"] == mp.value_id), None) or {}
        common = {"item": mid, "kind": in_use.get("value_kind", mp.value_kind),
                  "source": in_use.get("source", mp.source), "date": in_use.get("date"),
                  "note": in_use.get("note") or "", "status": in_use.get("status"),
                  "value_id": mp.value_id}
        if mp.anisotropic and mp.chi_perp_si is not None:
            rows.append({**common, "column": "chi_perp_si", "property": "chi perpendicular (SI volume)",
                         "value": fmt_number(mp.chi_perp_si),
                         "uncertainty": "-" if mp.uncertainty_si is None else fmt_number(mp.uncertainty_si)})
            rows.append({**common, "column": "chi_par_si", "property": "chi parallel (SI volume)",
                         "value": fmt_number(mp.chi_par_si),
                         "uncertainty": "-" if mp.uncertainty_si is None else fmt_number(mp.uncertainty_si)})
        else:
            rows.append({**common, "column": "chi_si", "property": "chi (SI volume)", "value": fmt_number(mp.chi_si),
                         "uncertainty": "-" if mp.uncertainty_si is None else fmt_number(mp.uncertainty_si)})
        if mp.temp_coeff_per_k is not None:
            rows.append({**common, "column": "temp_coeff_per_k", "property": "temperature coefficient of |chi| (1/K)",
                         "value": fmt_number(mp.temp_coeff_per_k), "uncertainty": "-"})
        rows.append({**common, "column": "density_kg_m3", "property": "density (kg/m^3)",
                     "value": fmt_number(mp.density_kg_m3),
                     "uncertainty": "-",
                     "kind": "handbook" if in_use.get("density_kg_m3") is None else common["kind"]})
    labels = {"br_t": ("Br (T)", 1), "br_min_t": ("Br, minimum (T)", 1), "hcj_ka_m": ("HcJ (kA/m)", 1),
              "alpha_br_pct_per_k": ("alpha of Br (%/K)", 1), "beta_hcj_pct_per_k": ("beta of HcJ (%/K)", 1),
              "max_temp_c": ("max working temperature (C)", 1), "density_kg_m3": ("density (kg/m^3)", 1)}
    for gname, gp in grades.items():
        values = catalog.grade_values(gname, url)
        in_use = next((v for v in values if v["value_id"] == gp.value_id), None) or {}
        published = next((v for v in values if v["value_kind"] != "measured" and not v["retracted"]), None) or {}
        for f, (label, _s) in labels.items():
            val = getattr(gp, f, None)
            if val is None:
                continue
            row_src = in_use if in_use.get(f) is not None else published
            br_min = (gp.br_min_t - gp.br_t) if f == "br_t" and gp.br_min_t is not None else None
            rows.append({"item": gname, "column": f, "property": label, "value": fmt_number(val),
                         "kind": row_src.get("value_kind", gp.value_kind), "source": row_src.get("source", gp.source),
                         "date": row_src.get("date"), "note": row_src.get("note") or "",
                         "status": row_src.get("status"), "value_id": row_src.get("value_id"),
                         "uncertainty": ("-" if br_min is None else f"minimum {fmt_number(gp.br_min_t)} T")})
    _status_marks(rows, set(mats), url)
    return rows


def _status_marks(rows: list[dict], material_ids: set, url: str | None) -> None:
    """The checked-against-source status of each number (verified, corrected, unverified,
    measured), from :func:`matdb.data.catalog.status_marks` (the schema is migrated on opening,
    so every database has the provenance tables)."""
    marks = catalog.status_marks(url)
    for r in rows:
        kind = "material" if r["item"] in material_ids else "magnet"
        st = marks.get(kind, {}).get(r["item"], {}).get(r.get("column", ""))
        if st:
            r["status"] = st


DYNAMICS_MODE_COLUMNS = (("frequency_hz", "frequency"), ("q", "Q"), ("q_eddy", "Q, eddy currents"),
                         ("q_air", "Q, air"), ("ring_down_s", "ring-down time"),
                         ("noise_micro_g_rthz", "thermal noise (micro-g/rtHz)"))


def _dynamics(design) -> dict | None:
    """Modes, damping, Q, ring-down and noise of a floating plate at the coldest, nominal
    and hottest temperature (None for a floating-magnet design)."""
    if getattr(design, "mode", "plate") != "plate":
        return None
    try:
        cases = _three(design, analyse_dynamics)
    except (InputError, PhysicsError) as exc:
        return {"error": str(exc)}
    tables = []
    for case in ("coldest", "nominal", "hottest"):
        r = cases[case]
        head = ["mode", *(f"{lbl} ({u})" if (u := _suffix_unit(k)[0]) else lbl for k, lbl in DYNAMICS_MODE_COLUMNS),
                "dominant damping"]
        rows = []
        for i, m in enumerate(r.get("modes") or []):
            rows.append({"name": m.get("name", ""), "dominant": m.get("dominant_damping") or "",
                         "cells": [cell(m.get(k), f"dynamics.modes.{i}.{k}", case, *_suffix_unit(k))
                                   for k, _lbl in DYNAMICS_MODE_COLUMNS]})
        scalars = [{"label": lbl, "cell": cell(r.get(k), f"dynamics.{k}", case, *_suffix_unit(k))}
                   for k, lbl in (("pressure_pa", "gas pressure (Pa)"), ("mass_kg", "moving mass (g)"),
                                  ("sigma_in_plane_s_m", "conductivity in plane (S/m)"),
                                  ("sigma_across_s_m", "conductivity across (S/m)")) if k in r]
        tables.append({"case": case, "head": head, "rows": rows, "scalars": scalars,
                       "warnings": r.get("warnings") or []})
    return {"tables": tables, "results": cases,
            "refs": docstring_references(analyse_dynamics),
            "method": "Rigid-body modes of K v = omega^2 M v; eddy-current damping from a P1 finite-element "
                      "solution on the plate outline (slots and holes included), squeeze-film and shear air "
                      "damping; Q = 1 / (2 zeta); Brownian acceleration noise sqrt(4 k_B T omega_0 / (m Q))."}


def _charts_plate(design, result) -> list[dict]:

    out = [{"title": "Lift against gap",
            "caption": "Solid: magnetic lift on the plate; dashed: weight of plate and payload; dot: the "
                       "equilibrium gap (nominal temperature).",
            "svg": charts.to_svg(charts.lift_chart(result))}]
    gap = result["gap_m"] if result.get("gap_m") is not None else design.plate.min_gap_m
    p = design.plate
    extent = (p.size[0], p.size[1] if p.shape == "rectangle" else p.size[0])
    fmap = presentation.field_map_df(design.arrangement(result.get("temperature_k")), gap, extent, n=REPORT_MAP_N)
    pol = presentation.polarity_df(design.arrangement(rigid=True))
    out.append({"title": "|B| over the footprint and the polarity layout",
                "caption": f"Left: |B| at {gap * 1e3:.3g} mm above the magnets, plate outline dashed. "
                           "Right: top view, N = north pole up, S = north pole down.",
                "svg": charts.to_svg(charts.field_and_polarity_chart(
                    fmap, pol, gap * 1e3, outline=charts.plate_outline_df(design)))})
    scan = presentation.stability_scan_df(stability_scan(design, n=REPORT_SCAN_N))
    out.append({"title": "Stability over plate size",
                "caption": "Square plates of the design's material and thickness with the same payload: "
                           "equilibrium gap and lateral stability against the side.",
                "svg": charts.to_svg(charts.stability_chart(scan))})
    return out


def _charts_stabilized(result) -> list[dict]:

    sched = presentation.stabilized_window_df(result)
    if not len(sched):
        return []
    return [{"title": "Schedule: lifter distance and stable plate distances against payload",
             "caption": "Top: where to set the lifter for each payload. Bottom: the band of plate distances "
                        "that keeps the floater stable.",
             "svg": charts.to_svg(charts.schedule_chart(sched))}]


def _bom(design, url) -> dict | None:

    if getattr(design, "mode", "") == "stabilized":
        return None
    df = presentation.bill_of_materials(design, url)
    rows = []
    for r in df.to_dict(orient="records"):
        cost = r.get("cost_usd")
        rows.append({"item": r["item"], "size": r["size"], "what": r["grade_or_material"], "count": int(r["count"]),
                     "mass_g": fmt_number(r["mass_g"]),
                     "price": "-" if r.get("price_usd_per_kg") is None or r["price_usd_per_kg"] != r["price_usd_per_kg"]
                     else fmt_number(r["price_usd_per_kg"]),
                     "cost": "-" if cost is None or cost != cost else f"{cost:.2f}",
                     "illustrative": bool(r["illustrative"])})
    total = df["cost_usd"].sum(min_count=1)
    return {"rows": rows, "total": None if total != total else f"{total:.2f}",
            "any_illustrative": any(r["illustrative"] for r in rows)}


def build_report(text: str, *, source_name: str = "design.toml", url: str | None = None,
                 charts: bool = True, now: _dt.datetime | None = None,
                 levitate_fn: Callable | None = None) -> dict:
    """Everything the report template shows, from a design file's text.

    ``levitate_fn`` replaces :func:`matdb.analysis.levitate.levitate` (the page passes its cached
    call). Raises :class:`~matdb.errors.InputError` for a bad design.
    """

    design = load_design_text(text, source=source_name)
    mode = getattr(design, "mode", "plate")
    results = run_cases(design, levitate_fn)
    nom = results["nominal"]
    t_cold, t_nom, t_hot = _temperatures(design)
    figures = PLATE_FIGURES if mode == "plate" else ()
    ctx: dict[str, Any] = {
        "title": getattr(design, "name", None) or Path(source_name).stem,
        "description": getattr(design, "description", None) or "",
        "demo": "demo" in ((getattr(design, "name", "") or "") + (getattr(design, "description", "") or "")).lower(),
        "mode": mode,
        "mode_label": "floating plate" if mode == "plate" else "floating magnet",
        "source_name": source_name,
        "design_text": text,
        "design_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest()[:16],
        "inputs": _inputs_as_typed(text),
        "version": __version__,
        "db_fingerprint": database_fingerprint(url),
        "date": (now or _dt.datetime.now(_dt.timezone.utc)).strftime("%Y-%m-%d %H:%M UTC"),
        "temps": [{"case": c, "k": t, "c": kelvin_to_celsius(t)} for c, t in
                  (("coldest", t_cold), ("nominal", t_nom), ("hottest", t_hot))],
        "figures": _figure_rows(results, figures, *(
            ("Floating-plate analysis.", "matdb.analysis.levitate.levitate_plate") if mode == "plate" else
            ("Floating-magnet analysis.", f"{_ST}.levitate_stabilized"))),
        "warnings": _warnings(results),
        "safety_text": SAFETY_TEXT,
        "safe_distance_m": nom.get("safe_distance_m"),
        "safe_cell": cell(nom.get("safe_distance_m"), "safe_distance_m", "nominal", "cm", 1e2),
        "large": any("Strong magnets" in w for w in nom.get("warnings", [])),
        "provenance": _provenance(design, url),
        "provenance_notes": [],
        "bom": _bom(design, url),
        "tables": [],
        "charts": [],
        "dynamics": _dynamics(design),
        "results": results,
    }
    if mode == "plate":
        ctx["tables"].append({"title": "Lift curve (nominal temperature)",
                              **_records_table(nom.get("lift_curve") or [], "lift_curve",
                                               [("gap_m", "gap"), ("force_n", "lift")])})
        if nom.get("k_matrix"):
            dofs = nom.get("k_matrix_dofs") or []
            ctx["k_matrix"] = {"dofs": dofs, "rows": [
                [cell(v, f"k_matrix.{i}.{j}", "nominal", "", 1) for j, v in enumerate(row)]
                for i, row in enumerate(nom["k_matrix"])]}
    else:
        cols = [("payload_kg", "payload"), ("lifter_distance_m", "lifter distance"),
                ("min_plate_distance_m", "smallest plate distance"),
                ("max_plate_distance_m", "largest stable plate distance")]
        ctx["tables"].append({"title": "Schedule (nominal temperature)",
                              **_records_table(nom.get("window") or [], "window", cols)})
        if nom.get("stations"):
            keep = ("x_m", "y_m", "share_fraction", "share_n", "lifter_distance_m", "max_plate_distance_m",
                    "k_z_total_n_m", "k_r_effective_n_m", "stable")
            scols = [(k, STABILIZED_LABELS.get(k, k.replace("_", " "))) for k in keep if k in nom["stations"][0]]
            ctx["tables"].append({"title": "Stations (nominal temperature)",
                                  **_records_table(nom["stations"], "stations", scols)})
    _number_references(ctx)
    _number_notes(ctx)
    if charts:
        ctx["charts"] = _charts_plate(design, nom) if mode == "plate" else _charts_stabilized(nom)
    return ctx


def _number_notes(ctx: dict) -> None:
    """Each value row's note once, numbered; the provenance rows point to it."""
    notes: list[str] = []
    for p in ctx["provenance"]:
        n = p.get("note") or ""
        if n:
            if n not in notes:
                notes.append(n)
            p["note_number"] = notes.index(n) + 1
        else:
            p["note_number"] = None
    ctx["provenance_notes"] = notes


def _number_references(ctx: dict) -> None:
    """One numbered reference list; each figure row keeps the numbers it cites."""
    refs: list[str] = []
    for f in ctx["figures"]:
        nums = []
        for r in f["refs"]:
            if r not in refs:
                refs.append(r)
            nums.append(refs.index(r) + 1)
        f["ref_numbers"] = nums
    dyn = ctx.get("dynamics")
    if dyn and dyn.get("refs"):
        for r in dyn["refs"]:
            if r not in refs:
                refs.append(r)
        dyn["ref_numbers"] = [refs.index(r) + 1 for r in dyn["refs"]]
    ctx["references"] = refs


def _warnings(results: dict[str, dict]) -> list[dict]:
    seen: dict[str, list[str]] = {}
    for case in ("nominal", "coldest", "hottest"):
        for w in results[case].get("warnings", []):
            seen.setdefault(w, [])
            if case not in seen[w]:
                seen[w].append(case)
    return [{"text": w, "cases": ", ".join(c)} for w, c in seen.items()]


# ---------------------------------------------------------------------------
# rendering
# ---------------------------------------------------------------------------

def _env():
    return jinja2.Environment(
        loader=jinja2.PackageLoader("matdb", "templates"),
        autoescape=jinja2.select_autoescape(["html", "j2"]),
        trim_blocks=True, lstrip_blocks=True, undefined=jinja2.StrictUndefined)


def render_html(ctx: dict, paper: str = "A4") -> str:
    """The report as one self-contained HTML page (inline CSS and SVG; nothing fetched)."""
    if paper not in PAPERS:
        raise InputError(f"expected one of {', '.join(PAPERS)}, got {paper!r}", field="paper")
    return _env().get_template("report.html.j2").render(**ctx, paper=paper)


def html_to_pdf(html: str) -> bytes:
    """PDF of a report page with WeasyPrint (the page size comes from the HTML's @page)."""
    import weasyprint  # lazy: PDF only; ~1 s of import and the Pango libraries, which HTML does not need

    return weasyprint.HTML(string=html, base_url=None).write_pdf()


def report_bytes(text: str, fmt: str, *, paper: str = "A4", source_name: str = "design.toml",
                 url: str | None = None, levitate_fn: Callable | None = None) -> bytes:
    """The report of a design's text as ``html`` or ``pdf`` bytes."""
    if fmt not in ("html", "pdf"):
        raise InputError(f"expected html or pdf, got {fmt!r}", field="format")
    html = render_html(build_report(text, source_name=source_name, url=url, levitate_fn=levitate_fn), paper)
    return html.encode("utf-8") if fmt == "html" else html_to_pdf(html)


def escape(s: str) -> str:
    return _html.escape(s)
