"""sweep users: who started each sweep (created_by), as for the other records since 0005

Adds one nullable column to sweeps. Sweeps recorded before this revision keep NULL ("unknown");
their runs already name their user. Plain ADD COLUMN on both back ends.

Revision ID: 0009
Revises: 0008
Create Date: 2026-12-02 19:10:00
"""
from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0009'
down_revision = '0008'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.add_column('sweeps', sa.Column('created_by', sa.String(length=200), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table('sweeps', schema=None) as batch_op:
        batch_op.drop_column('created_by')
