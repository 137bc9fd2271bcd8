"""Screening: every candidate evaluated at once from unit-polarisation tables.

Each geometry's tables (:mod:`matdb.advisor.tables`) are scaled per candidate by
``B_r(T)^2 / (2 mu0)`` of the grade and the two susceptibility parts of the material
(:mod:`matdb.physics.thermal` gives both at temperature and in the worst case). The
magnets sit on the recoil line of their family (``mu_rec`` of the grade table), so
each distinct recoil susceptibility has its own tables. Screening gives:

* the lift at the required gap (nominal and worst case: minimum Br, ``|chi|`` minus its
  uncertainty, hottest temperature) and the margin over the weight;
* the equilibrium gaps and ``k_z`` between tabulated heights, lateral stiffnesses from the
  side-face line integrals (:mod:`matdb.physics.plate_tables`);
* the irreversible-loss ratio at the coldest and hottest temperature, temperature
  ratings, cost, budget and envelope;
* on request (:func:`check_tilt`), the tilt and coupled stability of chosen rows from
  tabulated stiffness matrices moved to each candidate's centre of mass.
"""

from __future__ import annotations

import contextvars
import math
import os
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager

import numpy as np
import pandas as pd

from matdb.advisor.candidates import Catalogue, grade_chi_rec
from matdb.advisor.request import AdviceRequest
from matdb.advisor.tables import SCREEN_HEIGHTS_M, GeometryData, geometry, prepare_family, save_all
from matdb.errors import InputError
from matdb.physics import plate_tables as PT
from matdb.physics import thermal as TH
from matdb.constants import G_STANDARD, MU0, kelvin_to_celsius

G_START_M = 5e-5  # lowest gap considered [m] (as matdb.physics.plate.MIN_GAP)
#: gaps of the tilt tables [m] (interpolated in log gap)
TILT_GAPS_M = np.array([5e-5, 1e-4, 2e-4, 3.5e-4, 6e-4, 1e-3, 1.7e-3, 3e-3, 5e-3])

_PROGRESS: contextvars.ContextVar = contextvars.ContextVar("matdb_advisor_progress", default=None)


@contextmanager
def reporting_progress(callback):
    """Within this block, ranking calls ``callback(fraction, text)`` as it goes
    (``fraction`` from 0 to 1), so a page or a terminal can draw a progress bar."""
    token = _PROGRESS.set(callback)
    try:
        yield
    finally:
        _PROGRESS.reset(token)


def report(fraction: float, text: str) -> None:
    """Tell the callback of :func:`reporting_progress` (if any) how far the work is."""
    cb = _PROGRESS.get()
    if cb is not None:
        cb(min(1.0, max(0.0, float(fraction))), text)


def _fnum(x, none=np.nan) -> float:
    return none if x is None else float(x)


def prepare_all(geos: list[GeometryData], heights: np.ndarray, lat_heights: np.ndarray) -> None:
    """Fill the tables every candidate needs. ``MATDB_ADVISOR_THREADS`` > 1 computes cold
    geometries in threads (numpy releases the GIL); the default is one thread, since on a
    busy 2-core machine threads measured no faster."""
    def prep(family: list[GeometryData]) -> None:
        prepare_family(family, heights, lat_heights)
        for g in family:
            g.demag_hmax()

    groups: dict[tuple, list[GeometryData]] = {}
    for g in geos:
        if not g.is_ready(heights, lat_heights):
            groups.setdefault((g.spec, g.plate_m), []).append(g)
    cold = list(groups.values())
    try:
        want = int(os.environ.get("MATDB_ADVISOR_THREADS", "1"))
    except ValueError:
        want = 1
    workers = max(1, min(len(cold), want, os.cpu_count() or 1))
    if workers <= 1:
        for i, fam in enumerate(cold):
            report(0.05 + 0.55 * i / len(cold),
                   f"field integrals of {fam[0].spec.description} ({i + 1} of {len(cold)})")
            prep(fam)
        save_all(geos)
        return
    cold.sort(key=lambda f: -len(f) * f[0].spec.count * (3 if f[0].spec.shape == "cylinder" else 1))
    with ThreadPoolExecutor(max_workers=workers) as ex:
        list(ex.map(prep, cold))
    save_all(geos)


