"""The ``matdb`` command: argument parsing core.

Each module in :data:`COMMAND_MODULES` has ``register(subparsers)`` that adds its
subcommands with ``set_defaults(func=handler)``; ``handler(args) -> int``. Any
:class:`~matdb.errors.MatdbError` becomes one line on stderr and exit status 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from sqlalchemy.exc import SQLAlchemyError

from matdb.errors import MatdbError
from matdb.units import protect_negative_numbers

COMMAND_MODULES = [
    "matdb.cli.catalog",
    "matdb.cli.serve",
    "matdb.cli.lab",
    "matdb.cli.physics",
    "matdb.cli.advise",
    "matdb.cli.optimise",
    "matdb.cli.dynamics",
    "matdb.cli.report",
]


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, like every other input error
        self.exit(2, f"matdb: error: {message} (see '{self.prog} --help')\n")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="matdb",
        description="Cited susceptibility and magnet database, levitation physics and advisor. "
        "Negative numbers such as -1.6e-4 can be typed as they are; '--' before positionals also works.",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMAND_MODULES:
        importlib.import_module(name).register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    try:
        args = parser.parse_args(protect_negative_numbers(argv))
    except SystemExit as exc:
        return int(exc.code or 0)
    try:
        return int(args.func(args) or 0)
    except MatdbError as exc:
        msg = str(exc).replace("\n", " ")
        print(f"matdb: error: {msg}", file=sys.stderr)
        return 2
    except SQLAlchemyError as exc:  # the database itself failed (locked, gone, refused): one line too
        orig = getattr(exc, "orig", None) or exc
        first = (str(orig).strip().splitlines() or [type(orig).__name__])[0]
        print(f"matdb: error: database: {first}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # pragma: no cover
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
