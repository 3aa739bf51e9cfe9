"""The log is chained per series and sealed into a Merkle tree.

* ``log_entry.chain``: 0 for the register's chain, a series' id for that series' chain.
  Every existing entry is on the register's chain, with its hash unchanged (the
  register's chain hashes exactly as the single chain did), so a register that verified
  before verifies after.
* ``log_chain`` replaces ``log_head``: one head row per chain; the old head becomes
  chain 0's.
* ``log_leaf`` and ``log_tree``: the leaf position each sealed entry holds in the log's
  Merkle tree (RFC 6962), and how many are sealed.
* PostgreSQL: ``issuer_log_append`` now locks only the chains its entries go to and takes
  entry ids from the table's sequence (moved past the existing ids); ``issuer_log_seal``
  gives committed entries their leaf positions under the ``log_tree`` row's lock. Both are
  SECURITY DEFINER; ``issuer db roles --apply`` grants EXECUTE on the new one.

Revision ID: log_chains
Revises: log_rights
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "log_chains"
down_revision = "log_rights"
branch_labels = None
depends_on = None

GENESIS = "0" * 64

#: the hashed text is the canonical JSON of issuer.register.log.entry_hash (keys sorted,
#: no spaces, UTF-8; "chain" only off the register's chain); the chain of an entry as
#: issuer.register.log.chain_of decides it
LOG_APPEND = """
CREATE OR REPLACE FUNCTION {schema}.issuer_log_append(p_at timestamptz, p_actor text, p_entries text)
RETURNS integer LANGUAGE plpgsql SECURITY DEFINER SET search_path = {schema}, pg_temp AS $$
DECLARE
  v_id bigint;
  v_prev text;
  v_hash text;
  v_chain integer;
  v_series integer;
  v_heads jsonb := '{{}}';
  v_last jsonb := '{{}}';
  v_key text;
  v_at text := to_char(p_at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"');
  v_login text := session_user;
  v_count integer := 0;
  v_entries json := p_entries::json;
  e json;
BEGIN
  -- each chain the entries go to, locked once, in one order (no two acts deadlock here)
  FOR v_chain IN
    SELECT DISTINCT CASE WHEN value->>'series' IS NULL OR value->>'action' = 'series.add' THEN 0
                         ELSE (value->>'series')::integer END
    FROM json_array_elements(v_entries) ORDER BY 1
  LOOP
    SELECT last_hash INTO v_prev FROM log_chain WHERE chain = v_chain FOR UPDATE;
    IF NOT FOUND THEN
      INSERT INTO log_chain (chain, last_id, last_hash) VALUES (v_chain, 0, '{genesis}')
        ON CONFLICT (chain) DO NOTHING;
      SELECT last_hash INTO v_prev FROM log_chain WHERE chain = v_chain FOR UPDATE;
    END IF;
    v_heads := v_heads || jsonb_build_object(v_chain::text, v_prev);
  END LOOP;
  FOR e IN SELECT value FROM json_array_elements(v_entries) LOOP
    v_series := (e->>'series')::integer;
    v_chain := CASE WHEN v_series IS NULL OR e->>'action' = 'series.add' THEN 0 ELSE v_series END;
    v_prev := v_heads->>(v_chain::text);
    v_id := nextval('log_entry_id_seq');
    v_hash := encode(sha256(convert_to(
      '{{"action":' || to_json(e->>'action')::text
      || ',"actor":' || to_json(p_actor)::text
      || ',"at":' || to_json(v_at)::text
      || ',"batch":' || coalesce((e->>'batch')::bigint::text, 'null')
      || CASE WHEN v_chain <> 0 THEN ',"chain":' || v_chain::text ELSE '' END
      || ',"code":' || coalesce(to_json(e->>'code')::text, 'null')
      || ',"detail":' || to_json(e->>'detail')::text
      || ',"id":' || v_id::text
      || ',"login":' || to_json(v_login)::text
      || ',"prev":' || to_json(v_prev)::text
      || ',"series":' || coalesce(v_series::text, 'null')
      || '}}', 'UTF8')), 'hex');
    INSERT INTO log_entry (id, at, actor, action, series_id, code, batch_id, detail, prev_hash, hash, login, chain)
    VALUES (v_id, p_at, p_actor, e->>'action', v_series, e->>'code',
            (e->>'batch')::integer, e->>'detail', v_prev, v_hash, v_login, v_chain);
    v_heads := v_heads || jsonb_build_object(v_chain::text, v_hash);
    v_last := v_last || jsonb_build_object(v_chain::text, v_id);
    v_count := v_count + 1;
  END LOOP;
  FOR v_key IN SELECT jsonb_object_keys(v_last) LOOP
    UPDATE log_chain SET last_id = (v_last->>v_key)::bigint, last_hash = v_heads->>v_key
     WHERE chain = v_key::integer;
  END LOOP;
  RETURN v_count;
END
$$
"""

#: sealing: the committed entries not yet sealed, per chain after its newest sealed
#: entry (within a chain entries commit in id order, so this is a prefix of each chain),
#: numbered on from the tree's size under the log_tree row's lock
LOG_SEAL = """
CREATE OR REPLACE FUNCTION {schema}.issuer_log_seal() RETURNS bigint
LANGUAGE plpgsql SECURITY DEFINER SET search_path = {schema}, pg_temp AS $$
DECLARE
  v_size bigint;
  v_added bigint;
BEGIN
  SELECT size INTO v_size FROM log_tree WHERE id = 1 FOR UPDATE;
  INSERT INTO log_leaf (position, entry_id, chain)
  SELECT v_size + row_number() OVER (ORDER BY e.id) - 1, e.id, e.chain
    FROM log_chain c JOIN log_entry e ON e.chain = c.chain
     AND e.id > coalesce((SELECT max(l.entry_id) FROM log_leaf l WHERE l.chain = c.chain), 0);
  GET DIAGNOSTICS v_added = ROW_COUNT;
  IF v_added > 0 THEN
    UPDATE log_tree SET size = v_size + v_added WHERE id = 1;
  END IF;
  RETURN v_size + v_added;
END
$$
"""

def _quote(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def upgrade() -> None:
    bind = op.get_bind()
    tables = set(sa.inspect(bind).get_table_names())
    if "log_chain" in tables:
        # back up from a downgrade that kept the chains: log_head carried the register's
        # chain on (entries the older issuer appended there are chain 0's)
        op.execute(
            "UPDATE log_chain SET last_hash = (SELECT last_hash FROM log_head WHERE id = 1), "
            "last_id = (SELECT coalesce(max(id), 0) FROM log_entry WHERE chain = 0) WHERE chain = 0"
        )
        op.drop_table("log_head")
    else:
        _create_tables()
    if bind.dialect.name != "postgresql":
        return
    schema = _quote(bind.execute(sa.text("SELECT current_schema()")).scalar_one())
    # ids now come from the sequence (the old function numbered them itself)
    op.execute("SELECT setval('log_entry_id_seq', (SELECT coalesce(max(id), 0) + 1 FROM log_entry), false)")
    op.execute(LOG_APPEND.format(schema=schema, genesis=GENESIS))
    op.execute(LOG_SEAL.format(schema=schema))
    op.execute(f"REVOKE ALL ON FUNCTION {schema}.issuer_log_seal() FROM PUBLIC")


def _create_tables() -> None:
    op.add_column("log_entry", sa.Column("chain", sa.Integer(), server_default="0", nullable=False))
    op.create_index(op.f("ix_log_entry_chain_id"), "log_entry", ["chain", "id"], unique=False)
    op.create_table(
        "log_chain",
        sa.Column("chain", sa.Integer(), autoincrement=False, nullable=False),
        sa.Column("last_id", sa.BigInteger(), nullable=False),
        sa.Column("last_hash", sa.String(length=64), nullable=False),
        sa.PrimaryKeyConstraint("chain", name=op.f("pk_log_chain")),
    )
    op.execute(
        "INSERT INTO log_chain (chain, last_id, last_hash) SELECT 0, last_id, last_hash FROM log_head WHERE id = 1"
    )
    op.drop_table("log_head")
    op.create_table(
        "log_leaf",
        sa.Column("position", sa.BigInteger(), autoincrement=False, nullable=False),
        sa.Column("entry_id", sa.Integer(), nullable=False),
        sa.Column("chain", sa.Integer(), nullable=False),
        sa.ForeignKeyConstraint(["entry_id"], ["log_entry.id"], name=op.f("fk_log_leaf_entry_id_log_entry")),
        sa.PrimaryKeyConstraint("position", name=op.f("pk_log_leaf")),
        sa.UniqueConstraint("entry_id", name=op.f("uq_log_leaf_entry_id")),
    )
    op.create_index(op.f("ix_log_leaf_chain_entry_id"), "log_leaf", ["chain", "entry_id"], unique=False)
    op.create_table(
        "log_tree",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("size", sa.BigInteger(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_log_tree")),
    )
    op.execute("INSERT INTO log_tree (id, size) VALUES (1, 0)")


def _previous_append() -> str:
    """The append function of revision log_rights (this file's neighbour), for a downgrade."""
    import importlib.util
    from pathlib import Path

    path = Path(__file__).with_name("0006_log_rights.py")
    spec = importlib.util.spec_from_file_location("issuer_log_rights_revision", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return str(module.LOG_APPEND)


def downgrade() -> None:
    """Back to one head row. Entries on a series' chain cannot join the single chain
    without rewriting every hash after them, so when there are any the chains' tables
    and column stay (as log_rights keeps the logins): an upgrade takes them up again."""
    bind = op.get_bind()
    op.create_table(
        "log_head",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("last_id", sa.BigInteger(), nullable=False),
        sa.Column("last_hash", sa.String(length=64), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_log_head")),
    )
    # the older issuer numbers entries after last_id: after the newest entry of any chain
    op.execute(
        "INSERT INTO log_head (id, last_id, last_hash) SELECT 1, "
        "(SELECT coalesce(max(id), 0) FROM log_entry), last_hash FROM log_chain WHERE chain = 0"
    )
    if bind.dialect.name == "postgresql":
        schema = _quote(bind.execute(sa.text("SELECT current_schema()")).scalar_one())
        op.execute("DROP FUNCTION IF EXISTS issuer_log_seal()")
        op.execute(_previous_append().format(schema=schema))
    chained = bind.execute(sa.text("SELECT count(*) FROM log_entry WHERE chain <> 0")).scalar_one()
    if chained:
        return
    op.drop_table("log_tree")
    op.drop_index(op.f("ix_log_leaf_chain_entry_id"), table_name="log_leaf")
    op.drop_table("log_leaf")
    op.drop_table("log_chain")
    op.drop_index(op.f("ix_log_entry_chain_id"), table_name="log_entry")
    with op.batch_alter_table("log_entry") as batch:
        batch.drop_column("chain")
