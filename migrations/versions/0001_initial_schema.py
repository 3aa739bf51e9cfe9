"""Initial register schema: series, batches, issued codes, the hash-chained log.

Revision ID: 0001
Revises: 
"""

from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0001'
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('log_head',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('last_id', sa.BigInteger(), nullable=False),
    sa.Column('last_hash', sa.String(length=64), nullable=False),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_log_head'))
    )
    # the chain starts from a hash of 64 zeros
    op.bulk_insert(
        sa.table("log_head", sa.column("id"), sa.column("last_id"), sa.column("last_hash")),
        [{"id": 1, "last_id": 0, "last_hash": "0" * 64}],
    )
    op.create_table('series',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('key', sa.String(length=64), nullable=False),
    sa.Column('title', sa.String(length=200), nullable=False),
    sa.Column('scheme', sa.String(length=40), nullable=False),
    sa.Column('alphabet', sa.String(length=200), nullable=False),
    sa.Column('length', sa.Integer(), nullable=False),
    sa.Column('prefix', sa.String(length=32), nullable=False),
    sa.Column('suffix', sa.String(length=32), nullable=False),
    sa.Column('grouping', sa.String(length=64), nullable=False),
    sa.Column('separator', sa.String(length=4), nullable=False),
    sa.Column('mode', sa.String(length=16), nullable=False),
    sa.Column('range_start', sa.BigInteger(), nullable=False),
    sa.Column('range_end', sa.BigInteger(), nullable=False),
    sa.Column('next_counter', sa.BigInteger(), nullable=False),
    sa.Column('code_count', sa.BigInteger(), nullable=False),
    sa.Column('imported_count', sa.BigInteger(), nullable=False),
    sa.Column('scatter_key', sa.LargeBinary(), nullable=True),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('created_by', sa.String(length=120), nullable=False),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_series')),
    sa.UniqueConstraint('key', name=op.f('uq_series_key'))
    )
    op.create_table('batch',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('series_id', sa.Integer(), nullable=False),
    sa.Column('kind', sa.String(length=16), nullable=False),
    sa.Column('request_id', sa.String(length=200), nullable=True),
    sa.Column('count', sa.Integer(), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('actor', sa.String(length=120), nullable=False),
    sa.ForeignKeyConstraint(['series_id'], ['series.id'], name=op.f('fk_batch_series_id_series')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_batch')),
    sa.UniqueConstraint('request_id', name=op.f('uq_batch_request_id'))
    )
    op.create_index(op.f('ix_batch_series_id'), 'batch', ['series_id'], unique=False)

    op.create_table('issued_code',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('series_id', sa.Integer(), nullable=False),
    sa.Column('code', sa.String(length=100), nullable=False),
    sa.Column('base', sa.BigInteger(), nullable=False),
    sa.Column('status', sa.String(length=16), nullable=False),
    sa.Column('batch_id', sa.Integer(), nullable=False),
    sa.Column('holder', sa.String(length=200), nullable=True),
    sa.Column('note', sa.Text(), nullable=True),
    sa.Column('issued_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('issued_by', sa.String(length=120), nullable=False),
    sa.Column('void_reason', sa.Text(), nullable=True),
    sa.Column('voided_at', sa.DateTime(timezone=True), nullable=True),
    sa.Column('voided_by', sa.String(length=120), nullable=True),
    sa.Column('replaces_id', sa.Integer(), nullable=True),
    sa.Column('replaced_by_id', sa.Integer(), nullable=True),
    sa.Column('print_count', sa.Integer(), nullable=False),
    sa.Column('last_seen_at', sa.DateTime(timezone=True), nullable=True),
    sa.Column('last_seen_where', sa.String(length=200), nullable=True),
    sa.ForeignKeyConstraint(['batch_id'], ['batch.id'], name=op.f('fk_issued_code_batch_id_batch')),
    sa.ForeignKeyConstraint(['replaced_by_id'], ['issued_code.id'], name=op.f('fk_issued_code_replaced_by_id_issued_code')),
    sa.ForeignKeyConstraint(['replaces_id'], ['issued_code.id'], name=op.f('fk_issued_code_replaces_id_issued_code')),
    sa.ForeignKeyConstraint(['series_id'], ['series.id'], name=op.f('fk_issued_code_series_id_series')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_issued_code')),
    sa.UniqueConstraint('code', name=op.f('uq_issued_code_code')),
    sa.UniqueConstraint('series_id', 'base', name=op.f('uq_issued_code_series_id_base'))
    )
    op.create_index(op.f('ix_issued_code_batch_id'), 'issued_code', ['batch_id'], unique=False)

    op.create_table('log_entry',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('actor', sa.String(length=120), nullable=False),
    sa.Column('action', sa.String(length=32), nullable=False),
    sa.Column('series_id', sa.Integer(), nullable=True),
    sa.Column('code', sa.String(length=100), nullable=True),
    sa.Column('batch_id', sa.Integer(), nullable=True),
    sa.Column('detail', sa.Text(), nullable=False),
    sa.Column('prev_hash', sa.String(length=64), nullable=False),
    sa.Column('hash', sa.String(length=64), nullable=False),
    sa.ForeignKeyConstraint(['batch_id'], ['batch.id'], name=op.f('fk_log_entry_batch_id_batch')),
    sa.ForeignKeyConstraint(['series_id'], ['series.id'], name=op.f('fk_log_entry_series_id_series')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_log_entry')),
    sa.UniqueConstraint('hash', name=op.f('uq_log_entry_hash'))
    )
    op.create_index(op.f('ix_log_entry_code'), 'log_entry', ['code'], unique=False)
    op.create_index(op.f('ix_log_entry_series_id_id'), 'log_entry', ['series_id', 'id'], unique=False)



def downgrade() -> None:
    op.drop_index(op.f('ix_log_entry_series_id_id'), table_name='log_entry')
    op.drop_index(op.f('ix_log_entry_code'), table_name='log_entry')

    op.drop_table('log_entry')
    op.drop_index(op.f('ix_issued_code_batch_id'), table_name='issued_code')

    op.drop_table('issued_code')
    op.drop_index(op.f('ix_batch_series_id'), table_name='batch')

    op.drop_table('batch')
    op.drop_table('series')
    op.drop_table('log_head')
