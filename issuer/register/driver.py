"""Straight to the database driver, inside the session's transaction.

For the few places where a million rows pass: ``executemany`` over an iterator of
tuples, and queries whose rows come back as plain tuples, with no per-row work by the
ORM or Core. Values are bound as the ORM would bind them (:func:`bind_value`), and
driver errors come back as SQLAlchemy's own wrapped errors, so retries and callers see
one kind of error whichever road a statement took.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Sequence
from typing import Any

from sqlalchemy import Column
from sqlalchemy.exc import DBAPIError
from sqlalchemy.orm import Session
from sqlalchemy.sql import Select


def bind_value(session: Session, column: Column[Any], value: Any) -> Any:
    """``value`` as the driver takes it for ``column`` (what the ORM would send)."""
    dialect = session.get_bind().dialect
    processor = column.type.dialect_impl(dialect).bind_processor(dialect)
    return processor(value) if processor is not None else value


def execute_many(session: Session, sql: str, rows: Iterable[Sequence[Any]]) -> None:
    """Run ``sql`` once per tuple of ``rows`` through the driver's ``executemany``, in
    the session's transaction. Write ``?`` for each parameter (it becomes the driver's
    own marker); values must already be in the driver's form (:func:`bind_value`)."""
    connection = session.connection()
    dialect = connection.dialect
    if dialect.paramstyle != "qmark":
        sql = sql.replace("?", "%s")
    cursor = connection.connection.cursor()
    try:
        cursor.executemany(sql, rows)  # type: ignore[arg-type]  # both drivers take any iterable
    except dialect.loaded_dbapi.Error as exc:
        # the same wrapped error the ORM would raise, so retries and callers see one kind
        raise DBAPIError.instance(sql, None, exc, dialect.loaded_dbapi.Error) from None
    finally:
        cursor.close()


def insert_many(session: Session, table: str, columns: Sequence[str], rows: Iterable[Sequence[Any]]) -> None:
    """``INSERT`` every tuple of ``rows`` into ``table`` (see :func:`execute_many`)."""
    markers = ", ".join("?" * len(columns))
    execute_many(session, f"INSERT INTO {table} ({', '.join(columns)}) VALUES ({markers})", rows)


def driver_rows(session: Session, sql: str, params: Sequence[Any] = ()) -> list[tuple[Any, ...]]:
    """Rows of a query as the driver returns them (no type processing), in the
    session's transaction. Write ``?`` for each parameter; it becomes the driver's own
    marker."""
    connection = session.connection()
    dialect = connection.dialect
    if dialect.paramstyle != "qmark":
        sql = sql.replace("?", "%s")
    cursor = connection.connection.cursor()
    try:
        cursor.execute(sql, tuple(params))
        return list(cursor.fetchall())
    except dialect.loaded_dbapi.Error as exc:
        raise DBAPIError.instance(sql, None, exc, dialect.loaded_dbapi.Error) from None
    finally:
        cursor.close()


def stream_rows(session: Session, statement: Select[Any], size: int) -> Iterator[Sequence[Any]]:
    """The rows of a Core ``select`` a batch of ``size`` at a time, as the driver returns
    them: on SQLite straight from the cursor (which reads as it goes), elsewhere through
    a server-side cursor. The statement's columns must need no result processing."""
    connection = session.connection()
    dialect = connection.dialect
    if dialect.name != "sqlite":
        result = connection.execution_options(yield_per=size).execute(statement)
        yield from result.partitions()
        return
    compiled = statement.compile(dialect=dialect)
    params = [compiled.params[name] for name in compiled.positiontup or ()]
    cursor = connection.connection.cursor()
    try:
        cursor.execute(str(compiled), params)
        while rows := cursor.fetchmany(size):
            yield rows
    except dialect.loaded_dbapi.Error as exc:
        raise DBAPIError.instance(str(compiled), params, exc, dialect.loaded_dbapi.Error) from None
    finally:
        cursor.close()


__all__ = ["bind_value", "driver_rows", "execute_many", "insert_many", "stream_rows"]
