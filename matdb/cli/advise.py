"""``matdb advise``: rank plate material x magnet grade x arrangement for a payload.

    matdb advise (--mass "0.2 g" | --total-mass "0.3 g") --footprint "17 mm x 17 mm"
        [--min-gap|--gap "0.3 mm"] [--magnet-envelope "24 x 24 x 15 mm"]
        [--temp-min "0 degC"] [--temp-max "60 degC"] [--budget "20 USD"]
        [--material ID ...] [--family NdFeB ...] [--grade N42 ...] [--max-magnet-size "13 mm"]
        [--thickness "1 mm" ...] [--plate-size "20 mm x 20 mm"] [--payload-height "2 mm"]
        [--weights margin=1,cost=1,derating=1] [--top N] [--feasible-only] [--exact N]
        [--save DESIGN.toml] [--format table|json|csv]
        [--objective score|noise] [--min-q Q] [--pressure "1e-3 Pa"]

A thin layer over :func:`matdb.advisor.advise_request`.
"""

from __future__ import annotations

import math

from matdb.cli import summary
from matdb import advisor as A
from matdb.errors import InputError
from matdb.output import add_format_argument, check_output_path, emit, to_json
from matdb import constants
from matdb.constants import kelvin_to_celsius

TABLE_COLUMNS = ["rank", "material", "grade", "arrangement", "array_mm", "n", "plate_mm", "t_mm", "plate_g",
                 "feasible", "margin", "gap_mm", "gap_worst_mm", "derating_pct", "cost_usd", "score",
                 "pareto", "why"]
TABLE_HEADERS = {"t_mm": "plate t mm", "plate_g": "plate g", "plate_mm": "plate mm", "array_mm": "array WxLxH mm",
                 "n": "magnets", "gap_mm": "gap mm", "gap_worst_mm": "worst gap mm",
                 "derating_pct": "derating %", "cost_usd": "cost USD*", "why": "reasons / notes"}
CSV_COLUMNS = ["rank", "material", "grade", "arrangement", "pattern", "shape", "size_m", "rows",
               "cols", "thickness_m", "feasible", "lift_per_area_n_m2", "gap_m", "gap_worst_m",
               "margin", "margin_nominal", "laterally_stable", "derating_pct", "cost_usd", "score",
               "pareto", "reasons", "exact", "q_vertical", "noise_m_s2_rthz", "f_vertical_hz",
               "dynamics_exact", "plate_mass_kg", "payload_kg", "array_w_m", "array_l_m",
               "array_h_m", "magnet_count", "plate_m"]


def add_request_arguments(p, *, mass: bool = True) -> None:
    """The request options ``advise`` and ``optimise`` share (what to float, where, how);
    ``mass=False`` leaves out --mass, --total-mass and --footprint (the caller adds them)."""
    if mass:
        m = p.add_mutually_exclusive_group(required=True)
        m.add_argument("--mass", help="payload mass on top of the plate, e.g. '0.2 g'")
        m.add_argument("--total-mass", help="plate plus payload, e.g. '0.3 g' (the plate thickness "
                       "and side are then matched to it)")
        p.add_argument("--footprint", required=True,
                       help="plate outline, e.g. '20 mm x 20 mm', '20x20 mm' or '20 by 20 mm'")
    p.add_argument("--min-gap", "--gap", dest="min_gap", default="0.2 mm",
                   help="required gap (clearance) above the magnets (default 0.2 mm)")
    p.add_argument("--temp-min", default="20 degC", help="coldest operating temperature (default 20 degC)")
    p.add_argument("--temp-max", default="20 degC", help="hottest operating temperature (default 20 degC)")
    p.add_argument("--budget", help="most the magnets plus plate may cost, e.g. '20 USD'")
    p.add_argument("--material", action="extend", nargs="+", help="only these plate material ids (several, or repeat the option)")
    p.add_argument("--family", action="extend", nargs="+", help="only these magnet families, e.g. NdFeB SmCo")
    p.add_argument("--grade", action="extend", nargs="+", help="only these magnet grades, e.g. N42 N42SH")
    p.add_argument("--max-magnet-size", help="largest magnet dimension allowed, e.g. '13 mm'")
    p.add_argument("--magnet-envelope", help="box the magnet array must fit in, width x length x "
                   "height, e.g. '24 x 24 x 15 mm'")
    p.add_argument("--thickness", action="extend", nargs="+",
                   help="plate thickness to consider (repeatable; default 0.5, 1 and 2 mm, and with "
                   "--total-mass also each material's thickness matched to it)")
    p.add_argument("--plate-size", help="fix the plate outline instead of the footprint, e.g. '20 mm x 20 mm'")
    p.add_argument("--payload-height", default="0 mm",
                   help="payload centre of mass above the plate (default 0 mm)")


