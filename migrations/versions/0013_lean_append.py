"""PostgreSQL: the log's append function does less work per act.

Nothing in the schema changes and no row moves: ``issuer_log_append``, which every act
runs, is replaced by one that computes the same with fewer statements. Same signature,
same SECURITY DEFINER rights (``CREATE OR REPLACE`` keeps its owner and the roles'
EXECUTE), same login recorded, same hashes:

* the entries' JSON is parsed once (as jsonb: an entry and its fields are then found by
  expressions, without reading the text again and without a query), where the old function
  read the array twice by queries and each field of each entry again from its JSON text;
* the chains they go to are collected in an array, and sorted by a query only when there
  is more than one; each chain is still locked once, in ascending order, before any entry
  id is taken, and its head is moved once at the end (the old function kept the heads in
  jsonb objects rebuilt per entry and walked their keys with another query).

For one entry that is three statements (lock, insert, move) where there were six. The
hashed text is built exactly as before (keys sorted, no spaces, strings through
``to_json``): ``tests/register/test_lean_append.py`` checks that entries it chains hash as
Python computes them and that a register's chains go on unbroken across the upgrade and a
downgrade.

Revision ID: lean_append
Revises: fewer_pages
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import sqlalchemy as sa
from alembic import op

revision = "lean_append"
down_revision = "fewer_pages"
branch_labels = None
depends_on = None

GENESIS = "0" * 64

#: the hashed text is the canonical JSON of issuer.register.log.entry_hash (keys sorted,
#: no spaces, UTF-8; "chain" only off the register's chain); the chain of an entry as
#: issuer.register.log.chain_of decides it. (``{{``/``}}``: str.format's braces.)
LOG_APPEND = """
CREATE OR REPLACE FUNCTION {schema}.issuer_log_append(p_at timestamptz, p_actor text, p_entries text)
RETURNS integer LANGUAGE plpgsql SECURITY DEFINER SET search_path = {schema}, pg_temp AS $$
DECLARE
  -- parsed once; an entry and its fields are then found without reading the text again
  v_entries jsonb := p_entries::jsonb;
  v_n integer := jsonb_array_length(v_entries);
  e jsonb;
  -- the chains written to (ascending), each one's newest hash and id as entries join it
  v_chains integer[] := ARRAY[]::integer[];
  v_heads text[] := ARRAY[]::text[];
  v_lasts bigint[] := ARRAY[]::bigint[];
  v_k integer;
  v_chain integer;
  v_series integer;
  v_action text;
  v_id bigint;
  v_prev text;
  v_hash text;
  v_login text := session_user;
  -- the parts every entry of this call hashes alike
  v_who text := ',"actor":' || to_json(p_actor)::text || ',"at":'
    || to_json(to_char(p_at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"'))::text;
  v_signed text := ',"login":' || to_json(v_login)::text || ',"prev":';
BEGIN
  -- the chains the entries go to
  FOR v_i IN 0 .. v_n - 1 LOOP
    e := v_entries->v_i;
    v_series := (e->>'series')::integer;
    v_chain := CASE WHEN v_series IS NULL OR e->>'action' = 'series.add' THEN 0 ELSE v_series END;
    IF NOT v_chain = ANY (v_chains) THEN
      v_chains := v_chains || v_chain;
    END IF;
  END LOOP;
  IF cardinality(v_chains) > 1 THEN
    v_chains := ARRAY(SELECT c FROM unnest(v_chains) AS c ORDER BY c);
  END IF;
  -- each chain locked once, in one order (no two acts deadlock here), before any id is taken
  FOR v_k IN 1 .. cardinality(v_chains) LOOP
    SELECT last_hash INTO v_prev FROM log_chain WHERE chain = v_chains[v_k] FOR UPDATE;
    IF NOT FOUND THEN
      INSERT INTO log_chain (chain, last_id, last_hash) VALUES (v_chains[v_k], 0, '{genesis}')
        ON CONFLICT (chain) DO NOTHING;
      SELECT last_hash INTO v_prev FROM log_chain WHERE chain = v_chains[v_k] FOR UPDATE;
    END IF;
    v_heads[v_k] := v_prev;
  END LOOP;
  -- the entries, in the order given, each after its chain's newest
  FOR v_i IN 0 .. v_n - 1 LOOP
    e := v_entries->v_i;
    v_action := e->>'action';
    v_series := (e->>'series')::integer;
    v_chain := CASE WHEN v_series IS NULL OR v_action = 'series.add' THEN 0 ELSE v_series END;
    v_k := array_position(v_chains, v_chain);
    v_prev := v_heads[v_k];
    v_id := nextval('log_entry_id_seq');
    v_hash := encode(sha256(convert_to(
      '{{"action":' || to_json(v_action)::text
      || v_who
      || ',"batch":' || coalesce((e->>'batch')::integer::text, 'null')
      || CASE WHEN v_chain <> 0 THEN ',"chain":' || v_chain::text ELSE '' END
      || ',"code":' || coalesce(to_json(e->>'code')::text, 'null')
      || ',"detail":' || to_json(e->>'detail')::text
      || ',"id":' || v_id::text
      || v_signed || to_json(v_prev)::text
      || ',"series":' || coalesce(v_series::text, 'null')
      || '}}', 'UTF8')), 'hex');
    INSERT INTO log_entry (id, at, actor, action, series_id, code, batch_id, detail, prev_hash, hash, login, chain)
    VALUES (v_id, p_at, p_actor, v_action, v_series, e->>'code',
            (e->>'batch')::integer, e->>'detail', v_prev, v_hash, v_login, v_chain);
    v_heads[v_k] := v_hash;
    v_lasts[v_k] := v_id;
  END LOOP;
  -- each chain's head moved once
  FOR v_k IN 1 .. cardinality(v_chains) LOOP
    UPDATE log_chain SET last_id = v_lasts[v_k], last_hash = v_heads[v_k] WHERE chain = v_chains[v_k];
  END LOOP;
  RETURN v_n;
END
$$
"""


def _quote(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _previous_append() -> str:
    """The append function of revision log_chains, for a downgrade."""
    path = Path(__file__).with_name("0007_log_chains.py")
    spec = importlib.util.spec_from_file_location("issuer_log_chains_revision", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return str(module.LOG_APPEND)


def upgrade() -> None:
    bind = op.get_bind()
    if bind.dialect.name != "postgresql":
        return
    schema = _quote(bind.execute(sa.text("SELECT current_schema()")).scalar_one())
    # CREATE OR REPLACE keeps the function's owner and its grants (EXECUTE to the roles)
    op.execute(LOG_APPEND.format(schema=schema, genesis=GENESIS))


def downgrade() -> None:
    bind = op.get_bind()
    if bind.dialect.name != "postgresql":
        return
    schema = _quote(bind.execute(sa.text("SELECT current_schema()")).scalar_one())
    op.execute(_previous_append().format(schema=schema, genesis=GENESIS))
