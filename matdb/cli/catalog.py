"""``matdb materials``, ``matdb magnets``, ``matdb show``, ``matdb convert``."""

from __future__ import annotations

import math

from matdb.cli import summary
from matdb.data import catalog
from matdb.data.db import default_url, get_engine
from matdb.errors import InputError, NotFoundError
from matdb.limits import check_chi
from matdb.output import add_format_argument, emit, format_table, with_marks
from matdb.units import (
    CONVENTIONS,
    chi_from_si_volume,
    chi_to_si_volume,
    needs_density,
    needs_molar_mass,
    parse_convention,
    parse_density,
    parse_molar_mass,
    _split_number_unit,
)

MATERIAL_COLUMNS = ["id", "name", "chi_si", "chi_perp_si", "chi_par_si", "density_kg_m3",
                    "abs_chi_per_density_m3_kg", "value_kind", "source"]
MATERIAL_HEADERS = {"chi_si": "chi (SI vol)", "chi_perp_si": "chi_perp", "chi_par_si": "chi_par",
                    "density_kg_m3": "density kg/m^3", "abs_chi_per_density_m3_kg": "|chi|/rho m^3/kg",
                    "value_kind": "kind"}
MAGNET_COLUMNS = ["grade", "family", "br_t", "br_min_t", "hcb_ka_m", "hcj_ka_m", "bhmax_kj_m3",
                  "alpha_br_pct_per_k", "beta_hcj_pct_per_k", "max_temp_c", "density_kg_m3",
                  "price_usd_per_kg"]
MAGNET_HEADERS = {"br_t": "Br T", "br_min_t": "Br min T", "hcb_ka_m": "Hcb kA/m", "hcj_ka_m": "Hcj kA/m",
                  "bhmax_kj_m3": "BHmax kJ/m^3", "alpha_br_pct_per_k": "a(Br) %/K",
                  "beta_hcj_pct_per_k": "b(Hcj) %/K", "max_temp_c": "Tmax C", "density_kg_m3": "rho kg/m^3",
                  "price_usd_per_kg": "USD/kg*"}


def register(sub) -> None:
    _register_admin(sub)
    p = sub.add_parser("materials", help=summary("materials"))
    add_format_argument(p)
    p.set_defaults(func=cmd_materials)

    p = sub.add_parser("magnets", help=summary("magnets"))
    p.add_argument("--family", action="append", help="only these families (repeatable)")
    add_format_argument(p)
    p.set_defaults(func=cmd_magnets)

    p = sub.add_parser("sources", help=summary("sources"))
    p.add_argument("--status", choices=("verified", "corrected", "unverified"),
                   help="only sources that support values of this status")
    add_format_argument(p, choices=("table", "json"))
    p.set_defaults(func=cmd_sources)

    p = sub.add_parser("properties", help=summary("properties"))
    p.add_argument("id", nargs="?", help="only this material id or magnet family (e.g. pyrolytic-graphite, NdFeB)")
    add_format_argument(p)
    p.set_defaults(func=cmd_properties)

    p = sub.add_parser("show", help=summary("show"))
    p.add_argument("id", help="material id (e.g. bismuth) or magnet grade (e.g. N42SH)")
    add_format_argument(p, choices=("table", "json"))
    p.set_defaults(func=cmd_show)

    p = sub.add_parser(
        "convert",
        help=summary("convert"),
        description="Convert a magnetic susceptibility. UNIT: " + ", ".join(CONVENTIONS)
        + ", or m^3/kg, m^3/mol (SI), cm^3/g, cm^3/mol, emu/(g Oe), emu/(mol Oe) (CGS-emu). "
        "Example: matdb convert -280.1e-6 cm^3/mol --density '9.78 g/cm^3' --molar-mass '208.98 g/mol'",
    )
    p.add_argument("value", help="the number as published, e.g. -280.1e-6 (a unit may follow in the same argument)")
    p.add_argument("unit", nargs="?", help="convention or unit of VALUE")
    p.add_argument("--to", default="si-volume", help="target convention or unit (default si-volume)")
    p.add_argument("--density", help="density with units, e.g. '9.78 g/cm^3'")
    p.add_argument("--molar-mass", help="molar mass with units, e.g. '208.98 g/mol'")
    p.add_argument("--material", help="take density and molar mass from this material in the database")
    add_format_argument(p)
    p.set_defaults(func=cmd_convert)


def _status_table(marks: dict[str, dict[str, str]]) -> dict[str, dict[str, str]]:
    return {k: {c: catalog.mark(st) for c, st in m.items()} for k, m in marks.items()}


def cmd_materials(args) -> int:
    rows = [catalog.material_record(m) for m in catalog.list_materials()]
    marks = catalog.status_marks()["material"]
    if args.format == "table":
        print("SI volume susceptibilities; chi_perp/chi_par for anisotropic plates (c axis vertical).")
        emit(with_marks(rows, _status_table(marks), "id", ["chi_si", "chi_perp_si", "chi_par_si", "density_kg_m3"]),
             "table", MATERIAL_COLUMNS, MATERIAL_HEADERS)
        print("status marks: " + catalog.STATUS_LEGEND)
        return 0
    if args.format == "json":
        rows = [dict(r, provenance_status=marks.get(r["id"], {})) for r in rows]
    emit(rows, args.format, None, MATERIAL_HEADERS)
    return 0


