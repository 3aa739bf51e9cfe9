"""Fewer pages per act: indexes that another key already serves are dropped or narrowed.

Every index is a b-tree page an act writes (a WAL frame on SQLite, a WAL record and a
dirty page on PostgreSQL). Three of them repeated what a key already gives:

* ``uq_log_entry_hash``: the chains prove the log (``log verify`` recomputes every link),
  not the hashes' uniqueness, and nothing looks an entry up by its hash except the one
  diagnostic on a log already found broken (which entry a broken link points at), which
  may read the log. Its leaf was a random one per act (hashes are random).
* ``ix_log_entry_series_id_id``: a series' entries are its chain (``chain`` = the series'
  id, served by ``ix_log_entry_chain_id``), except a series' adding and the entries written
  before the log was chained per series, which lie on the register's chain (0). The index
  now holds those only (``WHERE chain = 0``); readers ask ``models.series_arms``.
* ``ix_batch_series_id``: only issuing past imported numbers looks a series' batches up,
  and only its imports; the index now holds import batches only (``WHERE kind = 'import'``).

PostgreSQL with roles applied: the rights triggers that looked entries up by series
(a series changed, a code changed by an import into its series) ask the chain instead;
their functions are replaced here when they exist (``issuer db roles --apply`` makes the
same ones).

SQLite keeps ``log_entry``'s UNIQUE (hash) inside its CREATE TABLE, so the table is copied
without it (``upgrade_to_head`` runs migrations with foreign keys off: the leaves point at
the entries). The downgrade puts the rule back as a unique index of its own (no copy),
which the upgrade also knows.

Revision ID: fewer_pages
Revises: text_salts
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "fewer_pages"
down_revision = "text_salts"
branch_labels = None
depends_on = None

SERIES_ENTRIES = "chain = 0"
SERIES_IMPORTS = "kind = 'import'"

_THIS_XACT = "e.xmin = pg_current_xact_id()::xid"

#: a rights trigger's function around its body (as issuer.register.rights writes them)
_FUNCTION = """
CREATE OR REPLACE FUNCTION {schema}.{name}() RETURNS trigger LANGUAGE plpgsql
SET search_path = {schema}, pg_temp AS $$
BEGIN
{body}
END
$$;
"""

#: issuer.register.rights, as this revision makes it: a series changed only with an entry
#: of this transaction naming it, found on its chain (the newest entry there is this
#: transaction's if it appended one: appending waits for the chain's lock) or, for its
#: adding, on the register's chain
SERIES_CHANGE_LOGGED = f"""
  IF NOT EXISTS (SELECT 1 FROM (SELECT e.series_id, e.xmin AS x FROM log_entry e WHERE e.chain = NEW.id
                                ORDER BY e.id DESC LIMIT 1) newest
                 WHERE newest.series_id = NEW.id AND newest.x = pg_current_xact_id()::xid) THEN
    IF NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.chain = 0 AND e.series_id = NEW.id AND {_THIS_XACT}) THEN
      RAISE EXCEPTION 'series % changed without a log entry for it', OLD.key USING ERRCODE = 'insufficient_privilege';
    END IF;
  END IF;
  RETURN NULL;"""

#: a code changed only with an entry of this transaction naming it, its batch, or an
#: import (made by this transaction) into its series
CODE_CHANGE_LOGGED = f"""
  IF NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.code IN (NEW.code, OLD.code) AND {_THIS_XACT})
     AND NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.batch_id = NEW.batch_id AND {_THIS_XACT})
     AND NOT EXISTS (SELECT 1 FROM batch b JOIN log_entry e ON e.batch_id = b.id
                     WHERE b.series_id = NEW.series_id AND b.kind = 'import'
                     AND b.xmin = pg_current_xact_id()::xid AND e.action = 'import' AND {_THIS_XACT}) THEN
    RAISE EXCEPTION 'code % changed without a log entry for it', OLD.code USING ERRCODE = 'insufficient_privilege';
  END IF;
  RETURN NULL;"""

#: the same two as revision text_salts left them (for the downgrade)
SERIES_CHANGE_LOGGED_BEFORE = f"""
  IF NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.series_id = NEW.id AND {_THIS_XACT}) THEN
    RAISE EXCEPTION 'series % changed without a log entry for it', OLD.key USING ERRCODE = 'insufficient_privilege';
  END IF;
  RETURN NULL;"""

CODE_CHANGE_LOGGED_BEFORE = f"""
  IF NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.code IN (NEW.code, OLD.code) AND {_THIS_XACT})
     AND NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.batch_id = NEW.batch_id AND {_THIS_XACT})
     AND NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.series_id = NEW.series_id
                     AND e.action = 'import' AND {_THIS_XACT}) THEN
    RAISE EXCEPTION 'code % changed without a log entry for it', OLD.code USING ERRCODE = 'insufficient_privilege';
  END IF;
  RETURN NULL;"""


def _quote(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _rights_functions(bodies: dict[str, str]) -> None:
    """Replace the rights triggers' functions (by name, their bodies) where ``issuer db roles
    --apply`` made them."""
    bind = op.get_bind()
    if bind.dialect.name != "postgresql":
        return
    schema = _quote(bind.execute(sa.text("SELECT current_schema()")).scalar_one())
    for name, body in bodies.items():
        present = bind.execute(sa.text(
            "SELECT 1 FROM pg_proc WHERE proname = :name AND pronamespace = current_schema()::regnamespace"
        ), {"name": name}).first()  # fmt: skip
        if present:
            op.execute(_FUNCTION.format(schema=schema, name=name, body=body))


def _indexes(*, narrow: bool) -> None:
    op.drop_index("ix_log_entry_series_id_id", table_name="log_entry")
    op.drop_index("ix_batch_series_id", table_name="batch")
    where = {"log": sa.text(SERIES_ENTRIES), "batch": sa.text(SERIES_IMPORTS)} if narrow else {}
    op.create_index(
        "ix_log_entry_series_id_id", "log_entry", ["series_id", "id"],
        sqlite_where=where.get("log"), postgresql_where=where.get("log"),
    )  # fmt: skip
    op.create_index(
        "ix_batch_series_id", "batch", ["series_id"],
        sqlite_where=where.get("batch"), postgresql_where=where.get("batch"),
    )  # fmt: skip


def upgrade() -> None:
    bind = op.get_bind()
    if bind.dialect.name == "postgresql":
        op.drop_constraint("uq_log_entry_hash", "log_entry", type_="unique")
    elif bind.execute(sa.text("SELECT 1 FROM sqlite_master WHERE type = 'index' AND name = 'uq_log_entry_hash'")).first():
        op.drop_index("uq_log_entry_hash", table_name="log_entry")  # as this revision's downgrade left it
    else:
        with op.batch_alter_table("log_entry", recreate="always") as batch:
            batch.drop_constraint("uq_log_entry_hash", type_="unique")
    _indexes(narrow=True)
    _rights_functions({"issuer_series_change_logged": SERIES_CHANGE_LOGGED, "issuer_code_change_logged": CODE_CHANGE_LOGGED})


def downgrade() -> None:
    _rights_functions({
        "issuer_series_change_logged": SERIES_CHANGE_LOGGED_BEFORE, "issuer_code_change_logged": CODE_CHANGE_LOGGED_BEFORE,
    })
    _indexes(narrow=False)
    if op.get_bind().dialect.name == "postgresql":
        op.create_unique_constraint("uq_log_entry_hash", "log_entry", ["hash"])
    else:
        op.create_index("uq_log_entry_hash", "log_entry", ["hash"], unique=True)
