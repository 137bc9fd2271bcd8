"""The floating-magnet result as text for a person: the summary table, the stations and
the payload schedule (mm, g, um, N/m, mN m/rad)."""

from __future__ import annotations

from matdb.analysis.floating import DIPOLE_NOTE

__all__ = ["format_table", "schedule_lines"]


def format_table(r: dict) -> str:
    """The stabilized-mode result as text for a person (mm, g, N/m, mN m/rad)."""

    def num(v, scale=1.0, unit="", digits=4):
        if v is None:
            return "-"
        return f"{v * scale:.{digits}g} {unit}".rstrip()

    yes = lambda b: "yes" if b else "no"  # noqa: E731

    def span(lo, hi):
        if lo is None or hi is None:
            return "none"
        return f"{num(lo, 1e3, 'mm')} to {num(hi, 1e3, 'mm')}"

    ratio = r.get("plate_stiffness_dipole_ratio")
    dip_stiff = num(r.get("k_plates_dipole_n_m"), 1, "N/m")
    if r.get("k_plates_dipole_n_m") is not None and ratio is not None:
        dip_stiff += f"  ({ratio:.2g} x the finite-size value)"
    dip_edge = num(r.get("max_plate_distance_dipole_m"), 1e3, "mm")
    if r.get("max_plate_distance_dipole_m") is not None and r.get("max_plate_distance_m") is not None \
            and r["max_plate_distance_dipole_m"] > r["max_plate_distance_m"]:
        dip_edge += "  (unsafe: beyond the finite-size edge)"
    rows = [
        ("floats (stable)", yes(r.get("floats"))),
        ("payload", num(r.get("payload_kg"), 1e3, "g")),
        ("lifter distance (floater centre to lifter face)", num(r.get("lifter_distance_m"), 1e3, "mm")),
        ("lifter stiffness k_z / k_r", f"{num(r.get('k_lifter_z_n_m'), 1, 'N/m')} / {num(r.get('k_lifter_r_n_m'), 1, 'N/m')}"),
        ("plate distance (design)", num(r.get("plate_distance_m"), 1e3, "mm")),
        ("plates' stiffness, finite-size (verdict)", num(r.get("k_plates_n_m"), 1, "N/m")),
        ("  image-dipole idealisation, comparison only", dip_stiff),
        ("stable plate distance, finite-size", span(r.get("min_plate_distance_m"), r.get("max_plate_distance_m"))),
        ("  largest, image-dipole idealisation (comparison)", dip_edge),
        ("plate width", "very wide" if r.get("plate_width_m") is None else num(r.get("plate_width_m"), 1e3, "mm")),
        ("plate distance in window", yes(r.get("plate_distance_in_window"))),
        ("tilt stiffness lifter / plates", f"{num(r.get('k_tilt_lifter_n_m_per_rad'), 1e3, 'mN m/rad')} / {num(r.get('k_tilt_plates_n_m_per_rad'), 1e3, 'mN m/rad')}"),
        ("lateral stiffness, tilt relaxed", num(r.get("k_r_effective_n_m"), 1, "N/m")),
        ("tilt stable", yes(r.get("tilt_stable"))),
        ("largest payload", num(r.get("max_payload_kg"), 1e3, "g")),
        ("lifter distance drift", num(r.get("lifter_distance_drift_um_per_k"), 1, "um/K", 3)),
        ("0.5 mT safety distance", num(r.get("safe_distance_m"), 1e3, "mm", 3)),
        ("verdict model", str(r.get("verdict_model"))),
    ]
    width = max(len(k) for k, _ in rows)
    lines = [f"{k.ljust(width)}  {v}" for k, v in rows]
    if r.get("stations"):
        lines += ["", "stations (share of the payload's weight, lifter distance, stable plate distances):"]
        for i, s in enumerate(r["stations"]):
            lines.append(
                f"  [{i}] {s.get('name') or ''} x {num(s['x_m'], 1e3, 'mm')}, y {num(s['y_m'], 1e3, 'mm')}: "
                f"share {num(s['share_n'], 1e3, 'mN')} ({num(s['share_fraction'], 100, '%', 3)}), "
                f"lifter {num(s['lifter_distance_m'], 1e3, 'mm')}, plates "
                f"{num(s['min_plate_distance_m'], 1e3, 'mm')} to {num(s['max_plate_distance_m'], 1e3, 'mm')}"
            )
    if r.get("window"):
        lines += schedule_lines(r)
    lines += ["", "note: " + DIPOLE_NOTE + "."]
    if r.get("warnings"):
        lines += ["", "warnings:"] + [f"- {w}" for w in r["warnings"]]
    return "\n".join(lines)


def _per_station(v) -> list:
    return list(v) if isinstance(v, list) else [v]


def schedule_lines(r: dict) -> list[str]:
    """The payload schedule of a result as text lines (mm, um, N/m); "none" where no
    plate distance is stable."""
    def cell(v, scale, digits=4):
        return "-" if v is None else f"{v * scale:.{digits}g}"

    head = ("payload g", "lifter mm", "travel mm", "stable plates mm", "window mm", "step um",
            "drift um/K", "dF/dd N/m")
    body = []
    for w in r["window"]:
        ds = _per_station(w.get("lifter_distance_m"))
        n = len(ds)
        col = {k: _per_station(w.get(k)) + [None] * n for k in (
            "lifter_travel_m", "min_plate_distance_m", "max_plate_distance_m", "window_m", "resolution_m",
            "lifter_distance_drift_um_per_k", "dforce_dd_n_m")}
        for i in range(n):
            lo, hi = col["min_plate_distance_m"][i], col["max_plate_distance_m"][i]
            body.append((
                cell(w["payload_kg"], 1e3) if i == 0 else "",
                (f"[{i}] " if n > 1 else "") + cell(ds[i], 1e3),
                cell(col["lifter_travel_m"][i], 1e3, 3),
                "none" if lo is None or hi is None else f"{lo * 1e3:.4g} to {hi * 1e3:.4g}",
                "none" if col["window_m"][i] is None else cell(col["window_m"][i], 1e3, 3),
                cell(col["resolution_m"][i], 1e6, 3),
                cell(col["lifter_distance_drift_um_per_k"][i], 1, 3),
                cell(col["dforce_dd_n_m"][i], 1, 4),
            ))
    widths = [max(len(h), *(len(b[j]) for b in body)) for j, h in enumerate(head)]
    out = ["", "schedule (lifter distance, its travel from the empty float, stable plate distances, the "
           "lifter step that moves the floater by " + ("the given shift" if r.get("resolution_shift_m") else
                                                       "a tenth of its clearance") + ", drift, dF/dd):"]
    out.append("  " + " | ".join(h.rjust(wd) for h, wd in zip(head, widths)))
    out += ["  " + " | ".join(c.rjust(wd) for c, wd in zip(b, widths)) for b in body]
    wm = r.get("window_min_m")
    out.append(f"  narrowest window over the schedule: {'none' if wm is None else f'{wm * 1e3:.3g} mm'}")
    return out
