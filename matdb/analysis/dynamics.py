"""Dynamics of a floating-plate design: modes, damping, Q, ring-down and noise floor.

:func:`analyse_dynamics` is the public entry (the CLI, the page and the report call it);
its JSON keys (:data:`CONTRACT_KEYS`, :data:`MODE_KEYS`) are a contract. The physics is in
:mod:`matdb.physics.dynamics`; this module finds the equilibrium, builds the mass,
stiffness and damping matrices of a design and turns them into per-mode records.

Work that does not depend on the pressure (equilibrium, stiffness, modes, the mesh and the
eddy-current damping) is done once in :func:`prepare_dynamics`; :func:`evaluate_dynamics`
then adds the air at a pressure, so a sweep over pressures (:func:`q_versus_pressure`)
costs one finite-element solve.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from matdb.design import PlateDesign
from matdb.errors import InputError, PhysicsError
from matdb.physics import dynamics as D
from matdb.physics import plate as P
from matdb.constants import G_STANDARD

CONTRACT_KEYS = ("pressure_pa", "sigma_in_plane_s_m", "sigma_across_s_m", "mass_kg", "modes")
MODE_KEYS = ("name", "frequency_hz", "q", "q_eddy", "q_air", "ring_down_s",
             "dominant_damping", "noise_m_s2_rthz")
MESH_DIVISIONS = 48  # default element size: the plate's smaller side / this (mesh study: README)
SCREEN_DIVISIONS = 6  # screening mesh: the smaller side / this
N_LAYERS = 3  # Gauss-Legendre layers through the thickness
MICRO_G = 1e-6 * G_STANDARD  # [m/s^2]
NOISE_DOFS = ("x", "y", "z")


@dataclass
class DynamicsPrep:
    """Pressure-independent part of a dynamics analysis (SI)."""

    design: PlateDesign
    temperature_k: float
    gap: float
    air_gap: float
    pivot: np.ndarray
    k: np.ndarray
    m: np.ndarray
    mass: float
    plate_mass: float
    modes: list
    c_eddy: np.ndarray
    sigma_ab: float
    sigma_c: float
    sigma_source: str
    fem: Any
    area: float
    polar: float
    squeeze_unit: np.ndarray
    mesh_size: float
    size: float
    thickness: float
    warnings: list
    laterally_stable: bool


def plate_mesh(design: PlateDesign, mesh_size: float | None = None) -> tuple[D.PlateMesh, float]:
    """Mesh of a design's plate outline (slots and holes cut) and the element size [m]."""
    p = design.plate
    h = mesh_size if mesh_size is not None else min(p.lx_m, p.ly_m) / MESH_DIVISIONS
    if not (h > 0):
        raise InputError(f"mesh size: expected a positive length, got {mesh_size!r}")
    geom = D.plate_outline(p.shape, p.lx_m, p.ly_m, p.center_m[0], p.center_m[1], p.slots,
                           p.holes)
    return D.mesh_outline(geom, h), h


def conductivities(design: PlateDesign) -> tuple[float, float, str]:
    """In-plane and across-plane conductivity [S/m] and where they come from."""
    from matdb.data.catalog import get_conductivity

    p = design.plate
    c = get_conductivity(p.material)
    s_ab = p.sigma_in_plane_s_m
    s_c = p.sigma_across_s_m
    if s_ab is not None or s_c is not None:
        if s_ab is None:
            s_ab = c.sigma_in_plane_s_m if c else s_c
        if s_c is None:
            s_c = c.sigma_across_s_m if c else s_ab
        return float(s_ab), float(s_c), "design file"
    if c is None:
        raise InputError(f"plate.sigma_in_plane: no conductivity recorded for {p.material}; "
                         "give sigma_in_plane (and sigma_across) in [plate], e.g. \"2e5 S/m\"")
    return c.sigma_in_plane_s_m, c.sigma_across_s_m, c.source


