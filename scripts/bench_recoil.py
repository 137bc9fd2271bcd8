"""Cost of recoil permeability, the default field model (a benchmark, not a test).

CPU times of this process, best of 3, for the demo design tests/data/plate_checkerboard.toml (a 10 mm x
1 mm graphite square over a 2 x 2 checkerboard of 12.7 mm N42 cubes):

- ``levitate_rigid_s`` / ``levitate_default_s``: the whole ``levitate_plate`` with
  ``[magnets] rigid = true`` and with the default (recoil) model, the response matrix
  already cached (the usual case: it is solved once per geometry and reused for every
  temperature and the worst case); ``ratio_default_over_rigid``;
- ``field_200k_*``: B at 200,000 points over the same magnets, rigid and default;
- ``solve_2x2_s``, ``solve_10x10_s``: the one-off solve of a new geometry (2 x 2 of
  12.7 mm cubes; 10 x 10 of 5 mm cubes), cache cleared first;
- ``solve_2x2_n4_s``, ``field_200k_n4_s``: the subdivided model (4 x 4 x 4 cells per
  magnet, ``subdivision=4``) of the 2 x 2 example: its one-off solve and B at the same
  200,000 points (the cells' departures are extra cuboid sources);
- ``load_1min``: the machine's load average while it ran (the machine is shared).

Goal: the default model costs no more than a few per cent over the rigid one.
"""

from __future__ import annotations

import os
import time
from dataclasses import replace
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "tests" / "data" / "plate_checkerboard.toml"
REPEATS = 3


def _best(fn, repeats=REPEATS):
    """Best CPU time of this process [s] (less sensitive to a shared machine's load than
    wall time)."""
    best = float("inf")
    for _ in range(repeats):
        t0 = time.process_time()
        fn()
        best = min(best, time.process_time() - t0)
    return best


def run() -> dict:
    from matdb.design import load_design
    from matdb.analysis.levitate import levitate_plate
    from matdb.physics import recoil as R
    from matdb.physics.arrangement import build_arrangement

    rigid = load_design(DEMO)
    default = replace(rigid, magnets=replace(rigid.magnets, rigid=False))
    assert rigid.magnets.rigid and not default.magnets.rigid
    levitate_plate(default)  # fills the cache once
    t_rigid = _best(lambda: levitate_plate(rigid))
    t_default = _best(lambda: levitate_plate(default))
    import numpy as np

    pts = np.random.default_rng(1).uniform([-0.02, -0.02, 1e-4], [0.02, 0.02, 0.005], (200_000, 3))
    a_rigid, a_default = rigid.arrangement(), default.arrangement()
    f_rigid = _best(lambda: a_rigid.B(pts), 5)
    f_default = _best(lambda: a_default.B(pts), 5)

    def solve(arr):
        R.clear_cache()
        R.response_matrix(arr.magnets, [0.05] * arr.count)

    small = build_arrangement("cuboid", (0.0127,) * 3, "checkerboard", 2, 2)
    big = build_arrangement("cuboid", (0.005,) * 3, "checkerboard", 10, 10)

    def solve_sub():
        R.clear_cache()
        return small.with_recoil([0.05] * 4, subdivision=4)

    t_sub = _best(solve_sub, 1)
    sub = solve_sub()
    sub.B(pts[:10])
    f_sub = _best(lambda: sub.B(pts), 1)
    return {
        "levitate_rigid_s": t_rigid,
        "levitate_default_s": t_default,
        "ratio_default_over_rigid": t_default / t_rigid,
        "field_200k_rigid_s": f_rigid,
        "field_200k_default_s": f_default,
        "field_ratio_default_over_rigid": f_default / f_rigid,
        "solve_2x2_s": _best(lambda: solve(small)),
        "solve_10x10_s": _best(lambda: solve(big), 1),
        "solve_2x2_n4_s": t_sub,
        "field_200k_n4_s": f_sub,
        "load_1min": os.getloadavg()[0],
        "goal": "default within a few per cent of rigid",
    }


if __name__ == "__main__":
    for k, v in run().items():
        print(f"{k}: {v:.6g}" if isinstance(v, float) else f"{k}: {v}")
