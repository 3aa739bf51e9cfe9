"""Leaner code rows: a batch's constants live on the batch row, and a batch's codes are a
range of ids rather than an index of their own.

* ``batch.code_id_from`` / ``batch.code_id_to``: the ids a batch's codes lie between
  (filled here from the codes each batch holds); the index ``ix_issued_code_batch_id``
  goes: readers find a batch's codes by that primary-key range (and ``batch_id``).
* ``issued_code.issued_at`` / ``issued_by`` go: every code issued here was issued at its
  batch's ``created_at`` by its ``actor``. What an import brought of its own (a time or
  an issuer its file gave, different from the import batch's) moves to the new
  ``origin_at`` / ``origin_by``; they stay empty everywhere else.
* The holder and note search keys are indexed only where present (partial indexes): a
  code without a holder costs no index entry.
* PostgreSQL: roles that may insert batches (``issuer db roles``) may also record where a
  batch's codes end (``UPDATE (code_id_to)``).

Every code reads back the same issue time and issuer through the batch; the log is not
touched (no entry's hash covers these columns' storage).

Revision ID: leaner_rows
Revises: log_chains
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "leaner_rows"
down_revision = "log_chains"
branch_labels = None
depends_on = None

#: the rights trigger that refuses an unlogged change of a code row (``issuer db roles``)
_CHANGE_TRIGGER = "issuer_code_change_logged"


def _has_trigger(name: str) -> bool:
    bind = op.get_bind()
    if bind.dialect.name != "postgresql":
        return False
    return bool(bind.execute(sa.text(
        "SELECT 1 FROM pg_trigger t JOIN pg_class c ON c.oid = t.tgrelid "
        "WHERE t.tgname = :n AND c.relname = 'issued_code' AND c.relnamespace = current_schema()::regnamespace"
    ), {"n": name}).first())  # fmt: skip


def _moving_rows(statement: str) -> None:
    """Run an UPDATE of code rows that the schema change itself makes (no act, no log
    entry): the rights trigger that asks for a log entry is off for it alone."""
    guarded = _has_trigger(_CHANGE_TRIGGER)
    if guarded:
        op.execute(f"ALTER TABLE issued_code DISABLE TRIGGER {_CHANGE_TRIGGER}")
    op.execute(statement)
    if guarded:
        op.execute(f"ALTER TABLE issued_code ENABLE ALWAYS TRIGGER {_CHANGE_TRIGGER}")


def _search_key_indexes(*, partial: bool) -> None:
    for column in ("holder_key", "note_key"):
        name = op.f(f"ix_issued_code_{column}")
        op.drop_index(name, table_name="issued_code")
        where = sa.text(f"{column} IS NOT NULL") if partial else None
        op.create_index(name, "issued_code", [column], unique=False, sqlite_where=where, postgresql_where=where)


def upgrade() -> None:
    with op.batch_alter_table("batch") as batch:
        batch.add_column(sa.Column("code_id_from", sa.BigInteger(), nullable=True))
        batch.add_column(sa.Column("code_id_to", sa.BigInteger(), nullable=True))
    with op.batch_alter_table("issued_code") as batch:
        batch.add_column(sa.Column("origin_at", sa.DateTime(timezone=True), nullable=True))
        batch.add_column(sa.Column("origin_by", sa.String(length=120), nullable=True))
    # each batch's id range, while the index by batch is still there to find its codes
    op.execute(
        "UPDATE batch SET "
        "code_id_from = (SELECT min(c.id) FROM issued_code c WHERE c.batch_id = batch.id), "
        "code_id_to = (SELECT max(c.id) FROM issued_code c WHERE c.batch_id = batch.id)"
    )
    # a time or issuer of a code's own (an import's file gave it) moves to origin_*
    _moving_rows(
        "UPDATE issued_code SET origin_at = issued_at, origin_by = issued_by WHERE EXISTS "
        "(SELECT 1 FROM batch b WHERE b.id = issued_code.batch_id "
        " AND (b.created_at <> issued_code.issued_at OR b.actor <> issued_code.issued_by))"
    )
    # the same statement on both backends (SQLite 3.35 drops a column in place)
    op.execute("ALTER TABLE issued_code DROP COLUMN issued_at")
    op.execute("ALTER TABLE issued_code DROP COLUMN issued_by")
    op.drop_index(op.f("ix_issued_code_batch_id"), table_name="issued_code")
    _search_key_indexes(partial=True)
    bind = op.get_bind()
    if bind.dialect.name == "postgresql":
        # roles that insert batches also record where a batch's codes end
        for (grantee,) in bind.execute(sa.text(
            "SELECT DISTINCT grantee FROM information_schema.role_table_grants "
            "WHERE table_schema = current_schema() AND table_name = 'batch' AND privilege_type = 'INSERT' "
            "AND grantee <> current_user"
        )).all():  # fmt: skip
            op.execute(f'GRANT UPDATE (code_id_to) ON batch TO "{grantee.replace(chr(34), chr(34) * 2)}"')


def downgrade() -> None:
    _search_key_indexes(partial=False)
    op.create_index(op.f("ix_issued_code_batch_id"), "issued_code", ["batch_id"], unique=False)
    with op.batch_alter_table("issued_code") as batch:
        batch.add_column(sa.Column("issued_at", sa.DateTime(timezone=True), nullable=True))
        batch.add_column(sa.Column("issued_by", sa.String(length=120), nullable=True))
    _moving_rows(
        "UPDATE issued_code SET "
        "issued_at = coalesce(origin_at, (SELECT b.created_at FROM batch b WHERE b.id = issued_code.batch_id)), "
        "issued_by = coalesce(origin_by, (SELECT b.actor FROM batch b WHERE b.id = issued_code.batch_id))"
    )
    if op.get_bind().dialect.name == "postgresql":
        # (SQLite would copy the whole table to say NOT NULL, and the copy trips the links
        # between replaced codes: there the columns stay nullable, every row filled)
        op.alter_column("issued_code", "issued_at", existing_type=sa.DateTime(timezone=True), nullable=False)
        op.alter_column("issued_code", "issued_by", existing_type=sa.String(length=120), nullable=False)
    op.execute("ALTER TABLE issued_code DROP COLUMN origin_at")
    op.execute("ALTER TABLE issued_code DROP COLUMN origin_by")
    op.execute("ALTER TABLE batch DROP COLUMN code_id_from")
    op.execute("ALTER TABLE batch DROP COLUMN code_id_to")
