"""Engine, transactions, first-use creation and seeding, and the light read path.

``MATDB_URL`` (any SQLAlchemy URL) selects the database; the default is a SQLite file in
the user's data directory. SQLite runs in WAL mode with a busy timeout so several
processes can record values at the same moment.

Two ways in:

* :func:`get_engine`, :func:`session_scope`, :func:`read_session`: the ORM models of
  :mod:`matdb.data.models`, the database checked against them and brought to the newest
  schema by Alembic (:mod:`matdb.data.migrate`). Every write goes this way.
* :func:`reading`: SQLAlchemy Core on the same tables, read from the database itself
  (reflection), for lookups and listings. When the database is at the newest revision and
  seeded it imports neither Alembic, sqlmodel/pydantic nor the ORM (start-up of ``matdb
  materials`` and of every command that looks up a material or grade); otherwise it takes
  the :func:`get_engine` path first (create, upgrade, seed), so both see the same data.
"""

from __future__ import annotations

import ast
import functools
import os
import re
import threading
from datetime import timezone
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Iterator, Optional

import platformdirs
from sqlalchemy import DateTime, MetaData, TypeDecorator, create_engine, event, inspect, select, text
from sqlalchemy.engine import Connection, Engine, Row
from sqlalchemy.exc import InvalidRequestError, SQLAlchemyError

from matdb.errors import DataError

if TYPE_CHECKING:
    from sqlalchemy import Table
    from sqlmodel import Session

_ENGINES: dict[str, Engine] = {}  # checked by Alembic against the models (get_engine)
_READERS: dict[str, "_Tables"] = {}  # at head and seeded, tables reflected (reading)
_LOCK = threading.Lock()

#: The migration scripts; :func:`schema_head` reads their revision ids without Alembic.
VERSIONS_DIR = Path(__file__).resolve().parent / "migrations" / "versions"
#: The ORM models; :func:`model_columns` reads their tables and columns without importing them.
MODELS_FILE = Path(__file__).resolve().parent / "models.py"
_REVISION_RE = re.compile(r"^(down_revision|revision)\s*(?::[^=]*)?=\s*['\"]?([\w.-]+|None)['\"]?", re.M)


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
    # lazy: Alembic and the ORM models are needed here, not by the light read path
    from matdb.data.migrate import ensure_schema

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
    """Forget cached engines and reflected tables (tests switch ``MATDB_URL``)."""
    with _LOCK:
        for e in _ENGINES.values():
            e.dispose()
        _ENGINES.clear()
        for r in _READERS.values():
            if r.own_engine:
                r.engine.dispose()
        _READERS.clear()


@contextmanager
def session_scope(url: str | None = None) -> Iterator["Session"]:
    """A transaction: commits on success, rolls back everything on any exception."""
    from sqlmodel import Session  # lazy: the ORM is not needed by the light read path

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


def read_session(url: str | None = None) -> "Session":
    """A session for reading (caller closes it; prefer ``with read_session() as s``)."""
    from sqlmodel import Session  # lazy: the ORM is not needed by the light read path

    return Session(get_engine(url), expire_on_commit=False)


# ---------------------------------------------------------------- light read path

def schema_head(folder: Path = VERSIONS_DIR) -> str:
    """The newest revision id among the migration scripts in ``folder``, read as text.

    The same answer as Alembic's head (``migrate.head_revision``; a test checks it) without
    importing Alembic: the one revision no script names as its ``down_revision``.
    """
    revisions, downs = set(), set()
    for path in folder.glob("*.py"):
        found = dict((k, v) for k, v in _REVISION_RE.findall(path.read_text(encoding="utf-8")))
        if "revision" in found:
            revisions.add(found["revision"])
            downs.add(found.get("down_revision", "None"))
    heads = revisions - downs
    if len(heads) != 1:
        raise DataError(f"migrations: expected one head revision, found {len(heads)} ({', '.join(sorted(heads))})")
    return heads.pop()


@functools.lru_cache(maxsize=1)
def model_columns(path: Path = MODELS_FILE) -> dict[str, frozenset[str]]:
    """Table name -> column names of the ORM models, read from their source text.

    The same tables and columns as ``SQLModel.metadata`` (a test checks it) without importing
    sqlmodel and pydantic: each ``class X(SQLModel, table=True)`` is table ``x``, each annotated
    field a column.
    """
    out: dict[str, frozenset[str]] = {}
    for node in ast.parse(path.read_text(encoding="utf-8")).body:
        if isinstance(node, ast.ClassDef) and any(k.arg == "table" for k in node.keywords):
            names = [st.target.id for st in node.body
                     if isinstance(st, ast.AnnAssign) and isinstance(st.target, ast.Name)]
            out[node.name.lower()] = frozenset(names)
    return out


