"""users: who created each record (created_by) on everything a person makes

Adds one nullable column, ``created_by``, to projects, networks, network versions, parameter sets
and their versions, runs and annotations. Records made before this revision keep NULL ("unknown").
Plain ADD COLUMN on both back ends: SQLite adds a nullable column without rebuilding the table.

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-02 13:05:00
"""
from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0005'
down_revision = '0004'
branch_labels = None
depends_on = None

TABLES = ('projects', 'networks', 'network_versions', 'param_sets', 'param_set_versions', 'runs', 'annotations')


def upgrade() -> None:
    for table in TABLES:
        op.add_column(table, sa.Column('created_by', sa.String(length=200), nullable=True))


def downgrade() -> None:
    for table in reversed(TABLES):
        with op.batch_alter_table(table, schema=None) as batch_op:
            batch_op.drop_column('created_by')
