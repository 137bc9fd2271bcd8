"""Alembic migrations of the matdb schema (applied by :mod:`matdb.data.migrate`)."""
