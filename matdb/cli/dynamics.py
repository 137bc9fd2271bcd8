"""``matdb dynamics``, ``matdb conductivities`` and ``matdb record q``.

    matdb dynamics DESIGN [--pressure "1e-3 Pa"] [--temp "25 degC"] [--format table|json|csv]
    matdb conductivities [--format table|json|csv]
    matdb record q MATERIAL (--q 1200 | --ring-down "25 s") [--frequency "16 Hz"] --source "..."
"""

from __future__ import annotations

import sys

from matdb.analysis.dynamics import analyse_dynamics, record_q_value
from matdb.cli import summary
from matdb.constants import kelvin_to_celsius
from matdb.data.catalog import conductivities_df
from matdb.design import load_design
from matdb.errors import InputError
from matdb.output import add_format_argument, emit, records, to_json
from matdb.units import parse_length, parse_quantity, parse_temperature

MODE_COLUMNS = ("name", "frequency_hz", "q", "q_eddy", "q_air", "ring_down_s",
                "dominant_damping", "noise_m_s2_rthz", "noise_micro_g_rthz")


def parse_pressure(text: str, field: str = "--pressure") -> float:
    """A pressure with units ("1e-3 Pa", "1 atm", "5 mbar", "1e-6 torr") -> Pa."""
    return parse_quantity(text, "Pa", field, positive=True)


def _g(v, digits: int = 3) -> str:
    if v is None:
        return "-"
    return f"{v:.{digits}g}"


def format_dynamics(r: dict) -> str:
    """A dynamics result as text for a person (Hz, s, micro-g)."""
    head = [
        ("pressure", f"{r['pressure_pa']:.3g} Pa"),
        ("conductivity in plane / across", f"{_g(r['sigma_in_plane_s_m'])} / "
         f"{_g(r['sigma_across_s_m'])} S/m  ({r.get('sigma_source')})"),
        ("mass (plate + payload)", f"{r['mass_kg'] * 1e3:.4g} g"),
        ("gap / air gap", f"{r['gap_m'] * 1e3:.4g} mm / {r['air_gap_m'] * 1e3:.4g} mm"),
        ("temperature", f"{kelvin_to_celsius(r['temperature_k']):.4g} C"),
        ("mesh", f"{r['mesh_triangles']} triangles, element size {r['mesh_size_m'] * 1e3:.3g} mm"),
    ]
    width = max(len(k) for k, _ in head)
    lines = [f"{k.ljust(width)}  {v}" for k, v in head]
    lines.append("")
    rows = [("mode", "f [Hz]", "Q", "Q eddy", "Q air", "ring-down [s]", "limited by",
             "noise [ug/rtHz]")]
    for m in r["modes"]:
        rows.append((m["name"], "unstable" if m["unstable"] else _g(m["frequency_hz"]),
                     _g(m["q"]), _g(m["q_eddy"]), _g(m["q_air"]), _g(m["ring_down_s"]),
                     m["dominant_damping"], _g(m["noise_micro_g_rthz"])))
    w = [max(len(str(row[i])) for row in rows) for i in range(len(rows[0]))]
    for k, row in enumerate(rows):
        lines.append("  ".join(str(c).ljust(w[i]) if i in (0, 6) else str(c).rjust(w[i])
                               for i, c in enumerate(row)).rstrip())
        if k == 0:
            lines.append("  ".join("-" * x for x in w))
    lines.append("")
    lines.append("Q '-' means that mechanism does not damp the mode; noise is given for the "
                 "vertical and sliding modes (1 ug = 9.81e-6 m/s^2).")
    if r.get("warnings"):
        lines.append("")
        lines.append("warnings:")
        lines += [f"- {w}" for w in r["warnings"]]
    return "\n".join(lines)


