"""value provenance and further properties: tables valueprovenance and propertyvalue

``valueprovenance`` holds the outcome of checking each stored published number against a
table (status verified | corrected | unverified, source, locator, sources tried);
``propertyvalue`` further published properties (resistivity, thermal expansion, ...). Both
are filled by seeding: an upgraded database keeps its rows as they were (its published values
may predate the checks) until ``matdb seed`` refreshes them; ``matdb sources`` says so.

Revision ID: 0004_value_provenance
Revises: 0003_saved_designs
Create Date: 2026-12-03 07:20:57.970236
"""

from __future__ import annotations

import sqlalchemy as sa
import sqlmodel  # noqa: F401  (autogenerate writes sqlmodel.sql.sqltypes.AutoString)
from alembic import op


revision = '0004_value_provenance'
down_revision = '0003_saved_designs'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('propertyvalue',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('key', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('subject_kind', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('subject_id', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('property', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('axis', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('value_si', sa.Float(), nullable=False),
    sa.Column('unit_si', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('value_published', sa.Float(), nullable=False),
    sa.Column('unit_published', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('temperature_k', sa.Float(), nullable=True),
    sa.Column('quality', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('source_key', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('note', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.ForeignKeyConstraint(['source_key'], ['source.key'], ),
    sa.PrimaryKeyConstraint('id')
    )
    with op.batch_alter_table('propertyvalue', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_propertyvalue_key'), ['key'], unique=True)
        batch_op.create_index(batch_op.f('ix_propertyvalue_subject_id'), ['subject_id'], unique=False)

    op.create_table('valueprovenance',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('value_kind', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('owner_id', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('value_row_id', sa.Integer(), nullable=True),
    sa.Column('field', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('status', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('source_key', sqlmodel.sql.sqltypes.AutoString(), nullable=True),
    sa.Column('locator', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('sources_tried', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.Column('note', sqlmodel.sql.sqltypes.AutoString(), nullable=False),
    sa.ForeignKeyConstraint(['source_key'], ['source.key'], ),
    sa.PrimaryKeyConstraint('id')
    )
    with op.batch_alter_table('valueprovenance', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_valueprovenance_owner_id'), ['owner_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_valueprovenance_value_kind'), ['value_kind'], unique=False)
        batch_op.create_index(batch_op.f('ix_valueprovenance_value_row_id'), ['value_row_id'], unique=False)



def downgrade() -> None:
    with op.batch_alter_table('valueprovenance', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_valueprovenance_value_row_id'))
        batch_op.drop_index(batch_op.f('ix_valueprovenance_value_kind'))
        batch_op.drop_index(batch_op.f('ix_valueprovenance_owner_id'))

    op.drop_table('valueprovenance')
    with op.batch_alter_table('propertyvalue', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_propertyvalue_subject_id'))
        batch_op.drop_index(batch_op.f('ix_propertyvalue_key'))

    op.drop_table('propertyvalue')
