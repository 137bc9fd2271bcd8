"""Schema versions: Alembic migrations applied on first use of a database.

:func:`ensure_schema` runs whenever matdb opens a database (``db.get_engine``):

* an empty database is created at the newest revision (``head``) and seeded;
* a database at an older revision is upgraded to ``head``; a SQLite file is first copied
  beside itself (``<file>.before-<head>-<UTC time>.bak``); the seed data is then loaded again
  (idempotent: published rows updated in place, lab rows and preferences untouched), so
  tables a migration added get their published rows;
* a database made before matdb used Alembic (its tables, no ``alembic_version``) is
  checked against the baseline, stamped ``0001_baseline`` and upgraded the same way;
* a database at a revision this program does not know (made by a newer matdb) is refused;
* a table or column that the schema needs and the database lacks is refused with one line
  naming it (no silent re-creation of an empty table).

Creating, upgrading and seeding happen under a lock (a lock file beside a SQLite file,
``pg_advisory_lock`` on PostgreSQL), so several processes opening an empty database at
once do not race; the fast path (database at head, seeded) takes no lock.

Command line (for developers)::

    python -m matdb.data.migrate current              # revision of the database and of this program
    python -m matdb.data.migrate upgrade              # upgrade MATDB_URL (or --url) to head
    python -m matdb.data.migrate revision -m "add sample table"   # new file in migrations/versions
    python -m matdb.data.migrate check                # do the models and the migrations agree?
"""

from __future__ import annotations

import argparse
import datetime as _dt
import functools
import logging
import re
import sqlite3
import sys
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator, Optional

from alembic import command
from alembic.autogenerate import compare_metadata
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import create_engine, inspect, text
from sqlalchemy.engine import Connection, Engine
from sqlmodel import SQLModel

from matdb.data import models  # noqa: F401  (registers the tables)
from matdb.data.seed import seed_database
from matdb.errors import DataError

try:  # POSIX; elsewhere concurrent first use relies on create-if-absent being tolerated
    import fcntl
except ImportError:  # pragma: no cover
    fcntl = None

log = logging.getLogger("matdb.data.migrate")

MIGRATIONS_DIR = Path(__file__).resolve().parent / "migrations"
VERSIONS_DIR = MIGRATIONS_DIR / "versions"
BASELINE = "0001_baseline"
_PG_LOCK_KEY = 0x6D617464  # "matd": one advisory lock for schema work on PostgreSQL


def alembic_config(url: Optional[str] = None):
    """An Alembic ``Config`` pointing at the migrations shipped inside the package."""
    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS_DIR))
    cfg.set_main_option("path_separator", "os")
    if url:
        cfg.set_main_option("sqlalchemy.url", url.replace("%", "%%"))
    return cfg


@functools.lru_cache(maxsize=1)
def _script():
    return ScriptDirectory.from_config(alembic_config())


def head_revision() -> str:
    """The newest schema revision this program knows."""
    heads = _script().get_heads()
    if len(heads) != 1:
        raise DataError(f"migrations: expected one head revision, found {len(heads)} ({', '.join(sorted(heads))}); "
                        "re-chain the newest migration's down_revision")
    return heads[0]


def known_revisions() -> set[str]:
    return {s.revision for s in _script().walk_revisions()}


def current_revision(conn: Connection) -> Optional[str]:
    """Revision stamped in the database (None: not managed by Alembic yet)."""
    heads = MigrationContext.configure(conn).get_current_heads()
    return heads[0] if heads else None


def _metadata():
    return SQLModel.metadata


def _expected_columns() -> dict[str, list[str]]:
    return {t.name: [c.name for c in t.columns] for t in _metadata().sorted_tables}


@functools.lru_cache(maxsize=1)
def _baseline_columns() -> dict[str, list[str]]:
    """Tables and columns of revision 0001_baseline (built in a scratch in-memory database)."""
    eng = create_engine("sqlite://")
    try:
        with eng.begin() as conn:
            cfg = alembic_config()
            cfg.attributes["connection"] = conn
            command.upgrade(cfg, BASELINE)
            insp = inspect(conn)
            return {t: [c["name"] for c in insp.get_columns(t)] for t in insp.get_table_names()
                    if t != "alembic_version"}
    finally:
        eng.dispose()


