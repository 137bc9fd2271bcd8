"""The database entry points: the light read path agrees with Alembic and the ORM models."""

from __future__ import annotations

import dataclasses

from sqlmodel import SQLModel

from matdb.data import catalog, db, migrate, models
from matdb.data.models import MagnetValue, SusceptibilityValue


def test_schema_head_read_as_text_equals_alembic_head():
    # regression check against Alembic's own script directory (the migration chain)
    assert db.schema_head() == migrate.head_revision()


def test_model_columns_read_as_text_equal_the_models_metadata():
    # regression check against SQLModel's metadata built by importing the models
    from_metadata = {t.name: frozenset(c.name for c in t.columns) for t in SQLModel.metadata.sorted_tables}
    assert db.model_columns() == from_metadata


def test_vocabulary_is_the_models_vocabulary():
    assert models.FAMILIES == ("NdFeB", "SmCo", "ferrite", "AlNiCo", "bonded-NdFeB")
    assert models.PROVENANCE_STATUSES == ("verified", "corrected", "unverified")


def test_light_read_equals_orm_read(fresh_db):
    # the reflected Core tables and the ORM models read the same rows (regression check)
    db.reset_engines()
    bismuth = catalog.get_material("bismuth", fresh_db)
    n42 = catalog.get_grade("N42", fresh_db)
    with db.read_session(fresh_db) as s:
        chi_row = s.get(SusceptibilityValue, bismuth.value_id)
        mag_row = s.get(MagnetValue, n42.value_id)
    assert bismuth.chi_si == chi_row.chi_si and bismuth.source_key == chi_row.source_key
    for f in ("br_t", "hcj_ka_m", "alpha_br_pct_per_k", "density_kg_m3"):
        assert getattr(n42, f) == getattr(mag_row, f), f
    rows = catalog.material_values("bismuth", fresh_db)
    with db.read_session(fresh_db) as s:
        orm = s.get(SusceptibilityValue, rows[0]["value_id"])
    assert rows[0]["entered_at"] == orm.entered_at.isoformat(timespec="seconds")
    assert isinstance(rows[0]["retracted"], bool)


def test_light_read_of_a_database_not_at_head_takes_the_full_path(tmp_path, monkeypatch):
    # an empty database: created at head and seeded by Alembic before the first read
    url = f"sqlite:///{tmp_path / 'empty.sqlite'}"
    monkeypatch.setenv("MATDB_URL", url)
    db.reset_engines()
    try:
        mats = catalog.list_materials(url)
        assert {m.id for m in mats} >= {"bismuth", "pyrolytic-graphite"}
        assert all(dataclasses.is_dataclass(m) for m in mats)
    finally:
        db.reset_engines()
