"""``matdb field`` and ``matdb levitate``: thin command-line layers over the physics.

    matdb field DESIGN --at "x,y,z mm" [--at ...] [--points FILE.csv] [--format json|csv|table]
    matdb levitate DESIGN [--temp "60 degC"] [--gap "0.3 mm"] [--payload-range "0 g..5 g"]
                   [--steps N] [--resolution "10 um"] [--format json|csv|table]
"""

from __future__ import annotations

import csv
import io
import math
import re
import sys
from pathlib import Path

import numpy as np

from matdb.cli import summary
from matdb.constants import kelvin_to_celsius
from matdb.design import load_design, parse_payload_range
from matdb.errors import InputError
from matdb.limits import MAX_FILE_BYTES, MAX_POINTS, check_count, check_magnitude, read_text_limited
from matdb.output import add_format_argument, emit, to_json
from matdb.reporting.schedule import SCHEDULE_COLUMNS, payload_steps, schedule_records
from matdb.units import parse_length, parse_number, parse_quantity, parse_temperature

FIELD_COLUMNS = ("x_m", "y_m", "z_m", "bx_t", "by_t", "bz_t")


# ---------------------------------------------------------------------------
# parsing
# ---------------------------------------------------------------------------
def parse_point(text: str, field: str = "--at") -> tuple[float, float, float]:
    """``"1,2,3 mm"`` (one unit for all) or ``"1 mm, 2 mm, 0.3 cm"`` -> metres."""
    parts = [p.strip() for p in str(text).split(",")]
    if len(parts) != 3 or not all(parts):
        raise InputError(f"{field}: expected three coordinates such as '0,0,1 mm', got {text!r}")
    m = re.match(r"^([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(\S.*)?$", parts[-1])
    unit = m.group(2) if m else None
    if unit is None and all(re.match(r"^[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?$", q) for q in parts):
        raise InputError(f"{field}: missing unit in {text!r}; expected e.g. '0,0,1 mm'")
    out = []
    for i, p in enumerate(parts):
        name = f"{field} {'xyz'[i]}"
        bare = re.match(r"^[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?$", p) is not None
        if bare and unit and i < 2:
            out.append(parse_quantity(f"{p} {unit}", "m", name))
        else:
            out.append(parse_quantity(p, "m", name))
    return tuple(out)  # type: ignore[return-value]


def read_points_csv(path: str) -> np.ndarray:
    """Points from a CSV file with columns ``x_m,y_m,z_m`` (metres) -> (n, 3)."""
    text = read_text_limited(Path(path), "--points", MAX_FILE_BYTES)
    reader = csv.DictReader(io.StringIO(text, newline=""))
    try:
        cols = [c.strip() for c in (reader.fieldnames or [])]
    except csv.Error as exc:
        raise InputError(f"{path}: line 1: unreadable CSV ({exc})") from None
    missing = [c for c in ("x_m", "y_m", "z_m") if c not in cols]
    if missing:
        raise InputError(f"{path}: line 1: missing column(s) {', '.join(missing)}; "
                         "expected a header x_m,y_m,z_m")
    rows = []
    try:
        for row in reader:
            line = reader.line_num
            row = {(k or "").strip(): v for k, v in row.items()}
            vals = []
            for c in ("x_m", "y_m", "z_m"):
                v = row.get(c)
                if v is None or str(v).strip() == "":
                    raise InputError(f"{path}: line {line}, column {c}: missing value")
                vals.append(parse_number(str(v).strip(), f"{path}: line {line}, column {c}"))
                check_magnitude(vals[-1], "m", f"{path}: line {line}, column {c}", v)
            rows.append(vals)
            check_count(len(rows), MAX_POINTS, "--points", "points")
    except csv.Error as exc:
        raise InputError(f"{path}: line {reader.line_num}: unreadable CSV ({exc})") from None
    if not rows:
        raise InputError(f"{path}: no points (expected rows under the header x_m,y_m,z_m)")
    return np.asarray(rows, dtype=float)


