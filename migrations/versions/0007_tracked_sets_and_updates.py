"""tracked sets and updates: parameter sets a network re-runs on each new version, and each update's runs

Self-contained: creates three new tables and their indexes; no existing table changes, so it
renumbers safely at merge (only the revision ids and HEAD_REVISION change).

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-02 14:50:00
"""
from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0007'
down_revision = '0006'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('tracked_sets',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('network_id', sa.Integer(), nullable=False),
    sa.Column('param_set_version_id', sa.Integer(), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('created_by', sa.String(length=200), nullable=True),
    sa.ForeignKeyConstraint(['network_id'], ['networks.id'], name=op.f('fk_tracked_sets_network_id_networks'), ondelete='CASCADE'),
    sa.ForeignKeyConstraint(['param_set_version_id'], ['param_set_versions.id'], name=op.f('fk_tracked_sets_param_set_version_id_param_set_versions'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_tracked_sets')),
    sa.UniqueConstraint('network_id', 'param_set_version_id', name=op.f('uq_tracked_sets_network_id_param_set_version_id'))
    )
    with op.batch_alter_table('tracked_sets', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_tracked_sets_network_id'), ['network_id'], unique=False)

    op.create_table('tracked_updates',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('network_id', sa.Integer(), nullable=False),
    sa.Column('version_id', sa.Integer(), nullable=False),
    sa.Column('previous_version_id', sa.Integer(), nullable=True),
    sa.Column('trigger', sa.String(length=16), nullable=False),
    sa.Column('status', sa.String(length=16), nullable=False),
    sa.Column('started_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('finished_at', sa.DateTime(timezone=True), nullable=True),
    sa.Column('created_by', sa.String(length=200), nullable=True),
    sa.Column('host', sa.String(length=255), nullable=True),
    sa.Column('pid', sa.Integer(), nullable=True),
    sa.Column('process_token', sa.String(length=64), nullable=True),
    sa.CheckConstraint("status IN ('running', 'done', 'failed', 'cancelled', 'interrupted')", name=op.f('ck_tracked_updates_status_known')),
    sa.CheckConstraint("trigger IN ('import', 'request')", name=op.f('ck_tracked_updates_trigger_known')),
    sa.ForeignKeyConstraint(['network_id'], ['networks.id'], name=op.f('fk_tracked_updates_network_id_networks'), ondelete='CASCADE'),
    sa.ForeignKeyConstraint(['previous_version_id'], ['network_versions.id'], name=op.f('fk_tracked_updates_previous_version_id_network_versions'), ondelete='SET NULL'),
    sa.ForeignKeyConstraint(['version_id'], ['network_versions.id'], name=op.f('fk_tracked_updates_version_id_network_versions'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_tracked_updates'))
    )
    with op.batch_alter_table('tracked_updates', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_tracked_updates_network_id'), ['network_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_tracked_updates_version_id'), ['version_id'], unique=False)

    op.create_table('tracked_update_runs',
    sa.Column('update_id', sa.Integer(), nullable=False),
    sa.Column('position', sa.Integer(), nullable=False),
    sa.Column('params_ref', sa.String(length=420), nullable=False),
    sa.Column('param_set_version_id', sa.Integer(), nullable=True),
    sa.Column('run_id', sa.Integer(), nullable=True),
    sa.Column('previous_run_id', sa.Integer(), nullable=True),
    sa.Column('status', sa.String(length=16), nullable=False),
    sa.Column('error', sa.Text(), nullable=True),
    sa.Column('summary_json', sa.Text(), nullable=False),
    sa.Column('labels_json', sa.Text(), nullable=True),
    sa.ForeignKeyConstraint(['param_set_version_id'], ['param_set_versions.id'], name=op.f('fk_tracked_update_runs_param_set_version_id_param_set_versions'), ondelete='SET NULL'),
    sa.ForeignKeyConstraint(['previous_run_id'], ['runs.id'], name=op.f('fk_tracked_update_runs_previous_run_id_runs'), ondelete='SET NULL'),
    sa.ForeignKeyConstraint(['run_id'], ['runs.id'], name=op.f('fk_tracked_update_runs_run_id_runs'), ondelete='SET NULL'),
    sa.ForeignKeyConstraint(['update_id'], ['tracked_updates.id'], name=op.f('fk_tracked_update_runs_update_id_tracked_updates'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('update_id', 'position', name=op.f('pk_tracked_update_runs'))
    )
    with op.batch_alter_table('tracked_update_runs', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_tracked_update_runs_run_id'), ['run_id'], unique=False)


def downgrade() -> None:
    with op.batch_alter_table('tracked_update_runs', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_tracked_update_runs_run_id'))
    op.drop_table('tracked_update_runs')
    with op.batch_alter_table('tracked_updates', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_tracked_updates_version_id'))
        batch_op.drop_index(batch_op.f('ix_tracked_updates_network_id'))
    op.drop_table('tracked_updates')
    with op.batch_alter_table('tracked_sets', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_tracked_sets_network_id'))
    op.drop_table('tracked_sets')
