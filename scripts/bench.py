"""`make bench`: every speed figure matdb has a goal for, in one table.

Each row shows the goal beside the figure: CPU seconds (user + system, what a busy machine
distorts least) as the minimum and median of repeats, the wall seconds likewise, how many
repeats, and the machine's 1-minute load average when the row was taken. The machine's
core count and load come first. Speed goals live here, never in timed tests.

How each row is measured
------------------------
* whole processes (``matdb --help``, ``matdb materials``, ``matdb levitate`` and
  ``matdb advise`` from the command line): the installed ``matdb`` run as a child process,
  its CPU time from the kernel's accounting of the finished child (``os.wait4``);
* in-process rows: a fresh Python process per repeat imports the command's module, then
  times ``matdb.cli.main([...])`` in the process: the first call ("cold": empty caches, a
  fresh cache folder) and further calls ("warm"). The CLI's ``main`` is the public way in,
  so these figures do not depend on how the library is arranged inside;
* rows measured by the per-topic scripts (``bench_fields``: matdb against magpylib side by
  side in the same run; ``bench_optimise``; ``bench_import``; ``bench_browser``): their
  ``run() -> dict`` is called and the figures named in :data:`TOPIC_ROWS` are read from it
  (a figure the script does not report is printed as "not reported").

Everything runs on a scratch database and cache folder in a temporary folder, never the
user's. Options: ``--repeats N`` (default 3), ``--skip-80mm`` (the 80 mm footprint row is
the slowest), ``--only TEXT`` (rows whose name contains TEXT), ``--details`` (also print
every per-topic script's full output), ``--json FILE``, ``--baseline DIR``: a checkout of
an earlier matdb (e.g. ``git worktree add /tmp/before COMMIT``); the plate ``levitate``
rows are then also measured with that code (``PYTHONPATH=DIR``, same interpreter and
packages), the two interleaved repeat by repeat, and a ratio row (before / now, minimum
CPU times) follows each pair, so the comparison holds while the machine's load drifts.
"""

from __future__ import annotations

import argparse
import contextlib
import importlib.util
import io
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

from matdb.cli import COMMANDS
from matdb.cli import main as matdb_main

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
EXAMPLES = REPO / "examples"
PLATE_2X2 = EXAMPLES / "plate_checkerboard_2x2.toml"
FLOATING_1 = EXAMPLES / "floating_magnet.toml"
FLOATING_2 = EXAMPLES / "floating_magnet_two_stations.toml"
ADVISE_17 = ["advise", "--mass", "0.2 g", "--footprint", "17 mm x 17 mm", "--temp-min", "0 degC",
             "--temp-max", "60 degC", "--quiet", "--format", "json", "--top", "1"]
FOOTPRINTS_MM = (10, 20, 40, 80)
DETAIL_SCRIPTS = ["bench_fields", "bench_plate", "bench_recoil", "bench_advisor", "bench_floating",
                  "bench_import", "bench_dynamics", "bench_optimise", "bench_report", "bench_browser"]


@dataclass
class Row:
    """One line of the table: figures in seconds (CPU and wall) or a ratio."""

    name: str
    goal: str
    cpu: list[float] = field(default_factory=list)
    wall: list[float] = field(default_factory=list)
    ratio: list[float] = field(default_factory=list)
    note: str = ""
    load: float = float("nan")


def _matdb_exe() -> str:
    exe = Path(sys.executable).with_name("matdb")
    return str(exe) if exe.exists() else (shutil.which("matdb") or "matdb")


def _load() -> float:
    return os.getloadavg()[0]


