"""Speed of the selection advisor (``make bench``; never a timed test).

The full seeded catalogue -- every material x every grade x the default arrangements x the
default plate thicknesses -- ranked for one payload (0.2 g, 0 to 60 C), tilt checked on
the first 20 feasible rows (what a page shows). Rows printed (CPU time of this process,
or of the child for the CLI row; minimum of the repeats):

* ``cold``: 17 mm x 17 mm footprint, nothing cached (fresh cache folder, memory caches
  emptied, the recoil solutions too), modules imported; goal < 2 s;
* ``warm``: the same again in the same process (what the page sees next); goal < 0.2 s;
* ``warm_from_disk``: memory emptied, disk cache kept (a new process);
* ``exact_row``: the first row worked out by ``matdb levitate`` (seconds for one row);
* ``cli_cold``: ``matdb advise ... --exact 1`` as a whole process, fresh cache; goal < 4 s;
* ``footprint_<n>mm``: cold time for footprints of 10, 20, 40 and 80 mm, and its ratio
  to the 10 mm time beside the plate-area ratio (goal: grows no faster than the area).
  ``MATDB_BENCH_MAX_FOOTPRINT_MM`` (default 80) skips larger ones.

The machine's load average and core count are printed with the figures: on a busy
machine wall times differ by 5-30x, CPU times much less.
"""

from __future__ import annotations

import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from contextlib import contextmanager

from matdb import advisor as A
from matdb.physics import recoil

REQUEST = dict(mass="0.2 g", temp_min="0 degC", temp_max="60 degC")
FOOTPRINTS_MM = (10, 20, 40, 80)
GOALS = {"cold_cpu_s": 2.0, "warm_cpu_s": 0.2, "cli_cold_cpu_s": 4.0}


@contextmanager
def _cache_folder():
    tmp = tempfile.mkdtemp(prefix="matdb-bench-advisor-")
    old = os.environ.get("MATDB_CACHE_DIR")
    os.environ["MATDB_CACHE_DIR"] = tmp
    try:
        yield tmp
    finally:
        if old is None:
            os.environ.pop("MATDB_CACHE_DIR", None)
        else:
            os.environ["MATDB_CACHE_DIR"] = old
        shutil.rmtree(tmp, ignore_errors=True)


def _cpu(fn) -> tuple[float, object]:
    c = time.process_time()
    out = fn()
    return time.process_time() - c, out


def _forget() -> None:
    A.clear_memory_cache()
    recoil.clear_cache()


def cold_rank(footprint_mm: float, repeats: int = 1) -> tuple[float, int]:
    """Minimum CPU seconds of a cold ranking (polish 0) and the number of candidates."""
    req = A.parse_request(REQUEST["mass"], f"{footprint_mm} mm x {footprint_mm} mm",
                          temp_min=REQUEST["temp_min"], temp_max=REQUEST["temp_max"])
    cat = A.build_catalogue(req)
    best, n = float("inf"), 0
    for _ in range(repeats):
        with _cache_folder():
            _forget()
            t, (df, _) = _cpu(lambda: A.rank(req, polish=0, catalogue=cat))
        best, n = min(best, t), len(df)
    return best, n


def cli_cold() -> float:
    """CPU seconds of ``matdb advise`` (one exact row) as a whole process, fresh cache."""
    with _cache_folder():
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        subprocess.run([sys.executable, "-m", "matdb", "advise", "--mass", REQUEST["mass"],
                        "--footprint", "17 mm x 17 mm", "--temp-min", REQUEST["temp_min"],
                        "--temp-max", REQUEST["temp_max"], "--exact", "1", "--top", "5",
                        "--format", "json"], check=True, capture_output=True, env=dict(os.environ))
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def run() -> dict:
    out: dict = {"load_average_1min": os.getloadavg()[0], "cores": os.cpu_count()}
    req = A.parse_request(REQUEST["mass"], "17 mm x 17 mm", temp_min=REQUEST["temp_min"],
                          temp_max=REQUEST["temp_max"])
    cat = A.build_catalogue(req)
    out["candidates"] = len(cat.mats) * len(cat.grades) * len(cat.specs) * len(cat.thick)
    with _cache_folder():
        _forget()
        cold, (df, _) = _cpu(lambda: A.rank(req, polish=0, catalogue=cat))
        warm = min(_cpu(lambda: A.rank(req, polish=0, catalogue=cat))[0] for _ in range(3))
        A.clear_memory_cache()
        disk = _cpu(lambda: A.rank(req, polish=0, catalogue=cat))[0]
        exact = _cpu(lambda: A.rank(req, polish=1, catalogue=cat))[0]
    cold = min(cold, cold_rank(17)[0])
    out.update({"cold_cpu_s": cold, "warm_cpu_s": warm, "warm_from_disk_cpu_s": disk,
                "exact_row_cpu_s": exact})
    out["cli_cold_cpu_s"] = cli_cold()
    limit = float(os.environ.get("MATDB_BENCH_MAX_FOOTPRINT_MM", "80"))
    base = None
    for fp in FOOTPRINTS_MM:
        if fp > limit:
            out[f"footprint_{fp}mm"] = "skipped"
            continue
        t, n = cold_rank(fp)
        base = base or t
        out[f"footprint_{fp}mm_cpu_s"] = t
        out[f"footprint_{fp}mm_ratio"] = f"{t / base:.3g} (area ratio {(fp / FOOTPRINTS_MM[0]) ** 2:.3g}, {n} candidates)"
    for k, goal in GOALS.items():
        out[f"goal_{k}_under_{goal:g}"] = bool(out[k] < goal)
    out["load_average_1min_end"] = os.getloadavg()[0]
    return out


if __name__ == "__main__":
    for k, v in run().items():
        print(f"{k}: {v:.4g}" if isinstance(v, float) else f"{k}: {v}")
