"""Bad input, injection and data round trips: one class of failure per test, each refused
with matdb's own one-line message (field and limit named), exit status 2, nothing written.

Sources: OWASP "CSV Injection" (cells starting with = + - @ tab CR run as formulas in
spreadsheets; prefix them with a quote); CommonMark spec 0.31, section 2.4 (backslash
escapes of ASCII punctuation), checked with markdown-it-py, a general-purpose CommonMark
renderer; the rest are regression checks.
"""

from __future__ import annotations

import csv
import io
import json
import time
from pathlib import Path

import pytest

from matdb import limits, output
from matdb.data import exchange
from matdb.data import lab_store

REPO = Path(__file__).resolve().parent.parent
DATA = Path(__file__).resolve().parent / "data"
EXAMPLE = REPO / "examples" / "plate_checkerboard_2x2.toml"
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _one_line_error(code: int, out: str, err: str) -> str:
    assert code == 2, (out, err)
    assert err.startswith("matdb: error: ") and err.count("\n") == 1, err
    assert "Traceback" not in err
    return err


def _cells(csv_text: str) -> list[str]:
    return [c for row in csv.reader(io.StringIO(csv_text)) for c in row]


def _looks_like_number(c: str) -> bool:
    try:
        float(c)
        return True
    except ValueError:
        return False


# ---------------------------------------------------------------------------- injection

EVIL_NAME = '=HYPERLINK("http://example.invalid","click")'
EVIL_SOURCE = "=cmd|' /C calc'!A0"


@pytest.fixture
def evil_db(fresh_db, tmp_path, run_cli):
    """A database with a user material named like a formula and a formula-like source."""
    f = tmp_path / "evil.csv"
    with f.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["material_id", "name", "density", "chi", "source", "date"])
        w.writerow(["demo-evil", EVIL_NAME, "1.2 g/cm^3", "-9e-6", EVIL_SOURCE, "2026-10-01"])
    code, _, err = run_cli("import", str(f))
    assert code == 0, err
    return fresh_db


def test_csv_escaping_is_one_function_for_cli_and_page(evil_db, run_cli):
    # OWASP CSV Injection: no text cell may start with a formula character
    for argv in (("materials", "--format", "csv"), ("history", "demo-evil", "--format", "csv"),
                 ("export", "--format", "csv")):
        code, out, err = run_cli(*argv)
        if code == 2 and "invalid choice" in err:
            continue  # that command has no CSV output
        assert code == 0, err
        assert EVIL_NAME in out.replace('""', '"') or EVIL_SOURCE in out or "demo-evil" in out
        bad = [c for c in _cells(out) if c[:1] in FORMULA_START and not _looks_like_number(c)]
        assert bad == [], (argv, bad)
    # the page's downloads use the same function (webapp._shared.csv_bytes -> output.csv_text)
    from matdb.reporting import presentation
    from webapp import _shared as sh

    df = presentation.materials_table("si-volume", evil_db)
    page_csv = sh.csv_bytes(df).decode()
    assert "'" + EVIL_NAME in page_csv.replace('""', '"')
    assert [c for c in _cells(page_csv) if c[:1] in FORMULA_START and not _looks_like_number(c)] == []
    for path in [*(REPO / "webapp").rglob("*.py"), *(REPO / "matdb").rglob("*.py")]:
        if path.name != "output.py":  # regression check: no download writes CSV on its own
            assert ".to_csv(" not in path.read_text(encoding="utf-8"), path


def test_escape_cell_round_trip_keeps_apostrophes():
    for text in ("=1+1", "'=already quoted", "''", "plain", "-1.6e-4 note", "@SUM(A1)", "\tx"):
        esc = output.escape_cell(text)
        assert esc[:1] not in FORMULA_START
        assert output.unescape_cell(esc) == text


def test_user_text_is_shown_as_text_not_markdown():
    markdown_it = pytest.importorskip("markdown_it")
    from webapp._shared import plain

    note = ('![x](http://127.0.0.1:9/x.png) <img src=x onerror=alert(1)> [link](http://example.invalid) '
            '**bold** `code` # heading\n- item :red[red] $x^2$')
    html = markdown_it.MarkdownIt("commonmark").render(plain(note))
    for tag in ("<img", "<a ", "<strong>", "<code>", "<h1>", "<li>", "<em>"):
        assert tag not in html, (tag, html)
    assert "&lt;img src=x onerror=alert(1)&gt;" in html  # the characters are still all there
    for path in (REPO / "webapp").rglob("*.py"):  # regression check: no st.info(f"...{note}") left raw
        text = path.read_text(encoding="utf-8")
        assert "st.info(f" not in text and "st.error(f" not in text and "st.success(f" not in text, path