def _load(path: str):
    return load_design(path)


# ---------------------------------------------------------------------------
# field
# ---------------------------------------------------------------------------
def field_records(design, points: np.ndarray, temp_k: float | None = None) -> list[dict]:
    """B of a design's magnets at points (n, 3) [m] as records with FIELD_COLUMNS."""
    if not hasattr(design, "arrangement"):
        raise InputError("design: this design has no magnet arrangement to evaluate")
    arr = design.arrangement(temp_k) if temp_k is not None else design.arrangement()
    b = np.asarray(arr.B(points), dtype=float).reshape(-1, 3)
    return [dict(zip(FIELD_COLUMNS, (float(v) for v in (*p, *bb)))) for p, bb in zip(points, b)]


def cmd_field(args) -> int:
    pts = [parse_point(a) for a in (args.at or [])]
    if args.points:
        pts.extend(map(tuple, read_points_csv(args.points)))
    if not pts:
        raise InputError("--at: give at least one point (--at '0,0,1 mm') or --points FILE.csv")
    check_count(len(pts), MAX_POINTS, "--at/--points", "points")
    temp = parse_temperature(args.temp, "--temp") if args.temp else None
    design = load_design(args.design, need_plate=False)  # a field needs only the magnets
    emit(field_records(design, np.asarray(pts, dtype=float), temp), args.format,
         columns=list(FIELD_COLUMNS))
    return 0


# ---------------------------------------------------------------------------
# levitate
# ---------------------------------------------------------------------------
def _num(v, scale: float = 1.0, digits: int = 4, unit: str = "") -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "-"
    x = v * scale
    s = f"{x:.{digits}g}"
    return f"{s} {unit}".rstrip()


def _point_mm(p) -> str:
    from matdb.analysis.levitate import _mm3  # lazy: `field` needs no plate analysis (start-up)

    if not p:
        return "none found"
    return f"({_mm3(p[0])}, {_mm3(p[1])}) mm"


def _intervals_mm(iv) -> str:
    from matdb.analysis.levitate import format_intervals  # lazy, as in _point_mm

    if iv is None:
        return "-"
    return format_intervals(iv)


def _cold_hot_lines(r: dict) -> list[str]:
    """The coldest and the hottest temperature side by side (nominal values)."""
    cold, hot = r.get("cold"), r.get("hot")
    if not cold or not hot:
        return []

    def head(s):
        t = s["temperature_k"]
        return f"{kelvin_to_celsius(t):.4g} C ({t:.5g} K)"

    rows = [
        ("", head(cold), head(hot)),
        ("gap", _num(cold["gap_m"], 1e3, 4, "mm"), _num(hot["gap_m"], 1e3, 4, "mm")),
        (f"margin at {_num(r.get('required_gap_m'), 1e3, 3, 'mm')}", _num(cold["margin"], 1, 3),
         _num(hot["margin"], 1, 3)),
        ("vertical stiffness k_z", _num(cold["k_z_n_m"], 1, 4, "N/m"), _num(hot["k_z_n_m"], 1, 4, "N/m")),
        ("lateral stiffness k_x", _num(cold["k_x_n_m"], 1, 3, "N/m"), _num(hot["k_x_n_m"], 1, 3, "N/m")),
        ("lateral stiffness k_y", _num(cold["k_y_n_m"], 1, 3, "N/m"), _num(hot["k_y_n_m"], 1, 3, "N/m")),
    ]
    w0 = max(len(a) for a, _, _ in rows)
    w1 = max(len(b) for _, b, _ in rows)
    out = ["", "coldest and hottest temperature (nominal Br and chi)"]
    rows[0] = ("temperature", rows[0][1], rows[0][2])
    w0 = max(w0, len("temperature"))
    out += [f"{a.ljust(w0)}  {b.ljust(w1)}  {c}" for a, b, c in rows]
    return out


