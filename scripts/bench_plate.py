"""Speed of the floating-plate analysis (a benchmark, not a test).

Times, best of 3, for the demo design tests/data/plate_checkerboard.toml (a 10 mm x
1 mm graphite square over a 2 x 2 checkerboard of 12.7 mm N42 cubes):

- ``core_s``: lift curve (60 gaps), equilibrium gap, k_z, the 6 x 6 stiffness matrix
  about the centre of mass (:func:`matdb.physics.plate.analyse_plate`);
- ``side_search_s``: the largest stable square side (scan + bisection to 0.1 mm);
- ``intervals_s``: the stable side intervals, each side judged at its lateral
  equilibrium (scan + bisection of every change of verdict to 0.1 mm);
- ``levitate_s``: the whole ``levitate_plate`` (the above plus thermal, worst case,
  irreversible-loss check and safety distance).

Goal: the whole levitate well under a second.
"""

from __future__ import annotations

import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "tests" / "data" / "plate_checkerboard.toml"
REPEATS = 3


def _best(fn, repeats=REPEATS):
    best, out = float("inf"), None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def run() -> dict:
    from matdb.design import load_design
    from matdb.analysis.levitate import levitate_plate, plate_geometry
    from matdb.physics import plate as P

    design = load_design(DEMO)
    arr = design.arrangement()
    geom = plate_geometry(design, arr)
    chi = (abs(design.plate.chi_perp), abs(design.plate.chi_par))
    rho = design.plate.density_kg_m3

    n = [0]

    def counted(p):
        n[0] += len(p)
        return arr.B(p)

    core, res = _best(lambda: P.analyse_plate(counted, geom, *chi, rho))
    n_core = n[0] // REPEATS
    n[0] = 0
    side, s_max = _best(lambda: P.stable_side_max(counted, geom, *chi, rho, 2 * 0.0127))
    n_side = n[0] // REPEATS
    n[0] = 0
    iv_s, iv = _best(lambda: P.stable_side_intervals(counted, geom, *chi, rho, 2 * 0.0127))
    n_iv = n[0] // REPEATS
    full, _ = _best(lambda: levitate_plate(design))
    return {
        "core_s": core,
        "core_field_points": n_core,
        "side_search_s": side,
        "side_search_field_points": n_side,
        "intervals_s": iv_s,
        "intervals_field_points": n_iv,
        "stable_side_intervals_mm": [[round(a * 1e3, 3), round(b * 1e3, 3)] for a, b in iv],
        "levitate_s": full,
        "gap_mm": res.gap * 1e3,
        "stable_side_max_mm": s_max * 1e3,
        "goal": "levitate well under 1 s",
    }


if __name__ == "__main__":
    for k, v in run().items():
        print(f"{k}: {v:.6g}" if isinstance(v, float) else f"{k}: {v}")