def prepare_dynamics(design: PlateDesign, temp_k: float | None = None,
                     mesh_size: float | None = None, n_layers: int = N_LAYERS) -> DynamicsPrep:
    """Equilibrium, stiffness, mass matrix, modes and eddy damping of a plate design.

    Raises
    ------
    PhysicsError
        When the plate does not float.
    """
    from matdb.analysis.levitate import plate_chi_at, plate_geometry

    if not isinstance(design, PlateDesign):
        raise InputError("design: dynamics needs a floating-plate design ([magnets] and [plate])")
    warnings: list[str] = []
    p = design.plate
    t_op = float(temp_k) if temp_k is not None else design.conditions.nominal_k
    arr = design.arrangement(t_op)
    geom = plate_geometry(design, arr)
    chi_perp, chi_par = plate_chi_at(design, t_op)
    mesh, h = plate_mesh(design, mesh_size)
    area, centroid, s2 = D.area_moments(mesh)
    plate_mass = p.density_kg_m3 * area * p.thickness_m
    # lift and stiffness of the full outline (slots and holes neglected there; they remove
    # a few per cent of the area); the weight is that of the cut plate
    weight = (plate_mass + p.payload_kg) * G_STANDARD
    g_start = design.magnets.cover_m + P.MIN_GAP
    gap = P.equilibrium_gap(arr.B, geom, chi_perp, chi_par, weight, g_start)
    if gap is None:
        raise PhysicsError("design: the plate does not float over these magnets; no dynamics "
                           "(run 'matdb levitate' for the lift curve)")
    st = P.stability(arr.B, geom, gap, chi_perp, chi_par, plate_mass, p.payload_kg,
                     p.payload_height_m, full=True)
    zc = P.combined_com_height(geom, gap, plate_mass, p.payload_kg, p.payload_height_m)
    pivot = np.array([geom.cx, geom.cy, zc])
    # mass matrix of plate (meshed outline) and payload (point mass or block)
    t = p.thickness_m
    parts_m = [plate_mass]
    parts_c = [np.array([centroid[0], centroid[1], gap + t / 2])]
    parts_i = [D.plate_inertia(plate_mass, s2, area, t)]
    if p.payload_kg > 0:
        sx, sy, sz = p.payload_size_m or (0.0, 0.0, 0.0)
        parts_m.append(p.payload_kg)
        parts_c.append(np.array([geom.cx, geom.cy, gap + t + p.payload_height_m]))
        parts_i.append(D.block_inertia(p.payload_kg, sx, sy, sz))
    m = D.rigid_mass_matrix(parts_m, parts_c, parts_i, pivot)
    modes = D.rigid_modes(st.k, m)
    # eddy currents
    s_ab, s_c, s_src = conductivities(design)
    fem = D.fem_plate(mesh)
    if s_ab > 0:
        z, wz = D.layer_rule(gap, gap + t, n_layers)
        emf = D.motional_fields(arr.B, fem.xq, z, pivot)
        c_eddy = D.eddy_damping_matrix(fem, emf, wz, s_ab)
    else:
        c_eddy = np.zeros((6, 6))
    size = max(p.lx_m, p.ly_m)
    if s_ab > 0 and s_c > 0.1 * s_ab and t > 0.2 * min(p.lx_m, p.ly_m):
        warnings.append("The plate is not thin and conducts across its plane: the in-plane "
                        "(layered) eddy-current model is only an estimate here.")
    for md in modes:
        if md.omega > 0 and s_ab > 0:
            v = D.eddy_validity(s_ab, md.omega, t, size)
            if v["reynolds"] > 1.0:
                raise PhysicsError(f"eddy currents: the {md.name} mode at "
                                   f"{md.frequency_hz:.3g} Hz is outside the quasi-static model "
                                   f"(mu0 sigma omega t L = {v['reynolds']:.2g} > 1)")
            if not v["ok"]:
                warnings.append(f"Eddy currents of the {md.name} mode: the induced field is not "
                                f"negligible (mu0 sigma omega t L = {v['reynolds']:.2g}); "
                                "damping is an estimate.")
    # air under the plate: from the plate bottom to the cover (or the magnets' faces)
    air_gap = gap - design.magnets.cover_m
    sq = D.squeeze_film_matrix(fem, air_gap, 1.0, pivot)
    d = fem.xq - pivot[:2, None, None]
    polar = float(np.sum((d[0] ** 2 + d[1] ** 2) * fem.dx))
    for md in modes:
        if md.unstable:
            warnings.append(f"Unstable mode: {md.name[len('unstable: '):]} (negative stiffness); "
                            "it has no frequency or Q.")
    from matdb.analysis.levitate import LARGE_MAGNET_M, LARGE_MAGNET_MASS_KG, _lines
    from matdb.physics.thermal import SAFETY_TEXT

    if (design.magnets.largest_dimension_m() > LARGE_MAGNET_M
            or design.magnet_mass_kg() > LARGE_MAGNET_MASS_KG):
        warnings.extend(_lines(SAFETY_TEXT))
    return DynamicsPrep(design, t_op, gap, air_gap, pivot, st.k, m, float(sum(parts_m)),
                        plate_mass, modes, c_eddy, s_ab, s_c, s_src, fem, area, polar, sq, h,
                        size, t, warnings, bool(st.laterally_stable))


