"""Tables and text the local web page and the report show, prepared without any page code.

Every function here returns plain pandas DataFrames or strings (column names carry the
unit), so the page only lays them out and the same numbers can be checked in tests or
printed elsewhere. Nothing here imports Streamlit, and nothing here is physics: the
levitation requirement and what magnet arrangements reach are in
:mod:`matdb.physics.levitation` and :mod:`matdb.analysis.reach`.
"""

from __future__ import annotations

import hashlib
import math
import re
from dataclasses import replace
from typing import Sequence

import numpy as np
import pandas as pd

from matdb.advisor.exact import candidate_design
from matdb.constants import celsius_to_kelvin, kelvin_to_celsius
from matdb.analysis.levitate import format_intervals
from matdb.analysis.synthesis import design_of
from matdb.data import catalog
from matdb.design import PlateDesign, body_volume, design_to_toml, document_to_toml, exact_quantity, exact_temperature
from matdb.errors import InputError
from matdb.output import csv_text
from matdb.physics.levitation import levitation_requirement
from matdb.physics.thermal import br_at, lift_factor
from matdb.reporting.schedule import SCHEDULE_COLUMNS, schedule_records
from matdb.units import CONVENTIONS, chi_from_si_volume

# ---------------------------------------------------------------------------
# susceptibility conventions as people read them
# ---------------------------------------------------------------------------

CHI_UNIT_LABELS = {
    "si-volume": "SI volume (dimensionless)",
    "cgs-volume": "CGS volume, emu/(cm^3 Oe)",
    "si-mass": "SI mass, m^3/kg",
    "cgs-mass": "CGS mass, cm^3/g (emu)",
    "si-molar": "SI molar, m^3/mol",
    "cgs-molar": "CGS molar, cm^3/mol (emu)",
}
CHI_UNIT_SHORT = {
    "si-volume": "SI volume, dimensionless",
    "cgs-volume": "emu/(cm^3 Oe)",
    "si-mass": "m^3/kg",
    "cgs-mass": "cm^3/g",
    "si-molar": "m^3/mol",
    "cgs-molar": "cm^3/mol",
}

# ---------------------------------------------------------------------------
# one number format for every page
# ---------------------------------------------------------------------------

SIG_DIGITS = 3  #: significant digits of an ordinary number shown to people
CHI_SIG_DIGITS = 4  #: susceptibilities: handbooks quote them to about four digits
CHI_PRINTF = f"%.{CHI_SIG_DIGITS - 1}e"  #: the same format for table columns (printf style)
MISSING = "\u2014"  #: shown where there is no value (an em dash, never "None" or "nan")
DIMENSIONLESS = "dimensionless"


def _is_missing(value) -> bool:
    if value is None:
        return True
    try:
        return bool(pd.isna(value))
    except (TypeError, ValueError):
        return False


def fmt_number(value, unit: str = "", *, sig: int = SIG_DIGITS, sci: bool | None = None,
               missing: str = MISSING) -> str:
    """One number as people read it: ``sig`` significant digits, then the unit.

    Scientific notation (``-1.70e-04``) when ``sci`` is True, or, when ``sci`` is None, for
    magnitudes below 1e-3 or from 1e5 on; fixed decimals otherwise (``0.640``, ``12.7``,
    ``1400``). A unit of "1" or "dimensionless" prints nothing after the number. Missing
    values print ``missing``; booleans print yes / no; infinities print "unbounded".
    Downloads keep exact values: use this for display only.
    """
    if _is_missing(value):
        return missing
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, str):
        return value
    v = float(value)
    if not math.isfinite(v):
        return "unbounded" if v > 0 else "minus unbounded"
    if v == 0.0:
        text = "0" if not sci else f"{0.0:.{sig - 1}e}"
    else:
        rounded = float(f"{v:.{sig - 1}e}")
        use_sci = sci if sci is not None else (abs(rounded) < 1e-3 or abs(rounded) >= 1e5)
        if use_sci:
            text = f"{v:.{sig - 1}e}"
        else:
            decimals = max(0, sig - 1 - int(math.floor(math.log10(abs(rounded)))))
            text = f"{rounded:.{decimals}f}"
    u = (unit or "").strip()
    return text if u in ("", "1", DIMENSIONLESS) else f"{text} {u}"


def fmt_chi(value, unit: str = "") -> str:
    """A susceptibility: always scientific, :data:`CHI_SIG_DIGITS` significant digits
    (``-1.700e-04``); the same text as :data:`CHI_PRINTF` gives in table columns."""
    return fmt_number(value, unit, sig=CHI_SIG_DIGITS, sci=True)


def fmt_length_mm(value_m, sig: int = SIG_DIGITS) -> str:
    """A length given in metres, shown in millimetres (``0.640 mm``)."""
    return fmt_number(None if _is_missing(value_m) else float(value_m) * 1e3, "mm", sig=sig)


def fmt_temperature_c(value_k) -> str:
    """A temperature given in kelvin, shown in degrees Celsius to 0.1 degC."""
    if _is_missing(value_k):
        return MISSING
    return f"{kelvin_to_celsius(float(value_k)):.1f} degC"


def unit_label(label: str, unit: str) -> str:
    """Column or axis label with its unit in brackets; "1" reads "dimensionless"."""
    u = (unit or "").strip()
    if u in ("", "1"):
        u = DIMENSIONLESS
    return f"{label} ({u})"


MATERIAL_COLUMNS = [
    "id", "name", "kind", "chi_si", "chi_perp_si", "chi_par_si", "density_kg_m3",
    "abs_chi_per_density", "uncertainty_si", "temp_coeff_per_k", "molar_mass_kg_mol",
    "price_usd_per_kg", "price_illustrative", "source", "value_kind",
]


