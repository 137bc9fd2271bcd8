"""The same lab-value checks against SQLite and a real PostgreSQL server.

PostgreSQL runs when ``MATDB_TEST_PG_URL`` points at a server (``.ci/run`` starts a throwaway
cluster on loopback and sets it); every test creates its own database there and drops it.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import uuid
from pathlib import Path

import pytest

from matdb.data import catalog
from matdb.data import db
from matdb.data import lab_store

DATA = Path(__file__).resolve().parent / "data"
REPO = Path(__file__).resolve().parent.parent
PG_URL = os.environ.get("MATDB_TEST_PG_URL", "").strip()


def _pg_admin():
    import psycopg

    return psycopg.connect(PG_URL.replace("postgresql+psycopg://", "postgresql://", 1), autocommit=True)


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def backend(request, tmp_path, monkeypatch):
    """A fresh, seeded database on each back end; returns its URL."""
    if request.param == "sqlite":
        url = f"sqlite:///{tmp_path / 'shared.sqlite'}"
        name = None
    else:
        if not PG_URL:
            pytest.skip("MATDB_TEST_PG_URL is unset: no PostgreSQL server (.ci/run starts one)")
        name = f"matdb_test_{uuid.uuid4().hex[:12]}"
        with _pg_admin() as conn:
            conn.execute(f'CREATE DATABASE "{name}"')
        url = PG_URL.rsplit("/", 1)[0] + f"/{name}"
    monkeypatch.setenv("MATDB_URL", url)
    db.reset_engines()
    db.get_engine(url)  # create and seed before any writer starts
    yield url
    db.reset_engines()
    if name:
        with _pg_admin() as conn:
            conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')


def _env(url: str) -> dict:
    env = dict(os.environ)
    env["MATDB_URL"] = url
    return env


def test_record_prefer_retract(backend, run_cli, export_text):
    code, out, err = run_cli("record", "material", "bismuth", "--chi", "-1.6e-4", "--date", "2026-10-01",
                             "--source", "casting B3", "--format", "json")
    assert code == 0, err
    first = json.loads(out)["value_id"]
    code, out, err = run_cli("record", "material", "bismuth", "--chi=-1.2e-4", "--date", "2026-11-01",
                             "--source", "bad holder", "--format", "json")
    assert code == 0, err
    second = json.loads(out)["value_id"]
    # newest measured value is in use (catalog.choose_preferred; regression check)
    assert catalog.get_material("bismuth").value_id == second
    assert run_cli("prefer", "bismuth", str(first))[0] == 0
    assert catalog.get_material("bismuth").value_id == first
    assert run_cli("retract", str(first), "--id", "bismuth", "--reason", "holder magnetic")[0] == 0
    assert catalog.get_material("bismuth").value_id == second
    rows = {r["value_id"]: r for r in lab_store.history("bismuth")}
    assert rows[first]["retracted"] and not rows[first]["preferred"] and rows[second]["preferred"]
    code, out, _ = run_cli("materials", "--format", "json")
    bi = next(m for m in json.loads(out) if m["id"] == "bismuth")
    assert bi["value_kind"] == "measured" and bi["source"] == "bad holder"
    before = export_text()
    assert run_cli("record", "material", "bismuth", "--chi", "5 kg", "--source", "x")[0] == 2
    assert run_cli("record", "material", "bismuth", "--chi", "-1e-4", "--source", "")[0] == 2
    assert export_text() == before


def test_import_export_round_trip(backend, run_cli, tmp_path, export_text):
    code, out, err = run_cli("import", str(DATA / "lab_good.csv"), "--format", "json")
    assert code == 0, err
    added = json.loads(out)["added"]
    assert added > 0
    snapshot = export_text()
    code, out, _ = run_cli("import", str(DATA / "lab_good.csv"), "--format", "json")
    assert json.loads(out)["added"] == 0 and export_text() == snapshot
    code, _, err = run_cli("import", str(DATA / "lab_bad.csv"))
    assert code == 2 and "line 3" in err
    assert export_text() == snapshot
    dump = tmp_path / "dump.csv"
    assert run_cli("export", "--format", "csv", "--out", str(dump))[0] == 0
    code, out, _ = run_cli("import", str(dump), "--format", "json")
    assert code == 0 and json.loads(out)["added"] == 0
    assert export_text() == snapshot


def test_concurrent_writers_all_succeed(backend, simultaneous_records):
    n = 4
    results = simultaneous_records(backend, n, "writer")
    assert all(rc == 0 for _, _, rc in results), [err for _, err, rc in results if rc]
    measured = [r for r in lab_store.history("bismuth", backend) if r["value_kind"] == "measured"]
    assert sorted(r["source"] for r in measured) == sorted(f"writer {i}" for i in range(n))


_PAUSED_IMPORT = """
import sys, time
from matdb.data import exchange

def pause(fraction, text):  # called with the rows written, inside the open transaction
    print('matdb: import paused after ' + text, file=sys.stderr, flush=True)
    time.sleep(120)

exchange.import_file(sys.argv[1], progress=pause)
"""


def test_killed_import_leaves_the_database_as_it_was(backend, run_cli, tmp_path, export_text):
    big = tmp_path / "big.csv"
    lines = ["material_id,chi,temperature,source,date"]
    lines += [f"bismuth,-1.{i:04d}e-4,{15 + i % 10} degC,batch row {i},2026-09-{1 + i % 28:02d}" for i in range(400)]
    big.write_text("\n".join(lines) + "\n", encoding="utf-8")
    before = export_text()
    p = subprocess.Popen([sys.executable, "-c", _PAUSED_IMPORT, str(big)], env=_env(backend), cwd=REPO,
                         stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        line = p.stderr.readline()
        assert "paused after 400 of 400 rows written" in line, line + p.stderr.read()
        os.kill(p.pid, signal.SIGKILL)
        p.wait(timeout=30)
    finally:
        if p.poll() is None:
            p.kill()
            p.wait()
        p.stdout.close()
        p.stderr.close()
    db.reset_engines()
    assert export_text() == before
    # and the database is usable afterwards
    code, out, err = run_cli("import", str(big), "--format", "json")
    assert code == 0 and json.loads(out)["added"] == 400, err
