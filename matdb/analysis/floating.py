"""Floating-magnet mode, the whole analysis: one or several stations under a payload,
balance, stiffnesses, stability window, payload schedule and the strong-magnet
cautions, as the JSON-ready dict that ``matdb levitate``, the page, the report and the
design search read.

The physics is in :mod:`matdb.physics.floating` (bodies, lifter, plates, one station,
several stations); this module puts it together and words the warnings.

The models and their references are listed in :mod:`matdb.physics.floating`.
"""

from __future__ import annotations

import math
from typing import Optional

import numpy as np

from matdb.errors import InputError
from matdb.physics.floating.body import BodySet
from matdb.physics.floating.plates import FinitePlates
from matdb.physics.floating.station import (
    StationModel,
    finite_or_none,
    lift_temperature_slope,
    lifter_distance_drift,
    schedule_row,
    station_model,
)
from matdb.physics.floating.stations import body_stiffness, coupled_heights, weight_shares
from matdb.physics.thermal import SAFETY_TEXT, safe_distance
from matdb.constants import G_STANDARD

__all__ = ["DIPOLE_NOTE", "levitate_stabilized", "station_report", "schedule", "window_min"]


DIPOLE_NOTE = ("image-dipole values (the floater as a point magnet) are an idealisation shown for "
               "comparison only; near the plates they overstate the stiffness and the window, so the "
               "verdict uses the finite-size model")


