"""``matdb optimise``: size magnets, arrangement and plate beyond the catalogue.

    matdb optimise (--mass "0.2 g" | --total-mass "0.3 g") --footprint "20 x 20 mm"
        [--gap "0.5 mm"] [--temp-min "0 degC"] [--temp-max "50 degC"] [--budget "30 USD"]
        [--magnet-envelope "24 x 24 x 15 mm"] [--objective margin|cost|noise] [--min-margin 1.5]
        [--min-q 100] [--pressure "1e-3 Pa"]
        [--stock magnets.csv] [--top N] [--save best.toml] [--quiet] [--format table|json|csv]
    matdb optimise --floating-magnet ...   # the floating-magnet search (its own options)

A thin layer over :func:`matdb.analysis.synthesis.optimise`.
"""

from __future__ import annotations

import math
import sys

from matdb.cli import summary
from matdb.analysis import synthesis as S
from matdb.errors import InputError
from matdb.output import add_format_argument, emit, to_json
from matdb.cli import advise as ADV
from matdb.constants import kelvin_to_celsius

TABLE_COLUMNS = ["rank", "source", "material", "grade", "arrangement", "array_mm", "n", "plate_mm",
                 "t_mm", "plate_g", "margin", "gap_mm", "gap_worst_mm", "cost_usd", "k_x", "why"]
TABLE_HEADERS = {"source": "from", "array_mm": "array WxLxH mm", "n": "magnets",
                 "plate_mm": "plate mm", "t_mm": "plate t mm", "plate_g": "plate g",
                 "gap_mm": "gap mm", "gap_worst_mm": "worst gap mm", "cost_usd": "cost USD*",
                 "k_x": "k_x N/m", "why": "notes"}
CSV_COLUMNS = ADV.CSV_COLUMNS + ["magnet_size_m", "spacing_m", "plate_side_m", "catalogue"]


def _fm_module():
    try:
        from matdb.cli import optimise_fm  # the floating-magnet search, when installed
    except ImportError:
        return None
    return optimise_fm


def register(sub) -> None:
    p = sub.add_parser(
        "optimise",
        help=summary("optimise"),
        description="Start from the best catalogue candidate of 'matdb advise' and vary the magnet "
        "size (continuous, or from --stock), rows and columns, spacing, plate side and thickness "
        "within the footprint, envelope and budget; every design shown is re-checked exactly as "
        "'matdb levitate' does. Example: matdb optimise --total-mass '0.3 g' --footprint "
        "'20 x 20 mm' --gap '0.5 mm' --temp-min '0 degC' --temp-max '50 degC' --budget '30 USD' "
        "--magnet-envelope '24 x 24 x 15 mm'",
    )
    p.add_argument("--floating-magnet", action="store_true",
                   help="search floating-magnet designs (lifter, floater, plates) instead of a plate")
    p.add_argument("--mass", help="payload mass on top of the plate, e.g. '0.2 g'")
    p.add_argument("--total-mass", help="plate plus payload, e.g. '0.3 g' (the plate is sized to it)")
    p.add_argument("--footprint", help="plate outline the plate must fit in, e.g. '20 mm x 20 mm'")
    ADV.add_request_arguments(p, mass=False)
    p.add_argument("--objective", choices=[*S.OBJECTIVES, "noise"], default="margin",
                   help="margin: largest worst-case margin within the budget (default); cost: the "
                   "cheapest design reaching --min-margin; noise: the lowest noise floor (thermal "
                   "acceleration noise of the vertical mode) among the margin designs")
    p.add_argument("--min-q", help="drop designs whose vertical-mode Q is below this, e.g. 100")
    p.add_argument("--pressure", help="gas pressure for the dynamics, e.g. '1e-3 Pa' (default 1 atm)")
    p.add_argument("--min-margin", type=float, default=None,
                   help="worst-case margin the cost objective must reach (default 1)")
    p.add_argument("--stock", metavar="MAGNETS.csv",
                   help="choose magnet sizes from this list (CSV columns shape,size, e.g. "
                   "'cuboid,10 x 10 x 5 mm') instead of continuous sizes")
    p.add_argument("--top", type=int, default=3, help="designs to show (default 3)")
    p.add_argument("--save", metavar="DESIGN.toml", help="write the best design as a design file")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    add_format_argument(p)
    fm = _fm_module()
    if fm is not None and hasattr(fm, "add_arguments"):
        fm.add_arguments(p)
    p.set_defaults(func=cmd_optimise)


def _mm(v) -> float | None:
    return None if v is None or not math.isfinite(v) else v * 1e3


