"""Download buttons for a design's report (HTML, PDF) and drawing (DXF, SVG).

The report takes a while (three temperatures, charts), so it is made when asked for and
cached by the design text; the page's own cached levitate result is reused for the
nominal case. No physics here: :mod:`matdb.reporting.report` and :mod:`matdb.reporting.drawing` do the work.
"""

from __future__ import annotations

import hashlib

import streamlit as st

from matdb.errors import MatdbError
from matdb.reporting.drawing import drawing_bytes
from matdb.reporting.report import report_bytes
from webapp import _results as rs
from webapp import _shared as sh

MIME = {"html": "text/html", "pdf": "application/pdf", "dxf": "image/vnd.dxf", "svg": "image/svg+xml"}


@st.cache_data(show_spinner=False, max_entries=8)
def report_file(text: str, fmt: str, paper: str, url: str, name: str) -> bytes:
    def lev(design, temp_k=None):
        return rs.levitate_text(text, temp_k)

    return report_bytes(text, fmt, paper=paper, source_name=f"{name}.toml", url=url, levitate_fn=lev)


@st.cache_data(show_spinner=False, max_entries=16)
def drawing_file(text: str, fmt: str, name: str) -> bytes:
    return drawing_bytes(text, fmt, source_name=f"{name}.toml")


def report_buttons(text: str, url: str, key: str, name: str = "design") -> None:
    """A "prepare" button, then download buttons for the report and the drawing of
    ``text`` (a design file). ``key`` keeps the widgets of several pages apart."""
    digest = hashlib.sha256(text.encode("utf-8")).hexdigest()[:12]
    ready_key = f"{key}_report_ready"
    # one above the other: side by side they were cut off in a narrow column
    paper = st.selectbox("Paper size of the report", ["A4", "Letter"], key=f"{key}_paper")
    if st.button("Prepare the design report and drawing", key=f"{key}_prepare"):
        st.session_state[ready_key] = digest
    if st.session_state.get(ready_key) != digest:
        st.caption("The report (HTML or PDF: inputs, every figure at the coldest, nominal and hottest "
                   "temperature, provenance, charts, bill of materials, cautions) and a 1:1 drawing "
                   "(DXF or SVG, millimetres) are made on request; a report takes up to a minute.")
        return
    try:
        bar = st.progress(0.05, text="Making the report (HTML, step 1 of 4)...")
        html = report_file(text, "html", paper, url, name)
        bar.progress(0.5, text="Making the report (PDF, step 2 of 4)...")
        pdf = report_file(text, "pdf", paper, url, name)
        bar.progress(0.8, text="Making the drawing (DXF, step 3 of 4)...")
        dxf = drawing_file(text, "dxf", name)
        bar.progress(0.9, text="Making the drawing (SVG, step 4 of 4)...")
        svg = drawing_file(text, "svg", name)
        bar.empty()
    except MatdbError as exc:
        st.error(sh.plain(f"report: {exc}"))
        return
    b1, b2 = st.columns(2)
    b3, b4 = st.columns(2)
    b1.download_button("Report (HTML)", html, file_name=f"{name}-report.html", mime=MIME["html"],
                       key=f"{key}_dl_html")
    b2.download_button(f"Report (PDF, {paper})", pdf, file_name=f"{name}-report.pdf", mime=MIME["pdf"],
                       key=f"{key}_dl_pdf")
    b3.download_button("Drawing (DXF)", dxf, file_name=f"{name}.dxf", mime=MIME["dxf"], key=f"{key}_dl_dxf")
    b4.download_button("Drawing (SVG)", svg, file_name=f"{name}.svg", mime=MIME["svg"], key=f"{key}_dl_svg")
