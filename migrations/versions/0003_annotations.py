"""annotations: insert-only notes and tags on runs, network versions and parameter-set versions

Self-contained: creates one new table and its indexes; no existing table changes.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-02 11:29:37.421454
"""
from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0003'
down_revision = '0002'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('annotations',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('run_id', sa.Integer(), nullable=True),
    sa.Column('version_id', sa.Integer(), nullable=True),
    sa.Column('param_set_version_id', sa.Integer(), nullable=True),
    sa.Column('action', sa.String(length=16), nullable=False),
    sa.Column('text', sa.Text(), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.CheckConstraint("action IN ('note', 'tag', 'untag')", name=op.f('ck_annotations_action_known')),
    sa.CheckConstraint("(CASE WHEN run_id IS NULL THEN 0 ELSE 1 END) + (CASE WHEN version_id IS NULL THEN 0 ELSE 1 END)"
                       " + (CASE WHEN param_set_version_id IS NULL THEN 0 ELSE 1 END) = 1",
                       name=op.f('ck_annotations_one_target')),
    sa.ForeignKeyConstraint(['param_set_version_id'], ['param_set_versions.id'], name=op.f('fk_annotations_param_set_version_id_param_set_versions'), ondelete='CASCADE'),
    sa.ForeignKeyConstraint(['run_id'], ['runs.id'], name=op.f('fk_annotations_run_id_runs'), ondelete='CASCADE'),
    sa.ForeignKeyConstraint(['version_id'], ['network_versions.id'], name=op.f('fk_annotations_version_id_network_versions'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_annotations'))
    )
    with op.batch_alter_table('annotations', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_annotations_param_set_version_id'), ['param_set_version_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_annotations_run_id'), ['run_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_annotations_version_id'), ['version_id'], unique=False)



def downgrade() -> None:
    with op.batch_alter_table('annotations', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_annotations_version_id'))
        batch_op.drop_index(batch_op.f('ix_annotations_run_id'))
        batch_op.drop_index(batch_op.f('ix_annotations_param_set_version_id'))

    op.drop_table('annotations')
