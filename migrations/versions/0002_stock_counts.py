"""Stock counts that span days (counts, their files, their scans) and each code's expected place.

Revision ID: 0002_stock_counts
Revises: 0001
"""

from __future__ import annotations

from alembic import op
import sqlalchemy as sa


revision = '0002_stock_counts'
down_revision = '0001'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('stock_count',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=64), nullable=False),
    sa.Column('series_id', sa.Integer(), nullable=False),
    sa.Column('scope', sa.String(length=16), nullable=False),
    sa.Column('scope_text', sa.String(length=200), nullable=True),
    sa.Column('scope_first', sa.BigInteger(), nullable=True),
    sa.Column('scope_last', sa.BigInteger(), nullable=True),
    sa.Column('zone', sa.String(length=64), nullable=False),
    sa.Column('state', sa.String(length=16), nullable=False),
    sa.Column('opened_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('opened_by', sa.String(length=120), nullable=False),
    sa.Column('closed_at', sa.DateTime(timezone=True), nullable=True),
    sa.Column('closed_by', sa.String(length=120), nullable=True),
    sa.Column('result', sa.Text(), nullable=True),
    sa.ForeignKeyConstraint(['series_id'], ['series.id'], name=op.f('fk_stock_count_series_id_series')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_stock_count')),
    sa.UniqueConstraint('name', name=op.f('uq_stock_count_name'))
    )
    op.create_table('stock_count_file',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('count_id', sa.Integer(), nullable=False),
    sa.Column('digest', sa.String(length=64), nullable=False),
    sa.Column('name', sa.String(length=200), nullable=False),
    sa.Column('scanner', sa.String(length=200), nullable=True),
    sa.Column('zone', sa.String(length=64), nullable=False),
    sa.Column('scans', sa.Integer(), nullable=False),
    sa.Column('blank_lines', sa.Integer(), nullable=False),
    sa.Column('comment_lines', sa.Integer(), nullable=False),
    sa.Column('added_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('added_by', sa.String(length=120), nullable=False),
    sa.ForeignKeyConstraint(['count_id'], ['stock_count.id'], name=op.f('fk_stock_count_file_count_id_stock_count')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_stock_count_file')),
    sa.UniqueConstraint('count_id', 'digest', name=op.f('uq_stock_count_file_count_id_digest'))
    )
    op.create_table('stock_count_scan',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('count_id', sa.Integer(), nullable=False),
    sa.Column('file_id', sa.Integer(), nullable=False),
    sa.Column('line', sa.Integer(), nullable=False),
    sa.Column('scanned', sa.String(length=200), nullable=False),
    sa.Column('seen_at', sa.DateTime(timezone=True), nullable=True),
    sa.Column('seen_where', sa.String(length=200), nullable=True),
    sa.ForeignKeyConstraint(['count_id'], ['stock_count.id'], name=op.f('fk_stock_count_scan_count_id_stock_count')),
    sa.ForeignKeyConstraint(['file_id'], ['stock_count_file.id'], name=op.f('fk_stock_count_scan_file_id_stock_count_file')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_stock_count_scan'))
    )
    with op.batch_alter_table('stock_count_scan', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_stock_count_scan_count_id_file_id_line'), ['count_id', 'file_id', 'line'], unique=False)

    # a plain ADD COLUMN: no copy of a big issued_code table on SQLite
    op.add_column('issued_code', sa.Column('expected_where', sa.String(length=200), nullable=True))



def downgrade() -> None:
    with op.batch_alter_table('issued_code', schema=None) as batch_op:
        batch_op.drop_column('expected_where')

    with op.batch_alter_table('stock_count_scan', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_stock_count_scan_count_id_file_id_line'))

    op.drop_table('stock_count_scan')
    op.drop_table('stock_count_file')
    op.drop_table('stock_count')
