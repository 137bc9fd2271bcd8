"""The seed loader: validation with file, line and field named; nothing written on error;
idempotent reseeding that keeps value ids and lab rows."""

from __future__ import annotations

import shutil

import pytest
from sqlmodel import Session, func, select

from matdb.data import db
from matdb.errors import DataError
from matdb.data.models import MagnetValue, Material, Source, SusceptibilityValue
from matdb.data.seed import parse_seed, seed_database, seed_dir


def _counts(engine):
    with Session(engine) as s:
        return tuple(s.exec(select(func.count()).select_from(m)).one()
                     for m in (Source, Material, SusceptibilityValue, MagnetValue))


@pytest.fixture
def seed_copy(tmp_path):
    dst = tmp_path / "seed"
    shutil.copytree(seed_dir(), dst)
    return dst


def _engine(tmp_path, name="db.sqlite"):
    return db.make_engine(f"sqlite:///{tmp_path / name}")


def test_seed_parses_and_loads(tmp_path):
    data = parse_seed()
    engine = _engine(tmp_path)
    from sqlmodel import SQLModel

    SQLModel.metadata.create_all(engine)
    seed_database(engine)
    n = _counts(engine)
    assert n[1] == len(data.materials) and n[3] == len(data.magnet_values)
    # idempotent: a second seeding adds nothing and keeps ids
    with Session(engine) as s:
        ids = sorted(v.id for v in s.exec(select(SusceptibilityValue)).all())
    seed_database(engine)
    assert _counts(engine) == n
    with Session(engine) as s:
        assert sorted(v.id for v in s.exec(select(SusceptibilityValue)).all()) == ids


def _corrupt(folder, fname, line_no, column, new_value):
    import csv

    path = folder / fname
    rows = list(csv.reader(path.read_text(encoding="utf-8").splitlines()))
    col = rows[0].index(column)
    rows[line_no - 1][col] = new_value
    import io

    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerows(rows)
    path.write_text(buf.getvalue(), encoding="utf-8")


@pytest.mark.parametrize(
    "fname,column,value,message",
    [
        ("susceptibilities.csv", "value_published", "abc", "value_published: expected a plain number"),
        ("susceptibilities.csv", "source_key", "no-such-source", "unknown source key"),
        ("susceptibilities.csv", "convention", "cm^3", "convention: expected one of"),
        ("materials.csv", "density_kg_m3", "-5", "density_kg_m3"),
        ("magnet_grades.csv", "br_t", "7.5", "br_t: implausible"),
        ("magnet_grades.csv", "family", "unobtainium", "family: expected one of"),
    ],
)
def test_bad_seed_row_names_file_line_field_and_writes_nothing(tmp_path, seed_copy, fname, column, value, message):
    engine = _engine(tmp_path)
    from sqlmodel import SQLModel

    SQLModel.metadata.create_all(engine)
    seed_database(engine)  # a good database first
    before = _counts(engine)
    _corrupt(seed_copy, fname, 3, column, value)
    with pytest.raises(DataError) as exc:
        seed_database(engine, seed_copy)
    assert str(exc.value).startswith(f"{fname}:3: ")
    assert message in str(exc.value)
    assert _counts(engine) == before


def test_positive_chi_for_diamagnet_refused(tmp_path, seed_copy):
    # Physics: a diamagnet has chi < 0 by definition.
    import csv

    rows = list(csv.DictReader((seed_copy / "susceptibilities.csv").read_text().splitlines()))
    line = next(i for i, r in enumerate(rows, start=2) if r["material_id"] == "bismuth")
    value = rows[line - 2]["value_published"].lstrip("-")
    _corrupt(seed_copy, "susceptibilities.csv", line, "value_published", value)
    with pytest.raises(DataError, match=rf"susceptibilities.csv:{line}: value_published: bismuth is diamagnetic"):
        parse_seed(seed_copy)


def test_not_utf8_and_missing_columns(tmp_path, seed_copy):
    (seed_copy / "sources.csv").write_bytes((seed_copy / "sources.csv").read_bytes() + b"\xff\xfe bad\n")
    with pytest.raises(DataError, match="sources.csv: not UTF-8"):
        parse_seed(seed_copy)
    shutil.copy(seed_dir() / "sources.csv", seed_copy / "sources.csv")
    text = (seed_copy / "materials.csv").read_text().splitlines()
    text[0] = text[0].replace("density_kg_m3", "rho")
    (seed_copy / "materials.csv").write_text("\n".join(text) + "\n")
    with pytest.raises(DataError, match="materials.csv:1: missing columns density_kg_m3"):
        parse_seed(seed_copy)


def test_first_use_creates_and_seeds(fresh_db):
    from matdb.data.catalog import get_material

    assert get_material("bismuth").chi_si < 0