def table_rows(result: S.OptimiseResult) -> list[dict]:
    rows = []
    for r in result.rows:
        rows.append({"rank": r["rank"], "source": "catalogue" if r.get("catalogue") else "sized",
                     "material": r["material"], "grade": r["grade"], "arrangement": r["arrangement"],
                     "array_mm": ADV.array_text(r), "n": int(r["magnet_count"]),
                     "plate_mm": "x".join(f"{v * 1e3:.4g}" for v in r["plate_m"]),
                     "t_mm": r["thickness_m"] * 1e3, "plate_g": r["plate_mass_kg"] * 1e3,
                     "margin": r["margin"], "gap_mm": _mm(r["gap_m"]),
                     "gap_worst_mm": _mm(r["gap_worst_m"]),
                     "cost_usd": r["cost_usd"] if math.isfinite(r["cost_usd"]) else None,
                     "k_x": r["k_x_n_m"], "why": "; ".join(list(r["reasons"]) or list(r["notes"]))})
    return rows


def cmd_optimise(args) -> int:
    if getattr(args, "floating_magnet", False):
        fm = _fm_module()
        if fm is None:
            raise InputError("--floating-magnet: the floating-magnet search is not installed in "
                             "this version")
        return fm.run(args)
    if args.footprint is None:
        raise InputError("--footprint: expected the plate outline, e.g. '20 mm x 20 mm'")
    if args.mass is None and args.total_mass is None:
        raise InputError("--mass/--total-mass: expected one of them, e.g. --total-mass '0.3 g'")
    if args.top is not None and args.top < 1:
        raise InputError(f"--top: expected a whole number of one or more, got {args.top}")
    req = ADV.request_from_args(args)
    stock = S.read_stock(args.stock) if args.stock else None
    from matdb.progress import progress_bar

    dyn = args.objective == "noise" or args.min_q is not None
    min_q = pressure = None
    if dyn:
        from matdb.units import parse_number
        from matdb.cli.dynamics import parse_pressure

        if args.min_q is not None:
            min_q = parse_number(args.min_q, "--min-q")
            if not (min_q > 0 and math.isfinite(min_q)):
                raise InputError(f"--min-q: expected a positive quality factor, got {args.min_q!r}")
        pressure = parse_pressure(args.pressure) if args.pressure else 101325.0
    with progress_bar("optimise", quiet=args.quiet) as prog:
        result = S.optimise(req, objective="margin" if args.objective == "noise" else args.objective,
                            min_margin=args.min_margin, stock=stock, top=args.top, progress=prog)
    if dyn:
        from matdb.advisor.dynamics import rank_optimised

        result = rank_optimised(result, objective="noise" if args.objective == "noise" else "margin",
                                min_q=min_q, pressure_pa=pressure)
    path = None
    if args.save:
        path = S.save(result, args.save)
    if args.format == "json":
        print(to_json(S.records(result)))
    elif args.format == "csv":
        recs = S.records(result)
        emit([{c: r.get(c) for c in CSV_COLUMNS} for r in recs], "csv", columns=CSV_COLUMNS)
    else:
        what = (f"total {req.total_mass_kg * 1e3:.4g} g (plate and payload)" if req.total_mode
                else f"payload {req.mass_kg * 1e3:.4g} g")
        print(f"{len(result.rows)} design(s), each re-checked exactly; {what}, footprint "
              f"{req.footprint_m[0] * 1e3:.4g} x {req.footprint_m[1] * 1e3:.4g} mm, gap >= "
              f"{req.min_gap_m * 1e3:.3g} mm, {kelvin_to_celsius(req.temp_min_k):.0f} to "
              f"{kelvin_to_celsius(req.temp_max_k):.0f} C; objective {result.objective}.")
        if result.rows:
            emit(table_rows(result), "table", TABLE_COLUMNS, TABLE_HEADERS)
        if result.start is not None and result.improvement is not None:
            s0 = result.start
            if result.objective == "margin":
                print(f"Start (best feasible catalogue candidate): margin {s0['margin']:.3g}; best "
                      f"sized design: {result.rows[0]['margin']:.3g} ({result.improvement:+.1%}).")
            else:
                print(f"Start (cheapest feasible catalogue candidate): {s0['cost_usd']:.2f} USD; best "
                      f"sized design: {result.rows[0]['cost_usd']:.2f} USD ({-result.improvement:+.1%}).")
        for n in result.notes:
            print(f"Note: {n}.")
        print(f"* prices are illustrative, not quotes. margin = worst-case lift / weight at the "
              f"required gap. {result.evaluations} search evaluations, {result.checks} exact checks, "
              f"{result.seconds:.1f} s.")
        if path is not None:
            print(f"saved {path}")
    if path is not None and args.format != "table":
        print(f"matdb: saved {path}", file=sys.stderr)
    return 0
