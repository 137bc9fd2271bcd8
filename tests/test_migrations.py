"""Schema versions (Alembic): upgrade of a database made before schema versions, refusal
of a newer or damaged database with matdb's own one-line error, and safe first use by
several processes at once (SQLite and, when a server is given, PostgreSQL)."""

from __future__ import annotations

import os
import shutil
import sqlite3
import uuid
from pathlib import Path

import pytest

from matdb.data import catalog
from matdb.data import db
from matdb.data import lab_store
from matdb.data import migrate
from matdb.errors import DataError

DATA = Path(__file__).resolve().parent / "data"
REPO = Path(__file__).resolve().parent.parent
FIXTURE = DATA / "schema_0_1_pre_alembic.sqlite3"  # made with matdb 0.1 (create_all), demo lab values
PG_URL = os.environ.get("MATDB_TEST_PG_URL", "").strip()


def _rows(path: Path, tables, columns: dict | None = None) -> dict[str, list[tuple]]:
    """Rows of ``tables`` keyed by table (only ``columns[table]`` when given), sorted."""
    con = sqlite3.connect(str(path))
    try:
        out = {}
        for t in tables:
            cols = columns[t] if columns else [r[1] for r in con.execute(f'PRAGMA table_info("{t}")')]
            out[t] = sorted(con.execute(f'SELECT {", ".join(cols)} FROM "{t}"').fetchall(), key=repr)
        return out
    finally:
        con.close()


def _columns(path: Path, tables) -> dict[str, list[str]]:
    con = sqlite3.connect(str(path))
    try:
        return {t: [r[1] for r in con.execute(f'PRAGMA table_info("{t}")')] for t in tables}
    finally:
        con.close()


def _lab_rows(path: Path, columns) -> dict[str, list[tuple]]:
    """Measured value rows, user materials and grades, and the preferences: what a lab made."""
    con = sqlite3.connect(str(path))
    try:
        q = {
            "susceptibilityvalue": "WHERE quality = 'measured'", "magnetvalue": "WHERE quality = 'measured'",
            "material": "WHERE origin != 'seed'", "magnetgrade": "WHERE origin != 'seed'",
        }
        out = {t: sorted(con.execute(f'SELECT {", ".join(columns[t])} FROM "{t}" {w}').fetchall(), key=repr)
               for t, w in q.items()}
        out["preferences"] = sorted(con.execute(
            "SELECT id, preferred_value_id FROM material WHERE preferred_value_id IS NOT NULL UNION ALL "
            "SELECT grade, preferred_value_id FROM magnetgrade WHERE preferred_value_id IS NOT NULL").fetchall(),
            key=repr)
        return out
    finally:
        con.close()


def _open(url: str):
    db.reset_engines()
    return db.get_engine(url)


@pytest.fixture
def pre_alembic(tmp_path, monkeypatch):
    path = tmp_path / "old.sqlite3"
    shutil.copyfile(FIXTURE, path)
    url = f"sqlite:///{path}"
    monkeypatch.setenv("MATDB_URL", url)
    yield path, url
    db.reset_engines()


def test_fixture_is_a_pre_alembic_database():
    con = sqlite3.connect(f"file:{FIXTURE}?mode=ro", uri=True)
    try:
        tables = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='table'")}
    finally:
        con.close()
    assert "alembic_version" not in tables and {"material", "susceptibilityvalue", "magnetvalue"} <= tables


def test_upgrade_of_pre_alembic_database_keeps_every_row(pre_alembic):
    path, url = pre_alembic
    tables = ["source", "material", "susceptibilityvalue", "magnetgrade", "magnetvalue"]
    cols = _columns(path, tables)
    before = _rows(path, tables)
    lab_before = _lab_rows(path, cols)
    keys_before = _rows(path, tables, {"source": ["key"], "material": ["id"], "susceptibilityvalue": ["id"],
                                       "magnetgrade": ["grade"], "magnetvalue": ["id"]})
    assert sum(len(v) for v in before.values()) > 50 and len(lab_before["susceptibilityvalue"]) == 3
    assert ("bismuth", 22) in lab_before["preferences"]
    _open(url)
    # every lab row and preference unchanged in every column (regression check)
    assert _lab_rows(path, cols) == lab_before
    # every row of every table still there under its key (published rows may be refreshed
    # from the program's seed data, in place)
    keys = {"source": ["key"], "material": ["id"], "susceptibilityvalue": ["id"], "magnetgrade": ["grade"],
            "magnetvalue": ["id"]}
    kept = _rows(path, tables, keys)
    assert all(set(keys_before[t]) <= set(kept[t]) for t in tables)
    con = sqlite3.connect(str(path))
    try:
        assert con.execute("SELECT version_num FROM alembic_version").fetchall() == [(migrate.head_revision(),)]
    finally:
        con.close()
    backups = list(path.parent.glob("old.sqlite3.before-*.bak"))
    assert len(backups) == 1 and _rows(backups[0], tables) == before  # the copy is the file as it was
    # the lab values still behave: the chosen value is in use, the retraction and its reason kept
    assert catalog.get_material("bismuth", url).value_id == 22
    hist = {r["value_id"]: r for r in lab_store.history("bismuth", url)}
    assert hist[23]["retracted"] and hist[23]["retract_reason"] == "demo: holder magnetic"
    # opening again is a no-op: no second backup
    _open(url)
    assert len(list(path.parent.glob("old.sqlite3.before-*.bak"))) == 1


def test_fresh_database_is_created_at_head_and_models_match_migrations(fresh_db):
    eng = db.get_engine(fresh_db)
    with eng.connect() as conn:
        assert migrate.current_revision(conn) == migrate.head_revision()
    # a column or table added to models.py without a migration shows up here
    assert migrate.model_differences() == []