def _mode_record(prep: DynamicsPrep, md, pressure_pa: float, notes: set) -> dict:
    rec: dict[str, Any] = {"name": md.name, "dof": md.dof,
                           "frequency_hz": md.frequency_hz, "unstable": md.unstable,
                           "neutral": md.neutral}
    q_e = q_a = None
    if md.omega > 0:
        q_e = D.modal_q(md.shape, md.omega, prep.c_eddy)
        c_air, info = D.air_damping_matrix(prep.fem, prep.area, prep.polar, prep.air_gap,
                                           pressure_pa, md.omega, prep.pivot,
                                           prep.temperature_k, prep.squeeze_unit)
        q_a = D.modal_q(md.shape, md.omega, c_air)
        if info["squeeze_number"] > 1.0 and md.participation["z"] + md.participation["roll"] \
                + md.participation["pitch"] > 0.5:
            notes.add("The squeeze number exceeds 1 (air film partly compressible): the squeeze "
                      "damping is overestimated (Blech 1983).")
        pen = info["penetration_depth_m"]
        if pen is not None and prep.air_gap > 0.5 * pen and md.dof in ("x", "y", "yaw"):
            notes.add("The air gap is not thin against the viscous penetration depth: the "
                      "Couette shear damping is approximate.")
        if not info["in_fit_range"]:
            notes.add(f"Knudsen number {info['knudsen']:.3g} beyond the effective-viscosity fits "
                      "(<= 880): air damping extrapolated (an estimate).")
        rec["knudsen"] = info["knudsen"]
    q = D.combine_q(q_e, q_a)
    rec["q"] = q
    rec["q_eddy"] = q_e
    rec["q_air"] = q_a
    rec["damping_ratio"] = None if q is None else 1.0 / (2.0 * q)
    rec["ring_down_s"] = None if (q is None or md.omega <= 0) else 2.0 * q / md.omega
    if q is None:
        rec["dominant_damping"] = "none"
    elif q_a is None or (q_e is not None and q_e <= q_a):
        rec["dominant_damping"] = "eddy"
    else:
        rec["dominant_damping"] = "air"
    noise = None
    if md.dof in NOISE_DOFS and not md.unstable:
        noise = D.thermal_acceleration_noise(prep.temperature_k, md.omega, prep.mass, q)
    rec["noise_m_s2_rthz"] = noise
    rec["noise_micro_g_rthz"] = None if noise is None else noise / MICRO_G
    rec["participation"] = md.participation
    return rec


