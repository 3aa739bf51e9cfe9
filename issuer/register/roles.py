"""Roles the database enforces (PostgreSQL).

Two group roles; the log append-only and written only by one function:

* the **clerk** issues, checks, reprints and reconciles: it reads everything, adds
  batches, codes and log entries, and may move only the columns those acts move (a
  series' counters, the log head, a code's print count and last sighting);
* the **admin** also defines series, voids, replaces, restores and imports, erases and
  purges holders, suspends and reinstates: more columns of ``series`` and
  ``issued_code`` may change.

The clerk may set and clear a code's holder and note and renew its validity; erasing
writes ``erased_at`` and suspending writes ``status`` and ``suspended_*``, columns only
the admin may move.

Neither may read ``access_token`` (the service's tokens: salts and scrypt digests a
guesser could work on offline); only the register's owner, the account the service runs
as, touches it.

Neither may write ``log_entry``, ``log_chain``, ``log_leaf`` or ``log_tree`` directly: entries are appended only by
the SECURITY DEFINER function ``issuer_log_append``, which computes the chain and
records the database login itself. The rules grants cannot express (a code inserted
only as issued, every change logged by the same act, counters never backwards) are
triggers: see :mod:`issuer.register.rights`. A trigger refuses UPDATE, DELETE and TRUNCATE
of the log to
every role — the table's owner and superusers included — so even the account that runs
migrations cannot edit the log without first dropping the trigger (which
``issuer doctor`` notices). Grants are per column, so a clerk's session cannot void a
code even through hand-written SQL.

People log in as their own roles and are made members of a group role::

    CREATE ROLE alice LOGIN PASSWORD '...';
    GRANT issuer_clerk TO alice;
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from issuer.errors import InvalidFormat
from issuer.register.rights import rights_statements

CLERK_ROLE = "issuer_clerk"
ADMIN_ROLE = "issuer_admin"
#: the trigger and its function that keep the log append-only
GUARD_FUNCTION = "issuer_log_append_only"
GUARD_TRIGGER = "issuer_log_append_only"
GUARD_TRUNCATE_TRIGGER = "issuer_log_no_truncate"
#: the one way to append to the log (migration log_rights creates it)
APPEND_FUNCTION = "issuer_log_append(timestamptz, text, text)"
SEAL_FUNCTION = "issuer_log_seal()"

_NAME = re.compile(r"^[a-z_][a-z0-9_]{0,62}$")


@dataclass(frozen=True)
class TableGrants:
    """What one role may do to one table."""

    select: bool = True
    insert: bool = False
    update: tuple[str, ...] = ()


#: stock counts: any clerk opens, adds to and closes a count (and places tags on shelves)
COUNT_GRANTS: dict[str, TableGrants] = {
    "stock_count": TableGrants(insert=True, update=("state", "closed_at", "closed_by", "result")),
    "stock_count_file": TableGrants(insert=True),
    "stock_count_scan": TableGrants(insert=True),
}

#: the service's tokens: the owner's alone (the service runs as the owner)
NO_ACCESS = TableGrants(select=False)

#: the clerk: issue, check, reprint, reconcile
CLERK_POLICY: dict[str, TableGrants] = {
    "series": TableGrants(update=("next_counter", "code_count")),
    "batch": TableGrants(insert=True, update=("code_id_to",)),  # where its codes end, once written
    "issued_code": TableGrants(
        insert=True,
        update=(
            "print_count", "last_seen_at", "last_seen_where", "expected_where",
            "holder", "holder_key", "note", "note_key", "text_salt", "valid_until",  # holder set/clear, renew
        ),
    ),
    # the log is written only through issuer_log_append (SECURITY DEFINER)
    "log_entry": TableGrants(),
    "log_chain": TableGrants(),
    "log_leaf": TableGrants(),
    "log_tree": TableGrants(),
    "alembic_version": TableGrants(),
    "access_token": NO_ACCESS,
    **COUNT_GRANTS,
}

#: the admin: the clerk's acts plus series definition, void, replace, restore, import
ADMIN_POLICY: dict[str, TableGrants] = {
    "series": TableGrants(
        insert=True,
        update=(
            "key", "title", "scheme", "alphabet", "length", "prefix", "suffix", "grouping",
            "separator", "mode", "range_start", "range_end", "next_counter", "code_count",
            "imported_count", "valid_for_days", "fill_levels",
        ),
    ),
    "batch": TableGrants(insert=True, update=("code_id_to",)),  # where its codes end, once written
    "issued_code": TableGrants(
        insert=True,
        update=(
            "status", "holder", "note", "void_reason", "voided_at", "voided_by",
            "replaces_id", "replaced_by_id", "print_count", "last_seen_at", "last_seen_where",
            "expected_where",
            "holder_key", "note_key", "text_salt", "valid_until", "erased_at",
            "suspended_at", "suspended_by", "suspend_reason",
        ),
    ),
    "log_entry": TableGrants(),
    "log_chain": TableGrants(),
    "log_leaf": TableGrants(),
    "log_tree": TableGrants(),
    "alembic_version": TableGrants(),
    "access_token": NO_ACCESS,
    **COUNT_GRANTS,
    # erasure also clears a holder named as a count's scope
    "stock_count": TableGrants(insert=True, update=("state", "closed_at", "closed_by", "result", "scope_text")),
}


def check_role_name(name: str) -> str:
    """A role name we are willing to put into SQL (quoted, lower case, no surprises)."""
    if not _NAME.match(name):
        raise InvalidFormat(
            f"role name {name!r} must be 1-63 lower-case letters, digits or _, "
            "not starting with a digit"
        )
    return name


def _q(name: str) -> str:
    """Quote an identifier (names are checked, but quote anyway)."""
    return '"' + name.replace('"', '""') + '"'


def _grant_lines(role: str, schema: str, policy: dict[str, TableGrants], tables: list[str]) -> list[str]:
    lines: list[str] = []
    for table in tables:
        grants = policy.get(table)
        target = f"{_q(schema)}.{_q(table)}"
        if grants is None:
            lines.append(f"-- {table}: not in this version's policy; read-only")
            grants = TableGrants()
        privileges = []
        if grants.select:
            privileges.append("SELECT")
        if grants.insert:
            privileges.append("INSERT")
        if privileges:
            lines.append(f"GRANT {', '.join(privileges)} ON {target} TO {_q(role)};")
        elif not grants.update:
            lines.append(f"-- {table}: no access (revoked above)")
        if grants.update:
            columns = ", ".join(_q(column) for column in grants.update)
            lines.append(f"GRANT UPDATE ({columns}) ON {target} TO {_q(role)};")
    return lines


def _create_role(role: str) -> str:
    return (
        "DO $$ BEGIN\n"
        f"  IF NOT EXISTS (SELECT FROM pg_roles WHERE rolname = '{role}') THEN\n"
        f"    CREATE ROLE {_q(role)} NOLOGIN;\n"
        "  END IF;\n"
        "END $$;"
    )


def guard_statements(schema: str) -> list[str]:
    """The trigger that keeps ``log_entry`` append-only for every role, owner included."""
    function = f"{_q(schema)}.{_q(GUARD_FUNCTION)}"
    table = f"{_q(schema)}.log_entry"
    return [
        (
            f"CREATE OR REPLACE FUNCTION {function}() RETURNS trigger LANGUAGE plpgsql AS $$\n"
            "BEGIN\n"
            "  RAISE EXCEPTION 'the log is append-only: % on log_entry refused', TG_OP\n"
            "    USING ERRCODE = 'insufficient_privilege';\n"
            "END\n"
            "$$;"
        ),
        f"DROP TRIGGER IF EXISTS {_q(GUARD_TRIGGER)} ON {table};",
        (
            f"CREATE TRIGGER {_q(GUARD_TRIGGER)} BEFORE UPDATE OR DELETE ON {table}\n"
            f"  FOR EACH ROW EXECUTE FUNCTION {function}();"
        ),
        f"DROP TRIGGER IF EXISTS {_q(GUARD_TRUNCATE_TRIGGER)} ON {table};",
        (
            f"CREATE TRIGGER {_q(GUARD_TRUNCATE_TRIGGER)} BEFORE TRUNCATE ON {table}\n"
            f"  FOR EACH STATEMENT EXECUTE FUNCTION {function}();"
        ),
        # ALWAYS: they fire even under session_replication_role = replica
        f"ALTER TABLE {table} ENABLE ALWAYS TRIGGER {_q(GUARD_TRIGGER)};",
        f"ALTER TABLE {table} ENABLE ALWAYS TRIGGER {_q(GUARD_TRUNCATE_TRIGGER)};",
    ]


def roles_statements(
    *,
    database: str,
    schema: str,
    tables: list[str],
    clerk: str = CLERK_ROLE,
    admin: str = ADMIN_ROLE,
) -> list[str]:
    """The SQL statements, in order, that set up both roles on one register.

    Running them again converges: privileges are revoked first, then granted afresh.
    ``tables`` are the register's tables (a table this version has no policy for is
    granted SELECT only, and says so in a comment).
    """
    check_role_name(clerk)
    check_role_name(admin)
    if clerk == admin:
        raise InvalidFormat("the clerk and admin roles need different names")
    roles = f"{_q(clerk)}, {_q(admin)}"
    on_schema = _q(schema)
    statements = [
        f"-- issuer: roles for the register in database {database}, schema {schema}",
        _create_role(clerk),
        _create_role(admin),
        f"GRANT CONNECT ON DATABASE {_q(database)} TO {roles};",
        f"GRANT USAGE ON SCHEMA {on_schema} TO {roles};",
        f"REVOKE CREATE ON SCHEMA {on_schema} FROM PUBLIC;",
        "-- start from nothing, so running this again converges",
        f"REVOKE ALL ON ALL TABLES IN SCHEMA {on_schema} FROM PUBLIC, {roles};",
        f"REVOKE ALL ON ALL SEQUENCES IN SCHEMA {on_schema} FROM PUBLIC, {roles};",
        f"-- clerk {clerk}: issue, check, reprint, reconcile, holder set/clear, renew",
        *_grant_lines(clerk, schema, CLERK_POLICY, tables),
        f"-- admin {admin}: the clerk's acts, series, void, replace, restore, import, erase, suspend",
        *_grant_lines(admin, schema, ADMIN_POLICY, tables),
        "-- new codes, batches and series take ids from sequences",
        f"GRANT USAGE ON ALL SEQUENCES IN SCHEMA {on_schema} TO {roles};",
        "-- the log is append-only for everyone, the table's owner included, and appended",
        "-- only through the function that computes the chain and records the login",
        f"REVOKE INSERT, UPDATE, DELETE, TRUNCATE ON {on_schema}.log_entry FROM PUBLIC, {roles};",
        *(f"REVOKE INSERT, UPDATE, DELETE, TRUNCATE ON {on_schema}.{table} FROM PUBLIC, {roles};"
          for table in ("log_chain", "log_leaf", "log_tree")),
        f"REVOKE ALL ON FUNCTION {on_schema}.{APPEND_FUNCTION} FROM PUBLIC;",
        f"GRANT EXECUTE ON FUNCTION {on_schema}.{APPEND_FUNCTION} TO {roles};",
        "-- sealing (log anchor, log checkpoint, a receipt) gives leaf positions, nothing else",
        f"REVOKE ALL ON FUNCTION {on_schema}.{SEAL_FUNCTION} FROM PUBLIC;",
        f"GRANT EXECUTE ON FUNCTION {on_schema}.{SEAL_FUNCTION} TO {roles};",
        *guard_statements(schema),
        "-- what grants cannot say: values, and every change logged by the same act",
        *rights_statements(schema, clerk=clerk, admin=admin),
        "-- give people their own login roles and make them members, for example:",
        f"--   CREATE ROLE alice LOGIN PASSWORD '...'; GRANT {_q(clerk)} TO alice;",
    ]
    return statements


def render_script(statements: list[str]) -> str:
    """The statements as one script, in a transaction, ready for psql."""
    body = "\n".join(statements)
    return f"BEGIN;\n{body}\nCOMMIT;\n"