def _check_convention(convention: str) -> str:
    if convention not in CONVENTIONS:
        raise InputError(f"expected one of {', '.join(CONVENTIONS)}, got {convention!r}", field="unit")
    return convention


def chi_in_convention(chi_si, density_kg_m3, molar_mass_kg_mol, convention: str) -> float:
    """One SI volume susceptibility expressed in ``convention`` (NaN when the molar mass
    a molar convention needs is unknown, e.g. for a polymer)."""
    _check_convention(convention)
    if chi_si is None or (isinstance(chi_si, float) and math.isnan(chi_si)):
        return math.nan
    mm = None if molar_mass_kg_mol is None or pd.isna(molar_mass_kg_mol) else float(molar_mass_kg_mol)
    if convention in ("si-molar", "cgs-molar") and mm is None:
        return math.nan
    return chi_from_si_volume(float(chi_si), convention, float(density_kg_m3), mm)


def materials_table(convention: str = "si-volume", url: str | None = None) -> pd.DataFrame:
    """Every material with the value in use, plus its chi in ``convention``.

    Columns: :data:`MATERIAL_COLUMNS`, then ``chi_shown``, ``chi_perp_shown`` and
    ``chi_par_shown`` (the SI volume values converted with
    :func:`matdb.units.chi_from_si_volume`; NaN where a molar value needs a molar mass the
    database does not hold). ``abs_chi_per_density`` is |chi_si| / rho in m^3/kg.
    """
    _check_convention(convention)
    rows = []
    for p in catalog.list_materials(url):
        rows.append({
            "id": p.id, "name": p.name, "kind": p.kind, "chi_si": p.chi_si,
            "chi_perp_si": p.chi_perp_si, "chi_par_si": p.chi_par_si,
            "density_kg_m3": p.density_kg_m3, "abs_chi_per_density": p.abs_chi_per_density,
            "uncertainty_si": p.uncertainty_si, "temp_coeff_per_k": p.temp_coeff_per_k,
            "molar_mass_kg_mol": p.molar_mass_kg_mol, "price_usd_per_kg": p.price_usd_per_kg,
            "price_illustrative": p.price_illustrative, "source": p.source,
            "value_kind": p.value_kind,
        })
    df = pd.DataFrame(rows, columns=MATERIAL_COLUMNS)
    for col, out in (("chi_si", "chi_shown"), ("chi_perp_si", "chi_perp_shown"), ("chi_par_si", "chi_par_shown")):
        df[out] = [
            chi_in_convention(c, rho, mm, convention)
            for c, rho, mm in zip(df[col], df["density_kg_m3"], df["molar_mass_kg_mol"])
        ]
    for col in ("chi_si", "chi_perp_si", "chi_par_si", "uncertainty_si", "temp_coeff_per_k",
                "molar_mass_kg_mol", "price_usd_per_kg", "chi_shown", "chi_perp_shown", "chi_par_shown"):
        df[col] = pd.to_numeric(df[col], errors="coerce").astype(float)
    return df


def filter_materials(df: pd.DataFrame, text: str = "", diamagnets_only: bool = False,
                     value_kinds: Sequence[str] | None = None) -> pd.DataFrame:
    """Rows whose id or name contains ``text`` (any case), optionally diamagnets only and
    only the given value kinds."""
    out = df
    t = (text or "").strip().lower()
    if t:
        mask = out["id"].str.lower().str.contains(t, regex=False) | out["name"].str.lower().str.contains(t, regex=False)
        out = out[mask]
    if diamagnets_only:
        out = out[out["chi_si"] < 0]
    if value_kinds:
        out = out[out["value_kind"].isin(list(value_kinds))]
    return out.reset_index(drop=True)


def compare_materials(df: pd.DataFrame, ids: Sequence[str], rounded: bool = False,
                      marks: dict[str, dict[str, str]] | None = None) -> pd.DataFrame:
    """Side-by-side view: one column per chosen material, one row per property (units in
    the row names). ``rounded`` turns numbers into short strings for people (4
    significant digits; susceptibilities in exponent form); with ``marks`` (from
    :func:`matdb.data.catalog.status_marks`) each stored value is followed by its status mark."""
    unknown = [i for i in ids if i not in set(df["id"])]
    if unknown:
        raise InputError(f"unknown material id(s) {', '.join(unknown)}", field="compare")
    fields = {
        "name": "name",
        "chi_si": "chi, SI volume",
        "chi_perp_si": "chi perpendicular (c axis), SI volume",
        "chi_par_si": "chi parallel (basal plane), SI volume",
        "density_kg_m3": "density, kg/m^3",
        "abs_chi_per_density": "|chi|/density, m^3/kg",
        "required_t2_m": "-B dB/dz needed to float, T^2/m",
        "value_kind": "value kind",
        "source": "source",
    }
    sub = df.set_index("id").loc[list(ids)]
    if "required_t2_m" not in sub.columns:
        sub = sub.assign(required_t2_m=np.atleast_1d(levitation_requirement(sub["chi_si"].to_numpy(float),
                                                                            sub["density_kg_m3"].to_numpy(float))))
    table = sub[list(fields)].T.astype(object)
    if rounded:
        for key in table.index:
            vals = [_human(v, sci=key.startswith("chi") or key == "abs_chi_per_density") for v in table.loc[key]]
            if marks is not None and key in ("chi_si", "chi_perp_si", "chi_par_si", "density_kg_m3"):
                vals = [f"{v} {catalog.mark(marks.get(i, {}).get(key))}" if v not in ("", "-") else v
                        for v, i in zip(vals, table.columns)]
            table.loc[key] = vals
    table.index = [fields[k] for k in table.index]
    return table