def time_process(argv: list[str], env: dict[str, str]) -> tuple[float, float, int]:
    """(CPU seconds, wall seconds, exit status) of one child process, from the kernel's accounting."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(argv, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    return usage.ru_utime + usage.ru_stime, wall, proc.returncode


def process_row(name: str, goal: str, argv: list[str], env: dict[str, str], repeats: int,
                fresh_cache: bool = False) -> Row:
    """Whole-process timings of ``matdb ARGV``; one unrecorded warm-up run first (seeds the database)."""
    row = Row(name, goal, load=_load())
    if not fresh_cache:
        time_process([_matdb_exe(), *argv], env)
    for _ in range(repeats):
        run_env = dict(env, MATDB_CACHE_DIR=tempfile.mkdtemp(dir=env["BENCH_TMP"])) if fresh_cache else env
        cpu, wall, code = time_process([_matdb_exe(), *argv], run_env)
        if code != 0:
            row.note = f"exit status {code}"
        row.cpu.append(cpu)
        row.wall.append(wall)
    return row


# ----------------------------------------------------------------------------- in-process worker
def worker(argv: list[str], calls: int) -> dict:
    """In this (fresh) process: import the command's module, then time ``main(argv)`` ``calls`` times."""
    importlib.import_module(COMMANDS[argv[0]][0])  # imports are not part of the figure
    out = {"cpu": [], "wall": [], "status": []}
    for _ in range(calls):
        c, t = time.process_time(), time.perf_counter()
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
            status = matdb_main(list(argv))
        out["wall"].append(time.perf_counter() - t)
        out["cpu"].append(time.process_time() - c)
        out["status"].append(status)
    return out


def in_process(argv: list[str], env: dict[str, str], calls: int, cache: str | None = None) -> dict:
    """Run :func:`worker` in a fresh process with a fresh cache folder (or ``cache``)."""
    run_env = dict(env, MATDB_CACHE_DIR=cache or tempfile.mkdtemp(dir=env["BENCH_TMP"]))
    r = subprocess.run([sys.executable, __file__, "--worker", str(calls), "--", *argv], env=run_env,
                       capture_output=True, text=True)
    if r.returncode != 0:
        raise RuntimeError(f"worker for {' '.join(argv)} failed: {r.stderr.strip()[-400:]}")
    return json.loads(r.stdout.strip().splitlines()[-1])


def in_process_rows(label: str, goals: tuple[str, str], argv: list[str], env: dict[str, str],
                    repeats: int, calls: int = 3) -> tuple[Row, Row]:
    """(cold, warm) rows: the first call of each fresh process, and the calls after it."""
    cold = Row(f"{label}, in-process, cold", goals[0], load=_load())
    warm = Row(f"{label}, in-process, warm", goals[1], load=cold.load)
    for _ in range(repeats):
        res = in_process(argv, env, calls)
        if any(res["status"]):
            cold.note = warm.note = f"exit status {res['status']}"
        cold.cpu.append(res["cpu"][0])
        cold.wall.append(res["wall"][0])
        warm.cpu += res["cpu"][1:]
        warm.wall += res["wall"][1:]
    return cold, warm


def new_request_rows(env: dict[str, str], repeats: int) -> list[Row]:
    """``advise`` 17 mm in a fresh process whose cache folder already holds one earlier
    request (a 12 mm footprint): what a user meets for any new request after the first.
    The recoil correction tables depend only on the catalogue's shapes (in magnet-size
    units), not on the request, so they are built once per cache folder."""
    row = Row("advise 17 mm, in-process, new request (cache of a 12 mm one)", "-", load=_load())
    earlier = list(ADVISE_17)
    earlier[earlier.index("--footprint") + 1] = "12 mm x 12 mm"
    for _ in range(repeats):
        cache = tempfile.mkdtemp(dir=env["BENCH_TMP"])
        in_process(earlier + ["--exact", "0"], env, 1, cache=cache)
        res = in_process(ADVISE_17 + ["--exact", "0"], env, 1, cache=cache)
        if any(res["status"]):
            row.note = f"exit status {res['status']}"
        row.cpu += res["cpu"]
        row.wall += res["wall"]
    return [row]


def footprint_rows(env: dict[str, str], sizes: tuple[int, ...]) -> list[Row]:
    """``advise`` cold (fresh process and cache) against the footprint side, with growth vs plate area."""
    rows: list[Row] = []
    base = None
    for mm in sizes:
        argv = list(ADVISE_17)
        argv[argv.index("--footprint") + 1] = f"{mm} mm x {mm} mm"
        row = Row(f"advise cold, footprint {mm} mm", "grows no faster than the plate's area", load=_load())
        res = in_process(argv + ["--exact", "0"], env, 1)
        row.cpu, row.wall = res["cpu"], res["wall"]
        if base is None:
            base = (mm, res["cpu"][0])
        else:
            grow, area = res["cpu"][0] / base[1], (mm / base[0]) ** 2
            row.note = f"x{grow:.3g} the {base[0]} mm time; area x{area:.3g} ({'ok' if grow <= area else 'FASTER'})"
        rows.append(row)
    return rows


