"""node attribute tables: typed columns of node data stored with a network version

Self-contained: creates two new tables (node_tables, node_table_columns) and their indexes; no existing
table changes. The columns' arrays are ordinary blobs.

Revision ID: 0008
Revises: 0007
Create Date: 2026-12-02 14:50:00
"""
from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0008'
down_revision = '0007'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('node_tables',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('version_id', sa.Integer(), nullable=False),
    sa.Column('attributes_hash', sa.String(length=64), nullable=False),
    sa.Column('n_rows', sa.Integer(), nullable=False),
    sa.Column('source_name', sa.Text(), nullable=False),
    sa.Column('coords_json', sa.Text(), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.ForeignKeyConstraint(['version_id'], ['network_versions.id'], name=op.f('fk_node_tables_version_id_network_versions'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_node_tables')),
    sa.UniqueConstraint('version_id', name=op.f('uq_node_tables_version_id'))
    )
    with op.batch_alter_table('node_tables', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_node_tables_attributes_hash'), ['attributes_hash'], unique=False)

    op.create_table('node_table_columns',
    sa.Column('table_id', sa.Integer(), nullable=False),
    sa.Column('position', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=200), nullable=False),
    sa.Column('type', sa.String(length=16), nullable=False),
    sa.Column('values_blob', sa.String(length=64), nullable=False),
    sa.Column('present_blob', sa.String(length=64), nullable=False),
    sa.Column('dictionary_offsets_blob', sa.String(length=64), nullable=True),
    sa.Column('dictionary_bytes_blob', sa.String(length=64), nullable=True),
    sa.CheckConstraint("type IN ('boolean', 'number', 'text')", name=op.f('ck_node_table_columns_type_known')),
    sa.ForeignKeyConstraint(['dictionary_bytes_blob'], ['blobs.hash'], name=op.f('fk_node_table_columns_dictionary_bytes_blob_blobs')),
    sa.ForeignKeyConstraint(['dictionary_offsets_blob'], ['blobs.hash'], name=op.f('fk_node_table_columns_dictionary_offsets_blob_blobs')),
    sa.ForeignKeyConstraint(['present_blob'], ['blobs.hash'], name=op.f('fk_node_table_columns_present_blob_blobs')),
    sa.ForeignKeyConstraint(['table_id'], ['node_tables.id'], name=op.f('fk_node_table_columns_table_id_node_tables'), ondelete='CASCADE'),
    sa.ForeignKeyConstraint(['values_blob'], ['blobs.hash'], name=op.f('fk_node_table_columns_values_blob_blobs')),
    sa.PrimaryKeyConstraint('table_id', 'position', name=op.f('pk_node_table_columns'))
    )


def downgrade() -> None:
    op.drop_table('node_table_columns')
    with op.batch_alter_table('node_tables', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_node_tables_attributes_hash'))

    op.drop_table('node_tables')
