"""Speed and mesh convergence of ``matdb dynamics`` (a benchmark, not a test).

Design: examples/plate_dynamics_10mm.toml (demo: a 10 mm x 0.5 mm pyrolytic graphite square
over a 2 x 2 checkerboard of 12.7 mm N42 cubes), at 1e-3 Pa.

- ``dynamics_s``: one whole :func:`matdb.analysis.dynamics.analyse_dynamics` run, best of 3
  (equilibrium, 6 x 6 stiffness, mesh, eddy-current solve, air, modes). Goal < 5 s on the
  2-core machine.
- ``phase_*_s``: where the time goes (one run).
- mesh study: Q of every stable mode with the element size L/24, L/48 (default) and L/96;
  ``mesh_change_default_vs_fine_pct`` is the largest change of any Q from L/48 to L/96
  (goal < 1 %); P1 elements converge as h^2, so the default is about a third of that from
  the converged value (Richardson).
- ``screening_error_pct``: the advisor's fast screening Q of the vertical mode against the
  full result.
"""

from __future__ import annotations

import os
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "examples" / "plate_dynamics_10mm.toml"
REPEATS = 3
PRESSURE = 1e-3


def _qs(result):
    return {m["name"]: m["q"] for m in result["modes"] if m["q"] is not None}


def run() -> dict:
    from matdb.design import load_design
    from matdb.analysis.dynamics import (analyse_dynamics, evaluate_dynamics, prepare_dynamics,
                                screening_estimate)

    design = load_design(DEMO)
    analyse_dynamics(design, PRESSURE)  # warm imports and the database
    best = float("inf")
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        res = analyse_dynamics(design, PRESSURE)
        best = min(best, time.perf_counter() - t0)
    t0 = time.perf_counter()
    prep = prepare_dynamics(design)
    t1 = time.perf_counter()
    evaluate_dynamics(prep, PRESSURE)
    t2 = time.perf_counter()
    side = 0.01
    study = {}
    for div in (24, 48, 96):
        study[div] = _qs(analyse_dynamics(design, PRESSURE, mesh_size=side / div))
    change = max(abs(study[48][k] / study[96][k] - 1) for k in study[96])
    coarse = max(abs(study[24][k] / study[96][k] - 1) for k in study[96])
    vert = next(m for m in res["modes"] if m["dof"] == "z")
    scr = screening_estimate(design, PRESSURE)
    out = {
        "dynamics_s": best,
        "goal_s": 5.0,
        "phase_prepare_s": t1 - t0,
        "phase_evaluate_s": t2 - t1,
        "mesh_triangles_default": res["mesh_triangles"],
        "mesh_change_coarse_vs_fine_pct": 100 * coarse,
        "mesh_change_default_vs_fine_pct": 100 * change,
        "q_vertical_default": vert["q"],
        "q_vertical_fine": study[96]["vertical"],
        "screening_error_pct": 100 * (scr["q"] / vert["q"] - 1),
        "load_1min": os.getloadavg()[0],
    }
    return out


if __name__ == "__main__":
    for k, v in run().items():
        print(f"{k}: {v:.4g}" if isinstance(v, float) else f"{k}: {v}")