def cmd_magnets(args) -> int:
    fams = {catalog.check_family(f, "family") for f in (args.family or [])}
    rows = [catalog.grade_record(g) for g in catalog.list_grades()]
    if fams:
        rows = [r for r in rows if r["family"] in fams]
    marks = catalog.status_marks()["magnet"]
    if args.format == "table":
        emit(with_marks(rows, _status_table(marks), "grade", MAGNET_COLUMNS), "table", MAGNET_COLUMNS, MAGNET_HEADERS)
        print("* prices are illustrative, not quotes. Br = mid-point of the published range, Br min = its lower end "
              "(the guaranteed value); Hcb, Hcj = published minima.")
        print("status marks: " + catalog.STATUS_LEGEND)
        return 0
    if args.format == "json":
        rows = [dict(r, provenance_status=marks.get(r["grade"], {})) for r in rows]
    emit(rows, args.format, None, MAGNET_HEADERS)
    return 0


def cmd_sources(args) -> int:
    rows = catalog.sources_summary(args.status)
    if args.format == "json":
        emit({"totals": catalog.provenance_totals(), "sources": rows}, "json")
        return 0
    totals = catalog.provenance_totals()
    n = sum(totals.values())
    emit(rows, "table", ["key", "kind", "year", "values", "verified", "corrected", "unverified", "citation"],
         {"values": "values"})
    if not n:
        print("\nno checks recorded in this database (made before they existed): run 'matdb seed' to refresh "
              "the published values and their provenance (lab values are kept).")
    if n:
        done = totals["verified"] + totals["corrected"]
        print(f"\n{n} stored published values: {totals['verified']} verified, {totals['corrected']} corrected, "
              f"{totals['unverified']} unverified ({100.0 * done / n:.0f} % checked against a source with a locator).")
    print("matdb show ID lists each value's status and locator; seed_data/CHECKS.md lists every correction.")
    return 0


PROPERTY_COLUMNS = ["subject_id", "property", "axis", "value_si", "unit_si", "value_published", "unit_published",
                    "temperature_c", "status", "source_key", "locator"]


def cmd_properties(args) -> int:
    rows = catalog.list_properties(args.id)
    if args.id and not rows:
        raise NotFoundError(f"id: no further properties stored for {args.id!r} (see matdb properties)")
    if args.format == "table":
        shown = [dict(r, status=f"{catalog.mark(r['status'])} {r['status']}") for r in rows]
        emit(shown, "table", PROPERTY_COLUMNS)
        print("axes: materials perp = along the c axis (normal to the plate), par = in the plane; "
              "magnet families par = along the magnetisation. Electrical conductivity = 1 / resistivity.")
        print("status marks: " + catalog.STATUS_LEGEND)
        return 0
    emit(rows, args.format, PROPERTY_COLUMNS if args.format == "csv" else None)
    return 0


def _prov_lines(prov: list[dict]) -> list[dict]:
    return [{"field": p["field"], "status": f"{catalog.mark(p['status'])} {p['status']}",
             "source_key": p.get("source_key"),
             "locator": p["locator"] or (("tried: " + p["sources_tried"]) if p.get("sources_tried") else "-")}
            for p in prov]


def cmd_show(args) -> int:
    key = args.id.strip()
    try:
        m = catalog.get_material(key)
    except NotFoundError:
        m = None
    if m is not None:
        rec = catalog.material_record(m)
        values = catalog.material_values(m.id)
        own = catalog.material_provenance(m.id)
        props = catalog.list_properties(m.id)
        if args.format == "json":
            emit({"type": "material", **rec, "provenance": own, "values": values, "properties": props}, "json")
        else:
            emit(rec, "table")
            print("\nvalues (newest last; * = in use):")
            emit([dict(v, value_id=f"{v['value_id']}{'*' if v['preferred'] else ''}") for v in values], "table",
                 ["value_id", "value_kind", "chi_si", "chi_par_si", "value_published", "convention",
                  "temperature_c", "uncertainty", "source", "measured_by", "date", "retracted"])
            _print_provenance(own, values, props)
        return 0
    try:
        g = catalog.get_grade(key)
    except NotFoundError:
        names = [m.id for m in catalog.list_materials()] + [x.grade for x in catalog.list_grades()]
        raise NotFoundError(f"{key!r} is neither a material id nor a magnet grade"
                            f"{catalog.did_you_mean(key, names) or ' (see matdb materials, matdb magnets)'}",
                            field="id") from None
    rec = catalog.grade_record(g)
    values = catalog.grade_values(g.grade)
    props = catalog.list_properties(g.family) + catalog.list_properties(g.grade)
    if args.format == "json":
        emit({"type": "magnet", **rec, "values": values, "column_meaning": catalog.GRADE_COLUMN_MEANING,
              "family_properties": props}, "json")
    else:
        emit(rec, "table")
        print("\nvalues (* = in use):")
        emit([dict(v, value_id=f"{v['value_id']}{'*' if v['preferred'] else ''}") for v in values], "table",
             ["value_id", "value_kind", "br_t", "br_min_t", "hcj_ka_m", "alpha_br_pct_per_k", "source",
              "measured_by", "date", "retracted"])
        _print_provenance([], values, props)
        print("\nBr = mid-point of the published range, Br min = its lower end; Hcb, Hcj = published minima.")
    return 0


