"""``matdb report`` and ``matdb drawing``: a design to hand over, and a drawing to cut from.

    matdb report DESIGN -o NAME.html|NAME.pdf [--paper A4|Letter]
    matdb drawing DESIGN -o NAME.dxf|NAME.svg

The kind of file follows the name's extension. Nothing is written when the design or
the arguments are bad: the file appears whole or not at all.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

from matdb.cli import summary
from matdb.errors import InputError
from matdb.reporting.drawing import drawing_bytes
from matdb.reporting.report import PAPERS, report_bytes

REPORT_KINDS = {".html": "html", ".htm": "html", ".pdf": "pdf"}
DRAWING_KINDS = {".dxf": "dxf", ".svg": "svg"}


def _kind(out: str, kinds: dict[str, str]) -> str:
    ext = Path(out).suffix.lower()
    if ext not in kinds:
        raise InputError(f"-o: expected a file name ending in {', '.join(sorted(kinds))}, got {out!r}")
    return kinds[ext]


def _read(path: str) -> str:
    p = Path(path)
    try:
        return p.read_text(encoding="utf-8")
    except FileNotFoundError as exc:
        raise InputError(f"design: no such file {path!r}") from exc
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"design: cannot read {path!r}: {exc}") from exc


def write_atomic(path: str, data: bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file in the same folder."""
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"-o: no such folder {str(folder)!r}")
    fd, tmp = tempfile.mkstemp(prefix=".matdb-", suffix=p.suffix, dir=folder)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, p)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return p


def cmd_report(args) -> int:
    kind = _kind(args.output, REPORT_KINDS)
    if args.paper not in PAPERS:
        raise InputError(f"--paper: expected one of {', '.join(PAPERS)}, got {args.paper!r}")
    text = _read(args.design)
    data = report_bytes(text, kind, paper=args.paper, source_name=Path(args.design).name)
    p = write_atomic(args.output, data)
    print(f"wrote {p} ({kind}, {len(data) / 1024:.0f} kB)", file=sys.stderr)
    return 0


def cmd_drawing(args) -> int:
    kind = _kind(args.output, DRAWING_KINDS)
    text = _read(args.design)
    data = drawing_bytes(text, kind, source_name=Path(args.design).name)
    p = write_atomic(args.output, data)
    print(f"wrote {p} ({kind}, {len(data) / 1024:.0f} kB)", file=sys.stderr)
    return 0


def register(subparsers) -> None:
    p = subparsers.add_parser("report", help=summary("report"),
                              description="A design report to file with a review: inputs as typed, "
                              "every levitate figure at the coldest, nominal and hottest temperature "
                              "and in the worst case with its method and reference, provenance of "
                              "each property, charts, bill of materials, strong-magnet cautions, "
                              "matdb's version and the database fingerprint.")
    p.add_argument("design", help="design TOML file")
    p.add_argument("-o", "--output", required=True, metavar="NAME.html|NAME.pdf",
                   help="output file; .html (self-contained page) or .pdf")
    p.add_argument("--paper", default="A4", choices=["A4", "Letter"],
                   help="paper size of the PDF and of printing the HTML (default A4)")
    p.set_defaults(func=cmd_report)

    d = subparsers.add_parser("drawing", help=summary("drawing"),
                              description="A drawing to cut and assemble from, 1:1 in millimetres: "
                              "plate outline, magnet layout with N/S marks, base outline, centre of "
                              "mass; layers PLATE, MAGNETS, POLARITY, BASE, MARKS. Floating-magnet "
                              "designs: a side view of lifter, plates and floater with the schedule's "
                              "distances.")
    d.add_argument("design", help="design TOML file")
    d.add_argument("-o", "--output", required=True, metavar="NAME.dxf|NAME.svg",
                   help="output file; .dxf or .svg")
    d.set_defaults(func=cmd_drawing)