def _database_columns(conn: Connection) -> dict[str, set[str]]:
    """Table name -> column names as the database has them (one query on SQLite and PostgreSQL)."""
    name = conn.dialect.name
    if name == "sqlite":
        q = ("SELECT m.name, p.name FROM sqlite_master AS m JOIN pragma_table_info(m.name) AS p "
             "WHERE m.type = 'table'")
    elif name == "postgresql":
        q = ("SELECT table_name, column_name FROM information_schema.columns "
             "WHERE table_schema = current_schema()")
    else:
        insp = inspect(conn)
        return {t: {c["name"] for c in insp.get_columns(t)} for t in insp.get_table_names()}
    out: dict[str, set[str]] = {}
    for table, column in conn.execute(text(q)).all():
        out.setdefault(table, set()).add(column)
    return out


def _ready_to_read(engine: Engine) -> bool:
    """True when the database is stamped at :func:`schema_head`, has every table and column
    of the models and holds the seed data: the checks of ``migrate.ensure_schema``'s fast path
    without Alembic or the models (anything else is left to that full path)."""
    try:
        with engine.connect() as conn:
            rev = conn.execute(text("SELECT version_num FROM alembic_version")).scalars().all()
            if rev != [schema_head()]:
                return False
            have = _database_columns(conn)
            if any(not cols <= have.get(t, set()) for t, cols in model_columns().items()):
                return False
            return conn.execute(text("SELECT 1 FROM source LIMIT 1")).first() is not None
    except SQLAlchemyError:  # no such table: new, pre-Alembic or damaged: the full path decides
        return False


class _UTCDateTime(TypeDecorator):
    """Reads a stored time as an aware UTC datetime, as the models' datetime columns do
    (they store UTC; SQLite keeps no offset)."""

    impl = DateTime
    cache_ok = True

    def process_result_value(self, value, dialect):
        if value is None:
            return None
        return value.replace(tzinfo=timezone.utc) if value.utcoffset() is None else value.astimezone(timezone.utc)


def _as_models_read(inspector, table, column_info) -> None:
    """``column_reflect`` hook: datetime columns read as the models read them (aware UTC)."""
    if isinstance(column_info["type"], DateTime):
        column_info["type"] = _UTCDateTime(timezone=True)


class _Tables:
    """An engine and the tables reflected from its database, each on first use."""

    def __init__(self, engine: Engine, own_engine: bool) -> None:
        self.engine = engine
        self.own_engine = own_engine
        self.metadata = MetaData()
        event.listen(self.metadata, "column_reflect", _as_models_read)
        self.lock = threading.Lock()

    def table(self, conn: Connection, name: str) -> "Table":
        with self.lock:
            if name not in self.metadata.tables:
                try:
                    self.metadata.reflect(conn, only=[name])
                except InvalidRequestError:
                    raise DataError(f"database: table '{name}' is missing; restore a backup copy "
                                    "of the database or point MATDB_URL at another one") from None
            return self.metadata.tables[name]


def _tables_for(url: str | None) -> _Tables:
    url = url or default_url()
    with _LOCK:
        found = _READERS.get(url)
        checked = _ENGINES.get(url)
    if found is not None:
        return found
    if checked is not None:
        found = _Tables(checked, own_engine=False)
    else:
        engine = make_engine(url)
        if _ready_to_read(engine):
            found = _Tables(engine, own_engine=True)
        else:  # create, upgrade or seed first (Alembic); then read the checked database
            engine.dispose()
            found = _Tables(get_engine(url), own_engine=False)
    with _LOCK:
        return _READERS.setdefault(url, found)


class Reader:
    """A read connection and its tables (Core rows: read columns as attributes)."""

    def __init__(self, conn: Connection, tables: _Tables) -> None:
        self.conn = conn
        self._tables = tables

    def table(self, name: str) -> "Table":
        """The table ``name`` as the database has it (reflected once per process)."""
        return self._tables.table(self.conn, name)

    def rows(self, name: str, *where, order_by=()) -> list[Row]:
        """Rows of table ``name`` matching every ``where(table)`` condition, in ``order_by(table)`` order.

        ``where`` and ``order_by`` take callables of the table, e.g.
        ``lambda t: t.c.material_id == "bismuth"``.
        """
        t = self.table(name)
        q = select(t)
        for cond in where:
            q = q.where(cond(t))
        q = q.order_by(*(f(t) for f in order_by)) if order_by else q
        return list(self.conn.execute(q).all())

    def first(self, name: str, *where) -> Optional[Row]:
        """The first row of ``name`` matching ``where`` (see :meth:`rows`), or None."""
        found = self.rows(name, *where)
        return found[0] if found else None


@contextmanager
def reading(url: str | None = None) -> Iterator[Reader]:
    """A :class:`Reader` on ``url``'s database (default :func:`default_url`).

    The database is checked once per process: at the newest revision, every table and column
    of the models present, seeded (else :func:`get_engine` creates, upgrades, seeds or refuses
    it in one line first).
    """
    tables = _tables_for(url)
    with tables.engine.connect() as conn:
        yield Reader(conn, tables)
