"""Series say whether their holders are people (member cards) or places and things (tools on
shelves): the personal-data caution follows this setting. Existing scattered series (the
member-like ones) hold people; in-order ones do not.

Revision ID: 0004_series_people
Revises: access_tokens
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0004_series_people"
down_revision = "access_tokens"
branch_labels = None
depends_on = None


def upgrade() -> None:
    # a plain ADD COLUMN with its default: no copy of the table, whose rows others point at
    op.add_column(
        "series", sa.Column("holds_people", sa.Boolean(), nullable=False, server_default=sa.false())
    )
    series = sa.table("series", sa.column("mode", sa.String), sa.column("holds_people", sa.Boolean))
    op.execute(series.update().where(series.c.mode == "scattered").values(holds_people=True))


def downgrade() -> None:
    # plain DROP COLUMN (SQLite 3.35+, PostgreSQL): a batch copy of the table would trip
    # the foreign keys of the codes and log entries that point at it
    op.execute("ALTER TABLE series DROP COLUMN holds_people")
