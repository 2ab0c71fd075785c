"""projects networks versions blobs

Revision ID: 0001
Revises: 
Create Date: 2026-12-01 23:08:20.581150
"""
from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0001'
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('blobs',
    sa.Column('hash', sa.String(length=64), nullable=False),
    sa.Column('codec', sa.String(length=32), nullable=False),
    sa.Column('dtype', sa.String(length=16), nullable=False),
    sa.Column('length', sa.Integer(), nullable=False),
    sa.Column('raw_size', sa.Integer(), nullable=False),
    sa.Column('data', sa.LargeBinary(), nullable=False),
    sa.PrimaryKeyConstraint('hash', name=op.f('pk_blobs'))
    )
    op.create_table('projects',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=200), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_projects')),
    sa.UniqueConstraint('name', name=op.f('uq_projects_name'))
    )
    op.create_table('networks',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('project_id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=200), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.ForeignKeyConstraint(['project_id'], ['projects.id'], name=op.f('fk_networks_project_id_projects'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_networks')),
    sa.UniqueConstraint('project_id', 'name', name=op.f('uq_networks_project_id_name'))
    )
    with op.batch_alter_table('networks', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_networks_project_id'), ['project_id'], unique=False)

    op.create_table('network_versions',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('network_id', sa.Integer(), nullable=False),
    sa.Column('number', sa.Integer(), nullable=False),
    sa.Column('parent_id', sa.Integer(), nullable=True),
    sa.Column('content_hash', sa.String(length=64), nullable=False),
    sa.Column('n_nodes', sa.Integer(), nullable=False),
    sa.Column('n_edges', sa.Integer(), nullable=False),
    sa.Column('total_weight', sa.Float(), nullable=False),
    sa.Column('message', sa.Text(), nullable=False),
    sa.Column('source_name', sa.Text(), nullable=False),
    sa.Column('source_format', sa.String(length=32), nullable=False),
    sa.Column('policy_json', sa.Text(), nullable=False),
    sa.Column('report_json', sa.Text(), nullable=False),
    sa.Column('node_offsets_blob', sa.String(length=64), nullable=False),
    sa.Column('node_bytes_blob', sa.String(length=64), nullable=False),
    sa.Column('edge_u_blob', sa.String(length=64), nullable=False),
    sa.Column('edge_v_blob', sa.String(length=64), nullable=False),
    sa.Column('weight_blob', sa.String(length=64), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.CheckConstraint('number >= 1', name=op.f('ck_network_versions_number_positive')),
    sa.ForeignKeyConstraint(['edge_u_blob'], ['blobs.hash'], name=op.f('fk_network_versions_edge_u_blob_blobs')),
    sa.ForeignKeyConstraint(['edge_v_blob'], ['blobs.hash'], name=op.f('fk_network_versions_edge_v_blob_blobs')),
    sa.ForeignKeyConstraint(['network_id'], ['networks.id'], name=op.f('fk_network_versions_network_id_networks'), ondelete='CASCADE'),
    sa.ForeignKeyConstraint(['node_bytes_blob'], ['blobs.hash'], name=op.f('fk_network_versions_node_bytes_blob_blobs')),
    sa.ForeignKeyConstraint(['node_offsets_blob'], ['blobs.hash'], name=op.f('fk_network_versions_node_offsets_blob_blobs')),
    sa.ForeignKeyConstraint(['parent_id'], ['network_versions.id'], name=op.f('fk_network_versions_parent_id_network_versions')),
    sa.ForeignKeyConstraint(['weight_blob'], ['blobs.hash'], name=op.f('fk_network_versions_weight_blob_blobs')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_network_versions')),
    sa.UniqueConstraint('network_id', 'number', name=op.f('uq_network_versions_network_id_number'))
    )
    with op.batch_alter_table('network_versions', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_network_versions_content_hash'), ['content_hash'], unique=False)
        batch_op.create_index(batch_op.f('ix_network_versions_network_id'), ['network_id'], unique=False)



def downgrade() -> None:
    with op.batch_alter_table('network_versions', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_network_versions_network_id'))
        batch_op.drop_index(batch_op.f('ix_network_versions_content_hash'))

    op.drop_table('network_versions')
    with op.batch_alter_table('networks', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_networks_project_id'))

    op.drop_table('networks')
    op.drop_table('projects')
    op.drop_table('blobs')
