"""Make docs/report-page.png: the first page of a design report as headless Chromium shows it.

    .venv/bin/python scripts/report_page.py [DESIGN.toml] [-o docs/report-page.png]

Writes the report of the demo design examples/plate_checkerboard_2x2.toml with
``matdb report`` into a temporary folder, opens it in Debian's Chromium (Python
playwright driving the system browser; never playwright's own browser download) with every
network request refused, and saves a screenshot of the top of the page. The README shows
the result. The browser test (tests/test_report_browser.py) uses the same functions.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]
PAGE_W, PAGE_H = 900, 1273  # CSS px: an A4 page's proportions (210 x 297)


def make_report(design: Path, out_html: Path) -> Path:
    """``matdb report DESIGN -o OUT.html`` in this interpreter's environment."""
    subprocess.run([sys.executable, "-m", "matdb", "report", str(design), "-o", str(out_html)], check=True)
    return out_html


def screenshot(html: Path, png: Path, full_page: bool = False) -> dict:
    """Open ``html`` offline in Chromium and save a screenshot; returns what the page
    asked for from outside (``blocked``: URLs refused) and how many charts it drew."""
    from playwright.sync_api import sync_playwright

    chromium = shutil.which("chromium")
    if chromium is None:
        raise SystemExit("Debian chromium is not installed (apt-get install chromium)")
    blocked: list[str] = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=chromium, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": PAGE_W, "height": PAGE_H})

            def route(r):
                if r.request.url.startswith(("file:", "data:", "about:")):
                    r.continue_()
                else:
                    blocked.append(r.request.url)
                    r.abort()

            page.route("**/*", route)
            page.goto(html.resolve().as_uri(), wait_until="load")
            page.wait_for_selector("h1")
            page.wait_for_selector("figure svg")
            charts = page.eval_on_selector_all(
                "figure svg",
                "els => els.filter(e => e.getBoundingClientRect().width > 50).length")
            title = page.inner_text("h1")
            png.parent.mkdir(parents=True, exist_ok=True)
            page.screenshot(path=str(png), full_page=full_page)
        finally:
            browser.close()
    return {"blocked": blocked, "charts": charts, "title": title}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("design", nargs="?", default=str(REPO / "examples" / "plate_checkerboard_2x2.toml"))
    ap.add_argument("-o", "--output", default=str(REPO / "docs" / "report-page.png"))
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="matdb-report-") as tmp:
        html = make_report(Path(args.design), Path(tmp) / "report.html")
        info = screenshot(html, Path(args.output))
    if info["blocked"]:
        print(f"warning: the page asked for {info['blocked']}", file=sys.stderr)
    print(f"wrote {args.output} ({info['charts']} charts drawn)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
