"""saved designs: named design-file texts with a note (matdb.data.saved_designs)

Revision ID: 0003_saved_designs
Revises: 0002_conductivity_q
Create Date: 2026-12-03 07:23:13
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = '0003_saved_designs'
down_revision = '0002_conductivity_q'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('saveddesign',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(), nullable=False),
    sa.Column('note', sa.String(), nullable=False),
    sa.Column('design_toml', sa.String(), nullable=False),
    sa.Column('created_at', sa.DateTime(), nullable=False),
    sa.Column('updated_at', sa.DateTime(), nullable=False),
    sa.PrimaryKeyConstraint('id')
    )
    with op.batch_alter_table('saveddesign', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_saveddesign_name'), ['name'], unique=True)


def downgrade() -> None:
    with op.batch_alter_table('saveddesign', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_saveddesign_name'))
    op.drop_table('saveddesign')