def _human(v, sci: bool = False) -> str:
    """:func:`fmt_chi` for susceptibilities, :func:`fmt_number` otherwise (no unit)."""
    if isinstance(v, (int, float, np.floating)) and not isinstance(v, bool) or _is_missing(v):
        return fmt_chi(v) if sci else fmt_number(v)
    return str(v)


# ---------------------------------------------------------------------------
# levitation requirement per material
# ---------------------------------------------------------------------------

def levitation_requirements(df: pd.DataFrame, reach: tuple[float, float] | None = None) -> pd.DataFrame:
    """The levitation view: every diamagnet with the -B dB/dz it needs, easiest first.

    ``df`` is :func:`materials_table` output. Uses ``chi_si`` (for pyrolytic graphite the
    perpendicular value, the one a plate with its c axis vertical sees over magnets).
    With ``reach = (low, high)`` in T^2/m the column ``verdict`` says whether common
    magnet arrangements reach the requirement: ``"plate floats"`` (needs at most ``low``),
    ``"small pieces only"`` (between low and high: only near the strongest spots of the
    field) or ``"out of reach"``. Paramagnets are listed last with ``required_t2_m`` = NaN and
    ``verdict`` = ``"pulled in (paramagnetic)"``.
    """
    req = np.atleast_1d(levitation_requirement(df["chi_si"].to_numpy(float), df["density_kg_m3"].to_numpy(float)))
    out = df[["id", "name", "chi_si", "density_kg_m3", "source", "value_kind"]].copy()
    out["required_t2_m"] = np.where(np.isfinite(req), req, np.nan)
    verdicts = []
    for v in out["required_t2_m"]:
        if math.isnan(v):
            verdicts.append("pulled in (paramagnetic)")
        elif reach is None:
            verdicts.append("")
        elif v <= reach[0]:
            verdicts.append("plate floats")
        elif v <= reach[1]:
            verdicts.append("small pieces only")
        else:
            verdicts.append("out of reach")
    out["verdict"] = verdicts
    out = out.sort_values(["required_t2_m", "id"], na_position="last").reset_index(drop=True)
    out["rank"] = range(1, len(out) + 1)
    return out


# ---------------------------------------------------------------------------
# magnet grades against temperature
# ---------------------------------------------------------------------------

def grade_temperature_curves(grades_df: pd.DataFrame, grades: Sequence[str],
                             t_min_c: float = -40.0, t_max_c: float = 200.0, n: int = 121) -> pd.DataFrame:
    """Br(T) and relative lift (Br(T)/Br(20 C))^2 for the chosen grades.

    Long format, one row per grade and temperature: ``grade``, ``temp_c``, ``br_t``
    (from :func:`matdb.physics.thermal.br_at`), ``relative_lift`` (lift over a
    diamagnet scales with B^2, hence with Br^2: :func:`matdb.physics.thermal.lift_factor`), ``max_temp_c`` and ``beyond_max``
    (True above the grade's maximum working temperature, where the linear model no
    longer describes a usable magnet).
    """
    if not (math.isfinite(t_min_c) and math.isfinite(t_max_c)) or t_min_c >= t_max_c:
        raise InputError(f"expected min < max, got {t_min_c!r} to {t_max_c!r} degC", field="temperature range")
    if celsius_to_kelvin(t_min_c) <= 0:
        raise InputError(f"{t_min_c!r} degC is below absolute zero", field="temperature range")
    if n < 2:
        raise InputError(f"expected at least 2 temperatures, got {n!r}", field="n")
    known = set(grades_df["grade"])
    unknown = [g for g in grades if g not in known]
    if unknown:
        raise InputError(f"unknown grade(s) {', '.join(unknown)}", field="grades")
    t_c = np.linspace(float(t_min_c), float(t_max_c), int(n))
    t_k = celsius_to_kelvin(t_c)
    parts = []
    by = grades_df.set_index("grade")
    for g in grades:
        row = by.loc[g]
        br20 = float(row["br_t"])
        br = np.asarray(br_at(br20, float(row["alpha_br_pct_per_k"]), t_k), dtype=float)
        tmax = float(row["max_temp_c"])
        parts.append(pd.DataFrame({
            "grade": g, "family": row["family"], "temp_c": t_c, "br_t": br,
            "relative_lift": np.asarray(lift_factor(float(row["alpha_br_pct_per_k"]), t_k), dtype=float),
            "max_temp_c": tmax, "beyond_max": t_c > tmax,
        }))
    if not parts:
        return pd.DataFrame(columns=["grade", "family", "temp_c", "br_t", "relative_lift", "max_temp_c", "beyond_max"])
    return pd.concat(parts, ignore_index=True)


#: Distinct hues for grades on one chart (neighbouring grades such as N42 and N42SH get
#: different hues, not two blues), each paired with a marker shape in :data:`GRADE_SHAPES`.
GRADE_PALETTE = ("#1f77b4", "#d62728", "#2ca02c", "#ff7f0e", "#9467bd", "#8c564b", "#e377c2", "#17becf",
                 "#7f7f7f", "#bcbd22")
GRADE_SHAPES = ("circle", "square", "triangle-up", "diamond", "cross", "triangle-down", "triangle-right",
                "triangle-left")
RATING_LABELS = ("within rating", "above max working T")


def rating_labels(beyond_max) -> list[str]:
    """Words for the ``beyond_max`` flags of :func:`grade_temperature_curves`."""
    return [RATING_LABELS[1] if bool(b) else RATING_LABELS[0] for b in beyond_max]


