"""The ``levitate`` computation: a design in, a plain dict of SI results out.

:func:`levitate_plate` runs the floating-plate analysis of :mod:`matdb.physics.plate`
at the operating temperature with the real remanence (not a scaled unit field), adds
the thermal derating, irreversible-loss check, worst-case band and safety distance of
:mod:`matdb.physics.thermal`, and returns the keys the CLI, the page and later checks
rely on (see ``CONTRACT_KEYS``). :func:`levitate` dispatches floating-magnet designs to
:func:`matdb.analysis.floating.levitate_stabilized`.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from matdb.design import PlateDesign
from matdb.errors import InputError
from matdb.physics import plate as P
from matdb.physics import thermal as TH
from matdb.constants import G_STANDARD, kelvin_to_celsius

CONTRACT_KEYS = (
    "mode", "floats", "gap_m", "weight_n", "lift_curve", "max_payload_kg", "k_z_n_m",
    "f_z_hz", "k_x_n_m", "k_y_n_m", "k_tilt_n_m_per_rad", "laterally_stable",
    "stable_plate_side_max_m", "lift_derating_pct", "gap_drift_um_per_k", "demag_risk",
    "gap_worst_m", "max_payload_worst_kg", "safe_distance_m", "warnings", "cold", "hot",
    "stable_side_intervals_m", "lateral_equilibrium_m",
)
#: keys of the ``cold`` and ``hot`` objects (a contract too)
STATE_KEYS = ("temperature_k", "gap_m", "margin", "k_z_n_m", "k_x_n_m", "k_y_n_m")

LARGE_MAGNET_M = 0.025  # a single magnet larger than this gets the cautions [m]
LARGE_MAGNET_MASS_KG = 0.100  # so does a total magnet mass above this [kg]
N_GAPS = 60  # points of the lift curve
SHIFT_TOL_M = 1e-6  # a plate centre closer than this to its equilibrium is not moved [m]
NEAR_NEUTRAL = 0.05  # a stiffness below this fraction of the other direction's


def plate_geometry(design: PlateDesign, arrangement) -> P.PlateGeometry:
    """The plate of a design as :class:`~matdb.physics.plate.PlateGeometry`, with the
    arrangement's edge lines as quadrature breaks and its mirror lines and diagonal
    symmetry through the plate's centre (:func:`~matdb.physics.plate.field_mirrors`,
    :func:`~matdb.physics.plate.field_swaps`)."""
    bx, by = P.edge_lines(arrangement.magnets)
    p = design.plate
    mirrors = P.field_mirrors(arrangement.magnets, *p.center_m)
    swap = None not in mirrors and P.field_swaps(arrangement.magnets, *p.center_m)
    mirrors, swap = _field_checked(arrangement, p.center_m, mirrors, swap)
    return P.PlateGeometry(p.shape, p.lx_m, p.ly_m, p.thickness_m, p.center_m[0], p.center_m[1],
                           bx, by, mirrors, swap)


def _field_checked(arrangement, centre, mirrors, swap):
    """The symmetries the field itself shows: the magnets' layout gives the mirror lines
    and the diagonal, but a field computed approximately (e.g. a correction tabulated on a
    grid that is not symmetric) may break them; each is kept only when the energy
    densities at sample points above the magnets and at their images agree to 1e-12 of
    their largest value (the folds are then exact to that)."""
    if None in mirrors and not swap:
        return mirrors, swap
    x0, y0 = float(centre[0]), float(centre[1])
    lo_x, hi_x, lo_y, hi_y, _, top = arrangement.bounds()
    rng = np.random.default_rng(0)
    pts = np.column_stack([rng.uniform(lo_x, hi_x, 64), rng.uniform(lo_y, hi_y, 64),
                           top + np.geomspace(5e-5, 3e-3, 64)])
    b = arrangement.B(pts)
    tol = 1e-12 * float((b ** 2).sum(axis=1).max())

    def same(img) -> bool:
        bm = arrangement.B(img)
        return bool(np.abs(bm[:, 2] ** 2 - b[:, 2] ** 2).max() <= tol
                    and np.abs((bm[:, :2] ** 2).sum(axis=1) - (b[:, :2] ** 2).sum(axis=1)).max()
                    <= tol)

    mx, my = mirrors
    if mx is not None and not same(pts * [-1, 1, 1] + [2 * x0, 0, 0]):
        mx = None
    if my is not None and not same(pts * [1, -1, 1] + [0, 2 * y0, 0]):
        my = None
    if swap and not same(np.column_stack([x0 + pts[:, 1] - y0, y0 + pts[:, 0] - x0, pts[:, 2]])):
        swap = False
    return (mx, my), bool(swap and mx is not None and my is not None)


def plate_chi_at(design: PlateDesign, t_k: float) -> tuple[float, float]:
    """|chi_perp|, |chi_par| at ``t_k`` (the material's coefficient, when it has one)."""
    coeff = design.plate.material_props.temp_coeff_per_k
    return (abs(float(TH.chi_at(design.plate.chi_perp, coeff, t_k))),
            abs(float(TH.chi_at(design.plate.chi_par, coeff, t_k))))


def plate_chi_worst(design: PlateDesign, chi_perp: float, chi_par: float) -> tuple[float, float]:
    """|chi| minus its uncertainty, the relative uncertainty applied to both components."""
    mat = design.plate.material_props
    ref = abs(mat.chi_vertical)
    unc = mat.uncertainty_si
    if unc is None or ref == 0:
        return chi_perp, chi_par
    worst_ref = TH.worst_case_abs_chi(mat.chi_vertical, unc)
    f = worst_ref / ref
    return chi_perp * f, chi_par * f


def _main_grade(design: PlateDesign):
    return design.magnets.grade_props


def _per_magnet_grades(design: PlateDesign, arrangement) -> list:
    g = design.magnets.grades
    return [g[m.grade or design.magnets.grade] for m in arrangement.magnets]


def _lines(text: str) -> list[str]:
    out = []
    for line in text.splitlines():
        s = line.strip()
        if s.startswith("- "):
            s = s[2:]
        if s:
            out.append(s)
    return out


def _f(x) -> float | None:
    return None if x is None else float(x)


def _mm3(v: float) -> str:
    """A coordinate [m] in mm to 3 significant digits, rounding-noise zeros as 0."""
    return f"{(v * 1e3 if abs(v) > 1e-9 else 0.0):.3g}"


def format_intervals(intervals) -> str:
    """``[[a, b], ...]`` [m] as ``"a-b mm, ..."`` ("none" when empty)."""
    if not intervals:
        return "none"
    return ", ".join(f"{lo * 1e3:.3g}-{hi * 1e3:.3g} mm" for lo, hi in intervals)


def _state(t_k: float, res: P.PlateResult, lift_req: float) -> dict[str, Any]:
    """The ``cold`` / ``hot`` object: gap, margin and stiffnesses at one temperature."""
    st = res.stability
    return {"temperature_k": float(t_k), "gap_m": _f(res.gap),
            "margin": float(lift_req / res.weight) if res.weight > 0 else None,
            "k_z_n_m": _f(res.k_z), "k_x_n_m": _f(st.k_x) if st else None,
            "k_y_n_m": _f(st.k_y) if st else None,
            "laterally_stable": bool(st.laterally_stable) if st else False}


def _field_scale(design: PlateDesign, t_k: float, worst: bool, ref) -> float | None:
    """``s`` with field(t_k, worst) = s * field of ``ref`` (the rigid arrangement the
    analysed field was built from), or None when the magnets' remanences do not all
    change by one factor (mixed grades). The recoil correction is linear in the
    remanence (``J = S J_r``), so one factor on every ``J_r`` scales the whole field."""
    other = design.arrangement(t_k, worst=worst, rigid=True)
    ratios = np.array([m.br / r.br if r.br else np.nan
                       for m, r in zip(other.magnets, ref.magnets)])
    if not np.all(np.isfinite(ratios)) or np.ptp(ratios) > 1e-12 * abs(ratios[0]):
        return None
    return float(ratios[0])


def _state_at(design: PlateDesign, t_k: float, geom: P.PlateGeometry, g_start: float,
              g_req: float, field=None, scale: float | None = None,
              memo: P.PlaneMemo | None = None) -> dict[str, Any]:
    """:func:`_state` of a fresh analysis at ``t_k`` (nominal Br and chi there). With
    ``scale``, ``field`` times ``scale`` is the field at ``t_k`` and the plane integrals
    of ``memo`` are reused (``|chi|`` scaled by ``scale**2``: the same physics)."""
    cp, cq = plate_chi_at(design, t_k)
    if scale is None:
        field = design.arrangement(t_k).B
        memo = None
    else:
        cp, cq = cp * scale ** 2, cq * scale ** 2
    spec = design.plate
    res = P.analyse_plate(field, geom, cp, cq, spec.density_kg_m3, spec.payload_kg,
                          spec.payload_height_m, g_start, g_req, n_gaps=N_GAPS, memo=memo,
                          full_stability=False)
    lift = float(P.lift_force(field, geom, [g_req], cp, cq, memo=memo)[0])
    return _state(t_k, res, lift)


def levitate_plate(design: PlateDesign, temp_k: float | None = None,
                   gap_m: float | None = None) -> dict[str, Any]:
    """Floating-plate analysis of a design.

    Parameters
    ----------
    design : PlateDesign
    temp_k : float, optional
        Operating temperature of magnets and plate [K]; default the design's
        ``temperature`` (else the hottest of its range, else 20 C).
    gap_m : float, optional
        Required gap for ``max_payload_kg`` [m]; default the design's ``min_gap``.

    Returns
    -------
    dict
        The keys of :data:`CONTRACT_KEYS` (SI; None where a value does not exist, e.g.
        ``gap_m`` when the plate does not float) and further information: temperatures,
        clearance, chi used and its provenance, stiffness matrix terms.

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    .. [2] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    if not isinstance(design, PlateDesign):
        raise InputError("design: expected a floating-plate design")
    cond = design.conditions
    t_op = float(temp_k) if temp_k is not None else cond.nominal_k
    t_cold, t_hot = cond.extremes(temp_k)
    t_der = float(temp_k) if temp_k is not None else t_hot
    plate_spec, mags = design.plate, design.magnets
    grade = _main_grade(design)
    mat = plate_spec.material_props
    warnings: list[str] = []

    # irreversible-loss check on the idealised magnets (a slightly larger reverse field
    # than on the recoil line: the check errs on the safe side)
    arr20 = design.arrangement(rigid=True)
    arr = design.arrangement(t_op)
    geom0 = plate_geometry(design, arr)
    chi_perp, chi_par = plate_chi_at(design, t_op)
    density = plate_spec.density_kg_m3
    cover = mags.cover_m
    g_start = cover + P.MIN_GAP
    # where the plate comes to rest sideways, near the centre the design gives
    eq = P.lateral_equilibrium(arr.B, geom0, chi_perp, chi_par, density, plate_spec.payload_kg,
                               g_start, order=P.DEFAULT_ORDER)
    moved = eq.found and eq.shift_m > SHIFT_TOL_M
    geom = geom0.shifted(eq.cx - geom0.cx, eq.cy - geom0.cy) if moved else geom0
    g_req_asked = plate_spec.min_gap_m if gap_m is None else float(gap_m)
    if gap_m is not None and not (math.isfinite(gap_m) and gap_m >= 0):
        raise InputError(f"gap: expected a gap of zero or more, got {gap_m!r}")
    g_req = max(g_req_asked, g_start)
    if g_req_asked < g_start:
        warnings.append(f"The required gap {g_req_asked * 1e3:.3g} mm is below the cover sheet "
                        f"plus 0.05 mm; the payload is given at {g_req * 1e3:.3g} mm.")

    # one memo of plane integrals for every temperature and the worst case: their fields
    # are this field times a factor (see _field_scale)
    field = arr.B
    memo = P.PlaneMemo(field, geom)
    ref = design.arrangement(t_op, rigid=True)
    res = P.analyse_plate(field, geom, chi_perp, chi_par, density, plate_spec.payload_kg,
                          plate_spec.payload_height_m, g_start, g_req, n_gaps=N_GAPS, memo=memo)
    plate_mass = res.plate_mass
    weight = res.weight
    max_payload = res.max_lift / G_STANDARD - plate_mass
    if max_payload < 0:
        warnings.append(f"Even without a payload the plate does not reach {g_req * 1e3:.3g} mm: "
                        f"the lift there is {res.max_lift * 1e3:.3g} mN against its own weight "
                        f"of {plate_mass * G_STANDARD * 1e3:.3g} mN.")
    out: dict[str, Any] = {"mode": "plate", "floats": bool(res.floats), "gap_m": _f(res.gap)}
    out["weight_n"] = float(weight)
    out["lift_curve"] = [{"gap_m": float(g), "force_n": float(f)}
                         for g, f in zip(res.gaps, res.forces)]
    out["max_payload_kg"] = float(max(max_payload, 0.0))
    out["k_z_n_m"] = _f(res.k_z)
    out["f_z_hz"] = _f(res.f_z)
    st = res.stability
    out["k_x_n_m"] = _f(st.k_x) if st else None
    out["k_y_n_m"] = _f(st.k_y) if st else None
    out["k_tilt_n_m_per_rad"] = float(min(st.k_pitch, st.k_roll)) if st else None
    out["k_pitch_n_m_per_rad"] = _f(st.k_pitch) if st else None
    out["k_roll_n_m_per_rad"] = _f(st.k_roll) if st else None
    out["k_yaw_n_m_per_rad"] = _f(st.k_yaw) if st else None
    stable_here = bool(st.laterally_stable) if st else False
    out["laterally_stable"] = bool(stable_here and eq.found)
    out["lateral_equilibrium_m"] = [float(eq.cx), float(eq.cy)] if eq.found else None

    extent = arr.bounds()
    size = max(extent[1] - extent[0], extent[3] - extent[2])
    intervals: list[list[float]] = []
    if geom0.is_square and res.floats:
        intervals = P.stable_side_intervals(
            arr.B, geom0, chi_perp, chi_par, density, size, plate_spec.payload_kg,
            plate_spec.payload_height_m, g_start, known={float(geom0.lx): out["laterally_stable"]})
    out["stable_side_intervals_m"] = intervals
    holding = P.interval_holding(intervals, geom0.lx) if geom0.is_square else None
    out["stable_plate_side_max_m"] = None if holding is None else float(holding[1])

    # thermal
    alpha = grade.alpha_br_pct_per_k
    chi_coeff = mat.temp_coeff_per_k
    out["lift_derating_pct"] = float(TH.lift_derating_pct(alpha, t_der, chi_coeff))
    drift = None
    if res.gap is not None and res.k_z and res.k_z > 0:
        d = 0.5
        lam = float(TH.lift_factor(alpha, t_op, chi_coeff))
        dlam = (float(TH.lift_factor(alpha, t_op + d, chi_coeff))
                - float(TH.lift_factor(alpha, t_op - d, chi_coeff))) / (2 * d)
        drift = dlam / lam * weight / res.k_z * 1e6  # [um/K]
    out["gap_drift_um_per_k"] = _f(drift)
    gprops = _per_magnet_grades(design, arr20)
    missing_beta = any(g.beta_hcj_pct_per_k is None for g in gprops)
    demag = TH.demag_check(arr20, [g.hcj_ka_m * 1e3 for g in gprops],
                           [g.beta_hcj_pct_per_k or 0.0 for g in gprops],
                           [g.family for g in gprops], sorted({t_cold, t_hot}),
                           alpha_pct_per_k=[g.alpha_br_pct_per_k for g in gprops])
    out["demag_risk"] = bool(demag.risk)
    out["demag_message"] = demag.message
    if demag.risk:
        warnings.append(demag.message[0].upper() + demag.message[1:] + ".")
    hot_c = kelvin_to_celsius(t_hot)
    for g in {g.grade: g for g in gprops}.values():
        if g.max_temp_c is not None and hot_c > g.max_temp_c:
            warnings.append(f"{g.grade} is rated to {g.max_temp_c:.0f} C; at {hot_c:.0f} C it "
                            "can lose magnetisation for good: choose a higher-temperature grade.")
    if missing_beta:
        warnings.append("A grade has no temperature coefficient of coercivity; the "
                        "irreversible-loss check used its 20 C coercivity at every temperature.")

    # worst case: minimum-spec Br, |chi| minus its uncertainty, hottest temperature
    t_worst = max(t_hot, t_op)
    cw_perp, cw_par = plate_chi_worst(design, *plate_chi_at(design, t_worst))
    s_w = _field_scale(design, t_worst, True, ref)
    if s_w is None:
        field_w, memo_w = design.arrangement(t_worst, worst=True).B, None
    else:
        field_w, memo_w = field, memo
        cw_perp, cw_par = cw_perp * s_w ** 2, cw_par * s_w ** 2
    res_w = P.analyse_plate(field_w, geom, cw_perp, cw_par, density, plate_spec.payload_kg,
                            plate_spec.payload_height_m, g_start, g_req, n_gaps=N_GAPS,
                            with_stability=False, memo=memo_w)
    out["gap_worst_m"] = _f(res_w.gap)
    out["lift_worst_at_required_gap_n"] = float(P.lift_force(field_w, geom, [g_req], cw_perp, cw_par)[0])
    out["max_payload_worst_kg"] = float(max(res_w.max_lift / G_STANDARD - plate_mass, 0.0))

    # safety distance, at the temperature of the strongest field
    t_strong = t_cold if alpha <= 0 else t_hot
    out["safe_distance_m"] = float(TH.safe_distance(design.arrangement(t_strong)))

    # verdict sentences
    if not res.floats:
        f0 = float(res.forces[0])
        warnings.insert(0, f"The plate does not float: the lift at {g_start * 1e3:.2g} mm is "
                           f"{f0 * 1e3:.3g} mN against a weight of {weight * 1e3:.3g} mN.")
    else:
        if res.gap < g_req:
            warnings.append(f"It floats at {res.gap * 1e3:.3g} mm, below the required gap of "
                            f"{g_req * 1e3:.3g} mm.")
        if not eq.found:
            warnings.append(f"No lateral equilibrium within {0.25 * max(geom0.lx, geom0.ly) * 1e3:.3g} mm "
                            "of the plate's centre: it slides away sideways.")
        if st is not None and eq.found and not st.laterally_stable:
            why = []
            if st.k_x <= 0 or st.k_y <= 0:
                why.append("it slides sideways off the magnets (lateral stiffness not positive)")
            if st.k_pitch <= 0 or st.k_roll <= 0:
                why.append("it tips over (tilt stiffness not positive)")
            if not why:
                why.append("sliding and tilting together have no restoring force")
            warnings.append("The plate is not laterally stable: " + "; ".join(why) + ".")
        if st is not None and st.k_x > 0 and st.k_y > 0:
            lo, hi = sorted([st.k_x, st.k_y])
            axis = "x" if st.k_x < st.k_y else "y"
            if mags.pattern == "stripes":
                warnings.append("Stripes restore almost nothing along the stripes (x): the plate "
                                "drifts along them towards the ends of the array.")
            elif lo < NEAR_NEUTRAL * hi:
                warnings.append(f"Almost no restoring force along {axis}: the plate drifts easily "
                                "in that direction.")
        elif mags.pattern == "stripes":
            warnings.append("Stripes restore almost nothing along the stripes (x): the plate "
                            "drifts along them towards the ends of the array.")
        if st is not None and st.k_yaw is not None and st.k_yaw < 0 and geom.shape == "rectangle":
            warnings.append("The plate tends to turn about the vertical axis to another "
                            "orientation; stiffnesses are for the orientation given.")
        fl = eq.force_at_start_n
        out["lateral_force_n"] = _f(fl)
        if moved:
            warnings.append(f"Placed at ({_mm3(geom0.cx)}, {_mm3(geom0.cy)}) mm the plate is "
                            f"pushed sideways by {fl * 1e3:.3g} mN; it comes to rest at "
                            f"({_mm3(eq.cx)}, {_mm3(eq.cy)}) mm, where it is analysed.")
    if geom0.is_square and res.floats:
        if not intervals:
            warnings.append("No square plate side scanned floats stably at its lateral "
                            "equilibrium over this arrangement.")
        elif holding is None:
            warnings.append(f"The plate side {geom0.lx * 1e3:.3g} mm is in no stable interval; "
                            f"stable sides: {format_intervals(intervals)}.")
    big = mags.largest_dimension_m() > LARGE_MAGNET_M
    mag_mass = design.magnet_mass_kg()
    if big or mag_mass > LARGE_MAGNET_MASS_KG:
        warnings.extend(_lines(TH.SAFETY_TEXT))
    warnings.append(f"Keep pacemakers and other implants at least {out['safe_distance_m'] * 1e2:.2g} cm "
                    "from the magnets (0.5 mT).")

    # coldest and hottest temperature side by side (nominal Br and chi there)
    lift_req = float(P.lift_force(field, geom, [g_req], chi_perp, chi_par, memo=memo)[0])
    here = _state(t_op, res, lift_req)
    for key, t_k in (("cold", t_cold), ("hot", t_hot)):
        out[key] = here if t_k == t_op else _state_at(
            design, t_k, geom, g_start, g_req, field, _field_scale(design, t_k, False, ref), memo)

    out["warnings"] = warnings
    # extras
    out["clearance_m"] = _f(None if res.gap is None else res.gap - cover)
    out["required_gap_m"] = float(g_req)
    out["lift_at_required_gap_n"] = lift_req
    out["margin"] = out["lift_at_required_gap_n"] / weight if weight > 0 else None
    out["temperature_k"] = t_op
    out["temp_coldest_k"] = t_cold
    out["temp_hottest_k"] = t_hot
    out["derating_temperature_k"] = t_der
    out["material"] = mat.id
    out["grade"] = grade.grade
    out["br_t"] = float(design._br20(None, mags.br_t))
    out["br_at_temperature_t"] = float(design._br(None, mags.br_t, t_op, False))
    out["rigid"] = bool(mags.rigid)
    out["chi_perp_si"] = -chi_perp
    out["chi_par_si"] = -chi_par
    out["chi_value_kind"] = "override" if plate_spec.overridden else mat.value_kind
    out["chi_source"] = "design file" if plate_spec.overridden else mat.source
    out["plate_mass_kg"] = float(plate_mass)
    out["payload_kg"] = float(plate_spec.payload_kg)
    out["magnet_mass_kg"] = float(mag_mass)
    out["magnet_count"] = arr.count
    out["demag_temperatures_k"] = list(demag.temps_k)
    out["k_matrix_dofs"] = list(st.dofs) if st else None
    out["k_matrix"] = st.k.tolist() if st else None
    return out


def levitate(design, temp_k: float | None = None, gap_m: float | None = None, payloads_kg=None,
             resolution_m: float | None = None) -> dict[str, Any]:
    """Plate designs go to :func:`levitate_plate`; floating-magnet designs to
    :func:`matdb.analysis.floating.levitate_stabilized` (with the schedule's payloads
    [kg] and allowed floater shift [m] when given)."""
    if isinstance(design, PlateDesign):
        if payloads_kg is not None or resolution_m is not None:
            raise InputError("payload range: only floating-magnet designs have a payload schedule")
        return levitate_plate(design, temp_k=temp_k, gap_m=gap_m)
    # lazy: plate-only callers (and the CLI's plate path) skip the floating-magnet physics
    from matdb.analysis.floating import levitate_stabilized

    extra = {}
    if payloads_kg is not None:
        extra["payloads_kg"] = payloads_kg
    if resolution_m is not None:
        extra["resolution_m"] = resolution_m
    return levitate_stabilized(design, temp_k=temp_k, **extra)


def stability_scan(design: PlateDesign, temp_k: float | None = None, n: int = 10
                   ) -> list[dict[str, Any]]:
    """Square plates of the design's material and thickness, side swept over the
    arrangement: does each float, where, and is it laterally stable.

    Sides run from ``1.2 extent / n`` to ``1.2 extent`` (``extent`` the larger
    horizontal size of the arrangement, as :func:`matdb.physics.plate.stable_side_max`
    scans), plus the design's own side when its plate is square. Same payload and
    temperature rules as :func:`levitate_plate`; the cheaper scan rule of
    :func:`matdb.physics.plate.is_stable_floating` (4-point panels, spline root).

    Returns
    -------
    list of dict
        ``side_m``, ``floats``, ``gap_m`` (None when it does not float),
        ``laterally_stable``, ``is_design`` [SI].

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    if not isinstance(design, PlateDesign):
        raise InputError("design: expected a floating-plate design")
    if not (isinstance(n, int) and n >= 2):
        raise InputError(f"n: expected an integer of 2 or more, got {n!r}")
    t_op = float(temp_k) if temp_k is not None else design.conditions.nominal_k
    arr = design.arrangement(t_op)
    geom = plate_geometry(design, arr)
    chi_perp, chi_par = plate_chi_at(design, t_op)
    p = design.plate
    extent = arr.bounds()
    size = max(extent[1] - extent[0], extent[3] - extent[2])
    sides = list(np.linspace(1.2 * size / n, 1.2 * size, n))
    own = geom.lx if geom.is_square else None
    if own is not None:
        sides.append(own)
    g_start = design.magnets.cover_m + P.MIN_GAP
    shift = 0.25 * max(geom.lx, geom.ly)  # as stable_side_intervals: near the design's centre
    rows = []
    for side in sorted(set(float(s) for s in sides)):
        g = geom.with_side(side)
        mass = p.density_kg_m3 * g.volume
        weight = (mass + p.payload_kg) * G_STANDARD
        gap = P.equilibrium_gap(arr.B, g, chi_perp, chi_par, weight, g_start, 4, xtol=None)
        stable = False
        if gap is not None:
            # judged at the lateral equilibrium near the centre, as the stable intervals are
            es = P.stability_at_equilibrium(arr.B, g, chi_perp, chi_par, p.density_kg_m3,
                                            p.payload_kg, p.payload_height_m, g_start, 4,
                                            max_shift=shift)
            stable = es.stable
            if es.equilibrium.found:
                gap = es.equilibrium.gap
        rows.append({"side_m": side, "floats": gap is not None, "gap_m": _f(gap),
                     "laterally_stable": bool(stable),
                     "is_design": own is not None and abs(side - own) < 1e-12})
    return rows
