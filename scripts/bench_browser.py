"""The page in a real browser: first render of each page and opening an advisor candidate
on the Design page, timed with Debian's headless Chromium (playwright drives it; never
playwright's own browser download).

Goals (this 2-core machine, whatever its load; the load average is printed beside):
first render of each page under 3 s; opening an advisor candidate on the Design page
under 2 s with a warm cache (the same candidate opened a second time).

The server runs on a scratch database and a scratch results cache in a temporary folder
(seeded on first use), so the bench never touches a user's files. "cold": the first visit
of each page after the server started with an empty cache, in a browser with nothing
cached; "warm": later visits in new tabs of one browser (its HTTP cache shared, as a
person's browser keeps the page's scripts; ``--repeats`` of them, min and median printed,
with the CPU seconds of the browser and the server, which the load does not change);
"restart": a new server on the same results cache (the persistent cache, without the server's memory). Run alone:
``python scripts/bench_browser.py [--repeats N]``.

``--breakdown``: instead, what the browser spends a warm first render of each page on: the
page's elements by kind (charts, tables, widgets, DOM nodes), Chromium's own counters for the
tab (DevTools protocol ``Performance.getMetrics``: script, layout and style time) and the CPU
seconds of each kind of browser process (the tab's renderer, the GPU process drawing in
software, the browser process).
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

from webapp._server import CHROMIUM_ARGS, served

PAGES = [("", "Materials"), ("magnets", "Magnets"), ("design", "Design"), ("advisor", "Advisor"),
         ("lab_values", "Lab values")]
GOAL_PAGE_S = 3.0
GOAL_OPEN_WARM_S = 2.0
VIEWPORT = {"width": 1400, "height": 1400}
IDLE_JS = ("() => !document.querySelector('[data-stale=\"true\"]')"
           " && !document.querySelector('[data-testid=\"stStatusWidget\"] [data-testid=\"stStatusWidgetRunningIcon\"]')"
           " && !(document.querySelector('[data-testid=\"stStatusWidget\"]') || {innerText: ''}).innerText.includes('Running')")


_TICK = os.sysconf("SC_CLK_TCK") if hasattr(os, "sysconf") else 100


def _my_processes() -> dict:
    """pid -> (CPU ticks, command line) of this process's descendants, from Linux's /proc
    (empty elsewhere)."""
    procs = {}
    for d in Path("/proc").glob("[0-9]*"):
        try:
            fields = (d / "stat").read_text().rsplit(")", 1)[1].split()
            procs[int(d.name)] = (int(fields[1]), int(fields[11]) + int(fields[12]), (d / "cmdline").read_bytes())
        except (OSError, IndexError, ValueError):
            continue
    mine, grew = {os.getpid()}, True
    while grew:
        more = {pid for pid, (ppid, _, _) in procs.items() if ppid in mine and pid not in mine}
        mine |= more
        grew = bool(more)
    return {pid: procs[pid][1:] for pid in mine - {os.getpid()}}


def _cpu() -> dict:
    """CPU seconds (user + system) used so far by this bench's browser (Chromium processes)
    and its page server (Streamlit), found among this process's descendants in Linux's
    /proc (zeros elsewhere): their own work, whatever the machine's load (wall time on a
    shared machine also counts waiting for a core)."""
    out = {"browser": 0.0, "server": 0.0}
    for ticks, cmd in _my_processes().values():
        who = "server" if b"streamlit" in cmd else "browser" if b"chrom" in cmd else None
        if who:
            out[who] += ticks / _TICK
    return out


def _wait_idle(page) -> None:
    page.wait_for_timeout(150)
    page.wait_for_function(IDLE_JS, timeout=300_000)


def _rendered(page, heading: str) -> None:
    """The page's heading and its first chart or table are on screen and the run ended."""
    page.get_by_role("heading", name=heading, exact=True).first.wait_for(timeout=300_000)
    page.locator('[data-testid="stVegaLiteChart"]:visible, [data-testid="stDataFrame"]:visible'
                 ).first.wait_for(timeout=300_000)
    _wait_idle(page)