def evaluate_dynamics(prep: DynamicsPrep, pressure_pa: float = D.P_ATM) -> dict[str, Any]:
    """Per-mode records at ``pressure_pa`` from :func:`prepare_dynamics`."""
    if not (isinstance(pressure_pa, (int, float)) and math.isfinite(pressure_pa)
            and pressure_pa > 0):
        raise InputError(f"pressure: expected a positive pressure, got {pressure_pa!r}")
    notes: set[str] = set()
    modes = [_mode_record(prep, md, float(pressure_pa), notes) for md in prep.modes]
    out: dict[str, Any] = {
        "pressure_pa": float(pressure_pa),
        "sigma_in_plane_s_m": prep.sigma_ab,
        "sigma_across_s_m": prep.sigma_c,
        "mass_kg": prep.mass,
        "modes": modes,
        "plate_mass_kg": prep.plate_mass,
        "payload_kg": prep.design.plate.payload_kg,
        "gap_m": prep.gap,
        "air_gap_m": prep.air_gap,
        "temperature_k": prep.temperature_k,
        "sigma_source": prep.sigma_source,
        "material": prep.design.plate.material,
        "laterally_stable": prep.laterally_stable,
        "mesh_size_m": prep.mesh_size,
        "mesh_triangles": int(prep.fem.mesh.t.shape[1]),
        "eddy_damping_matrix": prep.c_eddy.tolist(),
        "stiffness_matrix": prep.k.tolist(),
        "mass_matrix": prep.m.tolist(),
        "matrix_dofs": list(D.DOF),
        "warnings": list(prep.warnings) + sorted(notes),
    }
    ok = [r for r in modes if r["noise_m_s2_rthz"] is not None]
    best = min(ok, key=lambda r: r["noise_m_s2_rthz"]) if ok else None
    worst = max(ok, key=lambda r: r["noise_m_s2_rthz"]) if ok else None
    out["noise_floor_m_s2_rthz"] = worst["noise_m_s2_rthz"] if worst else None
    out["noise_best_mode"] = best["name"] if best else None
    return out


def analyse_dynamics(design: PlateDesign, pressure_pa: float = D.P_ATM,
                     temp_k: float | None = None, mesh_size: float | None = None
                     ) -> dict[str, Any]:
    """Modes, damping, Q, ring-down and thermal noise of a floating-plate design.

    Parameters
    ----------
    design : PlateDesign
    pressure_pa : float
        Gas (air) pressure around the plate [Pa]; default 1 atm.
    temp_k : float, optional
        Temperature [K]; default the design's.
    mesh_size : float, optional
        Element size of the plate mesh [m]; default the smaller side / 48.

    Returns
    -------
    dict
        :data:`CONTRACT_KEYS`; ``modes`` is a list of dicts with :data:`MODE_KEYS` (SI;
        ``q`` None for an undamped mechanism, ``frequency_hz`` None for an unstable mode,
        ``noise_m_s2_rthz`` only for the vertical and sliding modes), plus extras
        (``noise_micro_g_rthz``, ``damping_ratio``, ``dof``, ``participation``, the
        matrices, ``warnings``).

    References
    ----------
    See :mod:`matdb.physics.dynamics`.
    """
    return evaluate_dynamics(prepare_dynamics(design, temp_k, mesh_size), pressure_pa)


def q_versus_pressure(design: PlateDesign, pressures: Sequence[float],
                      prep: DynamicsPrep | None = None) -> list[dict]:
    """Records ``{pressure_pa, mode, q, q_eddy, q_air}`` for each pressure and stable mode
    (the Design page's chart)."""
    prep = prep or prepare_dynamics(design)
    rows = []
    for pr in pressures:
        r = evaluate_dynamics(prep, float(pr))
        for md in r["modes"]:
            if md["frequency_hz"]:
                rows.append({"pressure_pa": float(pr), "mode": md["name"], "q": md["q"],
                             "q_eddy": md["q_eddy"], "q_air": md["q_air"]})
    return rows


