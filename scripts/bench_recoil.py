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
- ``advise_17mm_cold_cpu_s`` / ``advise_17mm_cold_one_cell_cpu_s``: ``matdb advise`` of
  the 17 mm request of ``scripts/bench.py`` (``--exact 0``), in a fresh process with a
  fresh cache folder, with the default model and with one cell per magnet
  (``recoil.SUBDIVISION = 1``); ``advise_ratio_default_over_one_cell``;
  ``advise_tables`` / ``advise_table_build_s``: departure tables that run built and
  their CPU time (one basis per geometry in units of the magnet size, shared by every
  catalogue size and recoil susceptibility);
- ``load_1min``: the machine's load average while it ran.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
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


ADVISE_17 = ["advise", "--mass", "0.2 g", "--footprint", "17 mm x 17 mm", "--temp-min", "0 degC",
             "--temp-max", "60 degC", "--quiet", "--format", "json", "--top", "1", "--exact", "0"]


def advise_child(subdivision: int) -> dict:
    """In a child process (fresh caches): CPU time of one ``advise`` and the tables built."""
    import contextlib
    import io

    from matdb.physics import recoil as R
    from matdb.physics import recoil_field as RF

    R.SUBDIVISION = subdivision
    spent = [0.0]
    init = RF._Table.__init__

    def timed(self, *a, **k):
        t = time.process_time()
        init(self, *a, **k)
        spent[0] += time.process_time() - t

    RF._Table.__init__ = timed
    from matdb.cli import main

    t0 = time.process_time()
    with contextlib.redirect_stdout(io.StringIO()):
        main(ADVISE_17)
    return {"cpu_s": time.process_time() - t0, "tables": RF.table_count(), "table_build_s": spent[0]}


def advise_cold(subdivision: int) -> dict:
    with tempfile.TemporaryDirectory(prefix="matdb-bench-recoil-") as tmp:
        env = dict(os.environ, MATDB_CACHE_DIR=tmp)
        out = subprocess.run([sys.executable, __file__, "--advise-child", str(subdivision)], env=env,
                             capture_output=True, text=True, check=True, cwd=ROOT).stdout
    return json.loads(out.strip().splitlines()[-1])


def run() -> dict:
    import numpy as np

    from matdb.analysis.levitate import levitate_plate
    from matdb.design import load_design
    from matdb.physics import plate as P
    from matdb.physics import recoil as R
    from matdb.physics import recoil_field as RF
    from matdb.physics.arrangement import build_arrangement

    out: dict = {}
    default_cold = advise_cold(R.SUBDIVISION)
    one_cold = advise_cold(1)
    out["advise_17mm_cold_cpu_s"] = default_cold["cpu_s"]
    out["advise_17mm_cold_one_cell_cpu_s"] = one_cold["cpu_s"]
    out["advise_ratio_default_over_one_cell"] = default_cold["cpu_s"] / one_cold["cpu_s"]
    out["advise_tables"] = default_cold["tables"]
    out["advise_table_build_s"] = default_cold["table_build_s"]
    small = build_arrangement("cuboid", (0.0127,) * 3, "checkerboard", 2, 2, br=1.3)
    big = build_arrangement("cuboid", (0.006,) * 3, "checkerboard", 4, 4, br=1.3)
    for name, arr in (("2x2", small), ("4x4", big)):
        def setup(arr=arr):
            os.environ["MATDB_CACHE_DIR"] = tempfile.mkdtemp(prefix="matdb-bench-recoil-")  # nothing on disk
            R.clear_cache()
            RF.clear_tables()
            a = arr.with_recoil([0.05] * arr.count)
            a.correction().table()
            return a

        def solve(arr=arr):
            os.environ["MATDB_CACHE_DIR"] = tempfile.mkdtemp(prefix="matdb-bench-recoil-")
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
    out["goal"] = ("default field at most ~1.3x rigid once tabulated; advise 17 mm cold at most ~1.3x "
                   "the one-cell model")
    return out


if __name__ == "__main__":
    if len(sys.argv) == 3 and sys.argv[1] == "--advise-child":
        print(json.dumps(advise_child(int(sys.argv[2]))))
        raise SystemExit(0)
    os.environ["MATDB_CACHE_DIR"] = tempfile.mkdtemp(prefix="matdb-bench-recoil-")  # cold tables
    for k, v in run().items():
        print(f"{k}: {v:.6g}" if isinstance(v, float) else f"{k}: {v}")
