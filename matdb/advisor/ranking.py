"""Ranking: screen, sort, check tilt and work the best rows out exactly; the public API.

:func:`advise` ranks every plate material x magnet grade x arrangement x thickness for
a request typed with units; :func:`rank` does the work on a parsed request:
:func:`matdb.advisor.screening.screen` for every candidate, then
:func:`matdb.advisor.screening.check_tilt` on the first rows, then
:func:`matdb.advisor.exact.exact_evaluation` (``matdb levitate`` itself) on the first
``polish`` rows (column ``exact``).

Score and Pareto front
----------------------
``score = w_margin ln(margin) - w_cost ln(cost / 1 USD) - w_derating derating_pct / 10``
(higher is better; ``margin`` is the worst-case lift / weight at the required gap). The
Pareto front is taken over the feasible candidates on (margin up, cost down, derating
down): a candidate is on it when no other feasible candidate is at least as good on all
three and better on one.
"""

from __future__ import annotations

import hashlib
import json
import math
import threading
from dataclasses import replace
from typing import Sequence

import numpy as np
import pandas as pd

from matdb.advisor import dynamics as D
from matdb.advisor.candidates import (ArrangementSpec, Catalogue, build_catalogue, grade_chi_rec,
                                      matched_thicknesses, row_request)
from matdb.advisor.exact import exact_evaluation
from matdb.advisor.reasons import reasons_for
from matdb.advisor.request import AdviceRequest, Weights, parse_request
from matdb.advisor.screening import check_tilt, report, screen
from matdb.advisor.tables import geometry, save_all

COLUMNS = ["rank", "material", "grade", "family", "arrangement", "pattern", "shape",
           "size_m", "rows", "cols", "thickness_m", "feasible", "lift_per_area_n_m2",
           "gap_m", "gap_worst_m", "margin", "margin_nominal", "laterally_stable",
           "derating_pct", "cost_usd", "score", "pareto", "reasons", "notes", "exact",
           "plate_mass_kg", "payload_kg", "array_w_m", "array_l_m", "array_h_m", "magnet_count"]


def pareto_front(margin, cost, derating) -> np.ndarray:
    """Mask of points no other point dominates (margin up, cost down, derating down).

    NaN cost counts as the worst cost; NaN margin or derating as the worst of theirs.
    """
    m = np.nan_to_num(np.asarray(margin, dtype=float), nan=-np.inf)
    c = np.nan_to_num(np.asarray(cost, dtype=float), nan=np.inf)
    d = np.nan_to_num(np.asarray(derating, dtype=float), nan=np.inf)
    n = m.size
    dominated = np.zeros(n, dtype=bool)
    if n == 0:
        return ~dominated
    levels = np.unique(d)
    order = np.argsort(c, kind="stable")
    cs = c[order]

    def prefix_max(sel: np.ndarray):
        """cost-sorted costs and running max margin over points in ``sel``."""
        o = order[sel[order]]
        return c[o], np.maximum.accumulate(m[o]) if o.size else np.array([])

    prev = None
    for lev in levels:
        sel_le = d <= lev
        c_le, mx_le = prefix_max(sel_le)
        here = np.nonzero(d == lev)[0]
        ci, mi = c[here], m[here]
        # (c) some j with c_j <= c_i, d_j <= d_i and m_j > m_i
        k = np.searchsorted(c_le, ci, side="right") - 1
        best = np.where(k >= 0, mx_le[np.maximum(k, 0)], -np.inf)
        dom = best > mi
        # (a) some j with c_j < c_i strictly, d_j <= d_i, m_j >= m_i
        k = np.searchsorted(c_le, ci, side="left") - 1
        best = np.where(k >= 0, mx_le[np.maximum(k, 0)], -np.inf)
        dom |= best >= mi
        # (b) some j with d_j < d_i strictly, c_j <= c_i, m_j >= m_i
        if prev is not None:
            c_lt, mx_lt = prev
            k = np.searchsorted(c_lt, ci, side="right") - 1
            best = np.where(k >= 0, mx_lt[np.maximum(k, 0)], -np.inf)
            dom |= best >= mi
        dominated[here] = dom
        prev = (c_le, mx_le)
    del cs
    return ~dominated


