"""Speed of the floating-magnet search (a benchmark, not a test).

One suggestion run, ``matdb optimise --floating-magnet --payload-range "0 g..5 g"
--top 1`` as a library call (:func:`matdb.analysis.magnet_synthesis.search`):

- ``cold_s``: with an empty table cache (pull and plate tables computed);
- ``warm_s``: again with the tables on disk (what a second run costs);
- ``cpu_cold_s``, ``cpu_warm_s``: process CPU time of the two runs (the wall time on a
  shared machine depends on its load, printed as ``load_1min``);
- ``candidates``: combinations searched; ``pull_interp_error``: largest relative error
  of the tabulated pull against direct quadrature.

Goal: one suggestion run under 20 s on the 2-core machine.
"""

from __future__ import annotations

import os
import tempfile
import time


def run() -> dict:
    from matdb.analysis import magnet_synthesis as M

    out: dict = {}
    with tempfile.TemporaryDirectory() as d:
        old = os.environ.get("MATDB_CACHE_DIR")
        os.environ["MATDB_CACHE_DIR"] = d
        try:
            req = M.FMRequest(payload_range_kg=(0.0, 5e-3), top=1)
            for label in ("cold", "warm"):
                M._pull.cache_clear()
                M.plate_slope_table.cache_clear()
                t0, c0 = time.perf_counter(), time.process_time()
                res = M.search(req)
                out[f"{label}_s"] = time.perf_counter() - t0
                out[f"cpu_{label}_s"] = time.process_time() - c0
        finally:
            if old is None:
                os.environ.pop("MATDB_CACHE_DIR", None)
            else:
                os.environ["MATDB_CACHE_DIR"] = old
    out["candidates"] = res.n_candidates
    out["pull_interp_error"] = res.pull_interp_error
    out["feasible_found"] = any(r["feasible"] for r in res.rows)
    out["load_1min"] = os.getloadavg()[0]
    return out


if __name__ == "__main__":
    for k, v in run().items():
        print(f"{k}: {v}")