def test_database_newer_than_program_is_refused(fresh_db, run_cli):
    path = Path(fresh_db.removeprefix("sqlite:///"))
    db.reset_engines()
    con = sqlite3.connect(str(path))
    con.execute("UPDATE alembic_version SET version_num = '9999_from_the_future'")
    con.commit()
    con.close()
    with pytest.raises(DataError, match="newer than this matdb"):
        _open(fresh_db)
    db.reset_engines()
    code, out, err = run_cli("materials")
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and err.startswith("matdb: error: database: schema revision '9999_from_the_future'")


def _damage(url: str, sql: str) -> None:
    db.reset_engines()
    con = sqlite3.connect(url.removeprefix("sqlite:///"))
    con.execute(sql)
    con.commit()
    con.close()


def test_dropped_column_gives_one_line_error(fresh_db, run_cli):
    _damage(fresh_db, "ALTER TABLE susceptibilityvalue DROP COLUMN note")
    for argv in (("materials",), ("magnets",), ("history", "bismuth")):
        code, out, err = run_cli(*argv)
        assert code == 2 and out == "", argv
        assert err.count("\n") == 1 and "table 'susceptibilityvalue' lacks column(s) note" in err, err
        assert "sqlalchemy" not in err.lower() and "Traceback" not in err


def test_dropped_table_is_refused_not_recreated_empty(fresh_db, run_cli):
    _damage(fresh_db, "DROP TABLE magnetvalue")
    code, out, err = run_cli("magnets")
    assert code == 2 and out == "" and "table 'magnetvalue' is missing" in err
    con = sqlite3.connect(fresh_db.removeprefix("sqlite:///"))
    try:
        assert con.execute("SELECT count(*) FROM sqlite_master WHERE name='magnetvalue'").fetchone() == (0,)
    finally:
        con.close()


def test_pre_alembic_database_missing_a_column_is_refused(pre_alembic, run_cli):
    path, url = pre_alembic
    con = sqlite3.connect(str(path))
    con.execute("ALTER TABLE material DROP COLUMN price_note")
    con.commit()
    con.close()
    code, _, err = run_cli("materials")
    assert code == 2 and "table 'material' lacks column(s) price_note" in err
    con = sqlite3.connect(str(path))
    try:  # not stamped, nothing written
        assert con.execute("SELECT count(*) FROM sqlite_master WHERE name='alembic_version'").fetchone() == (0,)
    finally:
        con.close()


def test_migrate_command_line(pre_alembic, capsys):
    path, url = pre_alembic
    assert migrate.main(["current", "--url", url]) == 0
    assert "database: (none)" in capsys.readouterr().out
    assert migrate.main(["upgrade", "--url", url]) == 0
    assert "backup copy" in capsys.readouterr().out
    assert migrate.main(["current", "--url", url]) == 0
    assert f"database: {migrate.head_revision()}" in capsys.readouterr().out
    assert migrate.main(["check"]) == 0


# ------------------------------------------------------------------ concurrent first use


def _pg_admin():
    import psycopg

    return psycopg.connect(PG_URL.replace("postgresql+psycopg://", "postgresql://", 1), autocommit=True)


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def empty_backend(request, tmp_path):
    """An empty database (no tables) on each back end; returns its URL."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'empty.sqlite'}"
        db.reset_engines()
        return
    if not PG_URL:
        pytest.skip("MATDB_TEST_PG_URL is unset: no PostgreSQL server (.ci/run starts one)")
    name = f"matdb_test_{uuid.uuid4().hex[:12]}"
    with _pg_admin() as conn:
        conn.execute(f'CREATE DATABASE "{name}"')
    yield PG_URL.rsplit("/", 1)[0] + f"/{name}"
    db.reset_engines()
    with _pg_admin() as conn:
        conn.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')


@pytest.mark.slow
def test_eight_processes_opening_an_empty_database_at_once(empty_backend, tmp_path, simultaneous_records):
    n = 8
    results = simultaneous_records(empty_backend, n, "opener")
    assert all(rc == 0 for _, _, rc in results), [err for _, err, rc in results if rc]
    measured = [r for r in lab_store.history("bismuth", empty_backend) if r["value_kind"] == "measured"]
    assert sorted(r["source"] for r in measured) == sorted(f"opener {i}" for i in range(n))
    handbook = [r for r in lab_store.history("bismuth", empty_backend) if r["value_kind"] != "measured"]
    assert len(handbook) == len([r for r in lab_store.history("bismuth", _seeded_reference(tmp_path))
                                 if r["value_kind"] != "measured"])  # seeded once, not twice


def _seeded_reference(tmp_path) -> str:
    url = f"sqlite:///{tmp_path / 'reference.sqlite'}"
    db.get_engine(url)
    return url


def test_revision_ids_fit_alembic_version_column_and_form_one_line():
    """Alembic stores the revision id in ``alembic_version.version_num``, a VARCHAR(32):
    PostgreSQL refuses a longer id (SQLite does not check lengths). One head, linear history
    (regression check)."""
    from alembic.config import Config
    from alembic.script import ScriptDirectory

    cfg = Config()
    cfg.set_main_option("script_location", str(Path(migrate.__file__).resolve().parent / "migrations"))
    script = ScriptDirectory.from_config(cfg)
    revs = list(script.walk_revisions())
    assert len(script.get_heads()) == 1
    for rev in revs:
        assert len(rev.revision) <= 32, rev.revision
    assert [r.down_revision for r in revs if r.down_revision is None] == [None]
