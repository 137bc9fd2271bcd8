"""Report and drawing timings (``make bench``): the demo plate design, one run each.

Splits the report into its parts so a slow one is visible: the levitate cases, the
dynamics cases, the charts (vl-convert), the HTML template and the PDF (WeasyPrint).
"""

from __future__ import annotations

import time
from pathlib import Path

DESIGN = Path(__file__).resolve().parent.parent / "examples" / "plate_checkerboard_2x2.toml"


def _t(fn):
    t0 = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t0


def run() -> dict:
    from matdb.reporting import report
    from matdb.design import load_design_text
    from matdb.reporting.drawing import drawing_bytes

    text = DESIGN.read_text(encoding="utf-8")
    design = load_design_text(text)
    res = {}
    cases, res["levitate_cases_s"] = _t(lambda: report.run_cases(design))
    _, res["dynamics_cases_s"] = _t(lambda: report._dynamics(design))
    _, res["charts_s"] = _t(lambda: report._charts_plate(design, cases["nominal"]))
    ctx, res["build_report_s"] = _t(lambda: report.build_report(text))
    html, res["render_html_s"] = _t(lambda: report.render_html(ctx))
    _, res["pdf_s"] = _t(lambda: report.html_to_pdf(html))
    _, res["drawing_dxf_s"] = _t(lambda: drawing_bytes(text, "dxf"))
    _, res["drawing_svg_s"] = _t(lambda: drawing_bytes(text, "svg"))
    res["html_kb"] = round(len(html.encode()) / 1024)
    return res
