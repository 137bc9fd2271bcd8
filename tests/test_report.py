"""Design report: every number in the HTML equals ``matdb levitate --format json`` for
the same design and temperature; the page is self-contained; the PDF has the paper size
asked for and its pages are not blank.

The display units are converted back with a separate pint registry (not matdb's) so a
wrong scale in the report shows up. Each report is generated once per module (slow
under load).
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pint
import pytest

from matdb.cli import main

EXAMPLES = Path(__file__).resolve().parent.parent / "examples"
UREG = pint.UnitRegistry()


def _cli(*argv: str) -> str:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(list(argv))
    assert code == 0, err.getvalue()
    return out.getvalue()


class _Cells(HTMLParser):
    """Every element with ``data-key``: its attributes and its text; plus tags seen."""

    def __init__(self):
        super().__init__()
        self.cells: list[dict] = []
        self.tags: list[tuple[str, dict]] = []
        self._open: list[dict | None] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if tag in ("td", "span"):
            rec = dict(a, text="") if "data-key" in a else None
            self._open.append(rec)
            if rec is not None:
                self.cells.append(rec)

    def handle_endtag(self, tag):
        if tag in ("td", "span") and self._open:
            self._open.pop()

    def handle_data(self, data):
        for rec in self._open:
            if rec is not None:
                rec["text"] += data


def _parse(html: str) -> _Cells:
    p = _Cells()
    p.feed(html)
    return p


def _lookup(result: dict, path: str):
    cur = result
    for part in path.split("."):
        cur = cur[int(part)] if isinstance(cur, list) else cur[part]
    return cur


# the levitate JSON names each key after its unit (DEVELOPERS.md glossary)
_KEY_UNITS = (("_s_m", "S/m"), ("_n_m_per_rad", "N*m/rad"), ("_um_per_k", "micrometer/K"), ("_n_m", "N/m"), ("_hz", "Hz"),
              ("_pct", "percent"), ("_kg", "kg"), ("_n", "N"), ("_m", "m"), ("_t", "T"), ("_k", "K"), ("_s", "s"))


def _json_unit(key: str) -> str:
    last = key.split(".")[-1]
    if last.isdigit():
        last = key.split(".")[-2]
    for suffix, unit in _KEY_UNITS:
        if last.endswith(suffix):
            return unit
    return ""


def _shown_to_si(text: str, unit: str, key: str) -> float:
    """The number shown in ``unit`` converted to the unit the JSON key is named after."""
    v = float(text)
    target = _json_unit(key)
    if unit in ("", "1") or not target:
        assert unit in ("", "1"), (key, unit)
        return v
    if unit == "degC":
        return UREG.Quantity(v, UREG.degC).to(target).magnitude
    u = unit.replace(" ", "*").replace("um", "micrometer").replace("%", "percent")
    return UREG.Quantity(v, UREG(u).units).to(target).magnitude


@pytest.fixture(scope="module")
def plate_report(tmp_path_factory):
    """examples/plate_checkerboard_2x2.toml (10 to 40 C): report and levitate JSON."""
    d = tmp_path_factory.mktemp("report")
    design = EXAMPLES / "plate_checkerboard_2x2.toml"
    out = d / "r.html"
    _cli("report", str(design), "-o", str(out))
    nominal = json.loads(_cli("levitate", str(design), "--format", "json"))
    cold = json.loads(_cli("levitate", str(design), "--format", "json", "--temp",
                           f"{nominal['temp_coldest_k']!r} K"))
    hot = json.loads(_cli("levitate", str(design), "--format", "json", "--temp",
                          f"{nominal['temp_hottest_k']!r} K"))
    results = {"nominal": nominal, "coldest": cold, "hottest": hot, "worst": nominal}
    # the dynamics section equals `matdb dynamics --format json` (with --temp at the extremes)
    results["dynamics"] = {
        "nominal": json.loads(_cli("dynamics", str(design), "--format", "json")),
        "coldest": json.loads(_cli("dynamics", str(design), "--format", "json", "--temp",
                                   f"{nominal['temp_coldest_k']!r} K")),
        "hottest": json.loads(_cli("dynamics", str(design), "--format", "json", "--temp",
                                   f"{nominal['temp_hottest_k']!r} K")),
    }
    return out.read_text(encoding="utf-8"), results


def _check_every_number(html: str, results: dict) -> int:
    cells = _parse(html).cells
    n = 0
    for c in cells:
        key, case, si = c["data-key"], c["data-case"], c.get("data-si")
        if si is None:
            continue
        if key.startswith("dynamics."):
            expected = _lookup(results["dynamics"][case], key[len("dynamics."):])
        else:
            expected = _lookup(results[case], key)
        if si == "null":
            assert expected is None, key
            assert c["text"].strip() == "-"
            continue
        if si in ("true", "false"):
            assert expected is (si == "true"), key
            assert c["text"].strip() == ("yes" if expected else "no"), key
            continue
        # the exact value equals the JSON one
        assert float(si) == expected, (key, case, si, expected)
        # and the rounded text shown equals it to its 4 significant digits
        shown = _shown_to_si(c["text"].strip(), c.get("data-unit", ""), key)
        assert math.isclose(shown, expected, rel_tol=6e-4, abs_tol=1e-12), (key, case, c["text"], expected)
        n += 1
    return n


@pytest.mark.slow
def test_every_number_equals_levitate_json(plate_report):
    html, results = plate_report
    assert _check_every_number(html, results) > 100


@pytest.mark.slow
def test_every_levitate_figure_is_in_the_report(plate_report):
    html, results = plate_report
    keys = {(c["data-key"], c["data-case"]) for c in _parse(html).cells}
    nominal = results["nominal"]
    for k, v in nominal.items():
        if isinstance(v, (int, float)) and not isinstance(v, bool) or v is None or isinstance(v, bool):
            if k in ("gap_worst_m", "max_payload_worst_kg"):
                assert (k, "worst") in keys, k
                continue
            assert (k, "nominal") in keys, k
            assert (k, "coldest") in keys and (k, "hottest") in keys, k
    for i in range(len(nominal["lift_curve"])):
        assert (f"lift_curve.{i}.force_n", "nominal") in keys
    for case in ("coldest", "nominal", "hottest"):
        for i, _m in enumerate(results["dynamics"][case]["modes"]):
            assert (f"dynamics.modes.{i}.q", case) in keys and (f"dynamics.modes.{i}.frequency_hz", case) in keys
    assert ("gap_worst_m", "worst") in keys and ("max_payload_worst_kg", "worst") in keys


@pytest.mark.slow
def test_report_sections(plate_report):
    html, results = plate_report
    for anchor in ("inputs", "results", "provenance", "charts", "bom", "cautions", "reproduce", "references"):
        assert f'id="{anchor}' in html, anchor
    # inputs as typed (the design file's own strings)
    assert "12.7 mm, 12.7 mm, 12.7 mm" in html and "10 degC" in html
    # charts are inline vector images: lift, field map with polarity, stability over size
    assert html.count("<svg") >= 3
    # illustrative prices are marked; cautions defer to local codes and licensed practice
    assert "Illustrative price" in html
    assert "0.5 mT" in html and "local codes" in html.lower() and "licensed" in html.lower()
    assert re.search(r"</span> cm from the magnets", html)  # regression check: words kept apart
    # provenance: the graphite value's kind and source
    assert "pyrolytic-graphite" in html and "handbook" in html or "standard" in html
    # reproducibility: version and database fingerprint
    from matdb import __version__
    from matdb.reporting.report import database_fingerprint

    assert f"<td>{__version__}</td>" in html
    assert database_fingerprint() in html


@pytest.mark.slow
def test_report_is_self_contained(plate_report):
    html, _ = plate_report
    tags = _parse(html).tags
    assert not any(t == "script" for t, _ in tags)
    assert not any(t == "link" for t, _ in tags)
    for _t, a in tags:
        for k in ("src", "href"):
            v = a.get(k)
            assert v is None or v.startswith("#") or v.startswith("data:"), (k, v)
    assert not re.search(r"url\(\s*['\"]?https?:", html) and "@import" not in html


def test_docstring_references_are_the_codes():
    # the method line cites what the function's own numpydoc References section says
    from matdb.physics import plate
    from matdb.reporting.report import docstring_references, references_of

    refs = docstring_references(plate.analyse_plate)
    assert refs and all("Simon" in r or "Berry" in r or r for r in refs)
    assert references_of("matdb.physics.thermal.lift_derating_pct") == docstring_references(
        __import__("matdb.physics.thermal", fromlist=["lift_factor"]).lift_factor)


def test_database_fingerprint_is_stable_and_content_based(fresh_db):
    from matdb.reporting.report import database_fingerprint

    a = database_fingerprint(fresh_db)
    assert a == database_fingerprint(fresh_db) and re.fullmatch(r"[0-9a-f]{16}", a)


def test_report_bad_extension_writes_nothing(tmp_path, run_cli):
    out = tmp_path / "r.docx"
    code, _o, err = run_cli("report", str(EXAMPLES / "plate_checkerboard_2x2.toml"), "-o", str(out))
    assert code == 2 and "-o" in err and err.count("\n") == 1
    assert not out.exists()


def test_report_bad_design_writes_nothing(tmp_path, run_cli):
    bad = tmp_path / "bad.toml"
    bad.write_text('[magnets]\nshape = "cube"\n', encoding="utf-8")
    code, _o, err = run_cli("report", str(bad), "-o", str(tmp_path / "r.html"))
    assert code == 2 and err.count("\n") == 1
    assert list(tmp_path.iterdir()) == [bad]


@pytest.fixture(scope="module")
def magnet_report(tmp_path_factory):
    """examples/floating_magnet.toml: report and levitate JSON."""
    d = tmp_path_factory.mktemp("report-fm")
    design = EXAMPLES / "floating_magnet.toml"
    html_out = d / "fm.html"
    _cli("report", str(design), "-o", str(html_out))
    nominal = json.loads(_cli("levitate", str(design), "--format", "json"))
    return html_out.read_text(encoding="utf-8"), {"nominal": nominal, "coldest": nominal,
                                                   "hottest": nominal, "worst": nominal}


@pytest.mark.slow
def test_floating_magnet_report_numbers_and_schedule(magnet_report):
    html, results = magnet_report
    # a single temperature (20 degC): coldest = nominal = hottest
    assert _check_every_number(html, results) > 30
    keys = {c["data-key"] for c in _parse(html).cells}
    for i, _w in enumerate(results["nominal"]["window"]):
        assert f"window.{i}.lifter_distance_m" in keys
    assert "<svg" in html  # the schedule chart


def _pdf_pages(pdf: bytes, tmp: Path) -> list[Path]:
    src = tmp / "r.pdf"
    src.write_bytes(pdf)
    subprocess.run(["pdftoppm", "-png", "-r", "40", str(src), str(tmp / "page")], check=True)
    return sorted(tmp.glob("page*.png"))


@pytest.mark.slow
@pytest.mark.parametrize("paper,size_pt", [("A4", (595.28, 841.89)), ("Letter", (612.0, 792.0))])
def test_pdf_paper_size_and_pages_not_blank(plate_report, tmp_path, paper, size_pt):
    """Paper sizes: ISO 216 (A4 210 x 297 mm) and ANSI Letter (8.5 x 11 in), in points."""
    from PIL import Image

    from matdb.reporting.report import html_to_pdf

    html, _ = plate_report
    html = html.replace("size: A4;", f"size: {paper};")
    pdf = html_to_pdf(html)
    assert pdf.startswith(b"%PDF")
    if shutil.which("pdftoppm") is None or shutil.which("pdfinfo") is None:
        pytest.skip("pdftoppm/pdfinfo (Debian poppler-utils) not installed; .ci/run installs it")
    (tmp_path / "size.pdf").write_bytes(pdf)
    info = subprocess.run(["pdfinfo", str(tmp_path / "size.pdf")], check=True, capture_output=True,
                          text=True).stdout
    box = re.search(r"Page size:\s+([\d.]+) x ([\d.]+) pts", info)
    assert box and abs(float(box.group(1)) - size_pt[0]) < 1 and abs(float(box.group(2)) - size_pt[1]) < 1
    pages = _pdf_pages(pdf, tmp_path)
    assert len(pages) >= 3
    for p in pages:
        px = np.asarray(Image.open(p).convert("L"))
        assert np.count_nonzero(px < 200) > 0.002 * px.size, p.name


def test_provenance_shows_a_lab_value_with_its_source_note_and_date(fresh_db):
    """A measured value recorded with `matdb record` is the one in use (DEVELOPERS.md):
    the report names it as measured, with the lab's source note, date and uncertainty."""
    from matdb.data import lab_store
    from matdb.design import load_design_text
    from matdb.reporting.report import _number_notes, _provenance

    lab_store.record_material_value("bismuth", chi=-1.62e-4, uncertainty=0.03e-4,
                                    source="bench SQUID run 7, sample B2", date="2026-11-02", url=fresh_db)
    text = (Path(__file__).resolve().parent / "data" / "plate_bismuth.toml").read_text(encoding="utf-8")
    rows = _provenance(load_design_text(text), fresh_db)
    chi = next(r for r in rows if r["item"] == "bismuth" and r["property"].startswith("chi"))
    assert chi["kind"] == "measured"
    assert "bench SQUID run 7" in chi["source"] and chi["date"] == "2026-11-02"
    assert chi["value"] == "-0.000162" and chi["uncertainty"] == "3e-06"
    # the magnet grade rows name their published source
    assert any(r["property"] == "Br (T)" and r["source"] for r in rows)
    # where the database keeps a checked-against-source status, every row carries it
    from matdb.data import catalog

    if hasattr(catalog, "status_marks"):
        assert chi["status"] == "measured"
        br = next(r for r in rows if r["property"] == "Br (T)")
        assert br["status"] in ("verified", "corrected", "unverified")
    ctx = {"provenance": rows}
    _number_notes(ctx)
    assert all(r["note_number"] is None or 1 <= r["note_number"] <= len(ctx["provenance_notes"]) for r in rows)
