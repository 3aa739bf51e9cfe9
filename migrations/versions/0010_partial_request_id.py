"""A batch's request id is unique where it is given, and indexed only there.

Most batches have no request id; a unique constraint still gave each of them an index
entry (both backends index NULLs), written by every issue. It becomes a unique index over
the rows that have one, the same rule for the ids that exist.

SQLite keeps a table's UNIQUE constraint inside its CREATE TABLE, so the table is copied
without it; the copy's drop of the old table would trip the codes' and log entries' links
to their batches while foreign keys are enforced, so ``upgrade_to_head`` runs migrations
with them off (and checks them before committing). The downgrade puts the rule back as a
unique index of its own on SQLite (no copy), which the upgrade also knows.

Revision ID: partial_request_id
Revises: sealed_keys
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "partial_request_id"
down_revision = "sealed_keys"
branch_labels = None
depends_on = None

WHERE = "request_id IS NOT NULL"


def upgrade() -> None:
    bind = op.get_bind()
    if bind.dialect.name == "postgresql":
        op.drop_constraint("uq_batch_request_id", "batch", type_="unique")
    elif bind.execute(sa.text("SELECT 1 FROM sqlite_master WHERE type = 'index' AND name = 'uq_batch_request_id'")).first():
        op.drop_index("uq_batch_request_id", table_name="batch")  # as this revision's downgrade left it
    else:
        with op.batch_alter_table("batch", recreate="always") as batch:
            batch.drop_constraint("uq_batch_request_id", type_="unique")
    op.create_index(
        "ix_batch_request_id", "batch", ["request_id"], unique=True,
        sqlite_where=sa.text(WHERE), postgresql_where=sa.text(WHERE),
    )  # fmt: skip


def downgrade() -> None:
    op.drop_index("ix_batch_request_id", table_name="batch")
    if op.get_bind().dialect.name == "postgresql":
        op.create_unique_constraint("uq_batch_request_id", "batch", ["request_id"])
    else:
        op.create_index("uq_batch_request_id", "batch", ["request_id"], unique=True)
