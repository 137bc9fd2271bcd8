"""Design page, floating-magnet mode, in real headless Chromium (Debian's, driven by
playwright): a payload range typed on the page gives the schedule over that range."""

from __future__ import annotations

import importlib.util
from pathlib import Path


REPO = Path(__file__).resolve().parent.parent
_spec = importlib.util.spec_from_file_location("_matdb_browser_helpers", REPO / "tests" / "test_browser.py")
_B = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_B)

pytestmark = _B.pytestmark
server = _B.server
browser = _B.browser


def test_floating_magnet_payload_range_in_browser(server, browser):
    page = _B._open(browser, f"{server}/design")
    try:
        page.get_by_role("heading", name="Design", exact=True).first.wait_for(timeout=60_000)
        _B._wait_idle(page)
        page.get_by_text("a design file (TOML)").click()
        _B._wait_idle(page)
        area = page.get_by_label("Design (TOML; every quantity with its unit)")
        area.fill((REPO / "examples" / "floating_magnet.toml").read_text())
        area.press("Control+Enter")
        page.get_by_text("Floating magnet: lifter distance").first.wait_for(timeout=120_000)
        _B._wait_idle(page)
        box = page.get_by_label("Payload range (e.g. 0 g..5 g; empty: 0 to the largest payload)")
        box.fill("0 g..1 g")
        box.press("Enter")
        _B._wait_idle(page)
        page.get_by_text("Narrowest window of plate distances over the schedule").first.wait_for(timeout=120_000)
        page.get_by_text("Image-dipole idealisation, for comparison only").first.wait_for(timeout=60_000)
        _B._no_exception(page, "Design, floating magnet with a payload range")
        _B.ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(_B.ARTIFACTS / "page-design-floating-range.png"), full_page=True)
        assert page.outside == [], f"the page fetched outside resources: {page.outside[:5]}"
    finally:
        page.close()