def padded_domain(low, high, frac: float = 0.12) -> tuple[float, float]:
    """An axis range that holds every value of ``low`` and ``high`` with a margin of
    ``frac`` of the span on each side (so no point sits on or below the lowest gridline)."""
    lo = float(np.nanmin(np.asarray(low, dtype=float)))
    hi = float(np.nanmax(np.asarray(high, dtype=float)))
    span = hi - lo
    if not span > 0:
        span = abs(hi) if hi != 0 else 1.0
    return lo - frac * span, hi + frac * span


def grade_max_temp_marks(curves: pd.DataFrame) -> pd.DataFrame:
    """One row per grade at its maximum working temperature (inside the plotted range):
    ``grade``, ``max_temp_c``, ``br_t`` and ``relative_lift`` there (interpolated)."""
    rows = []
    for g, part in curves.groupby("grade", sort=False):
        tmax = float(part["max_temp_c"].iloc[0])
        t = part["temp_c"].to_numpy()
        if not (t.min() <= tmax <= t.max()):
            continue
        rows.append({"grade": g, "max_temp_c": tmax,
                     "br_t": float(np.interp(tmax, t, part["br_t"].to_numpy())),
                     "relative_lift": float(np.interp(tmax, t, part["relative_lift"].to_numpy()))})
    return pd.DataFrame(rows, columns=["grade", "max_temp_c", "br_t", "relative_lift"])


# ---------------------------------------------------------------------------
# design page
# ---------------------------------------------------------------------------

def split_lengths(text: str) -> list[str]:
    """"12.7 mm, 12.7 mm, 5 mm" or "12.7 mm x 12.7 mm x 5 mm" -> list of length strings."""
    parts = [p.strip() for p in re.split(r",|\s+x\s+", str(text)) if p.strip()]
    return parts


def design_text_from_fields(f: dict) -> str:
    """TOML design text from the page's form fields (strings with units as typed).

    Keys: ``shape``, ``size`` (lengths separated by commas or " x "), ``grade``,
    ``pattern``, ``rows``, ``cols``, ``spacing``, ``back_plate``, ``cover``,
    ``material``, ``plate_shape``, ``plate_size``, ``payload``, ``payload_height``,
    ``min_gap``, ``temperature`` (or ``temp_min`` and ``temp_max``). The text is parsed
    by :func:`matdb.design.toml_io.load_design_text`, which names any bad key.
    """
    mags = {"shape": f["shape"], "size": split_lengths(f["size"]), "grade": f["grade"],
            "pattern": f["pattern"], "rows": int(f.get("rows", 1)), "cols": int(f.get("cols", 1)),
            "spacing": f.get("spacing") or "0 mm", "back_plate": bool(f.get("back_plate", False)),
            "cover": f.get("cover") or "0 mm"}
    plate = {"material": f["material"], "shape": f["plate_shape"], "size": split_lengths(f["plate_size"]),
             "payload": f.get("payload") or "0 g"}
    for k in ("payload_height", "min_gap"):
        if f.get(k):
            plate[k] = f[k]
    cond = {}
    if f.get("temp_min") or f.get("temp_max"):
        cond = {"temp_min": f.get("temp_min") or f.get("temp_max"), "temp_max": f.get("temp_max") or f.get("temp_min")}
    elif f.get("temperature"):
        cond = {"temperature": f["temperature"]}
    doc = {"magnets": mags, "plate": plate}
    if cond:
        doc["conditions"] = cond
    return document_to_toml(doc)


#: The Design page's form fields with their starting values (a demo design: a 2 x 2 NdFeB
#: checkerboard under a pyrolytic graphite plate).
DESIGN_FORM_DEFAULTS = dict(
    shape="cuboid", size="12.7 mm, 12.7 mm, 12.7 mm", grade="N50", pattern="checkerboard", rows=2, cols=2,
    spacing="0 mm", back_plate=False, cover="0 mm", material="pyrolytic-graphite", plate_shape="rectangle",
    plate_size="12 mm, 12 mm, 1 mm", payload="0.1 g", payload_height="2 mm", min_gap="0.2 mm",
    temp_min="20 degC", temp_max="20 degC")
FORM_PATTERNS = ("single", "checkerboard", "stripes", "grid")


def form_fields_from_design(design) -> dict | None:
    """The form fields (keys of :data:`DESIGN_FORM_DEFAULTS`) that give back ``design``,
    or None when the design holds something the form cannot show (a list of magnets, a
    Br or chi override, an off-centre plate, several grades, a floating-magnet design).
    Each quantity is the shortest text that reads back exactly."""
    if not isinstance(design, PlateDesign):
        return None
    m, p, c = design.magnets, design.plate, design.conditions
    if m.items or m.br_t is not None or m.pattern not in FORM_PATTERNS or len(m.grades) > 1:
        return None
    if p.chi_si is not None or p.chi_perp_si is not None or tuple(p.center_m) != (0.0, 0.0):
        return None
    if c.temperature_k is not None and (c.temp_min_k is not None or c.temp_max_k is not None):
        return None
    lo = c.temp_min_k if c.temp_min_k is not None else c.temperature_k
    hi = c.temp_max_k if c.temp_max_k is not None else c.temperature_k
    lo = lo if lo is not None else hi
    hi = hi if hi is not None else lo

    def mm(v: float) -> str:
        return exact_quantity(v, "m", "mm", 1e-3)

    return dict(
        shape=m.shape, size=", ".join(mm(v) for v in m.size), grade=m.grade, pattern=m.pattern,
        rows=int(m.rows), cols=int(m.cols), spacing=mm(m.spacing_m), back_plate=bool(m.back_plate),
        cover=mm(m.cover_m), material=p.material, plate_shape=p.shape,
        plate_size=", ".join(mm(v) for v in p.size), payload=exact_quantity(p.payload_kg, "kg", "g", 1e-3),
        payload_height=mm(p.payload_height_m), min_gap=mm(p.min_gap_m),
        temp_min="" if lo is None else exact_temperature(lo), temp_max="" if hi is None else exact_temperature(hi))