def request_from_args(args, **extra) -> A.AdviceRequest:
    """:class:`matdb.advisor.AdviceRequest` from the options of :func:`add_request_arguments`."""
    return A.parse_request(args.mass, args.footprint, min_gap=args.min_gap, temp_min=args.temp_min,
                           temp_max=args.temp_max, budget=getattr(args, "budget", None),
                           materials=args.material, families=getattr(args, "family", None),
                           grades=args.grade, max_magnet_size=args.max_magnet_size,
                           thickness=args.thickness, plate_size=args.plate_size,
                           payload_height=args.payload_height, total_mass=args.total_mass,
                           envelope=args.magnet_envelope, **extra)


def register(sub) -> None:
    p = sub.add_parser(
        "advise",
        help=summary("advise"),
        description="Rank every plate material x magnet grade x default arrangement x plate "
        "thickness for a payload: worst-case margin at the required gap, stability, thermal "
        "derating, demagnetisation risk, cost; every rejection with its reason. "
        "Example: matdb advise --mass '0.2 g' --footprint '17 mm x 17 mm' --temp-max '60 degC'",
    )
    add_request_arguments(p)
    p.add_argument("--weights", help="score weights, e.g. 'margin=1,cost=1,derating=1'")
    p.add_argument("--top", type=int, default=None,
                   help="rows to show (default 10 for the table, 50 for json and csv; 0 = every "
                   "candidate, which can be tens of thousands)")
    p.add_argument("--feasible-only", action="store_true", help="omit the rejected candidates")
    p.add_argument("--exact", type=int, default=None,
                   help="rows worked out exactly as 'matdb levitate' does (default 1: the top one, "
                   "a few seconds each when not cached); the rest are screening values")
    p.add_argument("--save", metavar="DESIGN.toml", help="write the top candidate as a design file")
    p.add_argument("--quiet", action="store_true", help="no progress bar on stderr")
    p.add_argument("--objective", choices=["score", "noise"], default="score",
                   help="rank by the score (default) or by the lowest noise floor: thermal "
                   "acceleration noise of the vertical mode (screened, exact for the rows shown)")
    p.add_argument("--min-q", help="reject candidates whose vertical-mode Q is below this, e.g. 100")
    p.add_argument("--pressure", help="gas pressure for the dynamics, e.g. '1e-3 Pa' (default 1 atm)")
    add_format_argument(p)
    p.set_defaults(func=cmd_advise)


def _mm(v) -> float | None:
    return None if v is None or not math.isfinite(v) else v * 1e3


def array_text(r) -> str:
    """'20x20x10' (array width x length x height in mm)."""
    return "x".join(f"{r[k] * 1e3:.4g}" for k in ("array_w_m", "array_l_m", "array_h_m"))


def table_rows(df) -> list[dict]:
    rows = []
    for r in df.to_dict(orient="records"):
        why = list(r["reasons"]) or list(r["notes"])
        rows.append({"rank": int(r["rank"]), "material": r["material"], "grade": r["grade"],
                     "arrangement": r["arrangement"], "array_mm": array_text(r),
                     "n": int(r["magnet_count"]), "plate_g": r["plate_mass_kg"] * 1e3,
                     "plate_mm": "x".join(f"{v * 1e3:.4g}" for v in r["plate_m"]),
                     "t_mm": r["thickness_m"] * 1e3,
                     "feasible": bool(r["feasible"]), "margin": r["margin"],
                     "gap_mm": _mm(r["gap_m"]), "gap_worst_mm": _mm(r["gap_worst_m"]),
                     "derating_pct": r["derating_pct"],
                     "cost_usd": r["cost_usd"] if math.isfinite(r["cost_usd"]) else None,
                     "score": r["score"] if math.isfinite(r["score"]) else None,
                     "pareto": bool(r["pareto"]), "why": "; ".join(why)})
    return rows


