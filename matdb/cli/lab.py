"""``matdb record``, ``prefer``, ``history``, ``retract``, ``import``, ``export``."""

from __future__ import annotations

import sys

from matdb.cli import summary
from matdb.cli.dynamics import register_record_q
from matdb.data import exchange, lab_store
from matdb.progress import progress_bar
from matdb.output import add_format_argument, check_output_path, emit

HISTORY_MATERIAL_COLUMNS = ["value_id", "value_kind", "chi_si", "chi_par_si", "uncertainty", "temperature_c",
                            "source", "measured_by", "date", "method", "retracted"]
HISTORY_MAGNET_COLUMNS = ["value_id", "value_kind", "br_t", "hcj_ka_m", "alpha_br_pct_per_k", "source",
                          "measured_by", "date", "method", "retracted"]


def _common_provenance(p) -> None:
    p.add_argument("--source", required=True,
                   help="required free-text note: where the value comes from (sample, instrument, notebook page)")
    p.add_argument("--measured-by", help="who measured it")
    p.add_argument("--date", help="measurement date YYYY-MM-DD")
    p.add_argument("--method", help="how it was measured (e.g. Gouy balance, gaussmeter)")


def register(sub) -> None:
    p = sub.add_parser("record", help=summary("record"))
    rsub = p.add_subparsers(dest="what", metavar="WHAT")  # parser class defaults to the parent's
    rsub.required = True

    pm = rsub.add_parser(
        "material", help="a measured susceptibility",
        description="Append a measured susceptibility. VALUE is a number (SI volume) or a number with a "
        "convention or unit in the same argument, e.g. --chi -1.6e-4, --chi '-1.31e-5 cgs-volume', "
        "--chi '-280e-6 cm^3/mol' --molar-mass '208.98 g/mol'. A new material is created with --name "
        "and --density. --from-float-gap with --design infers chi from the gap a plate floats at.")
    pm.add_argument("id", help="material id (see 'matdb materials'), or a new id with --name")
    pm.add_argument("--chi", help="measured susceptibility (isotropic, or along the c axis)")
    pm.add_argument("--chi-perp", help="anisotropic: field along the c axis")
    pm.add_argument("--chi-par", help="anisotropic: field in the basal plane")
    pm.add_argument("--density", help="measured density, e.g. '9.75 g/cm^3' (needed for a new material)")
    pm.add_argument("--molar-mass", help="molar mass for molar conventions, e.g. '208.98 g/mol'")
    pm.add_argument("--temperature", help="measurement temperature, e.g. '22 degC'")
    pm.add_argument("--uncertainty", help="absolute, in the same convention as the value, or a percentage such as '5%%'")
    pm.add_argument("--name", help="display name of a new material")
    pm.add_argument("--allow-paramagnetic", action="store_true",
                    help="accept chi > 0 for a material listed as diamagnetic")
    pm.add_argument("--from-float-gap", metavar="GAP", help="gap a plate floated at, e.g. '0.9 mm' (with --design)")
    pm.add_argument("--design", metavar="DESIGN.toml", help="design file of the arrangement and plate floated")
    _common_provenance(pm)
    add_format_argument(pm, choices=("table", "json"))
    pm.set_defaults(func=cmd_record_material)

    register_record_q(rsub)

    pg = rsub.add_parser(
        "magnet", help="a measured magnet (Br, Hcj, alpha)",
        description="Append measured properties of a magnet grade. --surface-field with --shape and --size "
        "gives Br by inverting the on-axis field of that magnet (the sensor sits --probe-offset above the "
        "face, default 0). A new id needs --family, --br, --hcj, --alpha, --max-temp and --density.")
    pg.add_argument("grade", help="magnet grade (see 'matdb magnets') or a new id with --family")
    pg.add_argument("--br", help="remanence, e.g. '1.29 T' or '12900 G'")
    pg.add_argument("--hcj", help="intrinsic coercivity, e.g. '960 kA/m' or '12 kOe'")
    pg.add_argument("--alpha", help="temperature coefficient of Br in %%/K, e.g. -0.12")
    pg.add_argument("--max-temp", help="maximum working temperature, e.g. '80 degC' (new grade)")
    pg.add_argument("--density", help="magnet density, e.g. '7.5 g/cm^3' (new grade)")
    pg.add_argument("--family", help="family of a new grade: NdFeB, SmCo, ferrite, AlNiCo, bonded-NdFeB")
    pg.add_argument("--surface-field", help="field measured on the axis at the face centre, e.g. '0.52 T'")
    pg.add_argument("--shape", choices=("cuboid", "cylinder"), help="shape of the measured magnet")
    pg.add_argument("--size", help="cuboid 'x,y,height' or cylinder 'diameter,height', e.g. '10 mm,10 mm,10 mm'")
    pg.add_argument("--probe-offset", help="depth of the gaussmeter's sensor below the probe face, e.g. '0.5 mm'")
    _common_provenance(pg)
    add_format_argument(pg, choices=("table", "json"))
    pg.set_defaults(func=cmd_record_magnet)

    p = sub.add_parser("prefer", help=summary("prefer"))
    p.add_argument("id", help="material id or magnet grade")
    p.add_argument("value_id", metavar="VALUE-ID", help="value id shown by 'matdb history ID'")
    add_format_argument(p, choices=("table", "json"))
    p.set_defaults(func=cmd_prefer)

    p = sub.add_parser("history", help=summary("history"))
    p.add_argument("id", help="material id or magnet grade")
    add_format_argument(p)
    p.set_defaults(func=cmd_history)

    p = sub.add_parser("retract", help=summary("retract"))
    p.add_argument("value_id", metavar="VALUE-ID", help="value id shown by 'matdb history ID'")
    p.add_argument("--reason", required=True, help="why the value is wrong")
    p.add_argument("--id", dest="subject", help="material id or grade, when VALUE-ID is ambiguous")
    add_format_argument(p, choices=("table", "json"))
    p.set_defaults(func=cmd_retract)

    p = sub.add_parser(
        "import", help=summary("import"),
        description="Columns of a measured-value file: material_id, chi, source (required); temperature, "
        "uncertainty, density, molar_mass, measured_by, date, method, name (new material), "
        "allow_paramagnetic, note (optional). A file written by 'matdb export' is accepted back.")
    p.add_argument("file", help="CSV file (UTF-8), or a JSON file written by 'matdb export --format json'")
    p.add_argument("--dry-run", action="store_true", help="check every row, write nothing")
    add_format_argument(p, choices=("table", "json"))
    p.set_defaults(func=cmd_import)

    p = sub.add_parser("export", help=summary("export"))
    p.add_argument("--format", choices=("csv", "json"), default="csv", help="output format (default csv)")
    p.add_argument("--out", help="write to this file instead of standard output")
    p.set_defaults(func=cmd_export)