def _check_tables(conn: Connection, expected: dict[str, list[str]], what: str) -> None:
    """Raise :class:`DataError` naming the first table or columns the database lacks."""
    insp = inspect(conn)
    present = set(insp.get_table_names())
    for table, cols in expected.items():
        if table not in present:
            raise DataError(f"database: table '{table}' is missing ({what}); restore a backup copy "
                            "of the database or point MATDB_URL at another one")
        have = {c["name"] for c in insp.get_columns(table)}
        missing = [c for c in cols if c not in have]
        if missing:
            raise DataError(f"database: table '{table}' lacks column(s) {', '.join(missing)} ({what}); "
                            "restore a backup copy of the database or point MATDB_URL at another one")


def _sqlite_path(engine: Engine) -> Optional[Path]:
    if engine.dialect.name != "sqlite":
        return None
    name = engine.url.database
    if not name or name == ":memory:" or name.startswith("file:"):
        return None
    return Path(name)


@contextmanager
def schema_lock(engine: Engine) -> Iterator[None]:
    """Exclusive lock for creating, upgrading and seeding ``engine``'s database."""
    path = _sqlite_path(engine)
    if path is not None and fcntl is not None:
        try:
            fh = open(f"{path}.lock", "a+")
        except OSError:  # read-only folder: no lock, create-if-absent is still tolerated
            yield
            return
        with fh:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX)
            try:
                yield
            finally:
                fcntl.flock(fh.fileno(), fcntl.LOCK_UN)
    elif engine.dialect.name == "postgresql":
        with engine.connect() as conn:
            conn.execute(text("SELECT pg_advisory_lock(:k)"), {"k": _PG_LOCK_KEY})
            conn.commit()
            try:
                yield
            finally:
                conn.execute(text("SELECT pg_advisory_unlock(:k)"), {"k": _PG_LOCK_KEY})
                conn.commit()
    else:
        yield


def backup_sqlite(engine: Engine, label: str) -> Optional[Path]:
    """Copy a SQLite database file beside itself (online backup API); returns the copy."""
    path = _sqlite_path(engine)
    if path is None or not path.exists():
        return None
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y%m%dT%H%M%S%fZ")
    dest = path.with_name(f"{path.name}.before-{label}-{stamp}.bak")
    src = sqlite3.connect(str(path))
    try:
        dst = sqlite3.connect(str(dest))
        try:
            src.backup(dst)
        finally:
            dst.close()
    finally:
        src.close()
    return dest


def _is_seeded(conn: Connection) -> bool:
    return conn.execute(text("SELECT 1 FROM source LIMIT 1")).first() is not None


def _ready(engine: Engine, head: str, seed: bool) -> bool:
    """Fast path without a lock: at head, every table and column present, seeded if asked."""
    with engine.connect() as conn:
        if current_revision(conn) != head:
            return False
        _check_tables(conn, _expected_columns(), f"schema {head}")
        return (not seed) or _is_seeded(conn)


def _upgrade(engine: Engine, target: str, stamp_first: Optional[str] = None) -> None:
    with engine.begin() as conn:
        cfg = alembic_config()
        cfg.attributes["connection"] = conn
        if stamp_first:
            command.stamp(cfg, stamp_first)
        command.upgrade(cfg, target)


def ensure_schema(engine: Engine, *, seed: bool = True) -> Optional[str]:
    """Bring ``engine``'s database to the newest schema (and seed it when empty).

    Returns the path of a backup copy when one was made, else None. Raises
    :class:`~matdb.errors.DataError` (one line) for a database newer than this program, a
    pre-Alembic database that is not a matdb schema, or a missing table or column.
    """
    head = head_revision()
    if _ready(engine, head, seed):
        return None
    backup: Optional[Path] = None
    with schema_lock(engine):
        with engine.connect() as conn:
            rev = current_revision(conn)
            present = set(inspect(conn).get_table_names())
        if rev is not None and rev != head and rev not in known_revisions():
            raise DataError(f"database: schema revision '{rev}' is newer than this matdb (it knows up to "
                            f"'{head}'); upgrade matdb to open this database")
        if rev is None:
            ours = present & set(_baseline_columns())
            if ours:  # made before matdb used Alembic: check it is the baseline schema
                with engine.connect() as conn:
                    _check_tables(conn, _baseline_columns(), "database made before schema versions")
                backup = backup_sqlite(engine, head)
                _upgrade(engine, head, stamp_first=BASELINE)
            else:
                _upgrade(engine, head)
        elif rev != head:
            backup = backup_sqlite(engine, head)
            _upgrade(engine, head)
        with engine.connect() as conn:
            _check_tables(conn, _expected_columns(), f"schema {head}")
            seeded = _is_seeded(conn)
        upgraded = seeded and rev != head  # an existing database just brought to a newer schema
        if seed and (not seeded or upgraded):
            # first use: load seed_data/; after an upgrade: load it again so new tables get their
            # published rows (idempotent: published rows updated in place, lab rows and
            # preferences never touched)
            seed_database(engine)
    if backup is not None:
        log.warning("matdb: database upgraded to schema %s; the previous file was copied to %s", head, backup)
    elif rev is not None and rev != head:
        log.warning("matdb: database upgraded from schema %s to %s", rev, head)
    return str(backup) if backup else None


