"""``matdb optimise --floating-magnet``: search lifter, floater, plates and stations for a
payload range (a thin layer over :mod:`matdb.analysis.magnet_synthesis`).

    matdb optimise --floating-magnet --payload-range "0 g..5 g" [--plates bismuth pyrolytic-graphite]
        [--min-window "0.5 mm"] [--envelope "80 mm x 200 mm"] [--stations 1 2 3]
        [--temp "20 degC"] [--clearance "0.5 mm"] [--budget "50 USD"] [--family NdFeB]
        [--top N] [--rejected N] [--save DESIGN.toml] [--quiet] [--format table|json|csv]

:func:`add_arguments` adds only the options the parser does not have yet (the plate
optimiser defines --format, --save, --quiet, --budget, --family and others);
:func:`run` returns the exit status.
"""

from __future__ import annotations

import math
import sys

from matdb.analysis import magnet_synthesis as M
from matdb.analysis.magnet_synthesis import DEFAULT_MATERIALS, FMRequest
from matdb.design import design_to_toml, parse_payload_range
from matdb.errors import InputError
from matdb.output import emit, to_json
from matdb.progress import progress_bar
from matdb.units import parse_length, parse_quantity, parse_temperature
from matdb.constants import T_REF_K

CSV_COLUMNS = ["rank", "feasible", "stations", "floater_shape", "floater_size_m", "floater_grade", "lifter_shape",
               "lifter_size_m", "lifter_grade", "material", "thickness_m", "plate_width_m", "plate_distance_m",
               "window_min_m", "lifter_travel_m", "lifter_distance_empty_m", "lifter_distance_full_m",
               "resolution_m", "lifter_distance_drift_um_per_k", "cost_usd", "envelope_width_m",
               "envelope_height_m", "reasons"]


def _add(parser, flag: str, **kw) -> None:
    if flag not in parser._option_string_actions:
        parser.add_argument(flag, **kw)


def add_arguments(parser) -> None:
    """Add the floating-magnet options that ``parser`` does not have yet."""
    _add(parser, "--floating-magnet", action="store_true",
         help="search floating-magnet designs (lifter, floater, plates, stations) for a payload range")
    _add(parser, "--payload-range", metavar="'FROM..TO'",
         help="floating magnet: payloads to float, e.g. '0 g..5 g' (shared by the floaters)")
    _add(parser, "--plates", action="extend", nargs="+", metavar="MATERIAL",
         help="floating magnet: plate materials to try (default bismuth pyrolytic-graphite)")
    _add(parser, "--min-window", default="0.5 mm",
         help="floating magnet: narrowest window of plate distances over the range (default 0.5 mm)")
    _add(parser, "--envelope", metavar="'W x H'",
         help="floating magnet: width and height the rig must fit in, e.g. '80 mm x 200 mm' (default none)")
    _add(parser, "--stations", action="extend", nargs="+", type=int, metavar="N",
         help="floating magnet: numbers of floaters sharing the payload to try (default 1 2 3)")
    _add(parser, "--temp", help="floating magnet: operating temperature (default 20 degC)")
    _add(parser, "--clearance", default="0.5 mm",
         help="floating magnet: smallest gap floater face to plate (default 0.5 mm)")
    _add(parser, "--budget", help="most the magnets and plates may cost, e.g. '50 USD'")
    _add(parser, "--family", action="extend", nargs="+", help="only these magnet families, e.g. NdFeB")
    _add(parser, "--top", type=int, default=3, help="designs to confirm and show (default 3)")
    _add(parser, "--rejected", type=int, metavar="N",
         help="floating magnet: also show the N closest rejected designs with their reasons "
         "(default 3 when nothing works)")
    _add(parser, "--save", metavar="DESIGN.toml", help="write the best design as a design file")
    _add(parser, "--quiet", action="store_true", help="no progress bar")
    _add(parser, "--format", choices=["table", "json", "csv"], default="table", help="output format")


def parse_envelope(text: str, field: str = "--envelope") -> tuple[float, float]:
    """``"80 mm x 200 mm"`` or ``"80 x 200 mm"`` -> (width, height) [m]."""
    parts = [p.strip() for p in str(text).replace("X", "x").replace("by", "x").split("x")]
    if len(parts) != 2 or not all(parts):
        raise InputError(f"{field}: expected width and height such as '80 mm x 200 mm', got {text!r}")
    a, b = parts
    try:
        float(a)
        a = f"{a} {b.split()[-1]}" if len(b.split()) > 1 else a
    except ValueError:
        pass
    return (parse_length(a, f"{field} width", positive=True), parse_length(b, f"{field} height", positive=True))