def canonical_design_text(design, text: str) -> str:
    """One text per design content (the cache key of its results): the design written back
    by :func:`matdb.design.toml_io.design_to_toml` without its name and description, so the
    same design typed in the form or in the editor computes once."""
    if isinstance(design, PlateDesign):
        return design_to_toml(replace(design, name=None, description=None))
    return design_to_toml(replace(design, name="", description=""))


def lift_curve_df(result: dict) -> pd.DataFrame:
    """The lift curve F(g) of a plate result: ``gap_mm``, ``force_mn`` (magnetic force,
    upward positive) and ``weight_mn`` (plate plus payload)."""
    lc = pd.DataFrame(result["lift_curve"])
    return pd.DataFrame({"gap_mm": lc["gap_m"] * 1e3, "force_mn": lc["force_n"] * 1e3,
                         "weight_mn": result["weight_n"] * 1e3})


def field_map_df(arrangement, gap_m: float, extent_m: tuple[float, float] | None = None, n: int = 41) -> pd.DataFrame:
    """|B| and B^2 on an n x n grid at height ``gap_m`` over the arrangement's footprint
    (or a centred ``extent_m`` = (x, y) if larger): ``x_mm``, ``y_mm``, ``b_t``, ``b2_t2``,
    ``bz_t``, and each cell's edges ``x0_mm``, ``x1_mm``, ``y0_mm``, ``y1_mm``."""
    xmin, xmax, ymin, ymax, _a, _b = (float(v) for v in arrangement.bounds())
    if extent_m is not None:
        xmin, xmax = min(xmin, -extent_m[0] / 2), max(xmax, extent_m[0] / 2)
        ymin, ymax = min(ymin, -extent_m[1] / 2), max(ymax, extent_m[1] / 2)
    xs = np.linspace(xmin, xmax, n)
    ys = np.linspace(ymin, ymax, n)
    gx, gy = np.meshgrid(xs, ys, indexing="xy")
    pts = np.column_stack([gx.ravel(), gy.ravel(), np.full(gx.size, float(gap_m))])
    b = np.asarray(arrangement.B(pts), dtype=float).reshape(-1, 3)
    b2 = np.sum(b**2, axis=1)
    hx = (xs[1] - xs[0]) / 2 if n > 1 else (xmax - xmin) / 2
    hy = (ys[1] - ys[0]) / 2 if n > 1 else (ymax - ymin) / 2
    return pd.DataFrame({"x_mm": pts[:, 0] * 1e3, "y_mm": pts[:, 1] * 1e3, "b_t": np.sqrt(b2),
                         "b2_t2": b2, "bz_t": b[:, 2],
                         "x0_mm": (pts[:, 0] - hx) * 1e3, "x1_mm": (pts[:, 0] + hx) * 1e3,
                         "y0_mm": (pts[:, 1] - hy) * 1e3, "y1_mm": (pts[:, 1] + hy) * 1e3})


def polarity_df(arrangement) -> pd.DataFrame:
    """Top view of the magnets: centre, footprint corners (mm), which way each points."""
    rows = []
    for i, m in enumerate(arrangement.magnets):
        hx, hy, _hz = m.half_extents
        dz = float(m.direction[2]) if len(m.direction) == 3 else 0.0
        rows.append({"magnet": i + 1, "x_mm": m.position[0] * 1e3, "y_mm": m.position[1] * 1e3,
                     "x0_mm": (m.position[0] - hx) * 1e3, "x1_mm": (m.position[0] + hx) * 1e3,
                     "y0_mm": (m.position[1] - hy) * 1e3, "y1_mm": (m.position[1] + hy) * 1e3,
                     "shape": m.shape, "grade": m.grade,
                     "points": "north up" if dz > 0.5 else "north down" if dz < -0.5 else "sideways",
                     "label": "N" if dz > 0.5 else "S" if dz < -0.5 else "-"})
    return pd.DataFrame(rows)


def _size_text(shape: str, size) -> str:
    mm = [f"{v * 1e3:.4g}" for v in size]
    if shape == "cylinder":
        return f"disc {mm[0]} mm dia. x {mm[1]} mm"
    if shape == "ring":
        return f"ring {mm[0]}/{mm[1]} mm dia. x {mm[2]} mm"
    if shape == "disc":
        return f"disc {mm[0]} mm dia. x {mm[1]} mm"
    return " x ".join(mm) + " mm"


