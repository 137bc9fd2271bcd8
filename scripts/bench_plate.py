"""Speed of the floating-plate analysis (``make bench``; a benchmark, never a timed test).

Rows, each the minimum over repeats of the process CPU time (and the wall time beside it),
with the machine's load average and core count, since a run under load differs by 5-30x:

- ``levitate_inprocess``: ``levitate_plate`` of the demo design
  examples/plate_checkerboard_2x2.toml (12 mm graphite square over a 2 x 2 checkerboard
  of 12.7 mm N50 cubes; default model: recoil on), modules imported, first call excluded
  (it builds the recoil solution once per geometry); goal < 0.5 s;
- ``levitate_cli``: ``matdb levitate`` of the same file as a whole process; goal < 1.5 s;
- ``levitate_field_points``: field points one ``levitate_plate`` evaluates (the work the
  symmetry folds, pose pairing and level-surface torque rates save);
- ``intervals``: the stable side intervals alone (each side judged at its lateral
  equilibrium), with the number of field points evaluated;
- ``stiffness_6x6``: the 6 x 6 stiffness matrix at the equilibrium (order 8).
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

from matdb.analysis.levitate import plate_chi_at, levitate_plate, plate_geometry
from matdb.design import load_design
from matdb.physics import plate as P

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "examples" / "plate_checkerboard_2x2.toml"
REPEATS = 5


def _best(fn, repeats: int = REPEATS):
    """(min CPU s, min wall s, last result) over ``repeats`` calls."""
    cpu, wall, out = float("inf"), float("inf"), None
    for _ in range(repeats):
        c, t = time.process_time(), time.perf_counter()
        out = fn()
        cpu = min(cpu, time.process_time() - c)
        wall = min(wall, time.perf_counter() - t)
    return cpu, wall, out


def _cli_best(args: list[str], repeats: int = REPEATS) -> tuple[float, float]:
    """(min CPU s of the child, min wall s) of a whole process."""
    cpu, wall = float("inf"), float("inf")
    for _ in range(repeats):
        before = os.times()
        t = time.perf_counter()
        subprocess.run(args, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        wall = min(wall, time.perf_counter() - t)
        after = os.times()
        cpu = min(cpu, (after.children_user - before.children_user)
                  + (after.children_system - before.children_system))
    return cpu, wall


def _points_of(fn) -> int:
    """Field points evaluated by ``fn()`` (counted where the plate modules call the field)."""
    from matdb.physics import plate_geometry, plate_intervals, plate_lift, plate_stiffness

    mods = (plate_geometry, plate_lift, plate_stiffness, plate_intervals)
    orig = plate_geometry.eval_field
    n = [0]

    def counted(field, pts):
        n[0] += len(pts)
        return orig(field, pts)

    for m in mods:
        m.eval_field = counted
    try:
        fn()
    finally:
        for m in mods:
            m.eval_field = orig
    return n[0]


def run() -> dict:
    load0 = os.getloadavg()
    design = load_design(DEMO)
    t_k = design.conditions.extremes(None)[1]
    arr = design.arrangement(t_k)
    geom = plate_geometry(design, arr)
    chi = plate_chi_at(design, t_k)
    p = design.plate
    levitate_plate(design)  # recoil solution and imports, once per geometry
    lev_cpu, lev_wall, res = _best(lambda: levitate_plate(design))
    lev_points = _points_of(lambda: levitate_plate(design))
    n = [0]

    def counted(pts):
        n[0] += len(pts)
        return arr.B(pts)

    extent = arr.bounds()
    size = max(extent[1] - extent[0], extent[3] - extent[2])
    g_start = design.magnets.cover_m + P.MIN_GAP
    iv_cpu, iv_wall, iv = _best(lambda: P.stable_side_intervals(
        counted, geom, *chi, p.density_kg_m3, size, p.payload_kg, p.payload_height_m, g_start))
    iv_points = n[0] // REPEATS
    k_cpu, k_wall, _ = _best(lambda: P.stability(arr.B, geom, res["gap_m"], *chi,
                                                 res["plate_mass_kg"], p.payload_kg,
                                                 p.payload_height_m))
    exe = str(Path(sys.executable).with_name("matdb"))  # the installed console script
    cli_cpu, cli_wall = _cli_best([exe, "levitate", str(DEMO)])
    return {
        "design": "examples/plate_checkerboard_2x2.toml (demo), default model (recoil on)",
        "levitate_inprocess_cpu_s": lev_cpu, "levitate_inprocess_wall_s": lev_wall,
        "levitate_field_points": lev_points,
        "levitate_goal_s": 0.5,
        "levitate_cli_cpu_s": cli_cpu, "levitate_cli_wall_s": cli_wall, "levitate_cli_goal_s": 1.5,
        "intervals_cpu_s": iv_cpu, "intervals_wall_s": iv_wall, "intervals_field_points": iv_points,
        "stable_side_intervals_mm": [[round(a * 1e3, 3), round(b * 1e3, 3)] for a, b in iv],
        "stiffness_6x6_cpu_s": k_cpu, "stiffness_6x6_wall_s": k_wall,
        "gap_mm": res["gap_m"] * 1e3,
        "repeats": REPEATS, "cores": os.cpu_count(),
        "load_average_before": [round(v, 2) for v in load0],
        "load_average_after": [round(v, 2) for v in os.getloadavg()],
    }


if __name__ == "__main__":
    for k, v in run().items():
        print(f"{k}: {v:.6g}" if isinstance(v, float) else f"{k}: {v}")
