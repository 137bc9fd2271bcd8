"""Dynamics objectives for the advisor: "lowest noise floor" and a minimum Q.

The advisor ranks thousands of candidates from per-geometry tables; dynamics needs an
equilibrium, a mesh and an eddy-current solve per candidate. So the feasible rows at the
head of the advisor's ranking (a pool a few times the rows shown) get the fast screening
estimate (:func:`matdb.analysis.dynamics.screening_estimate`: coarse mesh, one layer, cheap
equilibrium; within about 5 % of the full finite-element Q on the demo designs, see the
README), are filtered by the minimum Q and sorted by the thermal acceleration noise of the
vertical mode; only the rows shown are then solved exactly
(:func:`matdb.analysis.dynamics.analyse_dynamics`) and re-sorted. Column ``dynamics_exact`` says
which rows are exact.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from matdb.advisor.exact import candidate_design
from matdb.analysis.dynamics import analyse_dynamics, screening_estimate
from matdb.data import catalog
from matdb.errors import MatdbError

OBJECTIVES = ("score", "noise")
DYN_COLUMNS = ("q_vertical", "noise_m_s2_rthz", "f_vertical_hz", "dynamics_exact", "q_too_low")


def _vertical(result: dict) -> dict | None:
    return next((m for m in result["modes"] if m["dof"] == "z" and not m["unstable"]), None)


def apply_dynamics_objective(df: pd.DataFrame, req, cat, *, objective: str = "noise",
                             min_q: float | None = None, pressure_pa: float = 101325.0,
                             shown: int = 10, exact_rows: int | None = None,
                             pool: int | None = None) -> pd.DataFrame:
    """Screen, filter and (for ``objective == "noise"``) re-sort the advisor's frame.

    Parameters
    ----------
    df : the advisor's ranked frame (internal columns included)
    objective : "noise" sorts feasible rows by the vertical-mode noise (lowest first);
        "score" keeps the advisor's order and only applies ``min_q``.
    min_q : rows whose vertical-mode Q is below it become infeasible
    pressure_pa : gas pressure for the air damping [Pa]
    shown : rows that will be shown; ``exact_rows`` of them (default ``min(shown, 5)``)
        are solved exactly
    pool : feasible rows screened (default ``max(3 * shown, 20)``)
    """
    if objective not in OBJECTIVES:
        raise MatdbError(f"objective: expected one of {', '.join(OBJECTIVES)}, got {objective!r}")
    df = df.copy()
    for c in DYN_COLUMNS:
        df[c] = False if c in ("dynamics_exact", "q_too_low") else np.nan
    pool = pool if pool is not None else max(3 * shown, 20)
    exact_rows = exact_rows if exact_rows is not None else min(shown, 5)
    feas_idx = [i for i in df.index if bool(df.at[i, "feasible"])][:pool]
    designs = {}
    for i in feas_idx:
        row = df.loc[i].to_dict()
        try:
            d = candidate_design(row, req, cat)
            s = screening_estimate(d, pressure_pa)
        except MatdbError:
            continue
        designs[i] = d
        if s.get("q") is not None:
            df.at[i, "q_vertical"] = s["q"]
        df.at[i, "f_vertical_hz"] = s.get("frequency_hz") or np.nan
        df.at[i, "noise_m_s2_rthz"] = s["noise_m_s2_rthz"] if s["noise_m_s2_rthz"] is not None \
            else (0.0 if s.get("q") is None and s.get("floats") else np.nan)

    def _q_check(i):
        # only rows that were feasible are screened, so a row passing again is restored
        q = df.at[i, "q_vertical"]
        undamped = (not math.isfinite(q)) and df.at[i, "noise_m_s2_rthz"] == 0.0
        low = min_q is not None and not undamped and not (math.isfinite(q) and q >= min_q)
        df.at[i, "q_too_low"] = bool(low)
        df.at[i, "feasible"] = not low

    for i in designs:
        _q_check(i)
    df = _order(df, objective)
    done = 0
    for i in list(df.index)[:max(shown, exact_rows)]:
        if done >= exact_rows:
            break
        if i not in designs:
            continue
        try:
            r = analyse_dynamics(designs[i], pressure_pa=pressure_pa)
        except MatdbError:
            continue
        v = _vertical(r)
        done += 1
        df.at[i, "dynamics_exact"] = True
        if v is not None:
            df.at[i, "q_vertical"] = v["q"] if v["q"] is not None else np.nan
            df.at[i, "f_vertical_hz"] = v["frequency_hz"]
            df.at[i, "noise_m_s2_rthz"] = v["noise_m_s2_rthz"] if v["noise_m_s2_rthz"] is not None \
                else (0.0 if v["q"] is None else np.nan)
        _q_check(i)
    df = _order(df, objective).reset_index(drop=True)
    df["rank"] = np.arange(1, len(df) + 1)
    return df


def _order(df: pd.DataFrame, objective: str) -> pd.DataFrame:
    """Feasible rows with a noise value by noise (objective "noise"), then the advisor's
    order for the rest; rows made infeasible by the minimum Q go with the rejected ones."""
    feas = df["feasible"].to_numpy(dtype=bool)
    noise = df["noise_m_s2_rthz"].to_numpy(dtype=float)
    pos = np.arange(len(df))
    if objective == "noise":
        has = feas & np.isfinite(noise)
        key1 = np.where(has, 0, np.where(feas, 1, 2))
        key2 = np.where(has, noise, 0.0)
        order = np.lexsort((pos, key2, key1))
    else:
        order = np.lexsort((pos, ~feas))
    return df.iloc[order]


GENERIC_REASON = "not feasible after the exact check"


def reason_q_too_low(row: dict, min_q: float) -> str:
    q = row.get("q_vertical")
    qs = f"{q:.3g}" if q is not None and isinstance(q, float) and math.isfinite(q) else "unknown"
    return f"vertical-mode Q {qs} is below the minimum {min_q:.3g}"


def rank_optimised(result, *, objective: str = "noise", min_q: float | None = None,
                   pressure_pa: float = 101325.0):
    """The plate optimiser's designs (:func:`matdb.analysis.synthesis.optimise`, each already
    re-checked exactly) with the exact dynamics of each: ``q_vertical``,
    ``noise_m_s2_rthz``, ``f_vertical_hz`` added to every row; rows below ``min_q`` are
    dropped (named in ``result.notes``); ``objective="noise"`` sorts by the noise floor.

    The optimiser shows a few designs (``--top``), so every row is solved exactly (no
    screening needed). Returns the same result object, rows updated and re-ranked.
    """
    # lazy: matdb.analysis.synthesis imports the advisor package (an import cycle at load time)
    from matdb.analysis.synthesis import design_of

    kept = []
    for r in result.rows:
        mat = catalog.get_material(r["material"])
        grade = catalog.get_grade(r["grade"])
        try:
            dres = analyse_dynamics(design_of(r["sizing"], result.request, mat, grade),
                                    pressure_pa=pressure_pa)
        except MatdbError as exc:
            result.notes.append(f"{r['material']} / {r['grade']}: no dynamics ({exc})")
            continue
        v = _vertical(dres)
        q = None if v is None else v["q"]
        r["q_vertical"] = q
        r["f_vertical_hz"] = None if v is None else v["frequency_hz"]
        r["noise_m_s2_rthz"] = None if v is None else (
            v["noise_m_s2_rthz"] if v["noise_m_s2_rthz"] is not None else (0.0 if q is None else None))
        r["dynamics_exact"] = True
        if min_q is not None and v is not None and q is not None and q < min_q:
            result.notes.append(f"a design of rank {r.get('rank')} was dropped: vertical-mode Q "
                                f"{q:.3g} is below the minimum {min_q:.3g}")
            continue
        kept.append(r)
    if objective == "noise":
        kept.sort(key=lambda r: (r["noise_m_s2_rthz"] is None, r["noise_m_s2_rthz"] or 0.0))
    for i, r in enumerate(kept, start=1):
        r["rank"] = i
    result.rows = kept
    return result
