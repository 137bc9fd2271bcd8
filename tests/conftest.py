"""Test set-up: every test session gets its own temporary SQLite database, seeded from
seed_data/ on first use, so tests never touch a user's database."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import pytest

_TMP = tempfile.mkdtemp(prefix="matdb-test-")
if not os.environ.get("MATDB_TEST_KEEP_URL"):
    os.environ["MATDB_URL"] = f"sqlite:///{Path(_TMP) / 'matdb.sqlite'}"
os.environ.setdefault("MATDB_CACHE_DIR", str(Path(_TMP) / "cache"))
# no background computing of the pages' defaults in in-process page tests (browser tests turn it on)
os.environ.setdefault("MATDB_PAGE_WARM_UP", "0")

REPO = Path(__file__).resolve().parent.parent


@pytest.fixture
def fresh_db(tmp_path, monkeypatch):
    """A new, seeded SQLite database for one test (its URL is returned)."""
    from matdb.data import db

    url = f"sqlite:///{tmp_path / 'fresh.sqlite'}"
    monkeypatch.setenv("MATDB_URL", url)
    db.reset_engines()
    db.get_engine(url)
    yield url
    db.reset_engines()


@pytest.fixture
def run_cli(capsys):
    """Run ``matdb`` in-process: returns (exit code, stdout, stderr)."""
    from matdb.cli import main

    def _run(*argv: str):
        code = main(list(argv))
        out = capsys.readouterr()
        return code, out.out, out.err

    return _run