def _timed(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


CPU: dict = {}  # "browser" / "server": CPU seconds of the last timed visit


def _first_render(tabs, base: str, path: str, heading: str) -> float:
    """Open ``path`` in a new tab of ``tabs`` (a browser context: its tabs share the HTTP
    cache, as a person's browser does) and time it until rendered."""
    page = tabs.new_page()
    try:
        before = _cpu()
        wall = _timed(lambda: (page.goto(f"{base}/{path}", wait_until="load", timeout=300_000),
                               _rendered(page, heading)))
        after = _cpu()
        CPU.update({who: after[who] - before[who] for who in after})
        return wall
    finally:
        page.close()


def _open_candidate(tabs, base: str) -> float:
    """On the Advisor page, the time from clicking "Open on the Design page" to the Design
    page's results on screen."""
    page = tabs.new_page()
    try:
        page.goto(f"{base}/advisor", wait_until="load", timeout=300_000)
        _rendered(page, "Advisor")
        button = page.get_by_role("button", name="Open on the Design page")
        button.wait_for(timeout=300_000)

        def open_it():
            button.click()
            page.get_by_role("heading", name="Design", exact=True).first.wait_for(timeout=300_000)
            page.locator('[data-testid="stMetric"]').first.wait_for(timeout=300_000)
            _wait_idle(page)

        return _timed(open_it)
    finally:
        page.close()


# elements on the page by kind (Streamlit marks each with data-testid)
COUNT_JS = """() => {
  const ids = {};
  for (const el of document.querySelectorAll('[data-testid]')) {
    const t = el.getAttribute('data-testid'); ids[t] = (ids[t] || 0) + 1; }
  const out = {dom_nodes: document.querySelectorAll('*').length, svg_nodes: document.querySelectorAll('svg *').length,
               canvases: document.querySelectorAll('canvas').length};
  for (const k of ['stVegaLiteChart', 'stDataFrame', 'stElementContainer', 'stMarkdown', 'stCaptionContainer',
                   'stTextInput', 'stSelectbox', 'stMultiSelect', 'stNumberInput', 'stButton', 'stDownloadButton',
                   'stMetric', 'stAlert', 'stExpander', 'stTabs'])
    out[k.replace('st', '').toLowerCase()] = ids[k] || 0;
  return out;
}"""


def _process_kinds() -> dict:
    """CPU seconds so far of this bench's Chromium processes by kind (renderer, gpu-process,
    browser, utility)."""
    out: dict = {}
    for ticks, cmd in _my_processes().values():
        if b"chrom" not in cmd:
            continue
        # child processes rewrite their command line with spaces (not NULs) between arguments
        found = re.search(rb"--type=([a-z-]+)", cmd)
        kind = found.group(1).decode() if found else "browser"
        out[kind] = out.get(kind, 0.0) + ticks / _TICK
    return out


def breakdown(repeats: int = 2) -> dict:
    """Per page, the warm first render with the fewest CPU seconds of ``repeats``: elements,
    Chromium's counters for the tab and CPU seconds by process kind."""
    from playwright.sync_api import sync_playwright

    tmp = Path(tempfile.mkdtemp(prefix="matdb-bench-browser-"))
    env = dict(os.environ, MATDB_URL=f"sqlite:///{tmp / 'bench.sqlite'}", MATDB_CACHE_DIR=str(tmp / "cache"))
    out: dict = {"load_average_1min": os.getloadavg()[0]}
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=shutil.which("chromium"), args=CHROMIUM_ARGS)
            try:
                tabs = browser.new_context(viewport=VIEWPORT)
                with served(tmp / "streamlit.log", env=env, timeout_s=120) as base:
                    for path, heading in PAGES:  # cold visits: computed, cached
                        _first_render(tabs, base, path, heading)
                    for path, heading in PAGES:
                        best = None
                        for _ in range(repeats):
                            page = tabs.new_page()
                            try:
                                cdp = tabs.new_cdp_session(page)
                                cdp.send("Performance.enable")
                                k0 = _process_kinds()
                                page.goto(f"{base}/{path}", wait_until="load", timeout=300_000)
                                _rendered(page, heading)
                                k1 = _process_kinds()
                                metrics = {m["name"]: m["value"] for m in cdp.send("Performance.getMetrics")["metrics"]}
                                row = {"cpu_s": {k: round(k1[k] - k0.get(k, 0.0), 2) for k in k1},
                                       "tab": {k: round(metrics.get(k, 0.0), 3) for k in
                                               ("TaskDuration", "ScriptDuration", "LayoutDuration",
                                                "RecalcStyleDuration", "LayoutCount", "RecalcStyleCount")},
                                       "elements": page.evaluate(COUNT_JS)}
                                total = sum(row["cpu_s"].values())
                                if best is None or total < best[0]:
                                    best = (total, row)
                            finally:
                                page.close()
                        out[path or "materials"] = best[1]
            finally:
                browser.close()
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    out["load_average_1min_after"] = os.getloadavg()[0]
    return out


