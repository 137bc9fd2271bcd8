"""`make bench`: speed figures for matdb, printed side by side.

Each area has its own module (scripts/bench_*.py) with a ``run() -> dict``; this script runs
whichever exist and prints their figures. Speed goals live here, never in timed tests.
"""

from __future__ import annotations

import importlib.util
import json
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
MODULES = ["bench_fields", "bench_plate", "bench_recoil", "bench_advisor", "bench_floating", "bench_import",
           "bench_dynamics", "bench_optimise", "bench_report", "bench_browser"]


def main() -> int:
    results = {}
    for name in MODULES:
        path = HERE / f"{name}.py"
        if not path.exists():
            print(f"[{name}] not present, skipped")
            continue
        spec = importlib.util.spec_from_file_location(name, path)
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        print(f"[{name}]", flush=True)
        res = mod.run()
        results[name] = res
        for k, v in res.items():
            print(f"  {k}: {v:.6g}" if isinstance(v, float) else f"  {k}: {v}")
    out = HERE.parent / "test-artifacts"
    out.mkdir(exist_ok=True)
    (out / "bench.json").write_text(json.dumps(results, indent=2, default=str))
    return 0


if __name__ == "__main__":
    sys.exit(main())
