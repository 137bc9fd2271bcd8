"""The ``matdb`` command core: light start-up, dispatch, errors shown with the command's flags."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from matdb.cli import COMMANDS, build_parser, flag_for, main

HEAVY = ("pandas", "sqlalchemy", "scipy", "pint", "numpy", "sqlmodel", "alembic")

_PROBE = """
import contextlib, io, json, sys
from matdb.cli import main
with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
    try:
        main({argv!r})
    except SystemExit:
        pass
print(json.dumps(sorted(m for m in sys.modules if m.split('.')[0] in {heavy!r})))
"""


def _modules_imported_by(argv: list[str], heavy=HEAVY) -> list[str]:
    code = _PROBE.format(argv=argv, heavy=heavy)
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    return json.loads(r.stdout.strip().splitlines()[-1])


@pytest.mark.parametrize("argv", [["--help"], [], ["no-such-command"]])
def test_help_imports_no_heavy_library(argv):
    # regression check: the listing is built from the command table alone
    assert _modules_imported_by(argv) == []


def test_a_command_imports_only_its_own_module():
    # regression check: `matdb convert --help` needs the catalogue module, never the physics
    mods = _modules_imported_by(["convert", "--help"])
    assert "scipy" not in mods and "pint" not in mods


def test_table_command_needs_no_pandas_pint_or_scipy():
    # regression check: listing materials reads the database and prints; no unit registry,
    # no DataFrame, no physics (the session's database is seeded on first use)
    main(["seed"])
    mods = _modules_imported_by(["materials"])
    assert not {"pandas", "pint", "scipy"} & set(mods)


@pytest.mark.parametrize("argv", [["materials"], ["magnets"], ["show", "bismuth"]])
def test_listing_reads_without_orm_models_or_alembic(argv):
    # regression check: a seeded database at the newest schema is read with SQLAlchemy Core
    # alone (no sqlmodel/pydantic models, no Alembic, no ORM)
    main(["seed"])
    mods = set(_modules_imported_by(argv, heavy=("sqlmodel", "pydantic", "alembic", "sqlalchemy", "pandas")))
    assert "sqlalchemy" in mods
    assert not {"sqlmodel", "pydantic", "alembic", "pandas", "sqlalchemy.orm", "matdb.data.models"} & mods


def test_help_lists_every_command(capsys):
    assert main(["--help"]) == 0
    out = capsys.readouterr().out
    for name in COMMANDS:
        assert name in out


def test_full_parser_has_every_command_and_table_summaries():
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "command")
    assert set(sub.choices) == set(COMMANDS)
    helps = {a.dest: a.help for a in sub._choices_actions}
    assert helps == {name: text for name, (_, text) in COMMANDS.items()}


def test_mistyped_command_one_line(capsys):
    assert main(["materails"]) == 2
    err = capsys.readouterr().err
    assert "invalid choice" in err and err.count("\n") == 1


@pytest.mark.parametrize("command,path,field,flag", [
    ("convert", ["convert", "1", "si-volume"], "molar_mass", "--molar-mass"),
    ("convert", ["convert", "1", "si-volume"], "value", "value"),
    ("record", ["record", "material", "bismuth", "--source", "x"], "chi_perp", "--chi-perp"),
    ("record", ["record", "magnet", "N42", "--source", "x"], "max_temp", "--max-temp"),
    ("convert", ["convert", "1", "si-volume"], "magnets.size", None),
])
def test_field_maps_to_the_flag_of_the_command_run(command, path, field, flag):
    parser = build_parser(command)
    args = parser.parse_args(path)
    assert flag_for(parser, args, field) == flag


def test_library_error_shown_with_flag(run_cli):
    # the library names the field ("molar_mass"); the command line shows its flag
    code, out, err = run_cli("convert", "-280.1e-6", "cm^3/mol", "--density", "9.78 g/cm^3")
    assert code == 2 and out == ""
    assert err.startswith("matdb: error: --molar-mass: ") and err.count("\n") == 1


def test_negative_exponent_value_is_not_a_command(run_cli):
    code, out, err = run_cli("convert", "-1.6e-4", "si-volume", "--to", "cgs-volume")
    assert code == 0, err