def _stats(out: dict, name: str, values: list[float]) -> None:
    """``<name>_s``: every repeat (``make bench`` prints their min / median), and the two
    figures apart."""
    out[f"{name}_s"] = list(values)
    out[f"{name}_min_s"] = min(values)
    out[f"{name}_median_s"] = statistics.median(values)


def run(repeats: int = 3) -> dict:
    chromium = shutil.which("chromium")
    if chromium is None:
        return {"skipped": "Debian chromium is not installed (apt-get install chromium)"}
    try:
        from playwright.sync_api import TimeoutError, sync_playwright
    except ImportError:
        return {"skipped": "python playwright is not installed (pip install playwright)"}

    tmp = Path(tempfile.mkdtemp(prefix="matdb-bench-browser-"))
    env = dict(os.environ, MATDB_URL=f"sqlite:///{tmp / 'bench.sqlite'}", MATDB_CACHE_DIR=str(tmp / "cache"))
    out: dict = {"load_average_1min": os.getloadavg()[0], "cpu_count": os.cpu_count(), "repeats": repeats}
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=chromium, args=CHROMIUM_ARGS)

            def fresh():  # a browser with nothing cached (a new context)
                return browser.new_context(viewport=VIEWPORT)

            try:
                with served(tmp / "streamlit.log", env=env, timeout_s=120) as base:
                    # a throwaway first visit starts the server's Python side (imports, database seeding)
                    out["server_warm_up_s"] = _first_render(fresh(), base, "", "Materials")
                    for path, heading in PAGES:  # cold: nothing computed, nothing in the browser's cache
                        try:
                            out[f"first_render_cold_{path or 'materials'}_s"] = _first_render(fresh(), base, path,
                                                                                               heading)
                        except TimeoutError as exc:  # a cold advisor on a loaded machine: say so, keep measuring
                            out[f"first_render_cold_{path or 'materials'}_s"] = f"timed out ({exc.__class__.__name__})"
                    browser_tabs = fresh()  # warm: new tabs of one browser
                    warm: dict = {path: [] for path, _ in PAGES}
                    cpu: dict = {(path, who): [] for path, _ in PAGES for who in ("browser", "server")}
                    for _ in range(repeats):
                        for path, heading in PAGES:
                            warm[path].append(_first_render(browser_tabs, base, path, heading))
                            for who in ("browser", "server"):
                                cpu[path, who].append(CPU[who])
                    for path, values in warm.items():
                        _stats(out, f"first_render_warm_{path or 'materials'}", values)
                    for (path, who), values in cpu.items():  # CPU seconds: what the load does not change
                        out[f"first_render_warm_{path or 'materials'}_{who}_cpu_min_s"] = min(values)
                    # per repeat, the slowest page of that round
                    _stats(out, "first_render_warm_worst", [max(r) for r in zip(*warm.values())])
                    out["open_candidate_cold_s"] = _open_candidate(fresh(), base)
                    _stats(out, "open_candidate_warm", [_open_candidate(browser_tabs, base) for _ in range(repeats)])
                # a new server on the same results cache: what a restart costs
                with served(tmp / "streamlit-restart.log", env=env, timeout_s=120) as base:
                    out["restart_server_warm_up_s"] = _first_render(fresh(), base, "", "Materials")
                    for path, heading in PAGES[2:4]:
                        out[f"first_render_restart_{path}_s"] = _first_render(browser_tabs, base, path, heading)
            finally:
                browser.close()
    except RuntimeError as exc:
        return {"skipped": str(exc)}
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    out["first_render_cold_worst_s"] = max((v for k, v in out.items() if k.startswith("first_render_cold_")
                                            and isinstance(v, float)), default=None)
    out["goal_first_render_s"] = GOAL_PAGE_S
    out["goal_open_candidate_warm_s"] = GOAL_OPEN_WARM_S
    out["first_render_goal_met_warm"] = out["first_render_warm_worst_median_s"] < GOAL_PAGE_S
    out["open_candidate_goal_met"] = out["open_candidate_warm_median_s"] < GOAL_OPEN_WARM_S
    out["load_average_1min_after"] = os.getloadavg()[0]
    return out


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeats", type=int, default=3, help="warm visits of each page (default 3)")
    ap.add_argument("--breakdown", action="store_true",
                    help="what the browser spends each page's warm first render on (elements, tab counters, CPU by process)")
    args = ap.parse_args()
    res = breakdown(args.repeats) if args.breakdown else run(args.repeats)
    for k, v in res.items():
        if isinstance(v, list):
            v = "[" + ", ".join(f"{x:.3g}" for x in v) + "]"
        print(f"{k}: {v:.3g}" if isinstance(v, float) else f"{k}: {v}")
    sys.exit(0)
