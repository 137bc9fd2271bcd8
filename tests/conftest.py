"""Test set-up: every test session gets its own temporary SQLite database, seeded from
seed_data/ on first use, so tests never touch a user's database."""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

_TMP = tempfile.mkdtemp(prefix="matdb-test-")
if not os.environ.get("MATDB_TEST_KEEP_URL"):
    os.environ["MATDB_URL"] = f"sqlite:///{Path(_TMP) / 'matdb.sqlite'}"
os.environ.setdefault("MATDB_CACHE_DIR", str(Path(_TMP) / "cache"))

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


_RECORDER = """
import sys, time
from pathlib import Path
import matdb.cli.lab                 # the slow imports (the record command's module) happen before the start signal
from matdb.cli import main
go, i, tag = Path(sys.argv[1]), sys.argv[2], sys.argv[3]
Path(sys.argv[1] + '.ready' + i).touch()
while not go.exists():
    time.sleep(0.01)
sys.exit(main(['record', 'material', 'bismuth', '--chi', '-1.6' + i + 'e-4', '--source', tag + ' ' + i]))
"""


@pytest.fixture
def simultaneous_records(tmp_path):
    """``run(url, n, tag)``: ``n`` processes each record one bismuth value (source note
    ``"<tag> <i>"``) with ``matdb record`` against ``url``, released at the same moment once
    all have started; returns ``[(stdout, stderr, exit code), ...]``."""

    def run(url: str, n: int, tag: str, timeout: float = 180) -> list[tuple[str, str, int]]:
        go = tmp_path / f"go-{tag}"
        env = dict(os.environ, MATDB_URL=url)
        procs = [subprocess.Popen([sys.executable, "-c", _RECORDER, str(go), str(i), tag], env=env, cwd=REPO,
                                  stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
                 for i in range(n)]
        try:
            deadline = time.monotonic() + timeout
            while not all(Path(f"{go}.ready{i}").exists() for i in range(n)):
                assert time.monotonic() < deadline and all(p.poll() is None for p in procs), "writers did not start"
                time.sleep(0.02)
            go.touch()  # every writer records at the same moment
            return [p.communicate(timeout=timeout) + (p.returncode,) for p in procs]
        finally:
            for p in procs:
                if p.poll() is None:
                    p.kill()
                    p.communicate()

    return run


@pytest.fixture
def export_text(run_cli):
    """``export_text(fmt="json")``: the whole database as ``matdb export`` prints it (a
    snapshot to compare before and after a refused write)."""

    def _export(fmt: str = "json") -> str:
        code, out, err = run_cli("export", "--format", fmt)
        assert code == 0, err
        return out

    return _export


@pytest.fixture
def record_json(run_cli):
    """``record_json(*argv)``: run ``matdb record ARGV --format json`` and return the row."""
    import json

    def _rec(*argv: str) -> dict:
        code, out, err = run_cli("record", *argv, "--format", "json")
        assert code == 0, err
        return json.loads(out)

    return _rec