def station_report(st, model: StationModel, weight_n: float, where: str) -> dict:
    """Everything about one station carrying ``weight_n`` [N] (floater included): balance,
    stiffnesses, window, tilt, the verdict and its warnings (prefixed by ``where``)."""
    warnings: list[str] = []
    label = where.rstrip(".") + ": " if where else ""
    a_design = st.plates.distance
    D = model.balance(weight_n)
    w_max = model.max_weight()
    out: dict = {
        "weight_n": weight_n,
        "lifter_distance_m": finite_or_none(D),
        "min_plate_distance_m": model.a_min,
        "plate_distance_m": finite_or_none(a_design),
        "max_weight_n": finite_or_none(w_max),
    }
    if D is None:
        d_pk, f_pk = model.peak_force()
        warnings.append(
            f"{label}the lifter cannot hold {weight_n:.4g} N at any distance "
            f"(its largest pull is {f_pk:.4g} N, at {d_pk * 1e3:.3g} mm): use a stronger lifter or a lighter load"
        )
        out.update(k_lifter_z_n_m=None, k_lifter_r_n_m=None, k_plates_n_m=None, k_plates_dipole_n_m=None,
                   max_plate_distance_m=None, max_plate_distance_dipole_m=None, k_z_total_n_m=None,
                   k_r_effective_n_m=None, tilt_stable=False, radially_stable=False, stable=False,
                   plate_distance_in_window=False, k_tilt_n_m_per_rad=None, hessian=None)
        return out | {"warnings": warnings}
    kz, kr = model.stiffness(D)
    a_max = model.max_plate_distance(kz)
    a_max_dip = model.max_plate_distance(kz, "dipole")
    if a_design is not None and a_design + st.plates.thickness > D:
        raise InputError(
            f"{where}plates.distance: the lifter cannot clear the upper plate: holding "
            f"{weight_n:.4g} N needs the lifter's face {D * 1e3:.4g} mm above the floater's "
            f"centre, but the upper plate reaches {(a_design + st.plates.thickness) * 1e3:.4g} mm "
            "(distance plus thickness); use closer or thinner plates, a lighter load or a weaker lifter"
        )
    a_check = a_design if a_design is not None else model.a_min
    clear_limit = D - st.plates.thickness
    in_window = bool(
        a_max is not None
        and a_check >= model.a_min - 1e-12
        and a_check <= min(a_max, clear_limit) + 1e-12
    )
    kp = model.k_plates(a_check)
    kp_dip = model.k_plates_dipole(a_check)
    width = model.plates.width
    kp_wide = None
    if width is not None:
        wide = FinitePlates(model.floater, -model.plates.wz, -model.plates.wh, model.t)
        kp_wide = wide.stiffness_direct(a_check)
        if kp_wide > 0 and kp < 0.99 * kp_wide:
            warnings.append(
                f"{label}the plates are {width * 1e3:.3g} mm wide: their stiffness at "
                f"{a_check * 1e3:.3g} mm is {100 * kp / kp_wide:.3g}% of that of very wide plates "
                "(included in the window)"
            )
    tl = model.tilt(D, a_check)
    kappa = 0.5 * (tl["kappa_x"] + tl["kappa_y"]) + tl["kappa_plates"]
    coupling = 0.5 * (abs(tl["c_x_ty"]) + abs(tl["c_y_tx"]))
    tilt_ok = kappa > 0
    kr_eff = kr - coupling**2 / kappa if tilt_ok else -math.inf
    radial_ok = tilt_ok and kr_eff > 0
    kz_tot = kz + kp
    stable = bool(in_window and kz_tot > 0 and tilt_ok and radial_ok)
    if a_max is None:
        warnings.append(
            f"{label}no stable point: even at the smallest plate distance "
            f"({model.a_min * 1e3:.3g} mm) the plates' stiffness ({model.k_plates(model.a_min):.4g} N/m) "
            f"cannot beat the lifter's ({kz:.4g} N/m); use a stronger diamagnet, a lighter load or "
            "a smaller floater-to-lifter size ratio"
        )
    elif a_design is not None and not in_window:
        warnings.append(
            f"{where}plates.distance {a_design * 1e3:.4g} mm is outside the stable window "
            f"{model.a_min * 1e3:.4g} to {min(a_max, clear_limit) * 1e3:.4g} mm"
        )
    if a_max is not None and a_max_dip is not None and a_max_dip > a_max * 1.02 and a_max_dip > model.a_min:
        warnings.append(
            f"{label}the image-dipole idealisation (a point magnet) puts the window's edge at "
            f"{a_max_dip * 1e3:.3g} mm, the finite-size model at {a_max * 1e3:.3g} mm: plates set "
            "between the two would not hold the floater; the verdict uses the finite-size model"
        )
    if a_max is not None and a_max > clear_limit:
        warnings.append(
            f"{label}the lifter, not stability, limits the plate distance: the upper plate must "
            f"stay below {clear_limit * 1e3:.4g} mm"
        )
    if not tilt_ok:
        warnings.append(f"{label}the floater tips over: the plates' tilting push beats the lifter's aligning torque")
    elif not radial_ok:
        warnings.append(f"{label}the floater slides off the axis: lateral stiffness {kr_eff:.4g} N/m with the tilt relaxed")
    out.update(
        k_lifter_z_n_m=kz,
        k_lifter_r_n_m=kr,
        k_plates_n_m=kp if a_design is not None else None,
        k_plates_dipole_n_m=kp_dip if a_design is not None else None,
        k_z_total_n_m=kz_tot if a_design is not None else None,
        max_plate_distance_m=finite_or_none(a_max),
        max_plate_distance_dipole_m=finite_or_none(a_max_dip),
        lifter_clear_limit_m=clear_limit,
        plate_distance_checked_m=a_check,
        plate_stiffness_dipole_ratio=finite_or_none(kp_dip / kp) if kp > 0 else None,
        plate_model_note=DIPOLE_NOTE,
        plate_width_m=finite_or_none(width),
        k_plates_wide_n_m=finite_or_none(kp_wide),
        k_plates_checked_n_m=float(kp),
        k_plates_dipole_checked_n_m=float(kp_dip),
        plate_distance_in_window=in_window,
        k_tilt_lifter_n_m_per_rad=0.5 * (tl["kappa_x"] + tl["kappa_y"]),
        k_tilt_plates_n_m_per_rad=tl["kappa_plates"],
        k_tilt_plates_dipole_n_m_per_rad=tl["kappa_plates_dipole"],
        k_tilt_n_m_per_rad=kappa,
        k_r_effective_n_m=finite_or_none(kr_eff),
        tilt_stable=bool(tilt_ok),
        radially_stable=bool(radial_ok),
        stable=stable,
        hessian={**tl, "k_z": kz_tot},
    )
    return out | {"warnings": warnings}


