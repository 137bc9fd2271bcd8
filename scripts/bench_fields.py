"""Speed of the closed-form field engine against magpylib (a benchmark, not a test).

B on a 200 x 200 grid at z = 1 mm over a 4 x 4 checkerboard of touching 10 mm cubes
(Br 1.3 T), matdb vs ``magpylib.getB`` with a Collection of Cuboid sources, same points,
best of 5 each. Goal: matdb >= 3x faster at equal accuracy. The same grid over a 4 x 4
checkerboard of cylinders is timed as well, for information (best of 3).
"""

from __future__ import annotations

import time

import numpy as np

from matdb.physics.arrangement import build_arrangement
from matdb.physics.fields import cuboid_B

REPEATS = 5


def _best(fn, repeats=REPEATS):
    best = float("inf")
    out = None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def run() -> dict:
    import magpylib as magpy

    arr = build_arrangement("cuboid", (0.01, 0.01, 0.01), "checkerboard", rows=4, cols=4, br=1.3)
    g = np.linspace(-0.03, 0.03, 200)
    X, Y = np.meshgrid(g, g, indexing="ij")
    pts = np.column_stack([X.ravel(), Y.ravel(), np.full(X.size, 1e-3)])

    dims = np.array([m.size for m in arr.magnets])
    pols = np.array([m.polarization for m in arr.magnets])
    pos = np.array([m.position for m in arr.magnets])
    coll = magpy.Collection(
        *[magpy.magnet.Cuboid(polarization=j, dimension=d, position=c) for d, j, c in zip(dims, pols, pos)]
    )

    arr.B(pts[:10])  # build the cached corner table once (as any repeated caller would)
    t_matdb, b_matdb = _best(lambda: arr.B(pts))
    t_cold, b_cold = _best(lambda: cuboid_B(pts, dims, pols, pos))
    t_magpy, b_magpy = _best(lambda: magpy.getB(coll, pts))
    bmax = float(np.max(np.linalg.norm(b_magpy, axis=1)))

    # the same grid over a 4 x 4 checkerboard of 10 mm x 10 mm cylinders (for information)
    cyl = build_arrangement("cylinder", (0.01, 0.01), "checkerboard", rows=4, cols=4, br=1.3)
    ccoll = magpy.Collection(
        *[magpy.magnet.Cylinder(polarization=m.polarization, dimension=m.size, position=m.position)
          for m in cyl.magnets]
    )
    t_cyl, b_cyl = _best(lambda: cyl.B(pts), 3)
    t_cyl_magpy, b_cyl_magpy = _best(lambda: magpy.getB(ccoll, pts), 3)
    cmax = float(np.max(np.linalg.norm(b_cyl_magpy, axis=1)))
    return {
        "points": int(pts.shape[0]),
        "magnets": int(len(arr.magnets)),
        "distinct_corners": int(arr._fields().cuboids.corners.shape[0]),
        "matdb_arrangement_s": t_matdb,
        "matdb_cuboid_B_s": t_cold,
        "magpylib_s": t_magpy,
        "speedup_arrangement": t_magpy / t_matdb,
        "speedup_cuboid_B": t_magpy / t_cold,
        "max_rel_diff_arrangement": float(np.max(np.abs(b_matdb - b_magpy)) / bmax),
        "max_rel_diff_cuboid_B": float(np.max(np.abs(b_cold - b_magpy)) / bmax),
        "cylinders_matdb_s": t_cyl,
        "cylinders_magpylib_s": t_cyl_magpy,
        "speedup_cylinders": t_cyl_magpy / t_cyl,
        "max_rel_diff_cylinders": float(np.max(np.abs(b_cyl - b_cyl_magpy)) / cmax),
    }


if __name__ == "__main__":
    res = run()
    for k, v in res.items():
        print(f"{k}: {v:.4g}" if isinstance(v, float) else f"{k}: {v}")