# ---------------------------------------------------------------- developer command line

def _slug(message: str) -> str:
    s = re.sub(r"[^a-z0-9]+", "_", message.lower()).strip("_")
    return s[:40] or "change"


def new_revision(message: str, *, autogenerate: bool = True) -> Path:
    """Write ``versions/NNNN_<slug>.py`` chained on the current head.

    With ``autogenerate`` the operations are worked out by comparing the models with a
    scratch SQLite database built at head; review the file before committing it.
    """
    head = head_revision()
    number = max(int(r.split("_", 1)[0]) for r in known_revisions() if r.split("_", 1)[0].isdigit()) + 1
    rev_id = f"{number:04d}_{_slug(message)}"
    cfg = alembic_config()
    if autogenerate:
        with tempfile.TemporaryDirectory() as tmp:
            eng = create_engine(f"sqlite:///{Path(tmp) / 'scratch.sqlite'}")
            try:
                with eng.begin() as conn:
                    cfg.attributes["connection"] = conn
                    command.upgrade(cfg, head)
                    script = command.revision(cfg, message=message, rev_id=rev_id, autogenerate=True)
            finally:
                eng.dispose()
    else:
        script = command.revision(cfg, message=message, rev_id=rev_id)
    _script.cache_clear()
    return Path(script.path)


def model_differences() -> list:
    """Differences between the models and a database built by the migrations (empty: agree)."""
    eng = create_engine("sqlite://")
    try:
        with eng.begin() as conn:
            cfg = alembic_config()
            cfg.attributes["connection"] = conn
            command.upgrade(cfg, head_revision())
            ctx = MigrationContext.configure(conn, opts={"compare_type": True})
            return list(compare_metadata(ctx, _metadata()))
    finally:
        eng.dispose()


def main(argv: Optional[list[str]] = None) -> int:
    from matdb.data.db import default_url, reset_engines  # lazy: db imports this module (cycle)

    p = argparse.ArgumentParser(prog="python -m matdb.data.migrate", description="matdb schema revisions (Alembic)")
    sub = p.add_subparsers(dest="cmd", required=True)
    for name, helptext in (("current", "show the database's revision and this program's head"),
                           ("upgrade", "upgrade the database to head (SQLite: backup copy first)")):
        sp = sub.add_parser(name, help=helptext)
        sp.add_argument("--url", help="SQLAlchemy URL (default: MATDB_URL or the embedded SQLite file)")
    rp = sub.add_parser("revision", help="add a migration file chained on the current head")
    rp.add_argument("-m", "--message", required=True)
    rp.add_argument("--empty", action="store_true", help="write empty upgrade/downgrade (no autogenerate)")
    sub.add_parser("check", help="exit 1 when the models differ from what the migrations build")
    args = p.parse_args(argv)
    try:
        if args.cmd == "current":
            eng = create_engine(args.url or default_url())
            try:
                with eng.connect() as conn:
                    rev = current_revision(conn)
            finally:
                eng.dispose()
            print(f"database: {rev or '(none)'}  program head: {head_revision()}")
        elif args.cmd == "upgrade":
            reset_engines()
            eng = create_engine(args.url or default_url())
            try:
                backup = ensure_schema(eng, seed=False)
            finally:
                eng.dispose()
            print(f"database at {head_revision()}" + (f"; backup copy {backup}" if backup else ""))
        elif args.cmd == "revision":
            print(new_revision(args.message, autogenerate=not args.empty))
        elif args.cmd == "check":
            diffs = model_differences()
            for d in diffs:
                print(d)
            if diffs:
                print("models and migrations differ: add a migration (python -m matdb.data.migrate revision -m ...)")
                return 1
            print(f"models match the migrations at {head_revision()}")
    except DataError as exc:
        print(f"matdb: error: {exc}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