def schedule(model: StationModel, weights_n, payloads_kg, w_empty: float, dlnf_dt: float,
             plate_distance: Optional[float] = None, shift_m: Optional[float] = None) -> list[dict]:
    """One station's payload schedule: a :func:`~matdb.physics.floating.station.schedule_row`
    per total weight ``weights_n`` [N] (with its ``payload_kg``), the lifter travel counted
    from the balance at ``w_empty`` [N]."""
    d_empty = model.balance(w_empty) if w_empty > 0 else None
    return [{"payload_kg": float(p), **schedule_row(model, float(w), d_empty, dlnf_dt, plate_distance, shift_m)}
            for w, p in zip(weights_n, payloads_kg)]


def window_min(rows: list[dict]) -> Optional[float]:
    """Narrowest plate-distance window over schedule rows and stations [m]; None when
    some payload (or station) has none."""
    out = math.inf
    for r in rows:
        w = r.get("window_m")
        for v in (w if isinstance(w, list) else [w]):
            if v is None:
                return None
            out = min(out, v)
    return None if not math.isfinite(out) else float(out)


def levitate_stabilized(design, temp_k: Optional[float] = None, n_window: int = 11,
                        payloads_kg=None, resolution_m: Optional[float] = None) -> dict:
    """Floating-magnet mode: balance, stiffnesses, stability window and payload schedule.

    Parameters
    ----------
    design : StabilizedDesign
        From :func:`matdb.design.toml_io.parse_stabilized`.
    temp_k : float, optional
        Temperature [K]; default the design's.
    n_window : int
        Number of payloads in the schedule (0 to the largest payload).
    payloads_kg : array_like, optional
        Payloads of the schedule [kg] (a payload range); default the design's
        ``payload_range`` if it has one, else ``n_window`` payloads from 0 to the
        largest. For several stations these are the shared payload's masses.
    resolution_m : float, optional
        Allowed shift of the floater's equilibrium for ``resolution_m`` in the
        schedule [m]; default a tenth of the clearance to the nearer plate.

    Returns
    -------
    dict
        JSON-serialisable: ``mode`` ("stabilized"), ``floats``, ``lifter_distance_m``,
        ``k_lifter_z_n_m``, ``k_lifter_r_n_m``, ``k_plates_n_m``,
        ``k_plates_dipole_n_m``, ``max_plate_distance_m`` (finite-size),
        ``max_plate_distance_dipole_m``, ``max_payload_kg``, ``verdict_model``,
        ``window`` (list of ``payload_kg``, ``lifter_distance_m``,
        ``max_plate_distance_m``, ``min_plate_distance_m``; the largest plate distance
        there is also capped by the lifter, ``D - t``), ``safe_distance_m``,
        ``warnings``, ``tilt_stable``, and extras (``k_z_total_n_m``,
        ``k_r_effective_n_m``, tilt stiffnesses, ``lifter_distance_drift_um_per_k``...).
        With stations: ``stations`` (``share_n``, ``share_fraction``,
        ``lifter_distance_m``... per station), window rows whose
        ``lifter_distance_m`` and ``max_plate_distance_m`` are lists (one per station),
        ``body_stiffness_eigenvalues`` of the rigid payload, and the top-level scalars of
        the most constrained station (``critical_station``).

    Notes
    -----
    Vertical: ``k_z = k_lifter_z + k_plates(a) > 0`` between the smallest plate distance
    (half-height + clearance) and the root ``max_plate_distance_m``; the upper plate must
    also fit under the lifter (``a + t <= D``). Lateral and tilt: the lifter's lateral
    stiffness ``k_r = -k_z/2 > 0`` (Laplace), its aligning torque ``kappa_L`` and the
    plates' tilting push ``kappa_P < 0``; with the tilt relaxed the lateral stiffness is
    ``k_r - c^2 / (kappa_L + kappa_P)`` (``c`` the lateral-tilt coupling), which is how
    the plates lower it. The verdict uses the finite-size plate model; the dipole model
    is reported beside it. The largest payload is where the window closes: the lifter
    distance at which ``k_lifter_z + k_plates(a_min) = 0`` or the upper plate no longer
    fits. Several stations: :func:`weight_shares` and a 6x6 rigid-body stiffness.

    References
    ----------
    .. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, Am. J. Phys. 69, 702 (2001).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    t = float(design.temperature_k if temp_k is None else temp_k)
    if not (math.isfinite(t) and t > 0):
        raise InputError(f"temperature: expected a temperature above 0 K, got {temp_k!r}")
    g = G_STANDARD
    models = [station_model(st, t) for st in design.stations]
    warnings: list[str] = []
    payloads = None
    if payloads_kg is None and getattr(design, "payload_range", None) is not None:
        lo, hi = design.payload_range
        payloads_kg = np.linspace(lo, hi, n_window) if hi > lo else np.array([lo])
    if payloads_kg is not None:
        payloads = np.atleast_1d(np.asarray(payloads_kg, dtype=float))
        if payloads.size == 0 or not np.all(np.isfinite(payloads)) or np.any(payloads < 0):
            raise InputError(f"payload range: expected payloads of zero or more, got {payloads_kg!r}")
    if resolution_m is not None and not (math.isfinite(resolution_m) and resolution_m > 0):
        raise InputError(f"resolution: expected a positive length, got {resolution_m!r}")

    if not design.multi:
        st, model = design.stations[0], models[0]
        weight = (st.floater.mass_kg + st.payload_kg) * g
        rep = station_report(st, model, weight, "")
        w_max = rep["max_weight_n"]
        max_payload = None if w_max is None else w_max / g - st.floater.mass_kg
        if max_payload is not None and max_payload < 0:
            max_payload = None
        top = max_payload if max_payload is not None else st.payload_kg
        pay = np.linspace(0.0, top, n_window) if top > 0 else np.array([0.0])
        pay = pay if payloads is None else payloads
        window = schedule(model, (st.floater.mass_kg + pay) * g, pay, st.floater.mass_kg * g,
                         lift_temperature_slope(st, t), st.plates.distance, resolution_m)
        D = rep["lifter_distance_m"]
        bodies = [model.floater] + ([model.lifter_at(D)] if D is not None else [])
        floats = bool(rep["stable"])
        if st.plates.distance is None and D is not None:
            floats = bool(rep["max_plate_distance_m"] is not None and rep["tilt_stable"] and rep["radially_stable"])
            if floats:
                warnings.append(
                    f"set the plates {model.a_min * 1e3:.3g} to "
                    f"{min(rep['max_plate_distance_m'], rep['lifter_clear_limit_m']) * 1e3:.3g} mm "
                    "from the floater's centre (each plate's facing surface)"
                )
        result = {k: v for k, v in rep.items() if k not in ("warnings", "hessian", "stable")}
        if st.plates.distance is not None and st.plates.distance >= model.a_min:
            w_here = model.max_weight(st.plates.distance)
            p_here = None if w_here is None else w_here / g - st.floater.mass_kg
            result["max_payload_at_plate_distance_kg"] = None if p_here is None or p_here < 0 else p_here
        else:
            result["max_payload_at_plate_distance_kg"] = None
        drift = lifter_distance_drift(st, t, weight) if D is not None else None
        result["lifter_distance_drift_um_per_k"] = None if drift is None else drift * 1e6
        if design.temp_min_k is not None and D is not None:
            ends = [station_model(st, tt).balance(weight) for tt in (design.temp_min_k, design.temp_max_k)]
            result["lifter_distance_at_temp_min_m"], result["lifter_distance_at_temp_max_m"] = ends
            if drift is not None:
                warnings.append(
                    f"the lifter distance moves {abs(drift) * 1e6:.3g} um per kelvin "
                    f"({'closer' if drift < 0 else 'farther'} when warmer): re-set it, or regulate it, "
                    "as the temperature changes"
                )
        result.update(
            mode="stabilized",
            floats=floats,
            payload_kg=st.payload_kg,
            floater_mass_kg=st.floater.mass_kg,
            max_payload_kg=finite_or_none(max_payload),
            verdict_model="finite-size",
            window=window,
            temperature_k=t,
        )
        warnings = rep["warnings"] + warnings
    else:
        p = design.payload
        wp = p.mass_kg * g
        pos = [(s.x, s.y) for s in design.stations]
        fixed = np.array([(s.floater.mass_kg + s.payload_kg) * g for s in design.stations])
        if len(design.stations) == 1:
            shares = np.array([wp])
            if abs(p.centre_of_mass[0] - pos[0][0]) + abs(p.centre_of_mass[1] - pos[0][1]) > 1e-6:
                raise InputError("payload.centre_of_mass: one station can only carry a payload centred over it")
        else:
            shares = weight_shares(pos, wp, p.centre_of_mass[:2])
        frac = shares / wp if wp > 0 else weight_shares(pos, 1.0, p.centre_of_mass[:2])
        totals = fixed + shares
        for i, total in enumerate(totals):
            if not total > 0:
                raise InputError(
                    f"payload.centre_of_mass: station[{i}] would have to pull its floater down "
                    f"({total:.4g} N); move the centre of mass inside the stations"
                )
        # each floater hangs in the field of every lifter: solve the lifter distances together
        heights = [m.balance(float(w)) for m, w in zip(models, totals)]
        coupled = all(h is not None for h in heights)
        if coupled and len(models) > 1:
            heights, cross = coupled_heights(design.stations, models, totals, heights)
            for i, c in enumerate(cross):
                if c > 0.01:
                    warnings.append(
                        f"station[{i}]: the other stations' lifters give {100 * c:.3g}% of this "
                        "floater's pull (included in the lifter distances; each station's window and "
                        "largest load hold the other lifters where they are)"
                    )
        reps = [
            station_report(st, model, float(totals[i]), f"station[{i}].")
            for i, (st, model) in enumerate(zip(design.stations, models))
        ]
        ok = all(r["lifter_distance_m"] is not None for r in reps)
        tilt_stable = False
        eig = None
        if ok:
            ks = []
            for r in reps:
                h = r["hessian"]
                ks.append({
                    "k_x": h["k_x"], "k_y": h["k_y"], "k_z": h["k_z"],
                    "kappa_x": h["kappa_x"] + h["kappa_plates"], "kappa_y": h["kappa_y"] + h["kappa_plates"],
                    "kappa_z": h["kappa_z"], "c_x_ty": h["c_x_ty"], "c_y_tx": h["c_y_tx"],
                })
            K = body_stiffness(ks, pos, p.centre_of_mass, wp)
            eig = np.linalg.eigvalsh(K)
            tilt_block = np.linalg.eigvalsh(K[3:5, 3:5])
            tilt_stable = bool(np.all(tilt_block > 0) and np.all(eig > 0))
        # largest payload with the same centre of mass
        limits = []
        for i, r in enumerate(reps):
            wm = r["max_weight_n"]
            if frac[i] > 1e-12:
                limits.append((wm - fixed[i]) / frac[i] if wm is not None else 0.0)
            elif frac[i] < -1e-12:
                limits.append(fixed[i] / -frac[i])
        wp_max = max(0.0, min(limits)) if limits else None
        max_payload = None if wp_max is None else wp_max / g
        margins = []
        for r in reps:
            if r["max_plate_distance_m"] is None or r["lifter_distance_m"] is None:
                margins.append(-math.inf)
            else:
                margins.append(min(r["max_plate_distance_m"], r["lifter_clear_limit_m"]) - r["min_plate_distance_m"])
        # the most constrained station; among stations equal to rounding (symmetric designs), the first
        m_min = min(margins)
        tie = m_min + 1e-9 * abs(m_min) if math.isfinite(m_min) else m_min
        crit = next(i for i, m in enumerate(margins) if m <= tie)
        top = max_payload if max_payload else p.mass_kg
        pay = np.linspace(0.0, top, n_window) if payloads is None else payloads
        win_st = [schedule(m, fixed[i] + frac[i] * pay * g, pay, float(fixed[i]),
                          lift_temperature_slope(design.stations[i], t), design.stations[i].plates.distance,
                          resolution_m)
                  for i, m in enumerate(models)]
        window = [
            {"payload_kg": float(pj), **{k: [w[j][k] for w in win_st] for k in win_st[0][j] if k != "payload_kg"}}
            for j, pj in enumerate(pay)
        ]
        stations = []
        for i, (st, r) in enumerate(zip(design.stations, reps)):
            e = {k: v for k, v in r.items() if k not in ("warnings", "hessian")}
            e.update(name=st.name, x_m=st.x, y_m=st.y, share_n=float(shares[i]),
                     share_fraction=float(frac[i]), floater_mass_kg=st.floater.mass_kg)
            stations.append(e)
            warnings.extend(r["warnings"])
        rc = reps[crit]
        result = {k: v for k, v in rc.items() if k not in ("warnings", "hessian", "stable")}
        floats = bool(ok and all(r["stable"] for r in reps) and tilt_stable)
        if not tilt_stable and ok:
            warnings.append("the payload's rigid-body tilt (one floater rising while another sinks) is unstable")
        result.update(
            mode="stabilized",
            floats=floats,
            payload_kg=p.mass_kg,
            max_payload_kg=finite_or_none(max_payload),
            verdict_model="finite-size",
            window=window,
            stations=stations,
            critical_station=crit,
            tilt_stable=tilt_stable,
            body_stiffness_eigenvalues=None if eig is None else [float(v) for v in eig],
            temperature_k=t,
        )
        bodies = []
        for st, m, r in zip(design.stations, models, reps):
            off = np.array([st.x, st.y, 0.0])
            bodies.append(m.floater.at(off))
            if r["lifter_distance_m"] is not None:
                bodies.append(m.lifter_at(r["lifter_distance_m"]).at(
                    off + [0, 0, r["lifter_distance_m"] + m.lifter0.half_height]))
    result["window_min_m"] = window_min(result["window"])
    if result["window_min_m"] is None:
        lo_p = float(min(r["payload_kg"] for r in result["window"]))
        hi_p = float(max(r["payload_kg"] for r in result["window"]))
        warnings.append(
            "some payload has no stable plate distance; 'matdb optimise --floating-magnet "
            f"--payload-range \"{lo_p * 1e3:.3g} g..{hi_p * 1e3:.3g} g\"' searches floater and lifter sizes, "
            "grades, plate materials and thicknesses and two or three floaters sharing the load"
        )
    if payloads is not None:
        result["payload_range_kg"] = [float(payloads.min()), float(payloads.max())]
    result["resolution_shift_m"] = finite_or_none(resolution_m)
    result["safe_distance_m"] = float(safe_distance(BodySet(bodies)))
    result["warnings"] = warnings + [SAFETY_TEXT]
    head = {k: result.pop(k) for k in ("mode", "floats")}
    return _plain({**head, **result})




def _plain(x):
    """Plain Python floats, lists and dicts (JSON-serialisable; inf/NaN -> None)."""
    if isinstance(x, dict):
        return {k: _plain(v) for k, v in x.items()}
    if isinstance(x, (list, tuple, np.ndarray)):
        return [_plain(v) for v in x]
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    if isinstance(x, (int, np.integer)) and not isinstance(x, bool):
        return int(x)
    if isinstance(x, (float, np.floating)):
        v = float(x)
        return v if math.isfinite(v) else None
    return x