def format_levitate(r: dict) -> str:
    """The result of a plate levitate as text for a person (mm, g, Hz, N/m, mN)."""
    if r.get("mode") == "stabilized":
        # lazy: the floating-magnet text (and the analysis it imports) only for that mode
        from matdb.reporting.floating_text import format_table

        return format_table(r)
    if r.get("mode") != "plate":
        lines = [f"{k}: {v}" for k, v in r.items() if not isinstance(v, (list, dict))]
        lines += [f"warning: {w}" for w in r.get("warnings", [])]
        return "\n".join(lines)
    yes = lambda b: "yes" if b else "no"  # noqa: E731
    rows = [
        ("floats", yes(r["floats"])),
        ("gap", _num(r["gap_m"], 1e3, 4, "mm")),
        ("clearance above cover", _num(r.get("clearance_m"), 1e3, 4, "mm")),
        ("weight (plate + payload)", _num(r["weight_n"], 1e3, 4, "mN")),
        ("plate mass", _num(r.get("plate_mass_kg"), 1e3, 4, "g")),
        ("max payload at required gap", _num(r["max_payload_kg"], 1e3, 4, "g")
         + f"  (gap {_num(r.get('required_gap_m'), 1e3, 3, 'mm')})"),
        ("vertical stiffness k_z", _num(r["k_z_n_m"], 1, 4, "N/m")),
        ("vertical frequency f_z", _num(r["f_z_hz"], 1, 3, "Hz")),
        ("lateral stiffness k_x", _num(r["k_x_n_m"], 1, 3, "N/m")),
        ("lateral stiffness k_y", _num(r["k_y_n_m"], 1, 3, "N/m")),
        ("tilt stiffness pitch", _num(r.get("k_pitch_n_m_per_rad"), 1e3, 3, "mN m/rad")),
        ("tilt stiffness roll", _num(r.get("k_roll_n_m_per_rad"), 1e3, 3, "mN m/rad")),
        ("laterally stable", yes(r["laterally_stable"])),
        ("lateral equilibrium (x, y)", _point_mm(r.get("lateral_equilibrium_m"))),
        ("stable square sides", _intervals_mm(r.get("stable_side_intervals_m"))),
        ("lift lost vs 20 C", _num(r["lift_derating_pct"], 1, 3, "%")
         + f"  (at {_num(r.get('derating_temperature_k'), 1, 4)} K = "
           f"{_num(kelvin_to_celsius(r.get('derating_temperature_k') or 0), 1, 3)} C)"),
        ("gap drift", _num(r["gap_drift_um_per_k"], 1, 3, "um/K")),
        ("demagnetisation risk", yes(r["demag_risk"])),
        ("worst-case gap", _num(r["gap_worst_m"], 1e3, 4, "mm")),
        ("worst-case max payload", _num(r["max_payload_worst_kg"], 1e3, 4, "g")),
        ("0.5 mT safety distance", _num(r["safe_distance_m"], 1e3, 3, "mm")),
        ("material / grade", f"{r.get('material')} / {r.get('grade')}"),
        ("chi_perp / chi_par (SI)", f"{_num(r.get('chi_perp_si'), 1, 3)} / {_num(r.get('chi_par_si'), 1, 3)}"
         f"  ({r.get('chi_value_kind')})"),
        ("temperature", "-" if r.get("temperature_k") is None
         else f"{kelvin_to_celsius(r['temperature_k']):.4g} C ({r['temperature_k']:.5g} K)"),
    ]
    width = max(len(k) for k, _ in rows)
    lines = [f"{k.ljust(width)}  {v}" for k, v in rows]
    lines += _cold_hot_lines(r)
    curve = r.get("lift_curve") or []
    if curve:
        lines.append("")
        lines.append("lift curve (gap mm: force mN)")
        step = max(1, len(curve) // 10)
        picks = curve[::step]
        lines.append("  " + ", ".join(f"{c['gap_m'] * 1e3:.2f}: {c['force_n'] * 1e3:.3g}" for c in picks))
    if r.get("warnings"):
        lines.append("")
        lines.append("warnings:")
        lines += [f"- {w}" for w in r["warnings"]]
    return "\n".join(lines)


def _payloads(args) -> np.ndarray | None:
    if getattr(args, "payload_range", None) is None:
        if getattr(args, "steps", None) is not None:
            raise InputError("--steps: give it with --payload-range")
        return None
    lo, hi = parse_payload_range(args.payload_range, "--payload-range")
    n = 11 if args.steps is None else args.steps
    if not 1 <= n <= 1000:
        raise InputError(f"--steps: expected a whole number from 1 to 1000, got {n}")
    return payload_steps((lo, hi), n)


def cmd_levitate(args) -> int:
    from matdb.analysis.levitate import levitate  # lazy: `field` needs no plate analysis (start-up)

    temp = parse_temperature(args.temp, "--temp") if args.temp else None
    gap = parse_length(args.gap, "--gap") if args.gap else None
    payloads = _payloads(args)
    res = parse_length(args.resolution, "--resolution", positive=True) if args.resolution else None
    design = _load(args.design)
    if (payloads is not None or res is not None) and getattr(design, "mode", None) != "stabilized":
        opt = "--payload-range" if payloads is not None else "--resolution"
        raise InputError(f"{opt}: only floating-magnet designs have a payload schedule")
    result = levitate(design, temp_k=temp, gap_m=gap, payloads_kg=payloads, resolution_m=res)
    if args.format == "csv":
        emit(schedule_records(result), "csv", columns=list(SCHEDULE_COLUMNS))
        return 0
    if args.format == "json":
        sys.stdout.write(to_json(result) + "\n")
    else:
        sys.stdout.write(format_levitate(result) + "\n")
    return 0


def register(subparsers) -> None:
    p = subparsers.add_parser("field", help=summary("field"),
                              description="Flux density of a design's magnet arrangement "
                              "(Br at 20 C unless --temp) at points: --at 'x,y,z mm' "
                              "(repeatable) and/or --points FILE.csv with columns x_m,y_m,z_m.")
    p.add_argument("design", help="design TOML file")
    p.add_argument("--at", action="append", metavar="'x,y,z UNIT'",
                   help="a point, e.g. '0,0,1 mm' (repeatable)")
    p.add_argument("--points", metavar="FILE.csv", help="CSV with columns x_m,y_m,z_m")
    p.add_argument("--temp", help="magnet temperature, e.g. '60 degC'")
    add_format_argument(p, choices=("json", "csv", "table"), default="table")
    p.set_defaults(func=cmd_field)

    q = subparsers.add_parser("levitate", help=summary("levitate"),
                              description="Floating-plate analysis of a design: lift curve, "
                              "equilibrium gap, payload, stiffnesses, stability, thermal "
                              "derating, worst case and safety distance. Floating-magnet "
                              "designs ([lifter]/[floater] or [[station]] tables) get their "
                              "own analysis.")
    q.add_argument("design", help="design TOML file")
    q.add_argument("--temp", help="operating temperature, e.g. '60 degC'")
    q.add_argument("--gap", help="required gap for the payload figure, e.g. '0.3 mm'")
    q.add_argument("--payload-range", metavar="'FROM..TO'",
                   help="floating magnet: the schedule over these payloads, e.g. '0 g..5 g' "
                   "(for stations, the shared payload)")
    q.add_argument("--steps", type=int, help="number of payloads in --payload-range (default 11)")
    q.add_argument("--resolution", metavar="LENGTH",
                   help="floating magnet: allowed shift of the floater for the lifter step "
                   "(default a tenth of its clearance to the nearer plate), e.g. '20 um'")
    add_format_argument(q, choices=("json", "csv", "table"), default="table")
    q.set_defaults(func=cmd_levitate)