#: what ``matdb levitate`` imports before it computes, in the order it needs them
STARTUP_STEPS = ("numpy", "scipy.optimize", "sqlalchemy", "pint", "matdb.cli.physics",
                 "matdb.analysis.levitate")


def startup_row(env: dict[str, str], repeats: int) -> Row:
    """CPU time of a whole process that only imports what ``matdb levitate`` imports (the
    floor under the CLI row); the note splits it by package, each step's CPU time after
    the steps before it (minimum of the repeats)."""
    code = ("import json, time\nout = []\n"
            + "".join(f"t = time.process_time(); import {m}; out.append(time.process_time() - t)\n"
                      for m in STARTUP_STEPS)
            + "print(json.dumps(out))")
    row = Row("plate levitate CLI start-up: imports only (whole process)", "-", load=_load())
    steps = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        proc = subprocess.Popen([sys.executable, "-c", code], env=env, stdout=subprocess.PIPE,
                                stderr=subprocess.DEVNULL, text=True)
        out = proc.stdout.read()
        _, status, usage = os.wait4(proc.pid, 0)
        row.wall.append(time.perf_counter() - t0)
        row.cpu.append(usage.ru_utime + usage.ru_stime)
        if os.waitstatus_to_exitcode(status) == 0 and out.strip():
            steps.append(json.loads(out.strip().splitlines()[-1]))
    if steps:
        row.note = ", ".join(f"{m} {min(s[i] for s in steps):.2f}" for i, m in enumerate(STARTUP_STEPS))
    return row


def baseline_rows(label: str, goals: tuple[str, str], argv: list[str], env: dict[str, str],
                  base_dir: str, repeats: int) -> list[Row]:
    """In-process (cold, warm) and whole-process rows of ``argv`` for the code in
    ``base_dir`` ("before") and this checkout ("now"), interleaved repeat by repeat,
    each pair followed by the ratio of the minimum CPU times (before / now)."""
    base_env = dict(env, PYTHONPATH=str(Path(base_dir).resolve()))
    now_env = dict(env, PYTHONPATH=str(REPO))
    rows = {k: (Row(f"{label}, in-process, {k}, before", goals[0 if k == "cold" else 1], load=_load()),
                Row(f"{label}, in-process, {k}, now", goals[0 if k == "cold" else 1], load=_load()))
            for k in ("cold", "warm")}
    cli = (Row(f"{label}, CLI (whole process), before", goals[2], load=_load()),
           Row(f"{label}, CLI (whole process), now", goals[2], load=_load()))
    for e in (base_env, now_env):
        time_process([_matdb_exe(), *argv], e)  # warm-up: seeds the database, pint's cache
    for _ in range(repeats):
        for i, e in enumerate((base_env, now_env)):
            res = in_process(argv, e, 3)
            rows["cold"][i].cpu.append(res["cpu"][0])
            rows["cold"][i].wall.append(res["wall"][0])
            rows["warm"][i].cpu += res["cpu"][1:]
            rows["warm"][i].wall += res["wall"][1:]
            cpu, wall, code = time_process([_matdb_exe(), *argv], e)
            if code != 0:
                cli[i].note = f"exit status {code}"
            cli[i].cpu.append(cpu)
            cli[i].wall.append(wall)
    out: list[Row] = []
    for before, now in (rows["cold"], rows["warm"], cli):
        ratio = Row(now.name.replace(", now", ", before / now"), "-", load=_load())
        ratio.ratio = [min(before.cpu) / min(now.cpu)]
        ratio.note = f"baseline {base_dir}"
        out += [before, now, ratio]
    return out