def _print_provenance(own: list[dict], values: list[dict], props: list[dict]) -> None:
    """Each stored number with its status and where it was checked."""
    if own:
        print("\nmaterial numbers:")
        print(format_table(_prov_lines(own), ["field", "status", "source_key", "locator"], max_width=200))
    for v in values:
        if v.get("provenance"):
            print(f"\nvalue {v['value_id']}: status and locator of each number")
            print(format_table(_prov_lines(v["provenance"]), ["field", "status", "source_key", "locator"],
                               max_width=200))
    if props:
        print("\nfurther properties:")
        emit([{"property": f"{p['property']} ({p['axis']})", "value": f"{p['value_published']:g} {p['unit_published']}",
               "status": f"{catalog.mark(p['status'])} {p['status']}", "source_key": p["source_key"],
               "locator": p["locator"] or "-"} for p in props], "table",
             ["property", "value", "status", "source_key", "locator"])
    print("status marks: " + catalog.STATUS_LEGEND)


def convert_chi(value_text: str, unit: str | None, to: str = "si-volume", density: str | None = None,
                molar_mass: str | None = None, material: str | None = None) -> dict:
    """Parse and convert; returns the record printed by ``matdb convert``."""
    value, inline_unit = _split_number_unit(value_text.strip(), "value")
    if inline_unit and unit:
        a, b = parse_convention(inline_unit, "value"), parse_convention(unit, "unit")
        if a != b:
            raise InputError(f"the unit in VALUE ({inline_unit!r}) differs from {unit!r}; give one", field="unit")
    unit = unit or inline_unit
    if not unit:
        raise InputError("missing; give the convention or unit of VALUE, e.g. cm^3/mol or si-volume", field="unit")
    src = parse_convention(unit, "unit")
    dst = parse_convention(to, "to")
    rho = parse_density(density, "density") if density else None
    mm = parse_molar_mass(molar_mass, "molar_mass") if molar_mass else None
    if material:
        m = catalog.get_material(material)
        if rho is not None and abs(rho - m.density_kg_m3) > 0.02 * m.density_kg_m3:
            raise InputError(f"{density!r} contradicts {m.id}'s density "
                             f"{m.density_kg_m3:g} kg/m^3 in the database; give one of them", field="density")
        if mm is not None and m.molar_mass_kg_mol and abs(mm - m.molar_mass_kg_mol) > 0.01 * m.molar_mass_kg_mol:
            raise InputError(f"{molar_mass!r} contradicts {m.id}'s molar mass "
                             f"{m.molar_mass_kg_mol * 1000:g} g/mol in the database; give one of them",
                             field="molar_mass")
        rho = rho if rho is not None else m.density_kg_m3
        mm = mm if mm is not None else m.molar_mass_kg_mol
    for conv, where in ((src, "unit"), (dst, "to")):
        if needs_density(conv) and rho is None:
            raise InputError(f"needed for {conv} ({where}); give a density such as '9.78 g/cm^3' or a "
                             "material", field="density")
        if needs_molar_mass(conv) and mm is None:
            raise InputError(f"needed for {conv} ({where}); give a molar mass such as '208.98 g/mol' or a "
                             "material", field="molar_mass")
    chi_si = chi_to_si_volume(value, src, rho, mm)
    check_chi(chi_si, "value", f"{value:g} {src}")
    result = chi_from_si_volume(chi_si, dst, rho, mm)
    if not math.isfinite(result):
        raise InputError(f"{value:g} {src} has no finite value in {dst}", field="to")
    return {"chi_si": chi_si, "value": value, "from": src, "to": dst, "result": result,
            "density_kg_m3": rho, "molar_mass_kg_mol": mm, "material": material}


def cmd_convert(args) -> int:
    rec = convert_chi(args.value, args.unit, args.to, args.density, args.molar_mass, args.material)
    if args.format == "table":
        print(f"{rec['value']:.6g} {rec['from']}  =  {rec['result']:.6g} {rec['to']}"
              + (f"   (SI volume chi = {rec['chi_si']:.6g})" if rec["to"] != "si-volume" else ""))
    else:
        emit(rec, args.format)
    return 0


def _register_admin(sub) -> None:
    p = sub.add_parser("seed", help=summary("seed"))
    p.set_defaults(func=cmd_seed)


def cmd_seed(args) -> int:
    from matdb.data.seed import seed_database  # lazy: only `seed` needs the ORM models (start-up)

    url = default_url()
    counts = seed_database(get_engine(url, seed=False))
    shown = url if "@" not in url else url.split("@", 1)[-1]
    print(f"seeded {shown}: " + ", ".join(f"{v} {k}" for k, v in counts.items()))
    return 0