def bill_of_materials(design, url: str | None = None) -> pd.DataFrame:
    """Magnets by shape, size and grade with counts, and the plate: ``item``, ``size``,
    ``grade_or_material``, ``count``, ``mass_g``, ``price_usd_per_kg``,
    ``cost_usd`` (illustrative unless the price row says otherwise), ``illustrative``."""
    arr = design.arrangement(rigid=True)  # geometry and grades only
    groups: dict[tuple, dict] = {}
    for m in arr.magnets:
        grade_name = m.grade or design.magnets.grade
        g = design.magnets.grades.get(grade_name) or catalog.get_grade(grade_name, url)
        key = (m.shape, tuple(round(v, 12) for v in m.size), grade_name)
        row = groups.setdefault(key, {"item": "magnet", "size": _size_text(m.shape, m.size),
                                      "grade_or_material": grade_name, "count": 0, "mass_g": 0.0,
                                      "price_usd_per_kg": g.price_usd_per_kg,
                                      "illustrative": bool(g.price_illustrative)})
        row["count"] += 1
        row["mass_g"] += m.volume * g.density_kg_m3 * 1e3
    rows = list(groups.values())
    p = design.plate
    mat = p.material_props or catalog.get_material(p.material, url)
    rows.append({"item": "plate", "size": _size_text(p.shape, p.size), "grade_or_material": mat.id, "count": 1,
                 "mass_g": body_volume(p.shape, p.size) * mat.density_kg_m3 * 1e3, "price_usd_per_kg": mat.price_usd_per_kg,
                 "illustrative": bool(mat.price_illustrative)})
    df = pd.DataFrame(rows)
    df["cost_usd"] = [None if pr is None or pd.isna(pr) else m * 1e-3 * pr
                      for m, pr in zip(df["mass_g"], df["price_usd_per_kg"])]
    df["cost_usd"] = pd.to_numeric(df["cost_usd"], errors="coerce").astype(float)
    return df


def _intervals_text(iv) -> str:
    """Stable side intervals [m] as text in mm ("-" when not computed)."""
    if iv is None:
        return "-"
    return format_intervals(iv)


def _temp_pair(result: dict, key: str, scale: float = 1.0) -> str:
    """``cold / hot`` values of one key of the ``cold`` and ``hot`` objects."""
    c, h = result.get("cold") or {}, result.get("hot") or {}
    vals = [c.get(key), h.get(key)]
    if key == "temperature_k":
        return " / ".join("-" if v is None else f"{kelvin_to_celsius(v):.4g}" for v in vals)
    return " / ".join("-" if v is None else _human(v * scale) for v in vals)


def plate_summary(result: dict) -> pd.DataFrame:
    """The key numbers of a plate result as (quantity, value, unit) rows for people."""
    def mm(v):
        return None if v is None else v * 1e3

    items = [
        ("floats", "yes" if result.get("floats") else "no", ""),
        ("equilibrium gap", mm(result.get("gap_m")), "mm"),
        ("worst-case gap", mm(result.get("gap_worst_m")), "mm"),
        ("margin at the required gap (lift / weight)", result.get("margin"), ""),
        ("largest payload at the required gap", None if result.get("max_payload_kg") is None
         else result["max_payload_kg"] * 1e3, "g"),
        ("vertical stiffness k_z", result.get("k_z_n_m"), "N/m"),
        ("vertical natural frequency", result.get("f_z_hz"), "Hz"),
        ("lateral stiffness k_x", result.get("k_x_n_m"), "N/m"),
        ("lateral stiffness k_y", result.get("k_y_n_m"), "N/m"),
        ("tilt stiffness", result.get("k_tilt_n_m_per_rad"), "N m/rad"),
        ("laterally stable", "yes" if result.get("laterally_stable") else "no", ""),
        ("stable square plate sides", _intervals_text(result.get("stable_side_intervals_m")), ""),
        ("coldest / hottest temperature", _temp_pair(result, "temperature_k"), "C"),
        ("gap cold / hot", _temp_pair(result, "gap_m", 1e3), "mm"),
        ("margin cold / hot", _temp_pair(result, "margin"), ""),
        ("k_z cold / hot", _temp_pair(result, "k_z_n_m"), "N/m"),
        ("k_x cold / hot", _temp_pair(result, "k_x_n_m"), "N/m"),
        ("k_y cold / hot", _temp_pair(result, "k_y_n_m"), "N/m"),
        ("lift lost when hot", result.get("lift_derating_pct"), "%"),
        ("gap drift", result.get("gap_drift_um_per_k"), "um/K"),
        ("demagnetisation risk", "yes" if result.get("demag_risk") else "no", ""),
        ("distance to 0.5 mT", None if result.get("safe_distance_m") is None
         else result["safe_distance_m"] * 1e2, "cm"),
    ]
    return pd.DataFrame([{"quantity": q, "value": _human(v) if not isinstance(v, str) else v, "unit": u}
                         for q, v, u in items])


