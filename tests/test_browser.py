"""The local web page in a real browser: starts the app on a free localhost port, drives
Debian's headless Chromium with Python playwright (never playwright's own browser
download), saves a screenshot of each page under test-artifacts/, and fails if a page
shows a Python exception."""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import time
import urllib.request
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
ARTIFACTS = REPO / "test-artifacts"
CHROMIUM = shutil.which("chromium")
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(CHROMIUM is None, reason="Debian chromium is not installed (apt-get install chromium; CI does)"),
]

# (url path, heading) of every page
PAGES = [("", "Materials"), ("magnets", "Magnets"), ("design", "Design"), ("advisor", "Advisor"),
         ("lab_values", "Lab values")]


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def server():
    from matdb.commands.serve import serve_command
    from matdb.db import get_engine

    get_engine()  # create and seed the test database before the page opens it
    port = _free_port()
    env = os.environ.copy()  # MATDB_URL from tests/conftest.py: the page reads the test database
    ARTIFACTS.mkdir(exist_ok=True)
    log = open(ARTIFACTS / "streamlit.log", "w")
    proc = subprocess.Popen(serve_command(port), cwd=str(REPO), env=env, stdout=log, stderr=subprocess.STDOUT)
    base = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 90
    try:
        while True:
            if proc.poll() is not None:
                raise RuntimeError(f"streamlit exited with {proc.returncode}; see {log.name}")
            try:
                with urllib.request.urlopen(base + "/_stcore/health", timeout=2) as r:
                    if r.read().decode().strip() == "ok":
                        break
            except OSError:
                pass
            if time.monotonic() > deadline:
                raise RuntimeError("streamlit did not answer /_stcore/health within 90 s")
            time.sleep(0.3)
        yield base
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()
        log.close()


@pytest.fixture(scope="module")
def browser():
    sync_api = pytest.importorskip("playwright.sync_api")
    with sync_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        try:
            yield b
        finally:
            b.close()


def _open(browser, url: str):
    page = browser.new_page(viewport={"width": 1400, "height": 2400})
    base = url.split("/", 3)[:3]
    page.outside = []  # requests to anything but the local server (the page must work offline)
    page.on("request", lambda r: r.url.split("/", 3)[:3] != base and not r.url.startswith(("data:", "blob:"))
            and page.outside.append(r.url))
    page.goto(url, wait_until="load", timeout=60_000)
    return page


def _no_exception(page, name: str) -> None:
    errors = page.locator('[data-testid="stException"]')
    if errors.count():
        raise AssertionError(f"page {name!r} shows a Python exception: {errors.first.inner_text()[:2000]}")


def _wait_idle(page) -> None:
    """Wait until the script run has ended: no running indicator and no stale (greyed,
    from the previous run) elements, twice in a row half a second apart."""
    idle = ("() => !document.querySelector('[data-stale=\"true\"]')"
            " && !document.querySelector('[data-testid=\"stStatusWidget\"] [data-testid=\"stStatusWidgetRunningIcon\"]')"
            " && !(document.querySelector('[data-testid=\"stStatusWidget\"]') || {innerText: ''}).innerText.includes('Running')")
    for _ in range(2):
        page.wait_for_timeout(500)
        page.wait_for_function(idle, timeout=120_000)


@pytest.mark.parametrize("path,heading", PAGES)
def test_page_renders_and_screenshot(server, browser, path, heading):
    page = _open(browser, f"{server}/{path}")
    try:
        page.get_by_role("heading", name=heading, exact=True).first.wait_for(timeout=60_000)
        if path in ("", "magnets", "design", "advisor"):
            page.locator('[data-testid="stVegaLiteChart"] >> visible=true').first.wait_for(timeout=60_000)
            page.locator('[data-testid="stDataFrame"] >> visible=true').first.wait_for(timeout=60_000)
        _wait_idle(page)
        _no_exception(page, heading)
        # the page runs inside the app's navigation (titles in plain words), not as a bare script
        nav = page.locator('[data-testid="stSidebarNav"]').inner_text()
        assert [t.strip() for t in nav.splitlines() if t.strip()] == [h for _, h in PAGES]
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"page-{path or 'materials'}.png"), full_page=True)
        _no_exception(page, heading)
        assert page.outside == [], f"page {heading!r} fetched outside resources: {page.outside[:5]}"
    finally:
        page.close()


def test_materials_unit_selector_in_browser(server, browser):
    page = _open(browser, server)
    try:
        page.locator('[data-testid="stDataFrame"] >> visible=true').first.wait_for(timeout=60_000)
        page.get_by_role("combobox", name="Show susceptibility as").click()
        page.get_by_role("option", name="CGS molar, cm^3/mol (emu)").click()
        box = page.get_by_role("combobox", name="Show susceptibility as")
        page.wait_for_timeout(500)
        assert box.input_value() == "CGS molar, cm^3/mol (emu)"
        _wait_idle(page)
        _no_exception(page, "Materials, CGS molar")
        page.screenshot(path=str(ARTIFACTS / "page-materials-cgs-molar.png"), full_page=True)
    finally:
        page.close()


def test_advisor_form_fills_and_ranks_in_browser(server, browser):
    page = _open(browser, f"{server}/advisor")
    try:
        page.get_by_role("heading", name="Advisor", exact=True).first.wait_for(timeout=60_000)
        page.locator('[data-testid="stDataFrame"] >> visible=true').first.wait_for(timeout=120_000)
        mass = page.get_by_label("Payload mass")
        mass.fill("0.5 g")
        page.get_by_label("Footprint (x by y)").fill("20 mm x 20 mm")
        page.get_by_role("button", name="Rank candidates").click()
        _wait_idle(page)
        page.locator('[data-testid="stDataFrame"] >> visible=true').first.wait_for(timeout=120_000)
        page.get_by_text("Ranked for 0.5 g over 20 mm x 20 mm").first.wait_for(timeout=120_000)
        _wait_idle(page)
        _no_exception(page, "Advisor, 0.5 g over 20 mm x 20 mm")
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "page-advisor-ranked.png"), full_page=True)
        page.get_by_role("button", name="Open on the Design page").click()
        page.get_by_role("heading", name="Design", exact=True).first.wait_for(timeout=60_000)
        page.locator('[data-testid="stVegaLiteChart"] >> visible=true').first.wait_for(timeout=120_000)
        _wait_idle(page)
        _no_exception(page, "Design, opened from the advisor")
        page.screenshot(path=str(ARTIFACTS / "page-design-from-advisor.png"), full_page=True)
    finally:
        page.close()


def test_design_dynamics_section_in_browser(server, browser):
    """Design page, Dynamics section: tick the box, the modes table and the chart of Q
    against pressure appear without an exception (screenshot saved)."""
    page = _open(browser, f"{server}/design")
    try:
        page.get_by_role("heading", name="Design", exact=True).first.wait_for(timeout=60_000)
        page.get_by_role("heading", name="Dynamics: modes, damping, Q and noise floor").first.wait_for(timeout=120_000)
        _wait_idle(page)
        page.get_by_text("Compute modes, damping and noise (a few seconds)").click()
        page.get_by_text("Ring-down: time for the amplitude to fall to 1/e", exact=False).first.wait_for(timeout=180_000)
        _wait_idle(page)
        _no_exception(page, "Design, dynamics")
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "page-design-dynamics.png"), full_page=True)
        assert page.outside == [], f"fetched outside resources: {page.outside[:5]}"
    finally:
        page.close()