def _print_value(row: dict, fmt: str, verb: str) -> None:
    if fmt == "json":
        emit(row, "json")
        return
    subject = row.get("material_id") or row.get("grade") or row.get("subject")
    if row.get("chi_si") is not None:
        what = f"chi = {row['chi_si']:.6g} (SI volume)"
        if row.get("chi_par_si") is not None:
            what = f"chi_perp = {row['chi_si']:.6g}, chi_par = {row['chi_par_si']:.6g} (SI volume)"
    else:
        parts = [f"{k} = {row[k]:.6g}" for k in ("br_t", "hcj_ka_m", "alpha_br_pct_per_k") if row.get(k) is not None]
        what = ", ".join(parts)
    state = "in use" if row.get("preferred") else "not in use"
    if row.get("retracted"):
        state = f"retracted: {row.get('retract_reason')}"
    print(f"{verb} value {row['value_id']} of {subject}: {what} [{row['value_kind']}; {state}]")
    if row.get("note"):
        print(f"note: {row['note']}")


def cmd_record_material(args) -> int:
    fields = dict(chi=args.chi, chi_perp=args.chi_perp, chi_par=args.chi_par, density=args.density,
                  temperature=args.temperature, uncertainty=args.uncertainty, source=args.source,
                  measured_by=args.measured_by, date=args.date, method=args.method, molar_mass=args.molar_mass,
                  name=args.name, allow_paramagnetic=args.allow_paramagnetic)
    if args.from_float_gap or args.design:
        from matdb.analysis import inversions  # lazy: the plate physics loads only for a derived value

        row = inversions.record_chi_from_float_gap(args.id, args.from_float_gap, args.design, **fields)
    else:
        row = lab_store.record_material_value(args.id, **fields)
    if row.get("created_material") and args.format != "json":
        print(f"created material {row['material_id']}")
    _print_value(row, args.format, "recorded")
    return 0