def stabilized_window_df(result: dict) -> pd.DataFrame:
    """The schedule of a floating-magnet result, long format: per payload (g) and
    station, the lifter distance and the plate-distance window (mm). Columns
    ``payload_g``, ``station``, ``lifter_distance_mm``, ``min_plate_distance_mm``,
    ``max_plate_distance_mm``, and where the result has them ``lifter_travel_mm``,
    ``window_mm``, ``resolution_um``, ``drift_um_per_k`` and ``dforce_dd_n_m``. One
    station is called "floater"."""
    stations = result.get("stations") or []
    names = [st.get("name") or f"station {i + 1}" for i, st in enumerate(stations)]
    st_min = [st.get("min_plate_distance_m") for st in stations]

    def pick(v, i):
        if isinstance(v, (list, tuple)):
            return v[i] if i < len(v) else None
        return v

    rows = []
    for w in result.get("window", []):
        lifts = w.get("lifter_distance_m")
        n = len(lifts) if isinstance(lifts, (list, tuple)) else 1
        for i in range(n):
            mn = pick(w.get("min_plate_distance_m"), i)
            if mn is None and i < len(st_min):
                mn = st_min[i]
            if mn is None:
                mn = result.get("min_plate_distance_m")
            mx = pick(w.get("max_plate_distance_m"), i)
            if mx is None:  # no stable plate distance at this payload
                mn = None
            ld = pick(lifts, i)

            def val(key, scale, w=w, i=i):
                v = pick(w.get(key), i)
                return None if v is None else float(v) * scale

            rows.append({
                "payload_g": float(w["payload_kg"]) * 1e3,
                "station": names[i] if n > 1 and i < len(names) else ("floater" if n == 1 else f"station {i + 1}"),
                "lifter_distance_mm": None if ld is None else float(ld) * 1e3,
                "min_plate_distance_mm": None if mn is None else float(mn) * 1e3,
                "max_plate_distance_mm": None if mx is None else float(mx) * 1e3,
                "lifter_travel_mm": val("lifter_travel_m", 1e3),
                "window_mm": val("window_m", 1e3),
                "resolution_um": val("resolution_m", 1e6),
                "drift_um_per_k": val("lifter_distance_drift_um_per_k", 1.0),
                "dforce_dd_n_m": val("dforce_dd_n_m", 1.0),
            })
    cols = ["payload_g", "station", "lifter_distance_mm", "min_plate_distance_mm", "max_plate_distance_mm",
            "lifter_travel_mm", "window_mm", "resolution_um", "drift_um_per_k", "dforce_dd_n_m"]
    df = pd.DataFrame(rows, columns=cols)
    for c in cols[2:]:
        df[c] = pd.to_numeric(df[c], errors="coerce").astype(float)
    return df


def schedule_csv(result: dict) -> str:
    """The schedule as CSV, SI columns (what ``matdb levitate --format csv`` prints)."""
    return csv_text(pd.DataFrame(schedule_records(result), columns=list(SCHEDULE_COLUMNS)), float_format="%.10g")


def floating_designs_df(records: list) -> pd.DataFrame:
    """Designs of the floating-magnet search for people: sizes in mm, window, travel and
    step in mm/um, cost (illustrative), reasons as one sentence list."""
    def sz(v):
        return "x".join(f"{x * 1e3:.4g}" for x in v) + " mm"

    rows = []
    for r in records:
        rows.append({
            "rank": r.get("rank"), "feasible": bool(r.get("feasible")), "floaters": r.get("stations"),
            "floater": f"{r['floater_shape']} {sz(r['floater_size_m'])} {r['floater_grade']}",
            "lifter": f"{r['lifter_shape']} {sz(r['lifter_size_m'])} {r['lifter_grade']}",
            "plates": f"{r['material']} {r['thickness_m'] * 1e3:.3g} mm",
            "window_mm": None if r.get("window_min_m") is None else r["window_min_m"] * 1e3,
            "travel_mm": None if r.get("lifter_travel_m") is None else r["lifter_travel_m"] * 1e3,
            "step_um": None if r.get("resolution_m") is None else r["resolution_m"] * 1e6,
            "cost_usd": r.get("cost_usd"),
            "reasons": "; ".join(r.get("reasons") or []),
        })
    return pd.DataFrame(rows)


def stations_df(result: dict) -> pd.DataFrame:
    """Per station of a multi-floater result: name, position (mm), share of the weight,
    lifter distance (mm), stable."""
    rows = []
    for i, st in enumerate(result.get("stations") or []):
        rows.append({"station": st.get("name") or f"station {i + 1}",
                     "x_mm": st.get("x_m", 0.0) * 1e3, "y_mm": st.get("y_m", 0.0) * 1e3,
                     "share_pct": None if st.get("share_fraction") is None else st["share_fraction"] * 100,
                     "lifter_distance_mm": None if st.get("lifter_distance_m") is None else st["lifter_distance_m"] * 1e3,
                     "stable": bool(st.get("stable"))})
    return pd.DataFrame(rows)


# ---------------------------------------------------------------------------
# advisor page
# ---------------------------------------------------------------------------

ADVISOR_SHOWN = ["rank", "material", "grade", "arrangement", "array_mm", "magnet_count", "plate_mm",
                 "thickness_mm", "plate_g", "feasible", "margin", "gap_mm", "gap_worst_mm", "derating_pct",
                 "cost_usd", "score", "pareto", "reasons_text"]


def advisor_table(df: pd.DataFrame) -> pd.DataFrame:
    """The ranking of :func:`matdb.advisor.advise` for people: lengths in mm, reasons as
    one sentence list (``reasons_text``); the other columns as they are."""
    out = df.copy()
    out["thickness_mm"] = out["thickness_m"] * 1e3
    if "array_w_m" in out.columns:
        out["array_mm"] = [" x ".join(f"{v * 1e3:.4g}" for v in t) for t in
                           zip(out["array_w_m"], out["array_l_m"], out["array_h_m"])]
    else:
        out["array_mm"] = ""
    if "magnet_count" not in out.columns:
        out["magnet_count"] = [int(r) * int(c) for r, c in zip(out["rows"], out["cols"])]
    out["plate_mm"] = [" x ".join(f"{v * 1e3:.4g}" for v in pm) if isinstance(pm, (list, tuple)) else ""
                       for pm in out.get("plate_m", [None] * len(out))]
    out["plate_g"] = pd.to_numeric(out.get("plate_mass_kg"), errors="coerce") * 1e3
    out["gap_mm"] = pd.to_numeric(out["gap_m"], errors="coerce") * 1e3
    out["gap_worst_mm"] = pd.to_numeric(out["gap_worst_m"], errors="coerce") * 1e3
    out["reasons_text"] = [
        "; ".join(list(r) + [n for n in (notes if isinstance(notes, list) else [])])
        for r, notes in zip(out["reasons"], out.get("notes", [[]] * len(out)))
    ]
    return out