def cmd_advise(args) -> int:
    save = check_output_path(args.save, "--save") if args.save is not None else None  # before computing
    if args.top is not None and args.top < 0:
        raise InputError(f"--top: expected a whole number of zero or more, got {args.top}")
    if args.exact is not None and args.exact < 0:
        raise InputError(f"--exact: expected zero or more, got {args.exact}")
    req = request_from_args(args, weights=args.weights)
    top = args.top if args.top is not None else (10 if args.format == "table" else 50)
    top = None if top == 0 else top
    exact = args.exact if args.exact is not None else 1
    min_q = None
    if args.min_q is not None:
        from matdb.units import parse_number

        min_q = parse_number(args.min_q, "--min-q")
        if not (min_q > 0 and math.isfinite(min_q)):
            raise InputError(f"--min-q: expected a positive quality factor, got {args.min_q!r}")
    pressure = 101325.0
    if args.pressure:
        from matdb.cli.dynamics import parse_pressure

        pressure = parse_pressure(args.pressure)
    from matdb.progress import progress_bar

    with progress_bar("advise", quiet=getattr(args, "quiet", False)) as prog, A.reporting_progress(prog):
        df, cat = A.advise_request(req, top=top, feasible_only=args.feasible_only, polish=exact,
                                   objective=args.objective, min_q=min_q, pressure_pa=pressure)
    if args.save:
        if df.empty:
            raise InputError("--save: no candidate to save")
        path = A.save_design(df.iloc[0].to_dict(), req, save, cat)
        if not bool(df.iloc[0]["feasible"]):
            import sys

            print(f"matdb: note: no candidate is feasible; {path} holds the best rejected one "
                  f"({'; '.join(df.iloc[0]['reasons'])})", file=sys.stderr)
    if args.format == "json":
        print(to_json(A.records(df)))
    elif args.format == "csv":
        recs = []
        for r in df.to_dict(orient="records"):
            recs.append({c: r.get(c) for c in CSV_COLUMNS})
        emit(recs, "csv", columns=CSV_COLUMNS)
    else:
        n_feas = int(df["feasible"].sum())
        what = (f"total {req.total_mass_kg * 1e3:.4g} g (plate and payload)" if req.total_mode
                else f"payload {req.mass_kg * 1e3:.4g} g")
        env = ("" if req.envelope_m is None else
               ", magnets within " + " x ".join(f"{v * 1e3:.4g}" for v in req.envelope_m) + " mm")
        up = "plates up to" if len(req.plates) > 1 else "a"
        pl = "" if len(req.plates) > 1 else " plate"
        print(f"{n_feas} feasible of {len(df)} shown; {what} on {up} "
              f"{req.plate_m[0] * 1e3:.4g} x {req.plate_m[1] * 1e3:.4g} mm{pl}, gap >= "
              f"{req.min_gap_m * 1e3:.3g} mm, {kelvin_to_celsius(req.temp_min_k):.0f} to {kelvin_to_celsius(req.temp_max_k):.0f} C{env}.")
        dyn = "noise_m_s2_rthz" in df.columns
        rows_t = table_rows(df)
        cols_t = list(TABLE_COLUMNS)
        if dyn:
            for rt, r in zip(rows_t, df.to_dict(orient="records")):
                q, n = r.get("q_vertical"), r.get("noise_m_s2_rthz")
                rt["q"] = q if isinstance(q, float) and math.isfinite(q) else None
                rt["noise_ug"] = n / (1e-6 * constants.G_STANDARD) if isinstance(n, float) and math.isfinite(n) else None
                rt["dyn"] = "exact" if r.get("dynamics_exact") else ("screen" if rt["q"] or rt["noise_ug"] is not None else "-")
            cols_t[cols_t.index("why"):cols_t.index("why")] = ["q", "noise_ug", "dyn"]
        emit(rows_t, "table", cols_t, {**TABLE_HEADERS, "q": "Q vert", "noise_ug": "noise ug/rtHz",
                                       "dyn": "Q from"})
        screened = int((~df["exact"].astype(bool)).sum())
        print("* prices are illustrative, not quotes. margin = worst-case lift / weight at the "
              "required gap." + (f" {screened} row(s) are screening values (see --exact)." if screened else ""))
    if args.save:
        print(f"saved {path}" if args.format == "table" else "", end="\n" if args.format == "table" else "")
    return 0
