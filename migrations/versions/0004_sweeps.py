"""sweeps, their runs, and cached spectral embeddings (self-contained: only new tables)

Revision ID: 0004
Revises: 0003
Create Date: 2026-12-02 11:34:52.876368
"""
from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0004'
down_revision = '0003'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('embeddings',
    sa.Column('key', sa.String(length=64), nullable=False),
    sa.Column('version_id', sa.Integer(), nullable=False),
    sa.Column('operator', sa.String(length=32), nullable=False),
    sa.Column('fields_json', sa.Text(), nullable=False),
    sa.Column('n_rows', sa.Integer(), nullable=False),
    sa.Column('n_vectors', sa.Integer(), nullable=False),
    sa.Column('values_blob', sa.String(length=64), nullable=False),
    sa.Column('vectors_blob', sa.String(length=64), nullable=False),
    sa.Column('solver', sa.String(length=32), nullable=False),
    sa.Column('residuals_json', sa.Text(), nullable=False),
    sa.Column('info_json', sa.Text(), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.ForeignKeyConstraint(['values_blob'], ['blobs.hash'], name=op.f('fk_embeddings_values_blob_blobs')),
    sa.ForeignKeyConstraint(['vectors_blob'], ['blobs.hash'], name=op.f('fk_embeddings_vectors_blob_blobs')),
    sa.ForeignKeyConstraint(['version_id'], ['network_versions.id'], name=op.f('fk_embeddings_version_id_network_versions'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('key', name=op.f('pk_embeddings'))
    )
    with op.batch_alter_table('embeddings', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_embeddings_version_id'), ['version_id'], unique=False)

    op.create_table('sweeps',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('version_id', sa.Integer(), nullable=False),
    sa.Column('param_set_version_id', sa.Integer(), nullable=True),
    sa.Column('method', sa.String(length=64), nullable=False),
    sa.Column('params_json', sa.Text(), nullable=False),
    sa.Column('ks_json', sa.Text(), nullable=False),
    sa.Column('vary_name', sa.String(length=64), nullable=True),
    sa.Column('vary_values_json', sa.Text(), nullable=False),
    sa.Column('seed', sa.Integer(), nullable=False),
    sa.Column('seeds', sa.Integer(), nullable=False),
    sa.Column('perturb', sa.Float(), nullable=False),
    sa.Column('status', sa.String(length=16), nullable=False),
    sa.Column('error', sa.Text(), nullable=True),
    sa.Column('started_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('finished_at', sa.DateTime(timezone=True), nullable=True),
    sa.Column('host', sa.String(length=255), nullable=True),
    sa.Column('pid', sa.Integer(), nullable=True),
    sa.Column('process_token', sa.String(length=64), nullable=True),
    sa.CheckConstraint("status IN ('running', 'done', 'failed', 'cancelled', 'interrupted')", name=op.f('ck_sweeps_status_known')),
    sa.ForeignKeyConstraint(['param_set_version_id'], ['param_set_versions.id'], name=op.f('fk_sweeps_param_set_version_id_param_set_versions')),
    sa.ForeignKeyConstraint(['version_id'], ['network_versions.id'], name=op.f('fk_sweeps_version_id_network_versions'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_sweeps'))
    )
    with op.batch_alter_table('sweeps', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_sweeps_status'), ['status'], unique=False)
        batch_op.create_index(batch_op.f('ix_sweeps_version_id'), ['version_id'], unique=False)

    op.create_table('sweep_runs',
    sa.Column('sweep_id', sa.Integer(), nullable=False),
    sa.Column('run_id', sa.Integer(), nullable=False),
    sa.Column('k', sa.Integer(), nullable=True),
    sa.Column('value_json', sa.String(length=200), nullable=False),
    sa.Column('repeat', sa.Integer(), nullable=False),
    sa.ForeignKeyConstraint(['run_id'], ['runs.id'], name=op.f('fk_sweep_runs_run_id_runs'), ondelete='CASCADE'),
    sa.ForeignKeyConstraint(['sweep_id'], ['sweeps.id'], name=op.f('fk_sweep_runs_sweep_id_sweeps'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('sweep_id', 'run_id', name=op.f('pk_sweep_runs'))
    )
    with op.batch_alter_table('sweep_runs', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_sweep_runs_run_id'), ['run_id'], unique=False)



def downgrade() -> None:
    with op.batch_alter_table('sweep_runs', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_sweep_runs_run_id'))

    op.drop_table('sweep_runs')
    with op.batch_alter_table('sweeps', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_sweeps_version_id'))
        batch_op.drop_index(batch_op.f('ix_sweeps_status'))

    op.drop_table('sweeps')
    with op.batch_alter_table('embeddings', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_embeddings_version_id'))

    op.drop_table('embeddings')
