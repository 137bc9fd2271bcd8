"""Serve the page on a free local port for a real-browser test or benchmark: the command
of ``matdb serve``, started in the background, waited for until Streamlit's health
check answers, stopped afterwards. One helper for tests/ and scripts/ alike."""

from __future__ import annotations

import os
import socket
import subprocess
import time
import urllib.request
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from matdb.cli.serve import APP, serve_command

REPO = APP.parent.parent

#: Arguments for Debian's headless Chromium (never a test tool's own browser download).
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def free_port() -> int:
    """A TCP port on 127.0.0.1 that nothing listens on now."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _healthy(base: str) -> bool:
    try:
        with urllib.request.urlopen(base + "/_stcore/health", timeout=2) as r:
            return r.read().decode().strip() == "ok"
    except OSError:
        return False


@contextmanager
def served(log_path: Path, env: dict | None = None, timeout_s: float = 90.0) -> Iterator[str]:
    """Serve the page (``env``: the server's environment, default this process's, e.g.
    with ``MATDB_URL`` of a scratch database); yields its base URL once healthy and stops
    it on exit. Server output goes to ``log_path``. RuntimeError when it exits or does
    not answer within ``timeout_s``."""
    port = free_port()
    log = open(log_path, "w")
    proc = subprocess.Popen(serve_command(port), cwd=str(REPO), env=dict(os.environ if env is None else env),
                            stdout=log, stderr=subprocess.STDOUT)
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + timeout_s
        while not _healthy(base):
            if proc.poll() is not None:
                raise RuntimeError(f"streamlit exited with {proc.returncode}; see {log_path}")
            if time.monotonic() > deadline:
                raise RuntimeError(f"streamlit did not answer /_stcore/health within {timeout_s:.0f} s; see {log_path}")
            time.sleep(0.3)
        yield base
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()
        log.close()
