"""parameter sets and runs

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-01 23:09:40.909059
"""
from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0002'
down_revision = '0001'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('param_sets',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('project_id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=200), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.ForeignKeyConstraint(['project_id'], ['projects.id'], name=op.f('fk_param_sets_project_id_projects'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_param_sets')),
    sa.UniqueConstraint('project_id', 'name', name=op.f('uq_param_sets_project_id_name'))
    )
    with op.batch_alter_table('param_sets', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_param_sets_project_id'), ['project_id'], unique=False)

    op.create_table('param_set_versions',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('param_set_id', sa.Integer(), nullable=False),
    sa.Column('number', sa.Integer(), nullable=False),
    sa.Column('method', sa.String(length=64), nullable=False),
    sa.Column('k', sa.String(length=16), nullable=True),
    sa.Column('values_json', sa.Text(), nullable=False),
    sa.Column('values_hash', sa.String(length=64), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.CheckConstraint('number >= 1', name=op.f('ck_param_set_versions_number_positive')),
    sa.ForeignKeyConstraint(['param_set_id'], ['param_sets.id'], name=op.f('fk_param_set_versions_param_set_id_param_sets'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_param_set_versions')),
    sa.UniqueConstraint('param_set_id', 'number', name=op.f('uq_param_set_versions_param_set_id_number'))
    )
    with op.batch_alter_table('param_set_versions', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_param_set_versions_param_set_id'), ['param_set_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_param_set_versions_values_hash'), ['values_hash'], unique=False)

    op.create_table('runs',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('version_id', sa.Integer(), nullable=False),
    sa.Column('param_set_version_id', sa.Integer(), nullable=True),
    sa.Column('rerun_of', sa.Integer(), nullable=True),
    sa.Column('kind', sa.String(length=16), nullable=False),
    sa.Column('method', sa.String(length=64), nullable=False),
    sa.Column('label', sa.Text(), nullable=False),
    sa.Column('params_json', sa.Text(), nullable=False),
    sa.Column('k_requested', sa.String(length=16), nullable=True),
    sa.Column('seed', sa.Integer(), nullable=True),
    sa.Column('repeats', sa.Integer(), nullable=False),
    sa.Column('status', sa.String(length=16), nullable=False),
    sa.Column('error', sa.Text(), nullable=True),
    sa.Column('started_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('finished_at', sa.DateTime(timezone=True), nullable=True),
    sa.Column('host', sa.String(length=255), nullable=True),
    sa.Column('pid', sa.Integer(), nullable=True),
    sa.Column('process_token', sa.String(length=64), nullable=True),
    sa.Column('k', sa.Integer(), nullable=True),
    sa.Column('membership_blob', sa.String(length=64), nullable=True),
    sa.Column('membership_hash', sa.String(length=64), nullable=True),
    sa.Column('stability_blob', sa.String(length=64), nullable=True),
    sa.Column('eigenvalues_blob', sa.String(length=64), nullable=True),
    sa.Column('quality_json', sa.Text(), nullable=False),
    sa.Column('diagnostics_json', sa.Text(), nullable=False),
    sa.Column('warnings_json', sa.Text(), nullable=False),
    sa.Column('provenance_json', sa.Text(), nullable=False),
    sa.CheckConstraint("kind IN ('computed', 'attached')", name=op.f('ck_runs_kind_known')),
    sa.CheckConstraint("status IN ('running', 'done', 'failed', 'cancelled', 'interrupted')", name=op.f('ck_runs_status_known')),
    sa.ForeignKeyConstraint(['eigenvalues_blob'], ['blobs.hash'], name=op.f('fk_runs_eigenvalues_blob_blobs')),
    sa.ForeignKeyConstraint(['membership_blob'], ['blobs.hash'], name=op.f('fk_runs_membership_blob_blobs')),
    sa.ForeignKeyConstraint(['param_set_version_id'], ['param_set_versions.id'], name=op.f('fk_runs_param_set_version_id_param_set_versions')),
    sa.ForeignKeyConstraint(['rerun_of'], ['runs.id'], name=op.f('fk_runs_rerun_of_runs')),
    sa.ForeignKeyConstraint(['stability_blob'], ['blobs.hash'], name=op.f('fk_runs_stability_blob_blobs')),
    sa.ForeignKeyConstraint(['version_id'], ['network_versions.id'], name=op.f('fk_runs_version_id_network_versions'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_runs'))
    )
    with op.batch_alter_table('runs', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_runs_membership_hash'), ['membership_hash'], unique=False)
        batch_op.create_index(batch_op.f('ix_runs_param_set_version_id'), ['param_set_version_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_runs_status'), ['status'], unique=False)
        batch_op.create_index(batch_op.f('ix_runs_version_id'), ['version_id'], unique=False)

    op.create_table('run_communities',
    sa.Column('run_id', sa.Integer(), nullable=False),
    sa.Column('community', sa.Integer(), nullable=False),
    sa.Column('size', sa.Integer(), nullable=False),
    sa.Column('volume', sa.Float(), nullable=True),
    sa.Column('cut', sa.Float(), nullable=True),
    sa.Column('conductance', sa.Float(), nullable=True),
    sa.Column('stability', sa.Float(), nullable=True),
    sa.ForeignKeyConstraint(['run_id'], ['runs.id'], name=op.f('fk_run_communities_run_id_runs'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('run_id', 'community', name=op.f('pk_run_communities'))
    )
    op.create_table('run_measures',
    sa.Column('run_id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=64), nullable=False),
    sa.Column('value', sa.Float(), nullable=True),
    sa.ForeignKeyConstraint(['run_id'], ['runs.id'], name=op.f('fk_run_measures_run_id_runs'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('run_id', 'name', name=op.f('pk_run_measures'))
    )


def downgrade() -> None:
    op.drop_table('run_measures')
    op.drop_table('run_communities')
    with op.batch_alter_table('runs', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_runs_version_id'))
        batch_op.drop_index(batch_op.f('ix_runs_status'))
        batch_op.drop_index(batch_op.f('ix_runs_param_set_version_id'))
        batch_op.drop_index(batch_op.f('ix_runs_membership_hash'))

    op.drop_table('runs')
    with op.batch_alter_table('param_set_versions', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_param_set_versions_values_hash'))
        batch_op.drop_index(batch_op.f('ix_param_set_versions_param_set_id'))

    op.drop_table('param_set_versions')
    with op.batch_alter_table('param_sets', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_param_sets_project_id'))

    op.drop_table('param_sets')
