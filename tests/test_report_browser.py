"""The HTML report in a real browser: Debian's headless Chromium (driven by Python
playwright, never playwright's own browser download) opens it offline, with every
network request refused, draws its charts and takes a screenshot
(test-artifacts/report-page.png)."""

from __future__ import annotations

import importlib.util
import shutil
from pathlib import Path

import numpy as np
import pytest

REPO = Path(__file__).resolve().parent.parent
ARTIFACTS = REPO / "test-artifacts"

pytestmark = [
    pytest.mark.browser,
    pytest.mark.slow,
    pytest.mark.skipif(shutil.which("chromium") is None,
                       reason="Debian chromium is not installed (apt-get install chromium; CI does)"),
]


def _script():
    spec = importlib.util.spec_from_file_location("report_page", REPO / "scripts" / "report_page.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_report_opens_offline_and_screenshot(tmp_path):
    pytest.importorskip("playwright.sync_api")
    from PIL import Image

    rp = _script()
    html = rp.make_report(REPO / "examples" / "plate_checkerboard_2x2.toml", tmp_path / "report.html")
    png = ARTIFACTS / "report-page.png"
    info = rp.screenshot(html, png, full_page=True)
    assert info["blocked"] == []  # self-contained: nothing fetched
    assert info["title"].startswith("Design report")
    assert info["charts"] >= 3  # lift curve, field map with polarity, stability over size
    px = np.asarray(Image.open(png).convert("L"))
    assert px.shape[0] > rp.PAGE_H  # the full page is longer than one screen
    assert np.count_nonzero(px < 200) > 0.01 * px.size  # not blank