def screening_estimate(design: PlateDesign, pressure_pa: float = D.P_ATM,
                       temp_k: float | None = None) -> dict[str, Any]:
    """Fast screening of the vertical mode's damping (no finite-element solve).

    Eddy damping and squeeze film from a coarse mesh (element size the smaller side / 6,
    one layer at mid-thickness, lower-order quadrature) and a cheaper equilibrium. Returns ``q``, ``noise_m_s2_rthz`` and ``frequency_hz``
    of the vertical mode. The error against :func:`analyse_dynamics` is stated in the
    README (mesh and screening study).
    """
    from matdb.analysis.levitate import plate_chi_at, plate_geometry

    p = design.plate
    t_op = float(temp_k) if temp_k is not None else design.conditions.nominal_k
    arr = design.arrangement(t_op)
    geom = plate_geometry(design, arr)
    chi_perp, chi_par = plate_chi_at(design, t_op)
    plate_mass = p.density_kg_m3 * geom.volume
    mass = plate_mass + p.payload_kg
    gap = P.equilibrium_gap(arr.B, geom, chi_perp, chi_par, mass * G_STANDARD,
                            design.magnets.cover_m + P.MIN_GAP, order=4, xtol=None)
    if gap is None:
        return {"floats": False, "q": None, "noise_m_s2_rthz": None, "frequency_hz": None}
    k_z = P.vertical_stiffness(arr.B, geom, gap, chi_perp, chi_par, order=4)
    omega = math.sqrt(k_z / mass) if k_z > 0 else 0.0
    mesh, _ = plate_mesh(design, min(p.lx_m, p.ly_m) / SCREEN_DIVISIONS)
    fem = D.fem_plate(mesh, intorder=2)
    s_ab, _, _ = conductivities(design)
    pivot = np.array([geom.cx, geom.cy, gap + p.thickness_m / 2])
    z, wz = D.layer_rule(gap, gap + p.thickness_m, 1)
    c_e = 0.0
    if s_ab > 0:
        emf = D.motional_fields(arr.B, fem.xq, z, pivot)
        c_e = float(D.eddy_damping_matrix(fem, emf, wz, s_ab)[2, 2])
    c_air, _ = D.air_damping_matrix(fem, float(fem.dx.sum()), 0.0, gap - design.magnets.cover_m,
                                    pressure_pa, omega, pivot, t_op)
    c = c_e + float(c_air[2, 2])
    q = mass * omega / c if c > 0 and omega > 0 else None
    return {"floats": True, "frequency_hz": omega / (2 * math.pi), "q": q,
            "q_eddy": mass * omega / c_e if c_e > 0 and omega > 0 else None,
            "noise_m_s2_rthz": D.thermal_acceleration_noise(t_op, omega, mass, q),
            "gap_m": gap}


# ---------------------------------------------------------------------------
# lab values: measured Q and ring-down times
# ---------------------------------------------------------------------------
Q_VALUE_COLUMNS = ("id", "material_id", "design", "mode", "frequency_hz", "q", "ring_down_s",
                   "pressure_pa", "temperature_k", "source_note", "measured_by", "measured_on",
                   "method", "entered_at")


def record_q_value(material_id: str, *, q: Any = None, ring_down: Any = None,
                   frequency: Any = None, pressure: Any = None, temperature: Any = None,
                   mode: str = "", design: str = "", source: Any = None,
                   measured_by: str | None = None, date: Any = None, method: str | None = None,
                   note: str = "", url: str | None = None) -> dict:
    """Append a measured quality factor and/or ring-down time (1/e of amplitude).

    Typed values carry units (``"16 Hz"``, ``"2.5 s"``, ``"1e-3 Pa"``, ``"22 degC"``); ``q``
    is a bare number. With the frequency, the missing one of ``q`` and the ring-down
    time follows from ``Q = pi f tau``. A source note is required; nothing is written on
    any error (one transaction).

    Returns
    -------
    dict
        The stored row (:data:`Q_VALUE_COLUMNS`).
    """
    from matdb.data.db import session_scope
    from matdb.data.lab_input import parse_date, require_source
    from matdb.data.lab_store import ensure_lab_source
    from matdb.data.models import Material, QualityFactorValue
    from matdb.units import parse_number, parse_quantity, parse_temperature

    note_src = require_source(source, "source")
    qv = None
    if q is not None and str(q).strip() != "":
        qv = parse_number(q, "q")
        if not (qv > 0 and math.isfinite(qv)):
            raise InputError(f"expected a positive quality factor, got {q!r}", field="q")
    tau = parse_quantity(ring_down, "s", "ring_down", positive=True) \
        if ring_down not in (None, "") else None
    f = parse_quantity(frequency, "Hz", "frequency", positive=True) \
        if frequency not in (None, "") else None
    p = parse_quantity(pressure, "Pa", "pressure", positive=True) \
        if pressure not in (None, "") else None
    t_k = parse_temperature(temperature, "temperature") if temperature not in (None, "") else None
    if qv is None and tau is None:
        raise InputError("expected a measured quality factor (such as 1200) or a ring-down time "
                         "(ring_down, such as '2.5 s'); neither was given", field="q")
    if f is not None:
        if qv is None:
            qv = math.pi * f * tau
        elif tau is None:
            tau = qv / (math.pi * f)
    day = parse_date(date) if date else None
    with session_scope(url) as s:
        if s.get(Material, material_id) is None:
            raise InputError(f"material: unknown id {material_id!r} (see 'matdb materials')")
        ensure_lab_source(s)
        row = QualityFactorValue(material_id=material_id, design=design or "", mode=mode or "",
                                 frequency_hz=f, q=qv, ring_down_s=tau, pressure_pa=p,
                                 temperature_k=t_k, source_note=note_src,
                                 measured_by=measured_by, measured_on=day, method=method,
                                 note=note or "")
        s.add(row)
        s.flush()
        out = {c: getattr(row, c) for c in Q_VALUE_COLUMNS}
    return out