def test_lab_page_shows_a_note_as_text(fresh_db):
    pytest.importorskip("streamlit")
    from streamlit.testing.v1 import AppTest

    from webapp._shared import plain

    note = "demo: ![img](http://127.0.0.1:9/x.png) <b>bold</b> [link](http://example.invalid)"
    lab_store.record_material_value("bismuth", chi="-1.6e-4", source=note, date="2026-10-01", url=fresh_db)
    at = AppTest.from_file(str(REPO / "webapp" / "app.py"), default_timeout=120).run()
    at.switch_page("views/lab_values.py").run()
    assert not at.exception, [e.message for e in at.exception]
    bodies = [e.body for e in at.info] + [e.value for e in at.markdown] + [e.value for e in at.caption]
    shown = [b for b in bodies if "127" in b]
    assert shown and all(plain(note) in b for b in shown), shown


def test_page_shows_no_error_details():
    import tomllib

    from matdb.cli.serve import serve_command

    cfg = tomllib.loads((REPO / ".streamlit" / "config.toml").read_text(encoding="utf-8"))
    assert cfg["client"]["showErrorDetails"] == "none"
    cmd = serve_command(8765)
    assert cmd[cmd.index("--client.showErrorDetails") + 1] == "none"


# ---------------------------------------------------------------------------- input limits

def _design(tmp_path, **subs) -> Path:
    text = EXAMPLE.read_text(encoding="utf-8")
    for old, new in subs.items():
        assert old.replace("_", " ") in text or old in text
        text = text.replace(old.replace("_", " ") if old.replace("_", " ") in text else old, new)
    p = tmp_path / "d.toml"
    p.write_text(text, encoding="utf-8")
    return p


