"""blob chunks: arrays larger than the chunk size are stored in pieces

A bytea value and an SQLite blob are each limited to 1 GB, so one ``blobs.data`` value cannot hold
the arrays of a 100M-edge network. This revision adds ``blobs.chunks`` (0: the array is in
``blobs.data``, as every row written before this revision; n: it is in n ``blob_chunks`` rows) and the
``blob_chunks`` table. Existing rows are not rewritten: both layouts are read. On PostgreSQL,
``blobs.length`` and ``blobs.raw_size`` become BIGINT (SQLite's INTEGER is 64-bit already).

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-02 14:50:00
"""
from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0006'
down_revision = '0005'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.add_column('blobs', sa.Column('chunks', sa.Integer(), server_default='0', nullable=False))
    if op.get_bind().dialect.name == 'postgresql':
        op.alter_column('blobs', 'length', type_=sa.BigInteger(), existing_type=sa.Integer())
        op.alter_column('blobs', 'raw_size', type_=sa.BigInteger(), existing_type=sa.Integer())
    op.create_table(
        'blob_chunks',
        sa.Column('blob_hash', sa.String(length=64), nullable=False),
        sa.Column('seq', sa.Integer(), nullable=False),
        sa.Column('raw_size', sa.Integer(), nullable=False),
        sa.Column('hash', sa.String(length=64), nullable=False),
        sa.Column('data', sa.LargeBinary(), nullable=False),
        sa.ForeignKeyConstraint(['blob_hash'], ['blobs.hash'], name=op.f('fk_blob_chunks_blob_hash_blobs'),
                                ondelete='CASCADE'),
        sa.PrimaryKeyConstraint('blob_hash', 'seq', name=op.f('pk_blob_chunks')),
    )


def downgrade() -> None:
    # only a store without chunked arrays can go back (their rows would lose their data)
    if op.get_bind().execute(sa.text("SELECT COUNT(*) FROM blobs WHERE chunks > 0")).scalar():
        raise RuntimeError("the store holds arrays in chunks: revision 0005 cannot hold them")
    op.drop_table('blob_chunks')
    if op.get_bind().dialect.name == 'postgresql':
        op.alter_column('blobs', 'raw_size', type_=sa.Integer(), existing_type=sa.BigInteger())
        op.alter_column('blobs', 'length', type_=sa.Integer(), existing_type=sa.BigInteger())
    with op.batch_alter_table('blobs', schema=None) as batch_op:
        batch_op.drop_column('chunks')