def list_q_values(material_id: str | None = None, url: str | None = None) -> list[dict]:
    """Recorded Q / ring-down values (newest last), optionally of one material."""
    from sqlmodel import select

    from matdb.data.db import read_session
    from matdb.data.models import QualityFactorValue

    with read_session(url) as s:
        stmt = select(QualityFactorValue)
        if material_id:
            stmt = stmt.where(QualityFactorValue.material_id == material_id)
        rows = [r for r in s.exec(stmt.order_by(QualityFactorValue.id)).all() if not r.retracted]
        return [{c: getattr(r, c) for c in Q_VALUE_COLUMNS} for r in rows]


# ---------------------------------------------------------------------------
# tables for the page and the report (no physics: reshaping of results)
# ---------------------------------------------------------------------------
def outline_df(design: PlateDesign):
    """The plate outline with slots and holes as polygon rings for a drawing.

    Columns ``piece``, ``ring`` (0 the outer edge, then slot/hole edges), ``order``,
    ``x_mm``, ``y_mm``; each ring is closed (its first point repeated).
    """
    import pandas as pd

    p = design.plate
    geom = D.plate_outline(p.shape, p.lx_m, p.ly_m, p.center_m[0], p.center_m[1], p.slots,
                           p.holes)
    rows = []
    for k, poly in enumerate(D.outline_pieces(geom)):
        for j, ring in enumerate([poly.exterior, *poly.interiors]):
            for n, (x, y) in enumerate(ring.coords):
                rows.append({"piece": k, "ring": j, "order": n, "x_mm": x * 1e3, "y_mm": y * 1e3})
    return pd.DataFrame(rows, columns=["piece", "ring", "order", "x_mm", "y_mm"])


DEFAULT_PRESSURES_PA = tuple(float(p) for p in np.logspace(-4, 5, 19)) + (101325.0,)


def pressure_sweep_df(design: PlateDesign, pressures: Sequence[float] = DEFAULT_PRESSURES_PA,
                      prep: DynamicsPrep | None = None):
    """Q of each stable mode against pressure (one finite-element solve for all)."""
    import pandas as pd

    rows = q_versus_pressure(design, sorted(set(pressures)), prep)
    return pd.DataFrame(rows, columns=["pressure_pa", "mode", "q", "q_eddy", "q_air"])


def modes_df(result: dict):
    """Per-mode table in the units people use (Hz, s, micro-g/sqrt(Hz))."""
    import pandas as pd

    rows = []
    for m in result["modes"]:
        rows.append({"mode": m["name"], "frequency_hz": m["frequency_hz"], "q": m["q"],
                     "q_eddy": m["q_eddy"], "q_air": m["q_air"], "ring_down_s": m["ring_down_s"],
                     "limited_by": m["dominant_damping"],
                     "noise_ug_rthz": m.get("noise_micro_g_rthz")})
    return pd.DataFrame(rows, columns=["mode", "frequency_hz", "q", "q_eddy", "q_air",
                                       "ring_down_s", "limited_by", "noise_ug_rthz"])
