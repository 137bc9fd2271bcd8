"""Speed of the floating-magnet mode (a benchmark, not a test).

Rows (CPU time of this process, minimum of ``REPEATS`` runs; wall time beside it, which
on a shared machine depends on its load, printed with the core count):

- ``levitate_one_station``: :func:`matdb.analysis.floating.levitate_stabilized` on
  examples/floating_magnet.toml (goal < 0.3 s on the 2-core machine);
- ``levitate_two_stations``: the same on examples/floating_magnet_two_stations.toml
  (goal < 0.8 s);
  each ``cold`` (pull and plate tables forgotten before every run) and ``warm``;
- ``pull_table_error``: largest error of the tabulated pull halfway between its nodes,
  relative to the peak pull (stated bound 1e-6);
- ``search_cold_s``, ``search_warm_s``: one suggestion run, ``matdb optimise
  --floating-magnet --payload-range "0 g..5 g" --top 1`` as a library call
  (:func:`matdb.analysis.magnet_synthesis.search`), with an empty table cache and again
  with the tables on disk (goal < 20 s); ``candidates`` searched.
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
import tomllib
from pathlib import Path

from matdb.analysis import magnet_synthesis as M
from matdb.analysis.floating import levitate_stabilized
from matdb.design import parse_stabilized
from matdb.physics.floating import Body, clear_tables, pull_table

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = {"one_station": ROOT / "examples" / "floating_magnet.toml",
            "two_stations": ROOT / "examples" / "floating_magnet_two_stations.toml"}
REPEATS = 5


def _best(fn, before=None, repeats=REPEATS) -> tuple[float, float]:
    """Minimum CPU and wall time of ``fn()`` over ``repeats`` runs [s]."""
    cpu, wall = float("inf"), float("inf")
    for _ in range(repeats):
        if before is not None:
            before()
        c0, t0 = time.process_time(), time.perf_counter()
        fn()
        cpu, wall = min(cpu, time.process_time() - c0), min(wall, time.perf_counter() - t0)
    return cpu, wall


def _search() -> dict:
    out: dict = {}
    with tempfile.TemporaryDirectory() as d:
        old = os.environ.get("MATDB_CACHE_DIR")
        os.environ["MATDB_CACHE_DIR"] = d
        try:
            req = M.FMRequest(payload_range_kg=(0.0, 5e-3), top=1)
            for label in ("cold", "warm"):
                M.unit_pull.cache_clear()
                M.plate_slope_table.cache_clear()
                c0, t0 = time.process_time(), time.perf_counter()
                res = M.search(req)
                out[f"search_{label}_s"] = time.perf_counter() - t0
                out[f"search_{label}_cpu_s"] = time.process_time() - c0
        finally:
            if old is None:
                os.environ.pop("MATDB_CACHE_DIR", None)
            else:
                os.environ["MATDB_CACHE_DIR"] = old
    out["candidates"] = res.n_candidates
    out["feasible_found"] = any(r["feasible"] for r in res.rows)
    return out


def run(search: bool = True) -> dict:
    out: dict = {"load_1min": os.getloadavg()[0], "cores": os.cpu_count()}
    for name, path in EXAMPLES.items():
        design = parse_stabilized(tomllib.loads(path.read_text()), source=str(path))
        levitate_stabilized(design)  # imports and the first-call set-up out of the figures
        cpu, wall = _best(lambda: levitate_stabilized(design), before=clear_tables)
        out[f"levitate_{name}_cold_cpu_s"], out[f"levitate_{name}_cold_wall_s"] = cpu, wall
        cpu, wall = _best(lambda: levitate_stabilized(design))
        out[f"levitate_{name}_warm_cpu_s"], out[f"levitate_{name}_warm_wall_s"] = cpu, wall
    st = parse_stabilized(tomllib.loads(EXAMPLES["one_station"].read_text())).stations[0]
    out["pull_table_error"] = pull_table(Body(st.lifter.shape, tuple(st.lifter.size), 1.0),
                                         Body(st.floater.shape, tuple(st.floater.size), 1.0)).error
    if search:
        out.update(_search())
    out["load_1min_after"] = os.getloadavg()[0]
    return out


if __name__ == "__main__":
    for k, v in run(search="--no-search" not in sys.argv).items():
        print(f"{k}: {v:.4g}" if isinstance(v, float) else f"{k}: {v}")