@pytest.mark.parametrize("argv_fn, field, limit", [
    (lambda t: ("levitate", str(_write(t, "deep.toml", "a = " + "[" * 5000 + "]" * 5000))), "deep.toml",
     f"limit of {limits.MAX_NESTING}"),
    (lambda t: ("levitate", str(_design(t, **{'"12.7 mm", "12.7 mm"': '"1e308 mm", "12.7 mm"'}))),
     "magnets.size[0]", "100 m"),
    (lambda t: ("levitate", str(EXAMPLE), "--gap", "1e308 m"), "--gap", "100 m"),
    (lambda t: ("convert", "1e308", "cgs-volume"), "value", "largest accepted susceptibility"),
    (lambda t: ("levitate", str(_design(t, **{"rows = 2": "rows = 200", "cols = 2": "cols = 200"}))),
     "magnets.rows", f"limit of {limits.MAX_ROWS_COLS}"),
    (lambda t: ("levitate", str(_design(t, **{"rows = 2": "rows = 20", "cols = 2": "cols = 20"}))),
     "magnets.rows", f"limit of {limits.MAX_MAGNETS}"),
    (lambda t: ("levitate", "/dev/zero"), "design", "not a regular file"),
    (lambda t: ("levitate", str(_write(t, "big.toml", "# x\n" * (limits.MAX_FILE_BYTES // 4 + 1)))), "design",
     f"limit of {limits.MAX_FILE_BYTES:,} bytes"),
    (lambda t: ("field", str(EXAMPLE), "--points", str(_write_bytes(t, "bin.csv", bytes(range(256)) * 8))),
     "--points", "not UTF-8"),
    (lambda t: ("levitate", str(_design(t, **{'temp_max = "40 degC"': 'temp_max = "1e308 degC"'}))),
     "conditions.temp_max", "1000 degC"),
    (lambda t: ("advise", "--mass", "1e308 kg", "--footprint", "20 mm x 20 mm"), "--mass", "10000 kg"),
])
def test_input_limits_are_refused_in_one_line(fresh_db, run_cli, tmp_path, argv_fn, field, limit):
    t0 = time.monotonic()
    err = _one_line_error(*run_cli(*argv_fn(tmp_path)))
    assert (f"error: {field}" in err or f"{field}: line" in err) and limit in err, err
    assert time.monotonic() - t0 < 120  # refused up front (generous bound for a loaded machine)


def _write(tmp_path, name, text) -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def _write_bytes(tmp_path, name, data: bytes) -> Path:
    p = tmp_path / name
    p.write_bytes(data)
    return p


def test_too_many_points_refused(fresh_db, run_cli, tmp_path):
    lines = ["x_m,y_m,z_m"] + ["0,0,0.001"] * (limits.MAX_POINTS + 1)
    pts = _write(tmp_path, "pts.csv", "\n".join(lines) + "\n")
    err = _one_line_error(*run_cli("field", str(EXAMPLE), "--points", str(pts)))
    assert "--points" in err and f"limit of {limits.MAX_POINTS}" in err, err


def test_json_import_nesting_refused(fresh_db, run_cli, tmp_path):
    deep = _write(tmp_path, "deep.json", '{"format": "matdb-export", "values": ' + "[" * 5000 + "]" * 5000 + "}")
    err = _one_line_error(*run_cli("import", str(deep)))
    assert f"limit of {limits.MAX_NESTING}" in err


def test_readme_states_the_limits():
    text = (REPO / "README.md").read_text(encoding="utf-8")
    section = text.split("## Input limits", 1)[1].split("\n## ", 1)[0]
    for n in (limits.MAX_NESTING, limits.MAX_ROWS_COLS, limits.MAX_MAGNETS, f"{limits.MAX_POINTS:,}",
              f"{limits.MAX_FILE_BYTES:,}", f"{limits.MAX_IMPORT_BYTES:,}", f"{limits.MAX_IMPORT_ROWS:,}"):
        assert str(n) in section, n


# ---------------------------------------------------------------------------- commands

def test_output_path_checked_before_computing(fresh_db, run_cli, monkeypatch, tmp_path):
    from matdb import advisor

    def boom(*a, **k):
        raise AssertionError("computed before checking --save")

    monkeypatch.setattr(advisor, "advise_request", boom)
    err = _one_line_error(*run_cli("advise", "--mass", "1 g", "--footprint", "20 mm x 20 mm",
                                   "--save", "/nonexistent/x.toml"))
    assert "--save" in err and "/nonexistent" in err
    err = _one_line_error(*run_cli("advise", "--mass", "1 g", "--footprint", "20 mm x 20 mm",
                                   "--save", str(tmp_path)))
    assert "is a folder" in err
    monkeypatch.setattr(exchange, "export", boom)
    err = _one_line_error(*run_cli("export", "--out", "/nonexistent/dump.csv"))
    assert "--out" in err


def test_field_needs_only_magnets(fresh_db, run_cli, tmp_path):
    text = EXAMPLE.read_text(encoding="utf-8")
    magnets_only = text.split("[plate]")[0]
    p = _write(tmp_path, "magnets.toml", magnets_only)
    code, out, err = run_cli("field", str(p), "--at", "0,0,1 mm", "--format", "json")
    assert code == 0, err
    with_plate = run_cli("field", str(EXAMPLE), "--at", "0,0,1 mm", "--format", "json")[1]
    assert json.loads(out) == json.loads(with_plate)  # the plate plays no part in the field
    err = _one_line_error(*run_cli("levitate", str(p)))
    assert "plate" in err


@pytest.mark.parametrize("argv", [
    ("magnets", "--family", "Kryptonite"),
    ("advise", "--mass", "1 g", "--footprint", "20 mm x 20 mm", "--family", "Kryptonite"),
    ("advise", "--mass", "1 g", "--footprint", "20 mm x 20 mm", "--grade", "N42", "--family", "Kryptonite"),
    ("record", "magnet", "demo-K1", "--family", "Kryptonite", "--br", "1 T", "--hcj", "900 kA/m",
     "--alpha", "-0.12", "--max-temp", "80 degC", "--density", "7.5 g/cm^3", "--source", "demo"),
])
def test_unknown_family_refused_everywhere(fresh_db, run_cli, argv):
    from matdb.data.models import FAMILIES

    err = _one_line_error(*run_cli(*argv))
    assert "Kryptonite" in err and all(f in err for f in FAMILIES), err


# ---------------------------------------------------------------------------- data round trip

def _measured(export_json: str) -> list[dict]:
    rows = [r for r in json.loads(export_json)["values"] if r["value_kind"] == "measured"]
    return sorted(({k: v for k, v in r.items() if k != "value_id"} for r in rows),
                  key=lambda r: (r["record"], r["id"], r["entered_at"], r["source"]))


@pytest.mark.parametrize("fmt", ["csv", "json"])
def test_export_import_round_trip_is_exact(fresh_db, run_cli, tmp_path, monkeypatch, fmt):
    from matdb.data import db

    src = fresh_db
    for _ in range(2):  # the same value recorded twice
        code, _, err = run_cli("record", "material", "bismuth", "--chi", "-1.6e-4", "--date", "2026-10-01",
                               "--source", "demo: casting B3, it's '=quoted'")
        assert code == 0, err
    hist = [r for r in lab_store.history("bismuth", src) if r["value_kind"] == "measured"]
    lab_store.retract(hist[-1]["value_id"], "demo: holder 'B' was magnetic", "bismuth", src)
    lab_store.record_material_value("bismuth", chi="-1.5e-4", source="=cmd|' /C calc'!A0", date="2026-10-02",
                                    note="demo note: 'apostrophes' kept", url=src)
    lab_store.record_magnet_value("N42", br="1.28 T", source="@demo gaussmeter", date="2026-10-03", url=src)
    before = _measured(exchange.export("json", src))
    dump = tmp_path / f"dump.{fmt}"
    dump.write_text(exchange.export(fmt, src), encoding="utf-8")

    dst = f"sqlite:///{tmp_path / 'other.sqlite'}"
    monkeypatch.setenv("MATDB_URL", dst)
    db.reset_engines()
    summary = exchange.import_file(dump, url=dst)
    after = _measured(exchange.export("json", dst))
    assert after == before  # every value, status, reason and note
    assert summary["added"] == len(before)
    again = exchange.import_file(dump, url=dst)  # and importing it again adds nothing
    assert again["added"] == 0 and _measured(exchange.export("json", dst)) == before
    retracted = [r for r in after if r["retracted"]]
    assert len(retracted) == 1 and retracted[0]["retract_reason"] == "demo: holder 'B' was magnetic"


def test_typed_apostrophe_is_kept_on_import(fresh_db, tmp_path):
    f = _write(tmp_path, "typed.csv", "material_id,chi,source,date\nbismuth,-1.6e-4,'=already quoted,2026-10-01\n")
    exchange.import_file(f, url=fresh_db)
    sources = [r["source"] for r in lab_store.history("bismuth", fresh_db) if r["value_kind"] == "measured"]
    assert sources == ["'=already quoted"]


# ---------------------------------------------------------------------------- database errors

def test_database_error_is_one_line(fresh_db, run_cli, monkeypatch):
    from sqlalchemy.exc import OperationalError

    from matdb.data import catalog

    def locked(*a, **k):
        raise OperationalError("SELECT 1", {}, Exception("database is locked"))

    monkeypatch.setattr(catalog, "list_materials", locked)
    err = _one_line_error(*run_cli("materials"))
    assert "database" in err and "locked" in err


# ---------------------------------------------------------------------------- real browser

@pytest.mark.browser
@pytest.mark.slow
def test_note_is_text_in_a_real_browser(tmp_path):
    """Debian Chromium (headless) on the served page: a note with HTML and Markdown shows its
    characters and makes no image, link or bold element (regression check)."""
    import os
    import shutil

    from webapp._server import CHROMIUM_ARGS, served

    chromium = shutil.which("chromium")
    if chromium is None:
        pytest.skip("Debian chromium is not installed (apt-get install chromium; CI does)")
    sync_api = pytest.importorskip("playwright.sync_api")
    from matdb.data import db

    url = f"sqlite:///{tmp_path / 'browser.sqlite'}"
    db.get_engine(url)
    note = 'demo: <img id="evil-img" src="x"> [evil-link](http://example.invalid) **evilbold**'
    row = lab_store.record_material_value("bismuth", chi="-1.6e-4", source=note, date="2026-10-01", url=url)
    lab_store.prefer("bismuth", row["value_id"], url)
    db.reset_engines()
    with served(tmp_path / "streamlit.log", env=dict(os.environ, MATDB_URL=url)) as base:
        with sync_api.sync_playwright() as p:
            b = p.chromium.launch(executable_path=chromium, args=CHROMIUM_ARGS)
            try:
                page = b.new_page(viewport={"width": 1400, "height": 2000})
                page.goto(f"{base}/lab_values", wait_until="load", timeout=60_000)
                alert = page.locator('[data-testid="stAlert"]', has_text="In use by the advisor").first
                alert.wait_for(timeout=90_000)
                text = alert.inner_text().replace("\u200b", "")  # invisible breaks of bare links
                assert "[evil-link](http://example.invalid)" in text and "**evilbold**" in text, text
                assert '<img id="evil-img" src="x">' in text, text
                assert page.locator("#evil-img").count() == 0
                assert alert.locator("a").count() == 0 and alert.locator("strong").count() == 0, alert.inner_html()
            finally:
                b.close()