def cmd_record_magnet(args) -> int:
    fields = dict(br=args.br, hcj=args.hcj, alpha=args.alpha, max_temp=args.max_temp, density=args.density,
                  family=args.family, source=args.source, measured_by=args.measured_by, date=args.date,
                  method=args.method)
    if args.surface_field or args.shape or args.size or args.probe_offset:
        from matdb.analysis import inversions  # lazy: the field physics loads only for a derived value

        row = inversions.record_magnet_from_surface_field(args.grade, args.surface_field, args.shape, args.size,
                                                          args.probe_offset, **fields)
    else:
        row = lab_store.record_magnet_value(args.grade, **fields)
    if row.get("created_grade") and args.format != "json":
        print(f"created grade {row['grade']}")
    _print_value(row, args.format, "recorded")
    return 0


def cmd_prefer(args) -> int:
    row = lab_store.prefer(args.id, args.value_id)
    _print_value(row, args.format, "preferred")
    return 0


def cmd_history(args) -> int:
    rows = lab_store.history(args.id)
    # CSV output is spreadsheet-safe already: emit() escapes formula-like text cells
    if args.format != "table":
        emit(rows, args.format)
        return 0
    magnet = bool(rows) and rows[0]["subject_kind"] == "magnet"
    cols = HISTORY_MAGNET_COLUMNS if magnet else HISTORY_MATERIAL_COLUMNS
    print(f"{rows[0]['subject'] if rows else args.id}: every value, oldest first (* = in use, "
          "! = chosen with 'matdb prefer')")
    emit([dict(r, value_id=f"{r['value_id']}{'*' if r['preferred'] else ''}{'!' if r['preference_set'] else ''}")
          for r in rows], "table", cols)
    return 0


def cmd_retract(args) -> int:
    row = lab_store.retract(args.value_id, args.reason, args.subject)
    _print_value(row, args.format, "retracted")
    return 0


def cmd_import(args) -> int:
    with progress_bar("import") as progress:
        totals = exchange.import_file(args.file, dry_run=args.dry_run, progress=progress)
    if args.format == "json":
        emit(totals, "json")
        return 0
    verb = "checked (dry run, nothing written)" if args.dry_run else "imported"
    print(f"{verb} {totals['file']}: {totals['added']} values added, {totals['already_present']} already "
          f"present; {totals['materials_added']} materials, {totals['grades_added']} grades, "
          f"{totals['sources_added']} sources added; {totals['retracted']} retracted, "
          f"{totals['preferences_set']} preferences set")
    return 0


def cmd_export(args) -> int:
    out = check_output_path(args.out, "--out") if args.out is not None else None
    text = exchange.export(args.format)
    if out is not None:
        out.write_text(text, encoding="utf-8", newline="")
        print(f"wrote {out}", file=sys.stderr)
    else:
        sys.stdout.write(text)
    return 0
