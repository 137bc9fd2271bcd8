"""Cost of recoil permeability, the default field model (a benchmark, not a test).

CPU times of this process (minimum of repeats; the machine is shared, so CPU rather
than wall time), for the demo design tests/data/plate_checkerboard.toml (a 10 mm x 1 mm
graphite square over a 2 x 2 checkerboard of 12.7 mm N42 cubes) and a 4 x 4 checkerboard
of 6 mm cubes:

- ``field_200k_rigid_s`` / ``field_200k_default_s``: B at 200,000 points over the 2 x 2
  magnets (0.05-5 mm above them, inside the tabulated region), rigid and default (the
  magnets' mean polarisation plus the tabulated departure field), table already built;
  ``field_ratio_default_over_rigid`` (goal: at most about 1.5);
- ``field_200k_4x4_*``: the same over the 4 x 4 array;
- ``field_plate_points_*``: B at the plate's quadrature points of a lift curve over 40
  gaps (points of one plane together, as the plate code asks for them; the random points
  above read the table in no order, the slowest case);
- ``lift_rigid_s`` / ``lift_default_s``: that lift curve with each field (quadrature
  included); ``lift_ratio_default_over_rigid``;
- ``levitate_rigid_s`` / ``levitate_default_s``: the whole ``levitate_plate`` with
  ``[magnets] rigid = true`` and with the default model, per-geometry work cached;
- ``setup_2x2_s`` / ``setup_4x4_s``: the one-off work of a new geometry, every cache
  cleared first: interaction matrix, solve and table (``setup_*_solve_s`` the first two);
  ``cells_2x2`` / ``cells_4x4``: the cells of the default subdivision;
- ``load_1min``: the machine's load average while it ran.
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
    """Minimum CPU time of this process over ``repeats`` calls [s]."""
    best = float("inf")
    for _ in range(repeats):
        t0 = time.process_time()
        fn()
        best = min(best, time.process_time() - t0)
    return best


def run() -> dict:
    import numpy as np

    from matdb.analysis.levitate import levitate_plate
    from matdb.design import load_design
    from matdb.physics import plate as P
    from matdb.physics import recoil as R
    from matdb.physics import recoil_field as RF
    from matdb.physics.arrangement import build_arrangement

    out: dict = {}
    small = build_arrangement("cuboid", (0.0127,) * 3, "checkerboard", 2, 2, br=1.3)
    big = build_arrangement("cuboid", (0.006,) * 3, "checkerboard", 4, 4, br=1.3)
    for name, arr in (("2x2", small), ("4x4", big)):
        def setup(arr=arr):
            R.clear_cache()
            RF.clear_tables()
            a = arr.with_recoil([0.05] * arr.count)
            a.correction().table()
            return a

        def solve(arr=arr):
            R.clear_cache()
            arr.with_recoil([0.05] * arr.count)

        out[f"setup_{name}_s"] = _best(setup, 2)
        out[f"setup_{name}_solve_s"] = _best(solve, 2)
        out[f"cells_{name}"] = int(setup().cells[0].shape[0])

    rng = np.random.default_rng(1)
    for name, arr in (("", small), ("_4x4", big)):
        default = arr.with_recoil([0.05] * arr.count)
        x0, x1, y0, y1, _, _ = arr.bounds()
        pts = rng.uniform([x0, y0, 5e-5], [x1, y1, 5e-3], (200_000, 3))
        default.B(pts[:10])  # builds the table
        out[f"field_200k{name}_rigid_s"] = f_r = _best(lambda: arr.B(pts), 5)
        out[f"field_200k{name}_default_s"] = f_d = _best(lambda: default.B(pts), 5)
        out[f"field{name}_ratio_default_over_rigid"] = f_d / f_r

    default = small.with_recoil([0.05] * 4)
    bx, by = P.edge_lines(small.magnets)
    geom = P.PlateGeometry("rectangle", 0.010, 0.010, 1e-3, 0.0, 0.0, bx, by)
    gaps = np.linspace(5e-5, 4e-3, 40)
    seen = []

    def record(p):
        seen.append(np.array(p))
        return small.B(p)

    P.lift_force(record, geom, gaps, 4.5e-4, 8.5e-5)
    quad = np.concatenate(seen)  # the plate's quadrature points over 40 gaps
    out["plate_points"] = int(quad.shape[0])
    out["field_plate_points_rigid_s"] = q_r = _best(lambda: small.B(quad), 5)
    out["field_plate_points_default_s"] = q_d = _best(lambda: default.B(quad), 5)
    out["field_plate_points_ratio_default_over_rigid"] = q_d / q_r
    out["lift_rigid_s"] = l_r = _best(lambda: P.lift_force(small.B, geom, gaps, 4.5e-4, 8.5e-5))
    out["lift_default_s"] = l_d = _best(lambda: P.lift_force(default.B, geom, gaps, 4.5e-4, 8.5e-5))
    out["lift_ratio_default_over_rigid"] = l_d / l_r

    rigid_d = load_design(DEMO)
    default_d = replace(rigid_d, magnets=replace(rigid_d.magnets, rigid=False))
    levitate_plate(default_d)  # per-geometry work once
    out["levitate_rigid_s"] = t_r = _best(lambda: levitate_plate(rigid_d), 2)
    out["levitate_default_s"] = t_d = _best(lambda: levitate_plate(default_d), 2)
    out["levitate_ratio_default_over_rigid"] = t_d / t_r
    out["load_1min"] = os.getloadavg()[0]
    out["cores"] = os.cpu_count()
    out["goal"] = "default field at most ~1.5x rigid once tabulated; setup well under 1 s"
    return out


if __name__ == "__main__":
    for k, v in run().items():
        print(f"{k}: {v:.6g}" if isinstance(v, float) else f"{k}: {v}")