def _material_arrays(mats, t_k: float):
    """Per material: |chi_perp|, |chi_par| at ``t_k``, worst-case factor, flags, density, price."""
    chi_v = np.array([m.chi_vertical for m in mats], dtype=float)
    chi_h = np.array([m.chi_horizontal for m in mats], dtype=float)
    cf = np.array([TH.chi_at(1.0, m.temp_coeff_per_k, t_k) for m in mats], dtype=float)
    unc_f = np.array([TH.worst_case_abs_chi(m.chi_vertical, m.uncertainty_si) / abs(m.chi_vertical)
                      if m.uncertainty_si is not None and m.chi_vertical != 0 else 1.0 for m in mats])
    return (-chi_v * cf, -chi_h * cf, unc_f, (chi_v < 0) & (chi_h < 0),
            np.array([m.density_kg_m3 for m in mats]), np.array([_fnum(m.price_usd_per_kg) for m in mats]))


def _labels(names: list[str], index: np.ndarray) -> pd.Categorical:
    """``names[index]`` as a categorical column (codes into the distinct names: no string
    is built per row, and reordering the frame moves integers)."""
    cats = list(dict.fromkeys(names))
    codes = np.array([cats.index(x) for x in names], dtype=np.int32)[index]
    return pd.Categorical.from_codes(codes, categories=cats)


