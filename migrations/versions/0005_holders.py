"""Holders found by search, validity, suspension and fill warning levels.

Revision ID: 0005_holders
Revises: 0004_series_people
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0005_holders"
down_revision = "0004_series_people"
branch_labels = None
depends_on = None

#: folded search text: byte order on PostgreSQL, so a prefix is an index range
SEARCH_KEY = sa.String(length=200).with_variant(sa.String(length=200, collation="C"), "postgresql")


def upgrade() -> None:
    with op.batch_alter_table("series") as batch:
        batch.add_column(sa.Column("valid_for_days", sa.Integer(), nullable=True))
        batch.add_column(
            sa.Column("fill_levels", sa.String(length=32), nullable=False, server_default="80,95")
        )
    with op.batch_alter_table("issued_code") as batch:
        batch.add_column(sa.Column("holder_key", SEARCH_KEY, nullable=True))
        batch.add_column(sa.Column("note_key", SEARCH_KEY, nullable=True))
        batch.add_column(sa.Column("valid_until", sa.DateTime(timezone=True), nullable=True))
        batch.add_column(sa.Column("suspended_at", sa.DateTime(timezone=True), nullable=True))
        batch.add_column(sa.Column("suspended_by", sa.String(length=120), nullable=True))
        batch.add_column(sa.Column("suspend_reason", sa.Text(), nullable=True))
        batch.add_column(sa.Column("erased_at", sa.DateTime(timezone=True), nullable=True))
    # codes issued before this revision get their search keys here, folded as the
    # register folds them (lower case, spaces collapsed)
    _fill_search_keys()
    op.create_index(op.f("ix_issued_code_holder_key"), "issued_code", ["holder_key"], unique=False)
    op.create_index(op.f("ix_issued_code_note_key"), "issued_code", ["note_key"], unique=False)


def _fill_search_keys() -> None:
    import unicodedata

    def fold(text: str | None) -> str | None:
        if text is None:
            return None
        folded = " ".join(unicodedata.normalize("NFKC", text).casefold().split())[:200]
        return folded or None

    connection = op.get_bind()
    rows = connection.execute(
        sa.text("SELECT id, holder, note FROM issued_code WHERE holder IS NOT NULL OR note IS NOT NULL")
    ).all()
    if rows:
        connection.execute(
            sa.text("UPDATE issued_code SET holder_key = :h, note_key = :n WHERE id = :i"),
            [{"i": row[0], "h": fold(row[1]), "n": fold(row[2])} for row in rows],
        )


def downgrade() -> None:
    op.drop_index(op.f("ix_issued_code_note_key"), table_name="issued_code")
    op.drop_index(op.f("ix_issued_code_holder_key"), table_name="issued_code")
    # plain ALTER TABLE ... DROP COLUMN (SQLite 3.35+): a batch copy would drop the
    # referenced tables, which foreign keys forbid once the register holds codes
    for column in ("erased_at", "suspend_reason", "suspended_by", "suspended_at", "valid_until", "note_key", "holder_key"):
        op.drop_column("issued_code", column)
    op.drop_column("series", "fill_levels")
    op.drop_column("series", "valid_for_days")
