"""Speed of the lab-value import (``make bench``; never a timed test).

Goal: 10,000 measured rows in under 10 s on the 2-core machine (the import used to be
quadratic: a 500-row dry run took minutes). Demo rows of our own making: bismuth
susceptibilities with distinct dates and sources, written to a fresh SQLite database:

* dry run of 10,000 rows (parse, validate, match against the database);
* real import of the same 10,000 rows (one transaction);
* re-import of the same file (every row matched, nothing added);
* exact round trip: export to CSV, import into a second fresh database.

Wall and CPU times are printed with the load average (the machine is shared).
"""

from __future__ import annotations

import csv
import datetime as dt
import os
import tempfile
import time
from pathlib import Path

N_ROWS = 10_000


def _timed(fn):
    c, t = time.process_time(), time.perf_counter()
    out = fn()
    return time.perf_counter() - t, time.process_time() - c, out


def _write_rows(path: Path, n: int) -> None:
    day0 = dt.date(2020, 1, 1)
    with path.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["material_id", "chi", "source", "date", "method"])
        for i in range(n):
            w.writerow(["bismuth", f"-1.{600 + i % 300}e-4", f"demo: bench sample {i}",
                        (day0 + dt.timedelta(days=i % 2000)).isoformat(), "demo balance"])


def run() -> dict:
    from matdb.data import db
    from matdb.data import exchange

    tmp = Path(tempfile.mkdtemp(prefix="matdb-bench-import-"))
    src = tmp / "rows.csv"
    _write_rows(src, N_ROWS)
    url = f"sqlite:///{tmp / 'a.sqlite'}"
    old = os.environ.get("MATDB_URL")
    os.environ["MATDB_URL"] = url
    try:
        db.reset_engines()
        db.get_engine(url)
        dry_w, dry_c, _ = _timed(lambda: exchange.import_file(src, dry_run=True, url=url))
        imp_w, imp_c, s1 = _timed(lambda: exchange.import_file(src, url=url))
        re_w, re_c, s2 = _timed(lambda: exchange.import_file(src, url=url))
        dump = tmp / "dump.csv"
        exp_w, _, text = _timed(lambda: exchange.export("csv", url))
        dump.write_text(text, encoding="utf-8")
        url_b = f"sqlite:///{tmp / 'b.sqlite'}"
        os.environ["MATDB_URL"] = url_b
        db.reset_engines()
        db.get_engine(url_b)
        rt_w, rt_c, s3 = _timed(lambda: exchange.import_file(dump, url=url_b))
    finally:
        if old is None:
            os.environ.pop("MATDB_URL", None)
        else:
            os.environ["MATDB_URL"] = old
        db.reset_engines()
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    return {
        "rows": N_ROWS,
        f"dry run {N_ROWS} rows, wall s (goal < 10)": dry_w,
        f"dry run {N_ROWS} rows, cpu s": dry_c,
        f"import {N_ROWS} rows, wall s (goal < 10)": imp_w,
        f"import {N_ROWS} rows, cpu s": imp_c,
        "rows added": s1["added"],
        "re-import (all matched), wall s": re_w,
        "re-import added (expect 0)": s2["added"],
        "export csv, wall s": exp_w,
        "round trip import into empty db, wall s": rt_w,
        "round trip added": s3["added"],
        "load average (1 min)": load,
        "time": time.strftime("%H:%M:%S"),
    }


if __name__ == "__main__":
    for k, v in run().items():
        print(f"{k}: {v:.4g}" if isinstance(v, float) else f"{k}: {v}")