ADVISOR_VERDICTS = ("feasible, Pareto front", "feasible", "rejected")


def advisor_verdicts(df: pd.DataFrame) -> list[str]:
    """Each candidate's verdict in words (the page also shows it by marker shape, never by
    colour alone): one of :data:`ADVISOR_VERDICTS`."""
    return [ADVISOR_VERDICTS[0] if f and p else ADVISOR_VERDICTS[1] if f else ADVISOR_VERDICTS[2]
            for f, p in zip(df["feasible"].astype(bool), df["pareto"].astype(bool))]


def ranking_signature(params: dict) -> str:
    """A short stable name of one set of advisor inputs (widget keys that must start over
    when the ranking changes)."""
    return hashlib.sha256(repr(sorted(params.items())).encode()).hexdigest()[:12]


def ranking_csv(df: pd.DataFrame) -> str:
    """The full ranking as CSV, exact values (lists joined with '; ')."""
    out = df.copy()
    for col in out.columns:
        if out[col].map(lambda v: isinstance(v, (list, tuple))).any():
            out[col] = out[col].map(lambda v: "; ".join(str(x) for x in v) if isinstance(v, (list, tuple)) else v)
    return csv_text(out)


def candidate_label(row) -> str:
    """A short name of one ranked candidate (it fits a choice box on a 1000 px screen; the
    full arrangement is in ``row["arrangement"]``)."""
    ok = "feasible" if row["feasible"] else "rejected"
    pattern = row.get("pattern") if hasattr(row, "get") else None
    if pattern and "rows" in row and "cols" in row:
        short = {"checkerboard": "checker"}.get(pattern, pattern)
        arr = "1 magnet" if pattern == "single" else f"{int(row['rows'])}x{int(row['cols'])} {short}"
    else:
        arr = str(row["arrangement"])
    return f"#{int(row['rank'])}: {row['material']} {row['thickness_m'] * 1e3:.3g} mm, {row['grade']}, {arr} ({ok})"


def candidate_toml(row: dict, request) -> str:
    """Design-file text of one ranked candidate (what ``matdb advise --save`` writes)."""
    return design_to_toml(candidate_design(dict(row), request))


def stability_scan_df(rows: list[dict]) -> pd.DataFrame:
    """:func:`matdb.analysis.levitate.stability_scan` records for people: ``side_mm``,
    ``floats``, ``gap_mm`` (NaN when it does not float), ``laterally_stable``,
    ``is_design``."""
    df = pd.DataFrame(rows, columns=["side_m", "floats", "gap_m", "laterally_stable", "is_design"])
    return pd.DataFrame({"side_mm": df["side_m"].astype(float) * 1e3, "floats": df["floats"].astype(bool),
                         "gap_mm": pd.to_numeric(df["gap_m"], errors="coerce").astype(float) * 1e3,
                         "laterally_stable": df["laterally_stable"].astype(bool),
                         "is_design": df["is_design"].astype(bool)})


# ---------------------------------------------------------------------------
# provenance marks for page tables (issue 14)
# ---------------------------------------------------------------------------
def add_status_columns(df: pd.DataFrame, marks: dict[str, dict[str, str]], key: str,
                       columns: dict[str, str]) -> tuple[pd.DataFrame, list[str]]:
    """Insert after each value column a text column with its provenance mark.

    ``marks[row[key]][field]`` is a status (verified, corrected, unverified, measured);
    ``columns`` maps a table column to the field its mark comes from (e.g. ``chi_shown`` ->
    ``chi_si``). Returns the new frame and the column order (each value followed by
    ``<column>_check``). The mark is a letter (v, c, ?, m), never colour alone.
    """
    out = df.copy()
    order: list[str] = []
    for c in df.columns:
        order.append(c)
        if c in columns:
            f = columns[c]
            out[f"{c}_check"] = [
                (catalog.mark(marks.get(k, {}).get(f)) if v is not None and not (isinstance(v, float) and math.isnan(v))
                 else "")
                for k, v in zip(df[key], df[c])]
            order.append(f"{c}_check")
    return out, order


def sources_table(url: str | None = None) -> pd.DataFrame:
    """The bibliography with the number of stored values each supports, by status."""
    rows = catalog.sources_summary(url=url)
    return pd.DataFrame(rows, columns=["key", "kind", "year", "values", "verified", "corrected",
                                       "unverified", "citation", "note"])


def value_check_marks(rows: Sequence[dict], field: str = "value_published") -> list[str]:
    """Status mark of one number in each value row of :func:`matdb.data.lab_store.history`
    (``m`` for a lab measurement)."""
    out = []
    for r in rows:
        if r.get("value_kind") == "measured":
            out.append("m")
            continue
        st = next((p["status"] for p in (r.get("provenance") or []) if p.get("field") == field), None)
        out.append(catalog.mark(st))
    return out


def optimised_frame(rows: list[dict]) -> pd.DataFrame:
    """Rows of :func:`matdb.analysis.synthesis.optimise` as a frame like the advisor's ranking
    (column ``source``: catalogue start or sized)."""
    clean = [{k: v for k, v in r.items() if k not in ("sizing", "levitate")} for r in rows]
    df = pd.DataFrame(clean)
    df["source"] = ["catalogue" if r.get("catalogue") else "sized" for r in rows]
    return df


def optimised_toml(result, index: int = 0) -> str:
    """TOML text of one design of an optimiser result (the best by default)."""
    r = result.rows[index]
    return design_to_toml(design_of(r["sizing"], result.request, catalog.get_material(r["material"]),
                                    catalog.get_grade(r["grade"])))
