"""The rules PostgreSQL enforces on every role once ``issuer db roles --apply`` has run.

Grants alone say which columns a role may touch, not which values it may write. These
triggers add what grants cannot say; each names the act it refuses:

* a code is inserted only as ``issued`` (``voided`` only by an import), never already
  printed, seen or replaced, and only into a batch created in the same transaction;
* a batch is inserted only together with its log entry; an import batch only by an admin;
* no row of ``issued_code`` or ``series`` changes unless the same transaction appends a
  log entry naming that code (or its batch, or an import into its series) or that series;
* a clerk's login cannot log an admin's act (void, restore, replace, import, series).

An entry naming a series is found on its chain, whose newest entry is this transaction's
if it appended one (appending waits for the chain's lock), or, for a series' adding, on
the register's chain; an import into a series by its batch (the log's indexes: migration
``fewer_pages``, which replaces these functions where they exist).

"The same transaction" is told by the rows' ``xmin``: a log entry appended by this
transaction carries its transaction id, and only the SECURITY DEFINER function
``issuer_log_append`` can append one, with the chain and the login computed inside the
database. Checks of changes are deferred to commit, so the order of an act's statements
does not matter. The table owner and superusers are held by the same triggers; they can
disable them (``ALTER TABLE ... DISABLE TRIGGER``), which is why ``issuer doctor`` replays
the log against the register rather than trusting the triggers alone.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from sqlalchemy.orm import Session

#: acts only an admin may log (the holders work adds its own acts here)
ADMIN_ACTS = ("void", "restore", "replace", "import", "series.add", "series.change")

#: the trigger names ``issuer doctor`` looks for, with their tables
RIGHTS_TRIGGERS = (
    ("issued_code", "issuer_code_insert"),
    ("issued_code", "issuer_code_change_logged"),
    ("batch", "issuer_batch_insert"),
    ("batch", "issuer_batch_logged"),
    ("series", "issuer_series_change_logged"),
    ("log_entry", "issuer_log_act_by_role"),
)

# a log entry appended by the current transaction
_THIS_XACT = "e.xmin = pg_current_xact_id()::xid"


def _literal(text: str) -> str:
    return "'" + text.replace("'", "''") + "'"


def rights_statements(schema: str, *, clerk: str, admin: str) -> list[str]:
    """The functions and triggers, in order; running them again converges."""
    s = '"' + schema.replace('"', '""') + '"'
    clerk_only = (
        f"pg_has_role(session_user, {_literal(clerk)}, 'MEMBER') "
        f"AND NOT pg_has_role(session_user, {_literal(admin)}, 'MEMBER')"
    )
    acts = ", ".join(_literal(act) for act in ADMIN_ACTS)

    def function(name: str, body: str) -> str:
        return (
            f"CREATE OR REPLACE FUNCTION {s}.{name}() RETURNS trigger LANGUAGE plpgsql "
            f"SET search_path = {s}, pg_temp AS $$\nBEGIN\n{body}\nEND\n$$;"
        )

    def refuse(message: str, *args: str) -> str:
        rest = "".join(f", {arg}" for arg in args)
        return f"RAISE EXCEPTION {_literal(message)}{rest} USING ERRCODE = 'insufficient_privilege';"

    def guard(name: str, table: str, when: str, each: str, body: str, *, constraint: bool = False) -> list[str]:
        """A trigger function and its trigger, dropped first so that running again converges."""
        kind = "CONSTRAINT TRIGGER" if constraint else "TRIGGER"
        return [
            function(name, body),
            f"DROP TRIGGER IF EXISTS {name} ON {s}.{table};",
            f"CREATE {kind} {name} {when} ON {s}.{table} {each} EXECUTE FUNCTION {s}.{name}();",
        ]

    statements = [
        *guard("issuer_code_insert", "issued_code", "AFTER INSERT", "REFERENCING NEW TABLE AS added FOR EACH STATEMENT", f"""
  IF EXISTS (SELECT 1 FROM added a LEFT JOIN batch b ON b.id = a.batch_id
             WHERE b.id IS NULL OR b.xmin <> pg_current_xact_id()::xid) THEN
    {refuse('a code goes only into a batch created by the same act')}
  END IF;
  IF EXISTS (SELECT 1 FROM added a JOIN batch b ON b.id = a.batch_id
             WHERE (a.status <> 'issued' AND b.kind <> 'import') OR a.print_count <> 0
                OR a.replaced_by_id IS NOT NULL
                OR (b.kind <> 'import' AND (a.last_seen_at IS NOT NULL OR a.void_reason IS NOT NULL))) THEN
    {refuse('a new code is inserted as issued, never printed, seen, voided or replaced')}
  END IF;
  RETURN NULL;"""),
        *guard("issuer_batch_insert", "batch", "BEFORE INSERT", "FOR EACH ROW", f"""
  IF NEW.kind NOT IN ('issue', 'replace', 'import') THEN
    {refuse('unknown batch kind %', 'NEW.kind')}
  END IF;
  IF NEW.kind = 'import' AND {clerk_only} THEN
    {refuse('only an admin imports codes')}
  END IF;
  RETURN NEW;"""),
        *guard("issuer_batch_logged", "batch", "AFTER INSERT", "DEFERRABLE INITIALLY DEFERRED FOR EACH ROW", f"""
  IF NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.batch_id = NEW.id AND {_THIS_XACT}) THEN
    {refuse('batch % was not logged by the act that made it', 'NEW.id')}
  END IF;
  RETURN NULL;""", constraint=True),
        *guard("issuer_code_change_logged", "issued_code", "AFTER UPDATE", "DEFERRABLE INITIALLY DEFERRED FOR EACH ROW", f"""
  IF NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.code IN (NEW.code, OLD.code) AND {_THIS_XACT})
     AND NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.batch_id = NEW.batch_id AND {_THIS_XACT})
     AND NOT EXISTS (SELECT 1 FROM batch b JOIN log_entry e ON e.batch_id = b.id
                     WHERE b.series_id = NEW.series_id AND b.kind = 'import'
                     AND b.xmin = pg_current_xact_id()::xid AND e.action = 'import' AND {_THIS_XACT}) THEN
    {refuse('code % changed without a log entry for it', 'OLD.code')}
  END IF;
  RETURN NULL;""", constraint=True),
        *guard("issuer_series_change_logged", "series", "AFTER UPDATE", "DEFERRABLE INITIALLY DEFERRED FOR EACH ROW", f"""
  IF NOT EXISTS (SELECT 1 FROM (SELECT e.series_id, e.xmin AS x FROM log_entry e WHERE e.chain = NEW.id
                                ORDER BY e.id DESC LIMIT 1) newest
                 WHERE newest.series_id = NEW.id AND newest.x = pg_current_xact_id()::xid) THEN
    IF NOT EXISTS (SELECT 1 FROM log_entry e WHERE e.chain = 0 AND e.series_id = NEW.id AND {_THIS_XACT}) THEN
      {refuse('series % changed without a log entry for it', 'OLD.key')}
    END IF;
  END IF;
  RETURN NULL;""", constraint=True),
        *guard("issuer_log_act_by_role", "log_entry", "BEFORE INSERT", "FOR EACH ROW", f"""
  IF NEW.action IN ({acts}) AND {clerk_only} THEN
    {refuse('a clerk cannot log the act %', 'NEW.action')}
  END IF;
  RETURN NEW;"""),
    ]
    # ALWAYS: session_replication_role = replica does not switch them off
    statements += [f"ALTER TABLE {s}.{table} ENABLE ALWAYS TRIGGER {name};" for table, name in RIGHTS_TRIGGERS]
    return statements


#: triggers every PostgreSQL register has from migration log_rights on: (table, name)
BASE_TRIGGERS = (
    ("log_entry", "issuer_log_append_only"),
    ("log_entry", "issuer_log_no_truncate"),
    ("series", "issuer_series_guard"),
)


def guard_problems(session: Session) -> tuple[list[str], list[str]]:
    """What is wrong with the database's guards (problems), and what is worth a look."""
    from sqlalchemy import text

    found = {
        (str(table), str(name)): str(mode)
        for table, name, mode in session.execute(text(
            "SELECT c.relname, t.tgname, t.tgenabled FROM pg_trigger t JOIN pg_class c ON c.oid = t.tgrelid "
            "WHERE NOT t.tgisinternal AND c.relnamespace = current_schema()::regnamespace"
        ))
    }
    problems: list[str] = []
    notes: list[str] = []
    rights_applied = any(pair in found for pair in RIGHTS_TRIGGERS)
    expected = list(BASE_TRIGGERS) + (list(RIGHTS_TRIGGERS) if rights_applied else [])
    for table, name in expected:
        mode = found.get((table, name))
        if mode is None:
            problems.append(f"trigger {name} on {table} is missing")
        elif mode == "D":
            problems.append(f"trigger {name} on {table} is disabled")
        elif mode != "A":
            notes.append(f"trigger {name} on {table} does not fire under session_replication_role = replica")
    appender = session.execute(text(
        "SELECT p.prosecdef FROM pg_proc p WHERE p.proname = 'issuer_log_append' "
        "AND p.pronamespace = current_schema()::regnamespace"
    )).first()
    if appender is None or not appender[0]:
        problems.append("the log's append function issuer_log_append is missing or not SECURITY DEFINER")
    if problems:
        problems.append("'issuer db upgrade' and 'issuer db roles --apply' put them back")
    if not rights_applied:
        notes.append("no roles set up: 'issuer db roles --apply' makes the database enforce who may do what")
    return problems, notes
