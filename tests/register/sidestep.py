"""Raw SQL behind the tool's back, as an owner or superuser would do it: on PostgreSQL
every trigger of the register's tables is disabled for the one transaction and then put
back exactly as it was (DISABLE TRIGGER ... ENABLE TRIGGER), which leaves no trace in the
catalog; SQLite's triggers are dropped and re-created the same way."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Connection, create_engine, text

from issuer.register.store import database_url

_MODES = {"O": "ENABLE TRIGGER", "A": "ENABLE ALWAYS TRIGGER", "R": "ENABLE REPLICA TRIGGER",
          "D": "DISABLE TRIGGER"}  # fmt: skip


def _pg_triggers(connection: Connection, statement: str) -> list[tuple[str, str, str]]:
    words = statement.split()
    named = {words[1], words[2]} if len(words) > 2 else set()  # UPDATE t / DELETE FROM t / INSERT INTO t
    return [
        (str(table), str(name), str(mode))
        for table, name, mode in connection.execute(text(
            "SELECT c.relname, t.tgname, t.tgenabled FROM pg_trigger t "
            "JOIN pg_class c ON c.oid = t.tgrelid WHERE NOT t.tgisinternal "
            "AND c.relnamespace = current_schema()::regnamespace"
        ))
        if table in named or not named
    ]


def sidestep(connection: Connection, statement: str, params: dict[str, Any] | None = None) -> None:
    """Run ``statement`` in the connection's transaction with the triggers out of the way."""
    if connection.dialect.name == "postgresql":
        triggers = _pg_triggers(connection, statement)
        for table, name, _mode in triggers:
            connection.execute(text(f'ALTER TABLE "{table}" DISABLE TRIGGER "{name}"'))
        connection.execute(text(statement), params or {})
        for table, name, mode in triggers:
            connection.execute(text(f'ALTER TABLE "{table}" {_MODES[mode]} "{name}"'))
        return
    saved = [
        (str(name), str(sql))
        for name, sql in connection.execute(text("SELECT name, sql FROM sqlite_master WHERE type = 'trigger'"))
    ]
    for name, _sql in saved:
        connection.execute(text(f'DROP TRIGGER "{name}"'))
    connection.execute(text(statement), params or {})
    for _name, sql in saved:
        connection.exec_driver_sql(sql)


def as_replica(connection: Connection, statement: str, params: dict[str, Any] | None = None) -> None:
    """Run ``statement`` as a superuser who sets ``session_replication_role = replica`` for
    the transaction (PostgreSQL): ordinary triggers stay silent, ALWAYS triggers fire."""
    connection.execute(text("SET LOCAL session_replication_role = replica"))
    connection.execute(text(statement), params or {})


def sql_behind_the_back(url: str, statement: str, **params: Any) -> None:
    """One statement in its own transaction, side-stepping the triggers."""
    engine = create_engine(database_url(url))
    try:
        with engine.begin() as connection:
            sidestep(connection, statement, params)
    finally:
        engine.dispose()
