"""baseline: the schema of matdb 0.1 (sources, materials, susceptibility and magnet values)

The tables exactly as ``SQLModel.metadata.create_all`` made them before matdb used Alembic, so
a database from then is stamped with this revision and upgraded from here. Do not edit:
changes go in a new revision (``python -m matdb.data.migrate revision -m "..."``).

Revision ID: 0001_baseline
Revises: (none)
Create Date: 2026-12-03 07:09:05.246020
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = '0001_baseline'
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('magnetgrade',
    sa.Column('grade', sa.String(), nullable=False),
    sa.Column('family', sa.String(), nullable=False),
    sa.Column('price_usd_per_kg', sa.Float(), nullable=True),
    sa.Column('price_illustrative', sa.Boolean(), nullable=False),
    sa.Column('note', sa.String(), nullable=False),
    sa.Column('preferred_value_id', sa.Integer(), nullable=True),
    sa.Column('origin', sa.String(), nullable=False),
    sa.PrimaryKeyConstraint('grade')
    )
    op.create_table('source',
    sa.Column('key', sa.String(), nullable=False),
    sa.Column('citation', sa.String(), nullable=False),
    sa.Column('kind', sa.String(), nullable=False),
    sa.Column('year', sa.Integer(), nullable=True),
    sa.Column('note', sa.String(), nullable=False),
    sa.PrimaryKeyConstraint('key')
    )
    op.create_table('magnetvalue',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('grade', sa.String(), nullable=False),
    sa.Column('br_t', sa.Float(), nullable=True),
    sa.Column('br_min_t', sa.Float(), nullable=True),
    sa.Column('hcb_ka_m', sa.Float(), nullable=True),
    sa.Column('hcj_ka_m', sa.Float(), nullable=True),
    sa.Column('bhmax_kj_m3', sa.Float(), nullable=True),
    sa.Column('alpha_br_pct_per_k', sa.Float(), nullable=True),
    sa.Column('beta_hcj_pct_per_k', sa.Float(), nullable=True),
    sa.Column('max_temp_c', sa.Float(), nullable=True),
    sa.Column('mu_rec', sa.Float(), nullable=True),
    sa.Column('density_kg_m3', sa.Float(), nullable=True),
    sa.Column('quality', sa.String(), nullable=False),
    sa.Column('source_key', sa.String(), nullable=False),
    sa.Column('source_note', sa.String(), nullable=False),
    sa.Column('note', sa.String(), nullable=False),
    sa.Column('measured_by', sa.String(), nullable=True),
    sa.Column('measured_on', sa.Date(), nullable=True),
    sa.Column('method', sa.String(), nullable=True),
    sa.Column('entered_at', sa.DateTime(), nullable=False),
    sa.Column('retracted', sa.Boolean(), nullable=False),
    sa.Column('retract_reason', sa.String(), nullable=True),
    sa.ForeignKeyConstraint(['grade'], ['magnetgrade.grade'], ),
    sa.ForeignKeyConstraint(['source_key'], ['source.key'], ),
    sa.PrimaryKeyConstraint('id')
    )
    with op.batch_alter_table('magnetvalue', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_magnetvalue_grade'), ['grade'], unique=False)

    op.create_table('material',
    sa.Column('id', sa.String(), nullable=False),
    sa.Column('name', sa.String(), nullable=False),
    sa.Column('kind', sa.String(), nullable=False),
    sa.Column('density_kg_m3', sa.Float(), nullable=False),
    sa.Column('molar_mass_kg_mol', sa.Float(), nullable=True),
    sa.Column('anisotropic', sa.Boolean(), nullable=False),
    sa.Column('price_usd_per_kg', sa.Float(), nullable=True),
    sa.Column('price_note', sa.String(), nullable=False),
    sa.Column('price_illustrative', sa.Boolean(), nullable=False),
    sa.Column('density_source_key', sa.String(), nullable=True),
    sa.Column('note', sa.String(), nullable=False),
    sa.Column('preferred_value_id', sa.Integer(), nullable=True),
    sa.Column('origin', sa.String(), nullable=False),
    sa.ForeignKeyConstraint(['density_source_key'], ['source.key'], ),
    sa.PrimaryKeyConstraint('id')
    )
    op.create_table('susceptibilityvalue',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('material_id', sa.String(), nullable=False),
    sa.Column('value_published', sa.Float(), nullable=False),
    sa.Column('value_par_published', sa.Float(), nullable=True),
    sa.Column('convention', sa.String(), nullable=False),
    sa.Column('chi_si', sa.Float(), nullable=False),
    sa.Column('chi_perp_si', sa.Float(), nullable=True),
    sa.Column('chi_par_si', sa.Float(), nullable=True),
    sa.Column('temperature_k', sa.Float(), nullable=True),
    sa.Column('uncertainty_si', sa.Float(), nullable=True),
    sa.Column('temp_coeff_per_k', sa.Float(), nullable=True),
    sa.Column('density_kg_m3', sa.Float(), nullable=True),
    sa.Column('quality', sa.String(), nullable=False),
    sa.Column('source_key', sa.String(), nullable=False),
    sa.Column('source_note', sa.String(), nullable=False),
    sa.Column('note', sa.String(), nullable=False),
    sa.Column('measured_by', sa.String(), nullable=True),
    sa.Column('measured_on', sa.Date(), nullable=True),
    sa.Column('method', sa.String(), nullable=True),
    sa.Column('entered_at', sa.DateTime(), nullable=False),
    sa.Column('retracted', sa.Boolean(), nullable=False),
    sa.Column('retract_reason', sa.String(), nullable=True),
    sa.ForeignKeyConstraint(['material_id'], ['material.id'], ),
    sa.ForeignKeyConstraint(['source_key'], ['source.key'], ),
    sa.PrimaryKeyConstraint('id')
    )
    with op.batch_alter_table('susceptibilityvalue', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_susceptibilityvalue_material_id'), ['material_id'], unique=False)



def downgrade() -> None:
    with op.batch_alter_table('susceptibilityvalue', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_susceptibilityvalue_material_id'))

    op.drop_table('susceptibilityvalue')
    op.drop_table('material')
    with op.batch_alter_table('magnetvalue', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_magnetvalue_grade'))

    op.drop_table('magnetvalue')
    op.drop_table('source')
    op.drop_table('magnetgrade')
