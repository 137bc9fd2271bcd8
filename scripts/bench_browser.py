"""The page in a real browser: first render of each page and opening an advisor candidate
on the Design page, timed with Debian's headless Chromium (playwright drives it; never
playwright's own browser download).

Goals (this 2-core machine, whatever its load; the load average is printed beside):
first render of each page under 3 s; opening an advisor candidate on the Design page
under 2 s with a warm cache (the same candidate opened a second time).

The server runs on a scratch database in a temporary folder (seeded on first use), so
the bench never touches a user's database. Run alone: ``python scripts/bench_browser.py``.
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]
PAGES = [("", "Materials"), ("magnets", "Magnets"), ("design", "Design"), ("advisor", "Advisor"),
         ("lab_values", "Lab values")]
GOAL_PAGE_S = 3.0
GOAL_OPEN_WARM_S = 2.0
IDLE_JS = ("() => !document.querySelector('[data-stale=\"true\"]')"
           " && !document.querySelector('[data-testid=\"stStatusWidget\"] [data-testid=\"stStatusWidgetRunningIcon\"]')"
           " && !(document.querySelector('[data-testid=\"stStatusWidget\"]') || {innerText: ''}).innerText.includes('Running')")


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


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


def run() -> dict:
    chromium = shutil.which("chromium")
    if chromium is None:
        return {"skipped": "Debian chromium is not installed (apt-get install chromium)"}
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        return {"skipped": "python playwright is not installed (pip install playwright)"}
    from matdb.cli.serve import serve_command

    tmp = tempfile.mkdtemp(prefix="matdb-bench-browser-")
    env = os.environ.copy()
    env["MATDB_URL"] = f"sqlite:///{Path(tmp) / 'bench.sqlite'}"
    env.setdefault("MATDB_CACHE_DIR", str(Path(tmp) / "cache"))
    port = _free_port()
    log = open(Path(tmp) / "streamlit.log", "w")
    proc = subprocess.Popen(serve_command(port), cwd=str(REPO), env=env, stdout=log, stderr=subprocess.STDOUT)
    base = f"http://127.0.0.1:{port}"
    out: dict = {"load_average_1min": os.getloadavg()[0], "cpu_count": os.cpu_count()}
    try:
        deadline = time.monotonic() + 120
        while True:
            try:
                with urllib.request.urlopen(base + "/_stcore/health", timeout=2) as r:
                    if r.read().decode().strip() == "ok":
                        break
            except OSError:
                pass
            if proc.poll() is not None or time.monotonic() > deadline:
                return {"skipped": f"streamlit did not start; see {log.name}"}
            time.sleep(0.3)
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=chromium, args=ARGS)
            try:
                page = browser.new_page(viewport={"width": 1400, "height": 1400})
                # a throwaway first visit starts the server's Python side (imports, database seeding)
                out["server_warm_up_s"] = _timed(lambda: (page.goto(base, wait_until="load", timeout=300_000),
                                                          _rendered(page, "Materials")))
                for cold_or_warm in ("cold", "warm"):
                    for path, heading in PAGES:
                        page.close()
                        page = browser.new_page(viewport={"width": 1400, "height": 1400})
                        t = _timed(lambda: (page.goto(f"{base}/{path}", wait_until="load", timeout=300_000),
                                            _rendered(page, heading)))
                        out[f"first_render_{cold_or_warm}_{path or 'materials'}_s"] = t
                # opening the advisor's first candidate, twice (the second with a warm cache)
                for attempt in ("cold", "warm"):
                    page.close()
                    page = browser.new_page(viewport={"width": 1400, "height": 1400})
                    page.goto(f"{base}/advisor", wait_until="load", timeout=300_000)
                    _rendered(page, "Advisor")
                    page.get_by_role("button", name="Open on the Design page").wait_for(timeout=300_000)

                    def open_it():
                        page.get_by_role("button", name="Open on the Design page").click()
                        page.get_by_role("heading", name="Design", exact=True).first.wait_for(timeout=300_000)
                        page.locator('[data-testid="stMetric"]').first.wait_for(timeout=300_000)
                        _wait_idle(page)

                    out[f"open_candidate_{attempt}_s"] = _timed(open_it)
            finally:
                browser.close()
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            proc.kill()
        log.close()
        shutil.rmtree(tmp, ignore_errors=True)
    warm = [v for k, v in out.items() if k.startswith("first_render_warm_")]
    cold = [v for k, v in out.items() if k.startswith("first_render_cold_")]
    out["first_render_cold_worst_s"] = max(cold)
    out["first_render_warm_worst_s"] = max(warm)
    out["goal_first_render_s"] = GOAL_PAGE_S
    out["goal_open_candidate_warm_s"] = GOAL_OPEN_WARM_S
    out["first_render_goal_met_warm"] = max(warm) < GOAL_PAGE_S
    out["open_candidate_goal_met"] = out["open_candidate_warm_s"] < GOAL_OPEN_WARM_S
    out["load_average_1min_after"] = os.getloadavg()[0]
    return out


if __name__ == "__main__":
    res = run()
    for k, v in res.items():
        print(f"{k}: {v:.3g}" if isinstance(v, float) else f"{k}: {v}")
    sys.exit(0)