def score_values(margin, cost, derating, weights: Weights) -> np.ndarray:
    """``w_m ln(margin) - w_c ln(cost / 1 USD) - w_d derating_pct / 10`` (NaN when unknown)."""
    m = np.asarray(margin, dtype=float)
    c = np.asarray(cost, dtype=float)
    d = np.asarray(derating, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = weights.margin * np.log(np.maximum(m, 1e-9)) if weights.margin else np.zeros_like(m)
        if weights.cost:
            s = s - weights.cost * np.log(np.maximum(c, 1e-6))
        if weights.derating:
            s = s - weights.derating * d / 10.0
    return s


def _failures(df: pd.DataFrame) -> np.ndarray:
    """How many of the feasibility criteria a candidate misses (0 when feasible)."""
    def col(name: str) -> np.ndarray:
        return df[name].to_numpy(dtype=bool)

    n = (~col("diamagnetic")).astype(np.int64)
    with np.errstate(invalid="ignore"):
        n += ~(df["margin"].to_numpy(dtype=float) >= 1.0)
    n += ~col("laterally_stable")
    for name in ("demag_risk", "too_hot", "over_budget", "outside_envelope", "too_heavy"):
        n += col(name)
    return n


def _order(df: pd.DataFrame) -> np.ndarray:
    """Positions of the rows in ranking order: feasible first by score; then the rejected
    ones, fewest failed criteria first."""
    key_s = df["score"].to_numpy(dtype=float)
    key_m = df["margin"].to_numpy(dtype=float)
    key_s = np.where(np.isnan(key_s), -np.inf, key_s)
    key_m = np.where(np.isnan(key_m), -np.inf, key_m)
    return np.lexsort((-key_m, -key_s, _failures(df), ~df["feasible"].to_numpy(dtype=bool)))


def refresh_flags(df: pd.DataFrame, idx, req: AdviceRequest) -> None:
    """Recompute ``feasible`` and ``score`` of rows ``idx`` from their columns, in place."""
    sub = df.loc[idx]
    feas = (sub["diamagnetic"] & (sub["margin"] >= 1.0) & sub["laterally_stable"].astype(bool)
            & ~sub["demag_risk"] & ~sub["too_hot"] & ~sub["over_budget"]
            & ~sub["outside_envelope"] & ~sub["too_heavy"])
    df.loc[idx, "feasible"] = feas.astype(bool)
    df.loc[idx, "score"] = score_values(sub["margin"], sub["cost_usd"], sub["derating_pct"], req.weights)


def rank(req: AdviceRequest, arrangements: Sequence[ArrangementSpec] | None = None, *,
         polish: int = 1, url=None, catalogue: Catalogue | None = None,
         tilt_rows: int = 20) -> tuple[pd.DataFrame, Catalogue]:
    """Screen and sort every candidate; check tilt on the first ``tilt_rows`` feasible-looking
    rows (:func:`matdb.advisor.screening.check_tilt`); work the first ``polish`` rows out exactly.

    Returns the full frame (internal columns included) and the catalogue used.
    """
    cat = catalogue or build_catalogue(req, arrangements, url)
    with _LOCK:  # the geometry caches are shared by every caller in the process (page sessions)
        return _rank_locked(req, cat, polish, tilt_rows)


_LOCK = threading.RLock()


def screen_plates(req: AdviceRequest, cat: Catalogue) -> pd.DataFrame:
    """:func:`matdb.advisor.screening.screen` for each plate outline of the request
    (thicknesses matched per plate), scored."""
    frames = []
    for p in req.plates:
        rq = replace(req, plate_m=(float(p[0]), float(p[1])), plate_options=())
        cp = cat
        if len(req.plates) > 1:
            th, own = matched_thicknesses(rq, cat.mats)
            cp = Catalogue(cat.mats, cat.grades, cat.specs, th, own)
        f = screen(rq, cp)
        f["score"] = score_values(f["margin"], f["cost_usd"], f["derating_pct"], req.weights)
        f["plate_x_m"] = float(p[0])
        f["plate_y_m"] = float(p[1])
        frames.append(f)
    return frames[0] if len(frames) == 1 else pd.concat(frames, ignore_index=True)


def _rank_locked(req: AdviceRequest, cat: Catalogue, polish: int, tilt_rows: int):
    report(0.02, "screening every candidate")
    df = screen_plates(req, cat)
    # the frame keeps its screening order (row labels stay put) until the end; the ranking
    # order is an array of positions, recomputed as rows change
    order = _order(df)
    report(0.65, "checking tilt of the best candidates")
    for _ in range(6):  # until the first `tilt_rows` feasible rows have had their tilt checked
        head = df.iloc[order[:tilt_rows]]
        todo = [i for i in head.index if head.at[i, "feasible"] and not head.at[i, "tilt_checked"]
                and not head.at[i, "exact"]]
        if not todo:
            break
        check_tilt(df, todo, req, cat)
        refresh_flags(df, todo, req)
        # rows checked here were feasible; if they all still are, no criterion and no score
        # changed, and neither did the order
        if not df.loc[todo, "feasible"].to_numpy(dtype=bool).all():
            order = _order(df)
    report(0.8, "working the best candidate out exactly")
    for _ in range(8):  # polish until the first `polish` rows are all exact
        head = df.iloc[order[:polish]]
        todo = [i for i in head.index if not df.at[i, "exact"]]
        if not todo:
            break
        for i in todo:
            row = df.loc[i].to_dict()
            rq = row_request(row, req)
            key = _polish_key(row, rq, cat)
            grade = cat.grades[int(row["grade_index"])]
            g = geometry(cat.specs[int(row["spec_index"])], rq.plate_m, grade_chi_rec(grade))
            upd = g.memo.get(key)
            if upd is None:
                upd = exact_evaluation(row, rq, cat)
                upd = {k: (float(v) if isinstance(v, (float, np.floating)) else v) for k, v in upd.items()}
                g.memo[key] = upd
                g.dirty = True
            for k, v in upd.items():
                df.at[i, k] = v
        refresh_flags(df, todo, req)
        order = _order(df)
    df = df.iloc[order].reset_index(drop=True)
    save_all()  # every plate and recoil susceptibility used
    # the Pareto front over feasible candidates
    feas = df["feasible"].to_numpy(dtype=bool)
    par = np.zeros(len(df), dtype=bool)
    if feas.any():
        par[feas] = pareto_front(df.loc[feas, "margin"], df.loc[feas, "cost_usd"], df.loc[feas, "derating_pct"])
    df["pareto"] = par
    df["rank"] = np.arange(1, len(df) + 1)
    report(1.0, "ranked")
    return df, cat


def _polish_key(row: dict, req: AdviceRequest, cat: Catalogue) -> str:
    """Key of an exact result: everything the design and ``levitate`` read (records in full)."""
    mat = cat.mats[int(row["mat_index"])]
    grade = cat.grades[int(row["grade_index"])]
    d = {"m": repr(mat), "g": repr(grade), "t": repr(float(row["thickness_m"])),
         "payload": repr(row.get("payload_kg")), "req": repr(replace(req, weights=Weights()))}
    return hashlib.sha256(json.dumps(d, sort_keys=True).encode()).hexdigest()[:20]


def finish(df: pd.DataFrame, req: AdviceRequest, cat: Catalogue, top: int | None = None,
           feasible_only: bool = False) -> pd.DataFrame:
    """The public frame: contract columns first, reasons in words, ``top`` rows."""
    if feasible_only:
        df = df[df["feasible"]]
    if top is not None:
        df = df.head(top)
    df = df.copy()
    reasons, notes, descr, pat, shp, size, rows, cols = [], [], [], [], [], [], [], []
    for row in df.to_dict(orient="records"):
        r, n_ = reasons_for(row, row_request(row, req), cat)
        reasons.append(r)
        notes.append(n_)
        spec = cat.specs[int(row["spec_index"])]
        descr.append(spec.description)
        pat.append(spec.pattern)
        shp.append(spec.shape)
        size.append([float(s) for s in spec.size])
        rows.append(spec.rows)
        cols.append(spec.cols)
    df["reasons"] = reasons
    df["notes"] = notes
    if "plate_x_m" not in df.columns:
        df["plate_x_m"] = float(req.plate_m[0])
        df["plate_y_m"] = float(req.plate_m[1])
    df["lift_per_area_nominal_n_m2"] = df["lift_nominal_n"] / (df["plate_x_m"] * df["plate_y_m"])
    df["arrangement"] = descr
    df["pattern"] = pat
    df["shape"] = shp
    df["size_m"] = size
    df["rows"] = rows
    df["cols"] = cols
    df["plate_m"] = [[float(a), float(b)] for a, b in zip(df["plate_x_m"], df["plate_y_m"])]
    front = [c for c in COLUMNS if c in df.columns]
    rest = [c for c in df.columns if c not in front]
    return df[front + rest].reset_index(drop=True)


def advise(mass=None, footprint=None, *, min_gap="0.2 mm", temp_min="20 degC", temp_max="20 degC",
           budget=None, materials=None, families=None, grades=None, max_magnet_size=None,
           thickness=None, plate_size=None, weights=None, payload_height="0 mm",
           total_mass=None, envelope=None,
           arrangements: Sequence[ArrangementSpec] | None = None, top: int | None = None,
           feasible_only: bool = False, polish: int | None = None, url=None,
           objective: str = "score", min_q: float | None = None,
           pressure_pa: float = 101325.0) -> pd.DataFrame:
    """Rank every plate material x magnet grade x arrangement x thickness for a payload.

    Parameters are what a person types (strings with units; numbers are SI): ``mass``
    (payload), ``footprint`` ("17 mm x 17 mm"), ``min_gap``, ``temp_min``/``temp_max``,
    ``budget`` ("20 USD"), restrictions ``materials``, ``families``, ``grades``,
    ``max_magnet_size``, ``thickness`` (one or more), ``plate_size`` (default the
    footprint), ``weights`` ("margin=1,cost=1,derating=1"), ``payload_height`` (payload
    centre of mass above the plate), ``total_mass`` (plate plus payload, instead of
    ``mass``: each plate's thickness is matched to it), ``envelope`` ("24 x 24 x 15 mm":
    arrays outside it are rejected with by how much). ``top`` limits the rows returned; the first ``polish``
    rows (default 1) are worked out exactly as ``matdb levitate`` does (column ``exact``).
    ``objective="noise"`` ranks the feasible rows by the lowest noise floor and ``min_q``
    rejects rows below a vertical-mode Q, both at ``pressure_pa``
    (:mod:`matdb.advisor.dynamics`).

    Returns
    -------
    pandas.DataFrame
        Best first: feasible candidates by score, then the rejected ones with their
        ``reasons``. Contract columns: rank, material, grade, arrangement (description),
        pattern, shape, size_m, rows, cols, feasible, lift_per_area_n_m2, gap_m,
        gap_worst_m, margin, laterally_stable, derating_pct, cost_usd, score, pareto,
        reasons, plate_mass_kg, payload_kg, array_w_m, array_l_m, array_h_m,
        magnet_count; more follow (SI units in the names).
    """
    req = parse_request(mass, footprint, min_gap=min_gap, temp_min=temp_min, temp_max=temp_max,
                        budget=budget, materials=materials, families=families, grades=grades,
                        max_magnet_size=max_magnet_size, thickness=thickness, plate_size=plate_size,
                        weights=weights, payload_height=payload_height, total_mass=total_mass,
                        envelope=envelope)
    return advise_request(req, arrangements, top=top, feasible_only=feasible_only, polish=polish,
                          url=url, objective=objective, min_q=min_q, pressure_pa=pressure_pa)[0]


def advise_request(req: AdviceRequest, arrangements=None, *, top=None, feasible_only=False,
                   polish=None, url=None, objective: str = "score", min_q: float | None = None,
                   pressure_pa: float = 101325.0):
    """:func:`advise` for an already parsed :class:`AdviceRequest`; returns (frame, catalogue).

    ``objective="noise"`` (lowest noise floor) and ``min_q`` re-rank the feasible rows by
    the dynamics of each candidate (:mod:`matdb.advisor.dynamics`: screening for a pool,
    exact for the rows shown) at ``pressure_pa``.
    """
    n_pol = polish if polish is not None else 1
    df, cat = rank(req, arrangements, polish=n_pol, url=url, tilt_rows=max(top or 20, n_pol))
    if objective != "score" or min_q is not None:
        df = D.apply_dynamics_objective(df, req, cat, objective=objective, min_q=min_q,
                                        pressure_pa=pressure_pa, shown=top or 10)
        out = finish(df, req, cat, top=top, feasible_only=feasible_only)
        if min_q is not None:
            out["reasons"] = [
                ([x for x in r if x != D.GENERIC_REASON] + [D.reason_q_too_low(row, min_q)])
                if row["q_too_low"] else list(r)
                for r, row in zip(out["reasons"], out.to_dict(orient="records"))]
        return out, cat
    return finish(df, req, cat, top=top, feasible_only=feasible_only), cat


def _jnum(v):
    if v is None:
        return None
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    f = float(v)
    return f if math.isfinite(f) else None


JSON_EXTRA = ["family", "thickness_m", "margin_nominal", "lift_per_area_nominal_n_m2",
              "max_payload_worst_kg", "k_z_n_m", "f_z_hz", "k_x_n_m", "k_y_n_m",
              "k_tilt_n_m_per_rad", "demag_risk", "demag_ratio", "plate_mass_kg", "magnet_mass_kg",
              "price_illustrative", "stable_plate_side_max_m", "exact", "tilt_checked", "notes",
              "payload_kg", "plate_m", "array_w_m", "array_l_m", "array_h_m", "magnet_count"]


def records(df: pd.DataFrame) -> list[dict]:
    """Rows as the JSON objects of ``matdb advise --format json`` (contract keys first)."""
    out = []
    for r in df.to_dict(orient="records"):
        d = {"rank": int(r["rank"]), "material": r["material"], "grade": r["grade"],
             "arrangement": {"description": r["arrangement"], "pattern": r["pattern"],
                             "shape": r["shape"], "size_m": list(r["size_m"]),
                             "rows": int(r["rows"]), "cols": int(r["cols"])},
             "feasible": bool(r["feasible"])}
        for k in ("lift_per_area_n_m2", "gap_m", "gap_worst_m", "margin"):
            d[k] = _jnum(r[k])
        d["laterally_stable"] = bool(r["laterally_stable"])
        for k in ("derating_pct", "cost_usd", "score"):
            d[k] = _jnum(r[k])
        d["pareto"] = bool(r["pareto"])
        d["reasons"] = list(r["reasons"])
        for k in JSON_EXTRA:
            v = r.get(k)
            d[k] = list(v) if isinstance(v, list) else _jnum(v) if not isinstance(v, str) else v
        if "noise_m_s2_rthz" in r:  # dynamics objective (matdb.advisor.dynamics)
            for k in ("q_vertical", "noise_m_s2_rthz", "f_vertical_hz"):
                d[k] = _jnum(r[k])
            d["dynamics_exact"] = bool(r["dynamics_exact"])
        out.append(d)
    return out