def screen(req: AdviceRequest, cat: Catalogue) -> pd.DataFrame:
    """Screen every candidate of ``cat`` for ``req`` (vectorised); the unsorted frame.

    Nominal values at the hottest temperature; the worst case there with minimum-spec Br
    and ``|chi|`` minus its uncertainty. Columns: see :data:`matdb.advisor.ranking.COLUMNS`
    and the internal indices ``mat_index``, ``grade_index``, ``spec_index``.
    """
    mats, grades, specs, thick = cat.mats, cat.grades, cat.specs, cat.thick
    nm, ng, ns, nt = len(mats), len(grades), len(specs), len(thick)
    if ns == 0:
        raise InputError("no default arrangement has magnets that small", field="max_magnet_size")
    lx, ly = req.plate_m
    area = lx * ly
    t_op = req.temp_max_k  # nominal: typical values at the hottest temperature
    g_req = max(req.min_gap_m, G_START_M)

    # per material
    a_nom, b_nom, unc_f, diamag, rho_p, price_p = _material_arrays(mats, t_op)
    a_w = a_nom * unc_f
    b_w = b_nom * unc_f

    # per grade
    br = np.array([g.br_t for g in grades])
    br_min = np.array([TH.worst_case_br(g.br_t, g.br_min_t) for g in grades])
    alpha = np.array([g.alpha_br_pct_per_k for g in grades])
    beta = np.array([_fnum(g.beta_hcj_pct_per_k, 0.0) for g in grades])
    hcj = np.array([g.hcj_ka_m * 1e3 for g in grades])
    tmax_c = np.array([g.max_temp_c for g in grades])
    rho_m = np.array([g.density_kg_m3 for g in grades])
    price_m = np.array([_fnum(g.price_usd_per_kg) for g in grades])
    knee = np.array([TH.KNEE_FRACTION.get(g.family, (0.5, ""))[0] for g in grades])
    s_nom = TH.br_at(br, alpha, t_op) ** 2 / (2 * MU0)
    s_w = TH.br_at(br_min, alpha, t_op) ** 2 / (2 * MU0)
    # each grade on the recoil line of its family: one set of tables per recoil susceptibility
    chis = sorted({grade_chi_rec(g) for g in grades})
    ic_g = np.array([chis.index(grade_chi_rec(g)) for g in grades])
    nc = len(chis)

    # per geometry (spec x recoil susceptibility)
    geos = [[geometry(s, req.plate_m, c) for s in specs] for c in chis]
    vol = np.array([s.magnet_volume_m3 for s in specs])
    grid = SCREEN_HEIGHTS_M
    th = np.asarray(thick)
    ng_ = grid.size
    Zc = np.empty((nc, ns, nt, ng_))
    Xc = np.empty((nc, ns, nt, ng_))
    Zr = np.empty((nc, ns, nt))
    Xr = np.empty((nc, ns, nt))
    LAT = np.empty((nc, ns, 4, ng_))  # the cumulative over height is interpolated at g and g + t
    hs = np.concatenate([grid, (grid[None, :] + th[:, None]).ravel()])
    hs_req = np.concatenate([[g_req], g_req + th])
    prepare_all([g for row in geos for g in row], np.concatenate([hs, hs_req]), grid)
    for ci in range(nc):
        for si, g in enumerate(geos[ci]):
            c = g.coarse(hs)
            base = c[:ng_]
            tops = c[ng_:].reshape(nt, ng_, 2)
            Zc[ci, si] = base[None, :, 0] - tops[:, :, 0]
            Xc[ci, si] = base[None, :, 1] - tops[:, :, 1]
            e = g.coarse(hs_req)
            Zr[ci, si] = e[0, 0] - e[1:, 0]
            Xr[ci, si] = e[0, 1] - e[1:, 1]
            LAT[ci, si] = PT.cumulative_over_height(g.lateral(grid), grid)
            g.save()
    hmax = np.array([g.demag_hmax() for g in geos[0]])

    # candidates: material x grade x spec x thickness (a thickness matched to one material's
    # total mass is paired with that material only)
    im, ig, is_, it = (a.ravel() for a in np.meshgrid(np.arange(nm), np.arange(ng), np.arange(ns),
                                                         np.arange(nt), indexing="ij"))
    if cat.thick_owner:
        keep = np.ones(im.size, dtype=bool)
        for ti, owners in enumerate(cat.thick_owner):
            if owners is not None:
                keep &= ~((it == ti) & ~np.isin(im, list(owners)))
        im, ig, is_, it = im[keep], ig[keep], is_[keep], it[keep]
    ic = ic_g[ig]
    n = im.size
    t_c = th[it]
    plate_mass = rho_p[im] * area * t_c
    payload = req.payload_for(plate_mass)
    too_heavy = payload < -1e-9 * (req.total_mass_kg or 0.0)
    payload = np.maximum(payload, 0.0)
    m_tot = plate_mass + payload
    weight = m_tot * G_STANDARD
    # the array against the envelope
    excess = np.array([s.envelope_excess(req.envelope_m) for s in specs]).reshape(ns, 3)
    outside = (excess > 1e-9).any(axis=1)[is_]

    # lift at the required gap
    fz_r, fx_r = Zr[ic, is_, it], Xr[ic, is_, it]
    lift_nom = s_nom[ig] * (a_nom[im] * fz_r + b_nom[im] * fx_r)
    lift_w = s_w[ig] * (a_w[im] * fz_r + b_w[im] * fx_r)
    with np.errstate(divide="ignore", invalid="ignore"):
        margin = np.where(weight > 0, lift_w / weight, np.inf)
        margin_nom = np.where(weight > 0, lift_nom / weight, np.inf)

    # equilibrium gaps on the screening tables
    grp = (ic * ns + is_) * nt + it
    Zg = Zc.reshape(nc * ns * nt, ng_)
    Xg = Xc.reshape(nc * ns * nt, ng_)
    gap_nom = np.full(n, np.nan)
    gap_w = np.full(n, np.nan)
    kz = np.full(n, np.nan)
    ok = diamag[im] & (weight > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        r_nom = np.where(a_nom[im] > 0, b_nom[im] / a_nom[im], 0.0)
        y_nom = weight / (s_nom[ig] * a_nom[im])
        y_w = weight / (s_w[ig] * a_w[im])
    sel = np.nonzero(ok)[0]
    if sel.size:
        # one lift curve per (material, geometry, thickness): grades only scale it
        pair = im[sel] * (nc * ns * nt) + grp[sel]
        upair, first, inv = np.unique(pair, return_index=True, return_inverse=True)
        su = sel[first]
        G = Zg[grp[su]] + r_nom[su, None] * Xg[grp[su]]
        gn, i_n, f_n = PT.highest_root_grid(G, y_nom[sel], grid, rows=inv)
        gw, _, _ = PT.highest_root_grid(G, np.where(np.isfinite(y_w[sel]), y_w[sel], np.inf), grid,
                                        rows=inv)
        gap_nom[sel] = gn
        gap_w[sel] = gw
        dZ = np.gradient(Zg, grid, axis=1)
        dX = np.gradient(Xg, grid, axis=1)
        gs = grp[sel]
        i1 = np.minimum(i_n + 1, ng_ - 1)
        d_at = ((dZ[gs, i_n] + r_nom[sel] * dX[gs, i_n]) * (1 - f_n)
                + (dZ[gs, i1] + r_nom[sel] * dX[gs, i1]) * f_n)
        kz[sel] = np.where(np.isfinite(gn), -d_at * s_nom[ig[sel]] * a_nom[im[sel]], np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        f_z = np.where(kz > 0, np.sqrt(np.maximum(kz, 0) / m_tot) / (2 * math.pi), 0.0)

    # lateral stiffness at the nominal gap
    kx = np.full(n, np.nan)
    ky = np.full(n, np.nan)
    fin = np.nonzero(np.isfinite(gap_nom))[0]
    if fin.size:
        g0 = gap_nom[fin]
        g1 = g0 + t_c[fin]
        rows = ic[fin] * ns + is_[fin]
        lat = LAT.reshape(nc * ns, 4, ng_)
        parts = [PT.interp_rows(lat[:, q, :], rows, g1, grid) - PT.interp_rows(lat[:, q, :], rows, g0, grid)
                 for q in range(4)]
        sa, sb = s_nom[ig[fin]] * a_nom[im[fin]], s_nom[ig[fin]] * b_nom[im[fin]]
        kx[fin] = sa * parts[0] + sb * parts[1]
        ky[fin] = sa * parts[2] + sb * parts[3]
    lat_stable = np.isfinite(kx) & (kx > 0) & (ky > 0)

    # thermal: derating, and the irreversible-loss ratio at the coldest and hottest temperature
    der_m_g = np.array([np.broadcast_to(TH.lift_derating_pct(alpha, req.temp_max_k, mm.temp_coeff_per_k), (ng,))
                        for mm in mats])  # (nm, ng)
    derating = der_m_g[im, ig]
    temps = sorted({req.temp_min_k, req.temp_max_k})
    ratio_g = np.full((ns, ng), -np.inf)
    ratio_t = np.full((ns, ng), temps[0])
    for t in temps:
        br_t = TH.br_at(br, alpha, t)
        hcj_t = TH.hcj_at(hcj, beta, t)
        with np.errstate(divide="ignore", invalid="ignore"):
            r = hmax[:, None] * br_t[None, :] / (knee * hcj_t)[None, :]
        r = np.where((hcj_t > 0)[None, :], r, np.inf)
        upd = r > ratio_g
        ratio_g = np.where(upd, r, ratio_g)
        ratio_t = np.where(upd, t, ratio_t)
    demag_ratio = ratio_g[is_, ig]
    demag_temp = ratio_t[is_, ig]
    demag_risk = demag_ratio >= 1.0
    too_hot = kelvin_to_celsius(req.temp_max_k) > tmax_c[ig] + 1e-9

    # cost
    magnet_mass = vol[is_] * rho_m[ig]
    cost = magnet_mass * price_m[ig] + plate_mass * price_p[im]
    illus = np.array([g.price_illustrative for g in grades])[ig] | np.array([m.price_illustrative for m in mats])[im]
    over_budget = np.zeros(n, dtype=bool) if req.budget_usd is None else ~(cost <= req.budget_usd)

    feasible = (diamag[im] & (margin >= 1.0) & lat_stable & ~demag_risk & ~too_hot & ~over_budget
                & ~outside & ~too_heavy)
    ext = np.array([s.extent for s in specs]).reshape(ns, 2)
    return pd.DataFrame({
        "material": _labels([m.id for m in mats], im),
        "grade": _labels([g.grade for g in grades], ig),
        "family": _labels([g.family for g in grades], ig),
        "spec_index": is_, "mat_index": im, "grade_index": ig,
        "thickness_m": t_c, "plate_mass_kg": plate_mass, "magnet_mass_kg": magnet_mass,
        "payload_kg": payload, "too_heavy": too_heavy, "outside_envelope": outside,
        "array_w_m": ext[is_, 0], "array_l_m": ext[is_, 1],
        "array_h_m": np.array([s.height for s in specs])[is_],
        "magnet_count": np.array([s.count for s in specs])[is_],
        "weight_n": weight, "feasible": feasible,
        "lift_per_area_n_m2": lift_w / area, "lift_nominal_n": lift_nom, "lift_worst_n": lift_w,
        "gap_m": gap_nom, "gap_worst_m": gap_w, "margin": margin, "margin_nominal": margin_nom,
        "max_payload_worst_kg": np.maximum(lift_w / G_STANDARD - plate_mass, 0.0),
        "k_z_n_m": kz, "f_z_hz": f_z, "k_x_n_m": kx, "k_y_n_m": ky,
        "k_tilt_n_m_per_rad": np.full(n, np.nan), "laterally_stable": lat_stable,
        "derating_pct": derating, "demag_risk": demag_risk, "demag_ratio": demag_ratio,
        "demag_temp_k": demag_temp, "too_hot": too_hot, "diamagnetic": diamag[im],
        "cost_usd": cost, "price_illustrative": illus, "over_budget": over_budget,
        "score": np.full(n, np.nan), "exact": np.zeros(n, dtype=bool),
        "stable_plate_side_max_m": np.full(n, np.nan), "tilt_stable": np.ones(n, dtype=bool),
        "stable_sides_text": pd.Series(np.full(n, "", dtype=object), dtype=object),
        "tilt_checked": np.zeros(n, dtype=bool),
    })


def check_tilt(df: pd.DataFrame, idx, req: AdviceRequest, cat: Catalogue) -> None:
    """Tilt (and coupled sliding-tilting) stability of screened rows ``idx``, in place.

    The stiffness matrix over (x, y, roll, pitch) about the plate's centre is tabulated per
    geometry and thickness at unit polarisation (:meth:`GeometryData.tilt`), interpolated
    in log gap, scaled by ``B_r^2`` and the chi parts and moved to the combined centre of
    mass (:func:`matdb.physics.plate_tables.move_pivot`). Sets ``k_tilt_n_m_per_rad``,
    ``tilt_stable``, ``laterally_stable`` and ``tilt_checked``.
    """
    idx = np.asarray(list(idx))
    if idx.size == 0:
        return
    sub = df.loc[idx]
    gap_all = sub["gap_m"].to_numpy(dtype=float)
    keep = (np.isfinite(gap_all) & ~sub["exact"].to_numpy(dtype=bool)
            & sub["diamagnetic"].to_numpy(dtype=bool))
    if not keep.any():
        return
    sub = sub[keep]
    rows = idx[keep]
    si_a = sub["spec_index"].to_numpy()
    mi_a = sub["mat_index"].to_numpy()
    gi_a = sub["grade_index"].to_numpy()
    t_a = sub["thickness_m"].to_numpy(dtype=float)
    gap_a = gap_all[keep]
    if "plate_x_m" in sub.columns:
        px, py = sub["plate_x_m"].to_numpy(dtype=float), sub["plate_y_m"].to_numpy(dtype=float)
    else:
        px = np.full(rows.size, float(req.plate_m[0]))
        py = np.full(rows.size, float(req.plate_m[1]))
    groups: dict[tuple, list] = {}
    for n_ in range(rows.size):
        chi_rec = grade_chi_rec(cat.grades[int(gi_a[n_])])
        key = (int(si_a[n_]), float(t_a[n_]), (float(px[n_]), float(py[n_])), chi_rec)
        groups.setdefault(key, []).append(n_)
    lg = np.log(TILT_GAPS_M)
    t_op = req.temp_max_k
    # per row: |chi| parts at temperature and Br at temperature
    a_r = np.abs(np.array([TH.chi_at(cat.mats[int(i)].chi_vertical, cat.mats[int(i)].temp_coeff_per_k, t_op)
                           for i in mi_a], dtype=float))
    b_r = np.abs(np.array([TH.chi_at(cat.mats[int(i)].chi_horizontal, cat.mats[int(i)].temp_coeff_per_k, t_op)
                           for i in mi_a], dtype=float))
    br_r = np.array([TH.br_at(cat.grades[int(i)].br_t, cat.grades[int(i)].alpha_br_pct_per_k, t_op)
                     for i in gi_a], dtype=float)
    K_r = np.empty((rows.size, 2, 4, 4))
    for (si, t, pk, chi_rec), members in groups.items():
        g = geometry(cat.specs[si], pk, chi_rec)
        gaps = gap_a[members]
        x = np.clip(np.log(gaps), lg[0], lg[-1])
        j = np.clip(np.searchsorted(lg, x) - 1, 0, lg.size - 2)
        f = (x - lg[j]) / (lg[j + 1] - lg[j])
        need = np.unique(np.concatenate([j, j + 1]))
        tab = np.empty((TILT_GAPS_M.size, 2, 4, 4))
        tab[need] = g.tilt(t, TILT_GAPS_M[need])  # only the brackets used
        g.save()
        K_r[members] = tab[j] * (1 - f)[:, None, None, None] + tab[j + 1] * f[:, None, None, None]
    k = br_r[:, None, None] ** 2 * (a_r[:, None, None] * K_r[:, 0] + b_r[:, None, None] * K_r[:, 1])
    pm = sub["plate_mass_kg"].to_numpy(dtype=float)
    pl = sub["payload_kg"].to_numpy(dtype=float)
    m_tot = pm + pl
    zo = gap_a + t_a / 2
    zl = gap_a + t_a + req.payload_height_m
    with np.errstate(invalid="ignore", divide="ignore"):
        zc = np.where(m_tot > 0, (pm * zo + pl * zl) / np.where(m_tot > 0, m_tot, 1.0), zo)
    mv = PT.move_pivot(k, zc - zo, sub["weight_n"].to_numpy(dtype=float))
    df.loc[rows, "k_tilt_n_m_per_rad"] = np.minimum(mv["k_pitch"], mv["k_roll"])
    df.loc[rows, "tilt_stable"] = np.asarray(mv["tilt_stable"], dtype=bool)
    df.loc[rows, "laterally_stable"] = (sub["laterally_stable"].to_numpy(dtype=bool)
                                        & np.asarray(mv["xp_stable"], dtype=bool)
                                        & np.asarray(mv["yr_stable"], dtype=bool))
    df.loc[rows, "tilt_checked"] = True
