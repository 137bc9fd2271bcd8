"""The ``matdb`` command: argument parsing core and dispatch.

:data:`COMMANDS` names, for each command, the module that defines and runs it and the
one-line summary ``matdb --help`` shows. Each such module has ``register(subparsers)``
that adds its commands with ``set_defaults(func=handler)``; ``handler(args) -> int``.

Start-up stays light: ``matdb --help`` builds its listing from :data:`COMMANDS` alone, and
a command imports only its own module (which imports the database, pandas, the physics...
at its top). This module imports nothing beyond the standard library and
:mod:`matdb.errors` / :mod:`matdb.units` (which builds its pint registry on first use).

Any :class:`~matdb.errors.MatdbError` becomes one line on stderr and exit status 2; an
error's ``field`` is shown as the command's flag (``chi`` -> ``--chi``).
"""

from __future__ import annotations

import argparse
import importlib
import sys

from matdb.errors import MatdbError
from matdb.units import protect_negative_numbers

# command -> (module that registers and runs it, summary for `matdb --help`)
COMMANDS: dict[str, tuple[str, str]] = {
    "seed": ("matdb.cli.catalog", "create the database if needed and (re)load seed_data/ (idempotent)"),
    "materials": ("matdb.cli.catalog", "list diamagnetic (and reference paramagnetic) materials"),
    "magnets": ("matdb.cli.catalog", "list permanent-magnet grades"),
    "sources": ("matdb.cli.catalog",
                "the bibliography: how many stored values each source supports, by status"),
    "properties": ("matdb.cli.catalog", "further published properties: resistivity, thermal expansion, ..."),
    "show": ("matdb.cli.catalog", "one material or grade with every value and its provenance"),
    "convert": ("matdb.cli.catalog", "convert a susceptibility between conventions"),
    "serve": ("matdb.cli.serve", "serve the local web page on http://127.0.0.1:PORT"),
    "record": ("matdb.cli.lab", "append a lab-measured value (handbook values are never changed)"),
    "prefer": ("matdb.cli.lab", "choose which value of a material or grade is used"),
    "history": ("matdb.cli.lab", "every value of a material or grade with provenance"),
    "retract": ("matdb.cli.lab", "hide a wrong measured value from use (it stays in the history)"),
    "import": ("matdb.cli.lab", "import measured values from a CSV file (all rows checked first)"),
    "export": ("matdb.cli.lab", "materials, grades and every value with provenance"),
    "field": ("matdb.cli.physics", "B of a design's magnets at points"),
    "levitate": ("matdb.cli.physics", "does the plate float, where, and is it stable"),
    "advise": ("matdb.cli.advise", "rank plate materials x magnet grades x arrangements for a payload"),
    "optimise": ("matdb.cli.optimise", "size magnets, arrangement and plate beyond the catalogue"),
    "dynamics": ("matdb.cli.dynamics", "modes, damping, Q, ring-down and noise floor of a floating plate"),
    "conductivities": ("matdb.cli.dynamics", "electrical conductivities (cited)"),
    "report": ("matdb.cli.report", "design report as HTML or PDF"),
    "drawing": ("matdb.cli.report", "1:1 drawing (DXF or SVG, millimetres)"),
}

DESCRIPTION = ("Cited susceptibility and magnet database, levitation physics and advisor. "
               "Negative numbers such as -1.6e-4 can be typed as they are; '--' before positionals also works.")


def summary(command: str) -> str:
    """The one-line summary of ``command`` (used by the modules' ``add_parser(help=...)``)."""
    return COMMANDS[command][1]


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, like every other input error
        self.exit(2, f"matdb: error: {message} (see '{self.prog} --help')\n")


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The argument parser; with ``command``, only that command's module is imported.

    ``command`` None gives the full parser (every module imported; for documentation and
    tests). A name not in :data:`COMMANDS` gives the listing only, so that ``--help`` and
    a mistyped command are answered without importing any command module.
    """
    parser = _Parser(prog="matdb", description=DESCRIPTION)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    if command is None:
        modules = dict.fromkeys(module for module, _ in COMMANDS.values())
    elif command in COMMANDS:
        modules = [COMMANDS[command][0]]
    else:
        for name, (_, text) in COMMANDS.items():
            sub.add_parser(name, help=text, add_help=False)
        return parser
    for module in modules:
        # lazy by design: a command imports its own module only (keeps start-up light)
        importlib.import_module(module).register(sub)
    return parser


def _command_of(argv: list[str]) -> str:
    """The command word: the first argument that is not an option ('' when there is none)."""
    return next((a for a in argv if not a.startswith("-")), "")


def flag_for(parser: argparse.ArgumentParser, args: argparse.Namespace, field: str | None) -> str | None:
    """The flag (or positional's name) that feeds ``field`` in the command that was run.

    Looks ``field`` up among the argument destinations of the parsers on the path of
    subcommands that ``args`` took (``chi_perp`` -> ``--chi-perp``; a positional as the
    usage line names it).
    None when the command has no such argument (a design-file key such as
    ``magnets.size`` stays as it is).
    """
    if not field:
        return None
    key = field.replace("-", "_")
    while parser is not None:
        nxt = None
        for action in parser._actions:
            if isinstance(action, argparse._SubParsersAction):
                nxt = action.choices.get(getattr(args, action.dest, None) or "")
            elif action.dest == key:
                longs = [o for o in action.option_strings if o.startswith("--")]
                if longs:
                    return longs[0]
                if not action.option_strings:
                    return str(action.metavar or action.dest)  # as the usage line names it
        parser = nxt
    return None


def _database_error(exc: BaseException) -> str | None:
    """One line for a failure of the database itself (locked, gone, refused), else None.

    SQLAlchemy is imported only by the commands that open a database; an exception can only
    be one of its errors when it has been imported, so it is looked up, not imported here.
    """
    sa_exc = sys.modules.get("sqlalchemy.exc")
    if sa_exc is None or not isinstance(exc, sa_exc.SQLAlchemyError):
        return None
    orig = getattr(exc, "orig", None) or exc
    first = (str(orig).strip().splitlines() or [type(orig).__name__])[0]
    return f"database: {first}"


def main(argv: list[str] | None = None) -> int:
    argv = protect_negative_numbers(sys.argv[1:] if argv is None else argv)
    parser = build_parser(_command_of(argv))
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:
        return int(exc.code or 0)
    try:
        return int(args.func(args) or 0)
    except MatdbError as exc:
        print(f"matdb: error: {exc.shown_as(flag_for(parser, args, exc.field))}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # pragma: no cover
        return 0
    except Exception as exc:
        line = _database_error(exc)
        if line is None:
            raise
        print(f"matdb: error: {line}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
