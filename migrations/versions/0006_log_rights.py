"""The log records the database login; one append function; counters never move back.

* ``log_entry.login``: the database login that appended the entry (PostgreSQL fills it
  in; SQLite has no logins and leaves it empty). It is covered by the entry's hash.
* ``log_entry.batch_id`` gets an index (the doctor's replay and the rights triggers look
  entries up by batch).
* PostgreSQL: ``issuer_log_append`` is the one way to append to the log. It runs with the
  owner's rights (SECURITY DEFINER), locks the head, computes every hash itself and
  records ``session_user``; the append-only triggers are created here, so every
  PostgreSQL register has them from its first moment (``db roles --apply`` re-creates
  them and adds the per-role rules).
* Both backends: a trigger refuses to move a series' counters backwards or to reshape a
  series that holds codes.

Revision ID: log_rights
Revises: 0005_holders
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "log_rights"
down_revision = "0005_holders"
branch_labels = None
depends_on = None


#: the one way to append to the log on PostgreSQL; the hashed text is the canonical JSON
#: that issuer.register.log.entry_hash builds (keys sorted, no spaces, UTF-8)
LOG_APPEND = """
CREATE OR REPLACE FUNCTION {schema}.issuer_log_append(p_at timestamptz, p_actor text, p_entries text)
RETURNS integer LANGUAGE plpgsql SECURITY DEFINER SET search_path = {schema}, pg_temp AS $$
DECLARE
  v_id bigint;
  v_prev text;
  v_hash text;
  v_at text := to_char(p_at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"');
  v_login text := session_user;
  v_count integer := 0;
  e json;
BEGIN
  SELECT last_id, last_hash INTO v_id, v_prev FROM log_head WHERE id = 1 FOR UPDATE;
  FOR e IN SELECT value FROM json_array_elements(p_entries::json) LOOP
    v_id := v_id + 1;
    v_hash := encode(sha256(convert_to(
      '{{"action":' || to_json(e->>'action')::text
      || ',"actor":' || to_json(p_actor)::text
      || ',"at":' || to_json(v_at)::text
      || ',"batch":' || coalesce((e->>'batch')::bigint::text, 'null')
      || ',"code":' || coalesce(to_json(e->>'code')::text, 'null')
      || ',"detail":' || to_json(e->>'detail')::text
      || ',"id":' || v_id::text
      || ',"login":' || to_json(v_login)::text
      || ',"prev":' || to_json(v_prev)::text
      || ',"series":' || coalesce((e->>'series')::bigint::text, 'null')
      || '}}', 'UTF8')), 'hex');
    INSERT INTO log_entry (id, at, actor, action, series_id, code, batch_id, detail, prev_hash, hash, login)
    VALUES (v_id, p_at, p_actor, e->>'action', (e->>'series')::integer, e->>'code',
            (e->>'batch')::integer, e->>'detail', v_prev, v_hash, v_login);
    v_prev := v_hash;
    v_count := v_count + 1;
  END LOOP;
  IF v_count > 0 THEN
    UPDATE log_head SET last_id = v_id, last_hash = v_prev WHERE id = 1;
  END IF;
  RETURN v_count;
END
$$
"""

#: the log is append-only for every role (``db roles --apply`` re-creates these)
APPEND_ONLY = [
    """
CREATE OR REPLACE FUNCTION {schema}.issuer_log_append_only() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  RAISE EXCEPTION 'the log is append-only: % on log_entry refused', TG_OP
    USING ERRCODE = 'insufficient_privilege';
END
$$
""",
    "DROP TRIGGER IF EXISTS issuer_log_append_only ON {schema}.log_entry",
    "CREATE TRIGGER issuer_log_append_only BEFORE UPDATE OR DELETE ON {schema}.log_entry "
    "FOR EACH ROW EXECUTE FUNCTION {schema}.issuer_log_append_only()",
    "DROP TRIGGER IF EXISTS issuer_log_no_truncate ON {schema}.log_entry",
    "CREATE TRIGGER issuer_log_no_truncate BEFORE TRUNCATE ON {schema}.log_entry "
    "FOR EACH STATEMENT EXECUTE FUNCTION {schema}.issuer_log_append_only()",
    # ALWAYS: the trigger fires even under session_replication_role = replica
    "ALTER TABLE {schema}.log_entry ENABLE ALWAYS TRIGGER issuer_log_append_only",
    "ALTER TABLE {schema}.log_entry ENABLE ALWAYS TRIGGER issuer_log_no_truncate",
]

#: counters never move back; a series holding codes keeps its shape
SERIES_GUARD_PG = [
    """
CREATE OR REPLACE FUNCTION {schema}.issuer_series_guard() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  IF NEW.next_counter < OLD.next_counter OR NEW.code_count < OLD.code_count
     OR NEW.imported_count < OLD.imported_count THEN
    RAISE EXCEPTION 'the counters of series % never move back', OLD.key
      USING ERRCODE = 'check_violation';
  END IF;
  IF OLD.code_count > 0 AND (NEW.range_start, NEW.range_end, NEW.scheme, NEW.alphabet, NEW.length,
      NEW.prefix, NEW.suffix, NEW.mode, NEW.key, NEW.scatter_key) IS DISTINCT FROM
     (OLD.range_start, OLD.range_end, OLD.scheme, OLD.alphabet, OLD.length,
      OLD.prefix, OLD.suffix, OLD.mode, OLD.key, OLD.scatter_key) THEN
    RAISE EXCEPTION 'series % holds codes: its shape is frozen', OLD.key
      USING ERRCODE = 'check_violation';
  END IF;
  RETURN NEW;
END
$$
""",
    "CREATE TRIGGER issuer_series_guard BEFORE UPDATE ON {schema}.series "
    "FOR EACH ROW EXECUTE FUNCTION {schema}.issuer_series_guard()",
    "ALTER TABLE {schema}.series ENABLE ALWAYS TRIGGER issuer_series_guard",
]

SERIES_GUARD_SQLITE = [
    """
CREATE TRIGGER issuer_series_counters BEFORE UPDATE ON series
WHEN NEW.next_counter < OLD.next_counter OR NEW.code_count < OLD.code_count
  OR NEW.imported_count < OLD.imported_count
BEGIN SELECT RAISE(ABORT, 'the counters of a series never move back'); END
""",
    """
CREATE TRIGGER issuer_series_shape BEFORE UPDATE ON series
WHEN OLD.code_count > 0 AND (NEW.range_start IS NOT OLD.range_start OR NEW.range_end IS NOT OLD.range_end
  OR NEW.scheme IS NOT OLD.scheme OR NEW.alphabet IS NOT OLD.alphabet OR NEW.length IS NOT OLD.length
  OR NEW.prefix IS NOT OLD.prefix OR NEW.suffix IS NOT OLD.suffix OR NEW.mode IS NOT OLD.mode
  OR NEW.key IS NOT OLD.key OR NEW.scatter_key IS NOT OLD.scatter_key)
BEGIN SELECT RAISE(ABORT, 'a series that holds codes keeps its shape'); END
""",
]


def _quote(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def upgrade() -> None:
    bind = op.get_bind()
    # a downgrade keeps the column (the hashes of PostgreSQL's entries cover the login)
    if "login" not in {c["name"] for c in sa.inspect(bind).get_columns("log_entry")}:
        with op.batch_alter_table("log_entry") as batch:
            batch.add_column(sa.Column("login", sa.String(length=120), nullable=True))
        op.create_index(op.f("ix_log_entry_batch_id"), "log_entry", ["batch_id"], unique=False)
    if bind.dialect.name != "postgresql":
        for statement in SERIES_GUARD_SQLITE:
            op.execute(statement)
        return
    schema = _quote(bind.execute(sa.text("SELECT current_schema()")).scalar_one())
    for statement in [LOG_APPEND, *APPEND_ONLY, *SERIES_GUARD_PG]:
        op.execute(statement.format(schema=schema))
    op.execute(f"REVOKE ALL ON FUNCTION {schema}.issuer_log_append(timestamptz, text, text) FROM PUBLIC")


def downgrade() -> None:
    bind = op.get_bind()
    if bind.dialect.name == "postgresql":
        for statement in [
            "DROP TRIGGER IF EXISTS issuer_series_guard ON series",
            "DROP FUNCTION IF EXISTS issuer_series_guard()",
            "DROP FUNCTION IF EXISTS issuer_log_append(timestamptz, text, text)",
        ]:
            op.execute(statement)
    else:
        op.execute("DROP TRIGGER IF EXISTS issuer_series_counters")
        op.execute("DROP TRIGGER IF EXISTS issuer_series_shape")
    # log_entry.login and its index stay: dropping the logins would break the chain's hashes
