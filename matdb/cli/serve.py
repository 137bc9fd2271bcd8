"""``matdb serve [--port N]``: the local web page (Streamlit), on 127.0.0.1 only."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

from matdb.cli import summary
from matdb.errors import InputError

APP = Path(__file__).resolve().parent.parent.parent / "webapp" / "app.py"


def serve_command(port: int, app: Path = APP) -> list[str]:
    """The command line that serves the page on ``127.0.0.1:port``, telemetry off."""
    if not (isinstance(port, int) and 1 <= port <= 65535):
        raise InputError(f"--port: expected a TCP port from 1 to 65535, got {port!r}")
    return [
        sys.executable, "-m", "streamlit", "run", str(app),
        "--server.headless", "true",
        "--server.port", str(port),
        "--server.address", "127.0.0.1",
        "--browser.gatherUsageStats", "false",
        "--client.showErrorDetails", "none",  # one-line errors in the browser, tracebacks to stderr
    ]


def register(sub) -> None:
    p = sub.add_parser("serve", help=summary("serve"))
    p.add_argument("--port", type=int, default=8501, help="TCP port (default 8501)")
    p.set_defaults(func=cmd_serve)


def cmd_serve(args) -> int:
    cmd = serve_command(args.port)
    if not APP.is_file():
        raise InputError(f"serve: the page script {APP} is missing (is matdb installed from a clone?)")
    print(f"matdb: serving on http://127.0.0.1:{args.port} (Ctrl+C stops)", file=sys.stderr)
    try:
        return subprocess.call(cmd, cwd=str(APP.parent.parent), env=os.environ.copy())
    except KeyboardInterrupt:  # pragma: no cover
        return 0