def cmd_dynamics(args) -> int:
    pressure = parse_pressure(args.pressure) if args.pressure else 101325.0
    temp = parse_temperature(args.temp, "--temp") if args.temp else None
    mesh = parse_length(args.mesh_size, "--mesh-size") if args.mesh_size else None
    if mesh is not None and mesh <= 0:
        raise InputError(f"--mesh-size: expected a positive length, got {args.mesh_size!r}")
    design = load_design(args.design)
    result = analyse_dynamics(design, pressure_pa=pressure, temp_k=temp, mesh_size=mesh)
    if args.format == "json":
        sys.stdout.write(to_json(result) + "\n")
    elif args.format == "csv":
        rows = [{"pressure_pa": result["pressure_pa"], **{c: m.get(c) for c in MODE_COLUMNS}}
                for m in result["modes"]]
        emit(rows, "csv", columns=["pressure_pa", *MODE_COLUMNS])
    else:
        sys.stdout.write(format_dynamics(result) + "\n")
    return 0


def cmd_conductivities(args) -> int:
    df = conductivities_df()
    cols = ["material", "sigma_in_plane_s_m", "sigma_across_s_m", "quality", "source_key"]
    emit(records(df), args.format, columns=None if args.format == "json" else cols)
    return 0


def cmd_record_q(args) -> int:
    row = record_q_value(args.material, q=args.q, ring_down=args.ring_down,
                         frequency=args.frequency, pressure=args.pressure,
                         temperature=args.temperature, mode=args.mode or "",
                         design=args.design or "", source=args.source,
                         measured_by=args.measured_by, date=args.date, method=args.method)
    if args.format == "json":
        sys.stdout.write(to_json(row) + "\n")
    else:
        print(f"recorded Q value {row['id']} for {row['material_id']}: Q = {_g(row['q'], 4)}, "
              f"ring-down {_g(row['ring_down_s'], 4)} s")
    return 0


def register_record_q(rsub) -> None:
    """``matdb record q``: added to the ``record`` command's subcommands."""
    pq = rsub.add_parser(
        "q", help="a measured quality factor or ring-down time",
        description="Append a measured Q or ring-down time (1/e of amplitude) of a floating "
        "plate. With --frequency the other one follows from Q = pi f tau.")
    pq.add_argument("material", help="plate material id (see 'matdb materials')")
    pq.add_argument("--q", help="measured quality factor, e.g. 1200")
    pq.add_argument("--ring-down", help="1/e amplitude decay time, e.g. '25 s'")
    pq.add_argument("--frequency", help="mode frequency, e.g. '16 Hz'")
    pq.add_argument("--pressure", help="gas pressure, e.g. '1e-3 Pa'")
    pq.add_argument("--temperature", help="temperature, e.g. '22 degC'")
    pq.add_argument("--mode", help="which mode, e.g. vertical")
    pq.add_argument("--design", help="design file or set-up it was measured on")
    pq.add_argument("--source", required=True,
                    help="required free-text note: where the value comes from")
    pq.add_argument("--measured-by", help="who measured it")
    pq.add_argument("--date", help="measurement date YYYY-MM-DD")
    pq.add_argument("--method", help="how it was measured (e.g. laser ring-down)")
    add_format_argument(pq, choices=("table", "json"))
    pq.set_defaults(func=cmd_record_q)


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "dynamics", help=summary("dynamics"),
        description="Rigid-body modes of the floating plate (K v = omega^2 M v), eddy-current "
        "damping (finite elements on the plate outline with its slots and holes), air damping "
        "(squeeze film and shear, rarefied gas) at --pressure, Q, ring-down time and thermal "
        "acceleration noise per mode. [plate] may set sigma_in_plane and sigma_across "
        "(e.g. \"2e5 S/m\") and slots/holes.")
    p.add_argument("design", help="design TOML file (floating plate)")
    p.add_argument("--pressure", help="gas pressure, e.g. '1e-3 Pa', '1 atm', '5 mbar' "
                   "(default 1 atm)")
    p.add_argument("--temp", help="temperature, e.g. '25 degC' (default the design's)")
    p.add_argument("--mesh-size", help="element size of the plate mesh, e.g. '0.2 mm' "
                   "(default the smaller side / 48)")
    add_format_argument(p, choices=("table", "json", "csv"), default="table")
    p.set_defaults(func=cmd_dynamics)

    c = subparsers.add_parser("conductivities", help=summary("conductivities"),
                              description="Electrical conductivity in use for each material, "
                              "in the plate plane and across it, with its source.")
    add_format_argument(c, choices=("table", "json", "csv"), default="table")
    c.set_defaults(func=cmd_conductivities)
