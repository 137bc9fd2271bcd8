"""Engine, transactions, first-use creation and seeding.

``MATDB_URL`` (any SQLAlchemy URL) selects the database; the default is a SQLite file in
the user's data directory. SQLite runs in WAL mode with a busy timeout so several
processes can record values at the same moment.
"""

from __future__ import annotations

import os
import threading
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

import platformdirs
from sqlalchemy import event
from sqlalchemy.engine import Engine
from sqlmodel import Session, create_engine

from matdb.data import models  # noqa: F401  (registers the tables)
from matdb.data.migrate import ensure_schema

_ENGINES: dict[str, Engine] = {}
_LOCK = threading.Lock()


def default_url() -> str:
    """The database URL in force: ``MATDB_URL`` or the embedded SQLite default."""
    url = os.environ.get("MATDB_URL", "").strip()
    if url:
        return url
    folder = Path(platformdirs.user_data_dir("matdb", appauthor=False))
    folder.mkdir(parents=True, exist_ok=True)
    return f"sqlite:///{folder / 'matdb.sqlite'}"


def _sqlite_pragmas(dbapi_conn, _record) -> None:
    cur = dbapi_conn.cursor()
    cur.execute("PRAGMA journal_mode=WAL")
    cur.execute("PRAGMA busy_timeout=30000")
    cur.execute("PRAGMA foreign_keys=ON")
    cur.close()


def make_engine(url: str) -> Engine:
    """A SQLAlchemy engine for ``url`` without migrating or seeding (SQLite: busy timeout and
    the connection pragmas of :func:`_sqlite_pragmas`)."""
    if url.startswith("sqlite"):
        engine = create_engine(url, connect_args={"timeout": 30, "check_same_thread": False})
        event.listen(engine, "connect", _sqlite_pragmas)
    else:
        engine = create_engine(url, pool_pre_ping=True)
    return engine


def get_engine(url: str | None = None, *, seed: bool = True) -> Engine:
    """Engine for ``url`` (default :func:`default_url`), migrated and seeded on first use.

    The schema is managed by Alembic (:mod:`matdb.data.migrate`): an empty database is created at
    the newest revision, an older one upgraded (SQLite: after a backup copy), a newer one or
    a damaged one refused with a one-line :class:`~matdb.errors.DataError`.
    """
    url = url or default_url()
    with _LOCK:
        engine = _ENGINES.get(url)
        if engine is None:
            engine = make_engine(url)
            try:
                ensure_schema(engine, seed=seed)
            except BaseException:
                engine.dispose()
                raise
            _ENGINES[url] = engine
    return engine


def reset_engines() -> None:
    """Forget cached engines (tests switch ``MATDB_URL``)."""
    with _LOCK:
        for e in _ENGINES.values():
            e.dispose()
        _ENGINES.clear()


@contextmanager
def session_scope(url: str | None = None) -> Iterator[Session]:
    """A transaction: commits on success, rolls back everything on any exception."""
    engine = get_engine(url)
    session = Session(engine, expire_on_commit=False)
    try:
        yield session
        session.commit()
    except BaseException:
        session.rollback()
        raise
    finally:
        session.close()


def read_session(url: str | None = None) -> Session:
    """A session for reading (caller closes it; prefer ``with read_session() as s``)."""
    return Session(get_engine(url), expire_on_commit=False)
