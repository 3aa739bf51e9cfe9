"""Bearer tokens for the HTTP service: name, role, a slow hash of the secret.

Revision ID: access_tokens
Revises: 0002_stock_counts
"""

from __future__ import annotations

from alembic import op
import sqlalchemy as sa



revision = 'access_tokens'
down_revision = '0002_stock_counts'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('access_token',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=64), nullable=False),
    sa.Column('lookup', sa.String(length=32), nullable=False),
    sa.Column('role', sa.String(length=16), nullable=False),
    sa.Column('salt', sa.LargeBinary(), nullable=False),
    sa.Column('digest', sa.LargeBinary(), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('created_by', sa.String(length=120), nullable=False),
    sa.Column('revoked_at', sa.DateTime(timezone=True), nullable=True),
    sa.Column('revoked_by', sa.String(length=120), nullable=True),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_access_token')),
    sa.UniqueConstraint('lookup', name=op.f('uq_access_token_lookup')),
    sa.UniqueConstraint('name', name=op.f('uq_access_token_name'))
    )


def downgrade() -> None:
    op.drop_table('access_token')