def request_from_args(args):
    """The :class:`~matdb.analysis.magnet_synthesis.FMRequest` of the command line."""
    if not getattr(args, "payload_range", None):
        raise InputError("--payload-range: expected the payloads to float, e.g. '0 g..5 g'")
    prange = parse_payload_range(args.payload_range, "--payload-range")
    win = parse_length(args.min_window, "--min-window", positive=True)
    env = parse_envelope(args.envelope) if getattr(args, "envelope", None) else None
    temp = parse_temperature(args.temp, "--temp") if getattr(args, "temp", None) else T_REF_K
    clearance = parse_length(args.clearance, "--clearance", positive=True)
    budget = None
    if getattr(args, "budget", None) is not None:
        budget = parse_quantity(args.budget, "USD", "--budget", require_unit=False)
        if not budget >= 0:
            raise InputError(f"--budget: expected an amount of zero or more, got {args.budget!r}")
    stations = tuple(sorted(set(args.stations))) if getattr(args, "stations", None) else (1, 2, 3)
    if any(n not in (1, 2, 3) for n in stations):
        raise InputError(f"--stations: expected some of 1 2 3, got {' '.join(map(str, args.stations))}")
    top = getattr(args, "top", None) or 3
    if top < 1:
        raise InputError(f"--top: expected a whole number of one or more, got {top}")
    fam = tuple(args.family) if getattr(args, "family", None) else None
    mats = tuple(getattr(args, "plates", None) or DEFAULT_MATERIALS)
    rejected = getattr(args, "rejected", None)
    if rejected is not None and rejected < 0:
        raise InputError(f"--rejected: expected a whole number of zero or more, got {rejected}")
    return FMRequest(payload_range_kg=prange, materials=mats, min_window_m=win, envelope_m=env,
                     stations=stations, budget_usd=budget, families=fam, temperature_k=temp,
                     clearance_m=clearance, top=top, rejected=rejected)


def _mm(v, d=4):
    return "-" if v is None or not math.isfinite(v) else f"{v * 1e3:.{d}g}"


def format_result(res) -> str:
    """The search result as text for a person (mm, g, USD)."""
    req = res.request
    lo, hi = req.payload_range_kg
    lines = [f"floating-magnet designs for {lo * 1e3:.4g} g to {hi * 1e3:.4g} g, window at least "
             f"{req.min_window_m * 1e3:.3g} mm over the range ({res.n_candidates} combinations searched, "
             f"{res.n_screened_feasible} passed the search)"]
    names = {"hold": "the lifter cannot hold the load", "window": "window too narrow or none",
             "height": "too tall for the envelope", "width": "too wide for the envelope", "budget": "over the budget"}
    counts = [f"{names.get(k, k)}: {v}" for k, v in res.rejected_by.items() if v]
    if counts:
        lines.append("rejected (a combination may fail several): " + "; ".join(counts))
    if res.message:
        lines.append(res.message)
    for r in res.rows:
        head = f"#{r['rank']}" if r["feasible"] else "rejected"
        sz = lambda s: "x".join(f"{v * 1e3:.4g}" for v in s)  # noqa: E731
        lines.append("")
        lines.append(f"{head}: {r['stations']} floater(s): {r['floater_shape']} {sz(r['floater_size_m'])} mm "
                     f"{r['floater_grade']} under a {r['lifter_shape']} {sz(r['lifter_size_m'])} mm "
                     f"{r['lifter_grade']} lifter; {r['material']} plates {_mm(r['thickness_m'], 3)} mm thick, "
                     f"{_mm(r['plate_width_m'], 3)} mm wide, set {_mm(r['plate_distance_m'])} mm from the floater")
        res_um = "-" if r.get("resolution_m") is None else f"{r['resolution_m'] * 1e6:.3g}"
        drift = "-" if r.get("lifter_distance_drift_um_per_k") is None else f"{r['lifter_distance_drift_um_per_k']:.3g}"
        cost = "-" if r.get("cost_usd") is None else f"{r['cost_usd']:.3g}"
        lines.append(f"  narrowest window {_mm(r.get('window_min_m'), 3)} mm; lifter from "
                     f"{_mm(r['lifter_distance_empty_m'])} mm (empty) to {_mm(r['lifter_distance_full_m'])} mm, "
                     f"travel {_mm(r['lifter_travel_m'], 3)} mm; step {res_um} um; drift {drift} um/K; "
                     f"cost about {cost} USD*; size {_mm(r['envelope_width_m'])} x {_mm(r['envelope_height_m'])} mm"
                     + ("" if r.get("exact_checked") else " (search estimate)"))
        for why in r["reasons"]:
            lines.append(f"  - {why}")
    lines.append("")
    lines += [f"* {n}" for n in res.notes]
    lines.append("Strong magnets: large magnets pinch, shatter and are dangerous if swallowed; keep implants "
                 "away; local codes and licensed practice take precedence.")
    return "\n".join(lines)


def run(args) -> int:
    """``matdb optimise --floating-magnet``: exit status 0 when a design works, 1 when none does."""
    req = request_from_args(args)
    save = getattr(args, "save", None)
    with progress_bar("floating-magnet search", quiet=bool(getattr(args, "quiet", False))) as prog:
        res = M.search(req, progress=prog)
    best = next((d for r, d in zip(res.rows, res.designs) if r["feasible"] and d is not None), None)
    if save:
        if best is None:
            raise InputError(f"--save: nothing to write to {save}: no design meets the requirements ({res.message})")
        text = design_to_toml(best)
        try:
            with open(save, "w", encoding="utf-8") as fh:
                fh.write(text)
        except OSError as exc:
            raise InputError(f"--save: cannot write {save!r}: {exc.strerror or exc}") from exc
    fmt = getattr(args, "format", "table")
    recs = M.records(res)
    if fmt == "json":
        sys.stdout.write(to_json(recs) + "\n")
    elif fmt == "csv":
        emit([{c: ("; ".join(r[c]) if c == "reasons" else
                   (" x ".join(f"{v:.6g}" for v in r[c]) if isinstance(r.get(c), list) else r.get(c)))
               for c in CSV_COLUMNS} for r in recs], "csv", columns=CSV_COLUMNS)
    else:
        sys.stdout.write(format_result(res) + "\n")
    if best is None:
        print(f"matdb: {res.message or 'no design meets the requirements'}", file=sys.stderr)
        return 1
    return 0
