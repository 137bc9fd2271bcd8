"""The local web page in a real browser: starts the app on a free localhost port, drives
Debian's headless Chromium with Python playwright (never playwright's own browser
download), saves a screenshot of each page under test-artifacts/, and fails if a page
shows a Python exception."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

from webapp._server import CHROMIUM_ARGS, served

REPO = Path(__file__).resolve().parent.parent
ARTIFACTS = REPO / "test-artifacts"
CHROMIUM = shutil.which("chromium")

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(CHROMIUM is None, reason="Debian chromium is not installed (apt-get install chromium; CI does)"),
]

# (url path, heading) of every page
PAGES = [("", "Materials"), ("magnets", "Magnets"), ("design", "Design"), ("advisor", "Advisor"),
         ("lab_values", "Lab values")]


@pytest.fixture(scope="module")
def server():
    from matdb.data.db import get_engine

    get_engine()  # create and seed the test database before the page opens it
    ARTIFACTS.mkdir(exist_ok=True)
    # MATDB_URL from tests/conftest.py: the page reads the test database
    with served(ARTIFACTS / "streamlit.log", env=dict(os.environ, MATDB_PAGE_WARM_UP="1")) as base:
        yield base


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
            # the advisor ranks on its first visit: on a loaded 2-core machine that can take minutes
            page.locator('[data-testid="stVegaLiteChart"] >> visible=true').first.wait_for(timeout=240_000)
            page.locator('[data-testid="stDataFrame"] >> visible=true').first.wait_for(timeout=240_000)
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
        mass = page.get_by_role("textbox", name="Mass", exact=True)
        mass.fill("0.5 g")
        page.get_by_label("Footprint (x by y", exact=False).fill("20 mm x 20 mm")
        page.get_by_role("button", name="Rank candidates").click()
        _wait_idle(page)
        page.locator('[data-testid="stDataFrame"] >> visible=true').first.wait_for(timeout=120_000)
        page.get_by_text("Ranked for a payload of 0.5 g over 20 mm x 20 mm").first.wait_for(timeout=120_000)
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


# ---------------------------------------------------------------------------
# the page as a practitioner uses it: nothing cut off, units shown, boxes that follow
# ---------------------------------------------------------------------------

WIDTHS = (1000, 1400, 1920)

# every form element, label and metric: its text must fit (scrollWidth not beyond clientWidth)
CUT_OFF_JS = """() => {
  const sel = 'input[type="text"], input:not([type]), textarea, [data-testid="stWidgetLabel"], '
            + '[data-testid="stMetricValue"], [data-testid="stMetricValue"] *, [data-testid="stMetricLabel"], '
            + '[data-testid="stMetricLabel"] *, [data-testid="stCheckbox"] label, [data-baseweb="select"] [value], '
            + '[data-baseweb="select"] div[title]';
  const out = [];
  for (const el of document.querySelectorAll(sel)) {
    const r = el.getBoundingClientRect();
    if (r.width === 0 || r.height === 0) continue;
    if (el.scrollWidth > el.clientWidth + 1) {
      out.push({what: el.getAttribute('aria-label') || el.innerText || el.value || el.tagName,
                scroll: el.scrollWidth, client: el.clientWidth});
    }
  }
  return out;
}"""


def _open_at(browser, url: str, width: int):
    page = browser.new_page(viewport={"width": width, "height": 2400})
    page.goto(url, wait_until="load", timeout=60_000)
    return page


def _ready(page, heading: str) -> None:
    # the advisor ranks on its first visit: on a loaded 2-core machine that can take minutes
    page.get_by_role("heading", name=heading, exact=True).first.wait_for(timeout=120_000)
    page.locator('[data-testid="stVegaLiteChart"]:visible, [data-testid="stDataFrame"]:visible'
                 ).first.wait_for(timeout=300_000)
    _wait_idle(page)


@pytest.mark.slow
@pytest.mark.parametrize("width", WIDTHS)
@pytest.mark.parametrize("path,heading", PAGES)
def test_nothing_cut_off(server, browser, path, heading, width):
    """Every text field, label and metric shows its whole text at 1000, 1400 and 1920 px
    (element scroll width not larger than its client width)."""
    page = _open_at(browser, f"{server}/{path}", width)
    try:
        _ready(page, heading)
        _no_exception(page, heading)
        cut = page.evaluate(CUT_OFF_JS)
        if width == 1400:
            page.screenshot(path=str(ARTIFACTS / f"width-{width}-{path or 'materials'}.png"), full_page=True)
        assert cut == [], f"{heading} at {width} px: cut off {cut[:6]}"
        # charts fit their column: no chart wider than the page's main block
        wide = page.evaluate("""() => {
          const main = document.querySelector('[data-testid="stMainBlockContainer"]') || document.body;
          const w = main.getBoundingClientRect().right + 1;
          return [...document.querySelectorAll('[data-testid="stVegaLiteChart"]')]
            .filter(c => c.getBoundingClientRect().right > w).length;
        }""")
        assert wide == 0, f"{heading} at {width} px: {wide} chart(s) run past the page"
        _charts_are_accessible(page, f"{heading} at {width} px")
    finally:
        page.close()


# per SVG chart (Vega draws its title, axis titles and legends as SVG text and paths): the
# title, the axis titles, and per legend whether its entries differ by more than colour
CHART_TEXT_JS = """() => [...document.querySelectorAll('[data-testid="stVegaLiteChart"]')].map(c => {
  const svg = c.querySelector('svg');
  if (!svg) return {canvas: true};
  const texts = sel => [...svg.querySelectorAll(sel)].map(t => t.textContent.trim()).filter(Boolean);
  const legends = [...svg.querySelectorAll('g.role-legend')].map(g => {
    const symbols = [...g.querySelectorAll('.role-legend-symbol path')];
    const looks = new Set(symbols.map(p => (p.getAttribute('d') || '') + '|' + (p.getAttribute('stroke-dasharray') || '')));
    return {name: [...g.querySelectorAll('.role-legend-title text')].map(t => t.textContent).join(' '),
            entries: symbols.length, looks: looks.size};
  });
  return {title: texts('.role-title-text text').join(' '), axes: texts('.role-axis-title text'), legends,
          labelled: texts('.mark-text.role-mark text').length};
})"""

#: legends whose entries may differ by colour alone: names, each also in the tooltip and the tables
COLOUR_ONLY_OK = ("design", "mode", "quantity")


def _charts_are_accessible(page, where: str) -> None:
    """Colour is never the only carrier of meaning and every chart says what it shows:
    a title, axis titles, a unit (or "dimensionless") on a numeric axis; legends of
    verdicts, statuses, grades and polarity differ by shape, dash or a text label too (WCAG 2.2,
    success criterion 1.4.1 "Use of Color")."""
    for i, c in enumerate(page.evaluate(CHART_TEXT_JS)):
        if c.get("canvas"):
            continue
        assert c["title"], f"{where}: chart {i} has no title"
        assert c["axes"], f"{where}: chart {i} ({c['title']}) has no axis titles"
        assert any("(" in a or "dimensionless" in a for a in c["axes"]), f"{where}: {c['title']}: no unit in {c['axes']}"
        for leg in c["legends"]:
            if leg["entries"] > 1 and not any(w in leg["name"] for w in COLOUR_ONLY_OK):
                # entries drawn in other shapes or dashes, or the marks labelled in words (N/S)
                assert leg["looks"] > 1 or c["labelled"], f"{where}: {c['title']}: legend {leg['name']!r} tells entries apart by colour only"


def _metric_text(page, label: str) -> str:
    m = page.locator('[data-testid="stMetric"]').filter(has_text=label).first
    return m.locator('[data-testid="stMetricValue"]').inner_text().strip()


@pytest.mark.parametrize("width", WIDTHS)
def test_design_metrics_carry_their_units(server, browser, width):
    page = _open_at(browser, f"{server}/design", width)
    try:
        _ready(page, "Design")
        page.locator('[data-testid="stMetric"]').first.wait_for(timeout=120_000)
        gap = _metric_text(page, "Equilibrium gap")
        dist = _metric_text(page, "0.5 mT distance")
        assert gap.endswith(" mm") and float(gap.split()[0]) > 0, gap
        assert dist.endswith(" cm") and float(dist.split()[0]) > 0, dist
        assert page.evaluate(CUT_OFF_JS) == []
        # the form has the coldest and the hottest temperature, as design files do
        assert page.get_by_role("textbox", name="Coldest").input_value() and \
            page.get_by_role("textbox", name="Hottest").input_value()
    finally:
        page.close()


def _rank(page, mass: str) -> None:
    page.get_by_role("textbox", name="Mass", exact=True).fill(mass)
    page.get_by_role("button", name="Rank candidates").click()
    page.get_by_text(f"Ranked for a payload of {mass} over").first.wait_for(timeout=300_000)
    _wait_idle(page)


def _wide(width: int):
    """1400 px in every run; 1000 and 1920 px with the slow tests."""
    return width if width == 1400 else pytest.param(width, marks=pytest.mark.slow)


@pytest.mark.parametrize("width", [_wide(w) for w in WIDTHS])
def test_advisor_second_ranking_box_follows_and_open_fills_the_form(server, browser, width):
    page = _open_at(browser, f"{server}/advisor", width)
    try:
        _ready(page, "Advisor")
        _rank(page, "0.3 g")
        _rank(page, "2 g")
        _no_exception(page, "Advisor, second ranking")
        best = page.locator('[data-testid="stAlert"]').filter(has_text="Best: ").first
        best_text = best.inner_text() if best.count() else ""
        shown = page.get_by_role("combobox", name="Candidate").input_value().strip()
        assert shown.startswith("#1: "), shown
        if best_text:  # the candidate box names the first row of the current ranking
            assert shown.rstrip(".") in best_text, (shown, best_text)
        material = shown.split(": ", 1)[1].split(" ", 1)[0]
        page.get_by_role("button", name="Open on the Design page").click()
        page.get_by_role("heading", name="Design", exact=True).first.wait_for(timeout=120_000)
        page.locator('[data-testid="stMetric"]').first.wait_for(timeout=300_000)
        _wait_idle(page)
        _no_exception(page, "Design, opened from the advisor")
        # the form is filled (not only the design-file editor)
        assert page.get_by_role("textbox", name="Payload mass").input_value() == "2 g"
        assert page.get_by_role("combobox", name="Plate material").input_value() == material
        assert page.evaluate(CUT_OFF_JS) == []
        page.screenshot(path=str(ARTIFACTS / f"page-design-opened-candidate-{width}.png"), full_page=True)
    finally:
        page.close()


@pytest.mark.parametrize("width", [_wide(w) for w in WIDTHS])
def test_advisor_rejection_says_what_was_needed_and_what_was_got(server, browser, width):
    """A payload no plate lifts (50 g over 17 mm: far beyond the about 1 g a graphite plate
    carries there, common practice, no source): every candidate is rejected and the one
    in the box says the requirement it missed and by how much."""
    page = _open_at(browser, f"{server}/advisor", width)
    try:
        _ready(page, "Advisor")
        _rank(page, "50 g")
        _no_exception(page, "Advisor, 50 g")
        page.get_by_text("No candidate floats this payload in the worst case").first.wait_for(timeout=60_000)
        rejected = page.locator('[data-testid="stAlert"]').filter(has_text="Rejected:").first.inner_text()
        assert "worst-case margin" in rejected and "needs 1.00" in rejected, rejected
        assert page.evaluate(CUT_OFF_JS) == []
    finally:
        page.close()


# the values chart: every point's centre inside the plot area, and the uncertainty bars drawn
VALUES_CHART_JS = """() => {
  const c = [...document.querySelectorAll('[data-testid="stVegaLiteChart"]')].find(
      c => (c.querySelector('.role-title-text') || {textContent: ''}).textContent.includes('Susceptibility values'));
  if (!c) return null;
  const plot = c.querySelector('svg g.root path.background').getBoundingClientRect();
  const pts = [...c.querySelectorAll('.mark-symbol.role-mark path')].map(p => {
    const r = p.getBoundingClientRect(); return [(r.left + r.right) / 2, (r.top + r.bottom) / 2]; });
  const bars = [...c.querySelectorAll('.mark-rule.role-mark line')].map(l => l.getBoundingClientRect().height);
  return {plot: [plot.left, plot.top, plot.right, plot.bottom], pts, bars};
}"""


@pytest.mark.parametrize("width", [_wide(w) for w in WIDTHS])
def test_lab_values_record_clears_the_form_and_the_box_follows(server, browser, width):
    from matdb.data import catalog
    from matdb.data import lab_store

    before = catalog.get_material("copper")
    page = _open_at(browser, f"{server}/lab_values", width)
    new_id = None
    try:
        _ready(page, "Lab values")
        page.get_by_role("combobox", name="Material", exact=True).click()
        page.get_by_role("option", name="copper", exact=False).first.click()
        _wait_idle(page)
        temp = page.get_by_role("textbox", name="Temperature (optional; empty: not stated)")
        assert temp.get_attribute("placeholder") in (None, ""), "a placeholder would look like a stored default"
        chi = page.get_by_label("chi (a number is SI volume", exact=False)
        chi.fill(repr(before.chi_si))  # the handbook value again: the physics of other tests stays put
        page.get_by_role("textbox", name="Uncertainty (optional", exact=False).fill("5%")
        page.get_by_label("Source note (required", exact=False).first.fill("regression check: browser test entry")
        page.get_by_role("button", name="Record", exact=True).click()
        page.get_by_text("Recorded value").first.wait_for(timeout=120_000)
        _wait_idle(page)
        msg = page.get_by_text("Recorded value").first.inner_text()
        new_id = int(msg.split("Recorded value ")[1].split()[0])
        # one number format: the message prints chi as the info box does (scientific)
        info = page.locator('[data-testid="stAlert"]').filter(has_text="In use by").first.inner_text()
        assert "e-0" in msg and "e-0" in info
        assert "temperature not stated" in msg
        # the form is cleared (no accidental double entry) and the box shows the value now in use
        assert page.get_by_label("chi (a number is SI volume", exact=False).input_value() == ""
        assert page.get_by_label("Source note (required", exact=False).first.input_value() == ""
        assert page.get_by_role("combobox", name="Value to use").input_value() == f"{new_id} (in use now)"
        # the chart: every point inside the axes, the new value's uncertainty drawn as a bar
        vc = page.evaluate(VALUES_CHART_JS)
        assert vc is not None and vc["pts"], "no values chart"
        left, top, right, bottom = vc["plot"]
        for x, y in vc["pts"]:
            assert left - 1 <= x <= right + 1 and top - 1 <= y <= bottom + 1, (x, y, vc["plot"])
        assert any(h > 2 for h in vc["bars"]), vc["bars"]
        assert page.evaluate(CUT_OFF_JS) == []
    finally:
        page.close()
        if new_id is not None:
            lab_store.retract(new_id, "browser test entry, removed", "copper")


def test_design_dynamics_section_in_browser(server, browser):
    """Design page, Dynamics section: tick the box, the modes table and the chart of Q
    against pressure appear without an exception (screenshot saved)."""
    page = _open(browser, f"{server}/design")
    try:
        page.get_by_role("heading", name="Design", exact=True).first.wait_for(timeout=60_000)
        # a view built when chosen: open its tab
        page.get_by_role("tab", name="Dynamics: modes, damping, Q, noise").first.click(timeout=120_000)
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


def test_design_result_is_cached_and_a_new_lab_value_recomputes(server, browser):
    """Regression check of the results cache in the real browser: a second visit reads the
    result from the cache; a measured value of the plate material that takes over computes
    afresh (a weaker diamagnet floats lower: lift is proportional to |chi|, Simon and Geim,
    J. Appl. Phys. 87, 6200 (2000)); after its retraction the first result comes back."""
    from matdb.data import catalog
    from matdb.data import lab_store as labvalues

    def visit() -> tuple[str, str]:
        page = _open_at(browser, f"{server}/design", 1400)
        try:
            _ready(page, "Design")
            page.locator('[data-testid="stMetric"]').first.wait_for(timeout=300_000)
            _no_exception(page, "Design")
            how = page.get_by_text("results cache", exact=False).or_(page.get_by_text("Computed now", exact=False))
            return _metric_text(page, "Equilibrium gap"), how.first.inner_text()
        finally:
            page.close()

    first, _ = visit()
    again, how = visit()
    assert again == first and how.startswith("From the results cache"), how
    pg = catalog.get_material("pyrolytic-graphite")
    row = labvalues.record_material_value(
        "pyrolytic-graphite", chi_perp=repr(pg.chi_perp_si * 0.9), chi_par=repr(pg.chi_par_si),
        source="regression check: browser cache test", date="2026-10-06")
    try:
        weaker, how = visit()
        assert how.startswith("Computed now"), how
        assert float(weaker.split()[0]) < float(first.split()[0]), (weaker, first)
    finally:
        labvalues.retract(row["value_id"], "browser cache test done", "pyrolytic-graphite")
    back, how = visit()
    assert back == first and how.startswith("From the results cache"), how