# ----------------------------------------------------------------------------- per-topic scripts
def load_script(name: str):
    path = HERE / f"{name}.py"
    if not path.exists():
        return None
    spec = importlib.util.spec_from_file_location(name, path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


# row name, goal, script, [(key, kind)] (first present per kind wins), extra keys shown; kind: "cpu"/"wall" seconds or "ratio"
TOPIC_ROWS = [
    ("fields vs magpylib, 200x200, 4x4 cube checkerboard (magpylib time / matdb time)", ">= 10x, agreement 1e-9",
     "bench_fields", [("speedup_cubes_arrangement", "ratio"), ("speedup_arrangement", "ratio")],
     ["max_rel_diff_cubes", "max_rel_diff_arrangement", "cubes_ns_per_point_corner"]),
    ("fields vs magpylib, 200x200, 4x4 cylinders (magpylib time / matdb time)", ">= 4x, agreement 1e-9",
     "bench_fields", [("speedup_cylinders", "ratio")], ["max_rel_diff_cylinders"]),
    ("optimiser, 0.3 g request, cold", "< 30 s", "bench_optimise",
     [("cold_cpu_s", "cpu"), ("cold_wall_s", "wall")], []),
    ("optimiser, 0.3 g request, warm from disk", "< 30 s", "bench_optimise",
     [("warm_from_disk_cpu_s", "cpu"), ("warm_from_disk_wall_s", "wall")], ["best_margin"]),
    ("import 10,000 rows (dry run)", "< 10 s", "bench_import",
     [("dry run 10000 rows, cpu s", "cpu"), ("dry run 10000 rows, wall s (goal < 10)", "wall")], []),
    ("import 10,000 rows", "< 10 s", "bench_import",
     [("import 10000 rows, cpu s", "cpu"), ("import 10000 rows, wall s (goal < 10)", "wall")], ["rows added"]),
    ("browser first render, worst page, warm (wall)", "< 3 s", "bench_browser",
     [("first_render_warm_worst_s", "wall")], ["first_render_cold_worst_s"]),
    ("browser open advisor candidate, warm (wall)", "< 2 s", "bench_browser",
     [("open_candidate_warm_s", "wall")], ["open_candidate_cold_s"]),
]


def topic_rows(only: str | None, outputs: dict[str, dict]) -> list[Row]:
    rows = []
    for name, goal, script, keys, extra in TOPIC_ROWS:
        if only and only not in name:
            continue
        if script not in outputs:
            mod = load_script(script)
            try:
                outputs[script] = mod.run() if mod else {"skipped": f"scripts/{script}.py not present"}
            except Exception as exc:  # one failing script must not hide the other rows
                outputs[script] = {"skipped": f"{type(exc).__name__}: {exc}"}
        res = outputs[script]
        row = Row(name, goal, load=_load())
        for key, kind in keys:  # the first key present for each kind wins (scripts rename keys)
            if getattr(row, kind):
                continue
            v = res.get(key)
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                getattr(row, kind).append(float(v))
            elif isinstance(v, list):
                getattr(row, kind).extend(float(x) for x in v)
        notes = [f"{k} = {res[k]:.3g}" if isinstance(res.get(k), float) else f"{k} = {res.get(k)}"
                 for k in extra if k in res]
        if not (row.cpu or row.wall or row.ratio):
            notes.insert(0, res.get("skipped") or f"not reported by {script} (keys: {', '.join(k for k, _ in keys)})")
        row.note = "; ".join(notes)
        rows.append(row)
    return rows


# ----------------------------------------------------------------------------- printing
def _fmt(values: list[float], unit: str = "s") -> str:
    if not values:
        return "-"
    return f"{min(values):.3g} / {statistics.median(values):.3g} {unit}"


def print_row(row: Row) -> None:
    if row.ratio:
        fig = f"ratio {_fmt(row.ratio, 'x')}"
    else:
        fig = f"cpu {_fmt(row.cpu)}  wall {_fmt(row.wall)}"
    n = max(len(row.cpu), len(row.wall), len(row.ratio))
    print(f"{row.name:<58} | goal {row.goal:<24} | {fig:<44} | n={n} | load {row.load:.2f}"
          + (f" | {row.note}" if row.note else ""), flush=True)


def scratch_env(tmp: Path) -> dict[str, str]:
    env = dict(os.environ)
    env["MATDB_URL"] = f"sqlite:///{tmp / 'bench.sqlite'}"
    env["MATDB_CACHE_DIR"] = str(tmp / "cache")
    env["BENCH_TMP"] = str(tmp)
    return env


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--skip-80mm", action="store_true", help="leave out the 80 mm footprint row")
    ap.add_argument("--only", help="only rows whose name contains this text")
    ap.add_argument("--details", action="store_true", help="also print each per-topic script's figures")
    ap.add_argument("--json", help="write every figure to this file")
    ap.add_argument("--baseline", metavar="DIR",
                    help="a checkout of earlier code: the plate levitate rows also run with it, "
                    "interleaved, with before/now ratios")
    ap.add_argument("--worker", type=int, help=argparse.SUPPRESS)
    ap.add_argument("rest", nargs="*", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.worker:
        print(json.dumps(worker(args.rest, args.worker)))
        return 0

    tmp = Path(tempfile.mkdtemp(prefix="matdb-bench-"))
    env = scratch_env(tmp)
    os.environ.update({k: env[k] for k in ("MATDB_URL", "MATDB_CACHE_DIR")})  # per-topic scripts too
    print(f"matdb bench {time.strftime('%Y-%m-%d %H:%M:%S %Z')}: {os.cpu_count()} cores, load average "
          f"{' '.join(f'{x:.2f}' for x in os.getloadavg())} (1/5/15 min); figures are min / median of "
          f"repeats; CPU = user + system seconds", flush=True)
    n = args.repeats
    plate, fm1, fm2 = str(PLATE_2X2), str(FLOATING_1), str(FLOATING_2)
    jobs = [
        ("matdb --help", lambda: [process_row("matdb --help (whole process)", "< 0.3 s", ["--help"], env, max(n, 5))]),
        ("matdb materials", lambda: [process_row("matdb materials (whole process)", "< 1 s", ["materials"], env,
                                                 max(n, 5))]),
        ("plate levitate", lambda: in_process_rows("plate levitate 2x2 example", ("-", "< 0.5 s"),
                                                   ["levitate", plate, "--format", "json"], env, n)),
        ("plate levitate CLI", lambda: [process_row("plate levitate 2x2 example, CLI (whole process)", "< 1.5 s",
                                                    ["levitate", plate, "--format", "json"], env, n)]),
        ("plate levitate CLI start-up", lambda: [startup_row(env, max(n, 5))]),
        ("plate levitate before/now", lambda: baseline_rows(
            "plate levitate 2x2 example", ("-", "< 0.5 s", "< 1.5 s"), ["levitate", plate, "--format", "json"],
            env, args.baseline, n) if args.baseline else []),
        ("floating one", lambda: in_process_rows("floating magnet, one station", ("-", "< 0.3 s"),
                                                 ["levitate", fm1, "--format", "json"], env, n)),
        ("floating two", lambda: in_process_rows("floating magnet, two stations", ("-", "< 0.8 s"),
                                                 ["levitate", fm2, "--format", "json"], env, n)),
        ("advise 17 mm", lambda: in_process_rows("advise full catalogue 17 mm", ("< 2 s", "< 0.2 s"),
                                                 ADVISE_17 + ["--exact", "0"], env, n)),
        ("advise new request", lambda: new_request_rows(env, n)),
        ("advise CLI cold", lambda: [process_row("advise CLI cold, one exact row (whole process)", "< 4 s",
                                                 ADVISE_17 + ["--exact", "1"], env, n, fresh_cache=True)]),
        ("advise footprint", lambda: footprint_rows(env, tuple(s for s in FOOTPRINTS_MM
                                                               if not (args.skip_80mm and s == 80)))),
    ]
    rows: list[Row] = []
    try:
        for key, job in jobs:
            if args.only and args.only not in key:
                continue
            try:
                got = job()
            except Exception as exc:  # one failing row must not hide the others
                got = [Row(key, "-", note=f"failed: {exc}", load=_load())]
            for r in got:
                print_row(r)
            rows += got
        outputs: dict[str, dict] = {}
        for r in topic_rows(args.only, outputs):
            print_row(r)
            rows.append(r)
        print(f"load average at the end: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
        if args.details:
            for name in DETAIL_SCRIPTS:
                if name not in outputs:
                    mod = load_script(name)
                    outputs[name] = mod.run() if mod else {"skipped": "not present"}
                print(f"[{name}]")
                for k, v in outputs[name].items():
                    print(f"  {k}: {v:.6g}" if isinstance(v, float) else f"  {k}: {v}")
        if args.json:
            Path(args.json).write_text(json.dumps({"rows": [r.__dict__ for r in rows], "scripts": outputs},
                                                  indent=2, default=str))
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
