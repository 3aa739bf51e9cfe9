"""Straight to the database driver, inside the session's transaction.

For the few places where a million rows pass: ``executemany`` over an iterator of
tuples, and queries whose rows come back as plain tuples, with no per-row work by the
ORM or Core. Values are bound as the ORM would bind them (:func:`bind_value`), and
driver errors come back as SQLAlchemy's own wrapped errors, so retries and callers see
one kind of error whichever road a statement took.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, cast

from sqlalchemy import Column, Connection
from sqlalchemy.engine import Dialect
from sqlalchemy.exc import DBAPIError
from sqlalchemy.orm import Session
from sqlalchemy.sql import ClauseElement, Select
from sqlalchemy.sql.compiler import SQLCompiler


def driver_error(connection: Connection, sql: str, exc: Exception) -> DBAPIError:
    """A driver's error as SQLAlchemy's own wrapped error, as Core would raise it: a
    dropped connection is invalidated (the pool then replaces it) and flagged
    ``connection_invalidated``, which the retry loop reads."""
    dialect = connection.dialect
    proxied = connection.connection
    lost = bool(dialect.is_disconnect(cast(Any, exc), proxied.dbapi_connection, None))
    if lost and not connection.invalidated:
        connection.invalidate(exc)
    wrapped = DBAPIError.instance(sql, None, exc, dialect.loaded_dbapi.Error, connection_invalidated=lost)
    return cast(DBAPIError, wrapped)


def begin_immediate(connection: Connection) -> None:
    """Begin a writing transaction on SQLite with BEGIN IMMEDIATE, straight to the driver,
    before SQLAlchemy begins its own on ``connection`` (the engine's BEGIN then sees the
    transaction open and says nothing): the write lock is taken first, so a transaction
    never reads a counter and then fails to write it under contention, whatever the busy
    timeout. A busy register comes back as SQLAlchemy's ``OperationalError``, which the
    retry loop knows. Elsewhere nothing: PostgreSQL's transactions lock the rows they write."""
    if connection.dialect.name != "sqlite":
        return
    try:
        connection.connection.dbapi_connection.execute("BEGIN IMMEDIATE")  # type: ignore[union-attr]
    except connection.dialect.loaded_dbapi.Error as exc:
        raise driver_error(connection, "BEGIN IMMEDIATE", exc) from None


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
        if isinstance(rows, list) and len(rows) == 1:
            cursor.execute(sql, rows[0])  # one row: no batching machinery (psycopg's costs round trips)
        else:
            cursor.executemany(sql, rows)  # type: ignore[arg-type]  # both drivers take any iterable
    except dialect.loaded_dbapi.Error as exc:
        # the same wrapped error the ORM would raise, so retries and callers see one kind
        raise driver_error(connection, sql, exc) from None
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
        raise driver_error(connection, sql, exc) from None
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
        raise driver_error(connection, str(compiled), exc) from None
    finally:
        cursor.close()


@dataclass(frozen=True)
class _Form:
    """A statement as one dialect runs it: its text, and how a call's values become
    the driver's parameters."""

    sql: str
    names: tuple[str, ...]  # in the order the driver takes them
    positional: bool
    defaults: Mapping[str, Any]  # values written into the statement (``id == 1``)
    processors: Mapping[str, Callable[[Any], Any]]
    returns_rows: bool = False  # a SELECT or a write with RETURNING

    def __post_init__(self) -> None:
        # looked up once, as binding runs on every statement of every act: each parameter's
        # name and the value written into the statement (or none: the caller gives it), and
        # where a processor applies
        plan = tuple((name, name not in self.defaults, self.defaults.get(name)) for name in self.names)
        processed = tuple((at, self.processors[name]) for at, name in enumerate(self.names) if name in self.processors)
        object.__setattr__(self, "_plan", plan)
        object.__setattr__(self, "_processed", processed)

    def parameters(self, values: Mapping[str, Any]) -> Sequence[Any] | dict[str, Any]:
        plan: tuple[tuple[str, bool, Any], ...] = self._plan  # type: ignore[attr-defined]
        out = [values[name] if given else values.get(name, default) for name, given, default in plan]
        for at, processor in self._processed:  # type: ignore[attr-defined]
            if out[at] is not None:
                out[at] = processor(out[at])
        return out if self.positional else dict(zip(self.names, out))


class Prepared:
    """A Core statement compiled once per dialect and run straight through the driver,
    in the transaction of the connection it is given.

    The acts that run on every issue (the counter move, the batch row, the log append)
    pay for SQLAlchemy's per-execution work — cache lookup, parameter construction,
    result set-up — several times over for a statement that takes the driver a few
    microseconds. Here the statement is built and compiled once; a call binds its
    values through the column types' own bind processors (what Core would send) and
    hands them to the driver. Errors come back as SQLAlchemy's wrapped errors, so the
    retry loop sees one kind. Returned columns get no result processing: return only
    columns whose driver values are already what Python wants (ids, numbers, text).
    """

    def __init__(self, statement: ClauseElement) -> None:
        self.statement = statement
        self._forms: dict[str, _Form] = {}

    def _form(self, dialect: Dialect) -> _Form:
        form = self._forms.get(dialect.name)
        if form is None:
            compiled = cast(SQLCompiler, self.statement.compile(dialect=dialect))
            binds = {name: bind for bind, name in compiled.bind_names.items()}
            positional = bool(compiled.positional)
            names = tuple(compiled.positiontup or ()) if positional else tuple(binds)
            processors = {}
            for name in names:
                processor = binds[name].type.dialect_impl(dialect).bind_processor(dialect)
                if processor is not None:
                    processors[name] = processor
            defaults = {name: binds[name].value for name in names if not binds[name].required}
            returns = bool(getattr(self.statement, "is_select", False) or getattr(self.statement, "_returning", ()))
            form = _Form(str(compiled), names, positional, defaults, processors, returns)
            self._forms[dialect.name] = form
        return form

    def _execute(self, connection: Connection, values: Mapping[str, Any] | None) -> tuple[_Form, Any]:
        """Send the statement (the driver's own ``Connection.execute``, which makes the
        cursor: sqlite3's in C); its form and the cursor holding its answer."""
        form = self._forms.get(connection.dialect.name) or self._form(connection.dialect)
        raw: Any = connection.connection.dbapi_connection
        try:
            return form, raw.execute(form.sql, form.parameters(values or {}))
        except connection.dialect.loaded_dbapi.Error as exc:
            # the same wrapped error Core would raise, so retries and callers see one kind
            raise driver_error(connection, form.sql, exc) from None

    def rows(self, connection: Connection, values: Mapping[str, Any] | None = None) -> list[tuple[Any, ...]]:
        """Run once; the rows it returns (none for a plain write)."""
        form, cursor = self._execute(connection, values)
        try:
            # in pipeline mode a write's answer is not waited for (its error, if any, comes
            # with the next answer that is); a statement that returns rows waits for them
            return cursor.fetchall() if form.returns_rows else []
        except connection.dialect.loaded_dbapi.Error as exc:
            raise driver_error(connection, form.sql, exc) from None
        finally:
            cursor.close()

    def one(self, connection: Connection, values: Mapping[str, Any] | None = None) -> tuple[Any, ...] | None:
        """Run once; its only row, or None."""
        found = self.rows(connection, values)
        return found[0] if found else None

    def start(self, connection: Connection, values: Mapping[str, Any] | None = None) -> Started:
        """Run once and read its rows later (:meth:`Started.rows`): in pipeline mode the
        statements started after it go out before its answer has come back, and the first
        read waits for all of them (one round trip)."""
        form, cursor = self._execute(connection, values)
        return Started(connection, form.sql, cursor)

    def send(self, connection: Connection, values: Mapping[str, Any] | None = None) -> None:
        """Run once and read nothing back: in pipeline mode (:func:`pipeline_to_commit`) it
        goes out without waiting, and an error it meets comes with the COMMIT's answer."""
        self._execute(connection, values)[1].close()

    def many(self, connection: Connection, values: Iterable[Mapping[str, Any]]) -> None:
        """Run once per mapping of ``values`` (a write), through ``executemany``."""
        form = self._forms.get(connection.dialect.name) or self._form(connection.dialect)
        cursor: Any = connection.connection.dbapi_connection.cursor()  # type: ignore[union-attr]
        try:
            cursor.executemany(form.sql, [form.parameters(each) for each in values])
        except connection.dialect.loaded_dbapi.Error as exc:
            raise driver_error(connection, form.sql, exc) from None
        finally:
            cursor.close()


class Started:
    """A statement sent by :meth:`Prepared.start`, its rows still to read."""

    def __init__(self, connection: Connection, sql: str, cursor: Any) -> None:
        self.connection, self.sql, self.cursor = connection, sql, cursor

    def rows(self) -> list[tuple[Any, ...]]:
        """Its rows (waiting for them if they have not come back yet); an error it met
        (or, in pipeline mode, one a statement sent with it met) is raised here."""
        try:
            return self.cursor.fetchall()  # type: ignore[no-any-return]
        except self.connection.dialect.loaded_dbapi.Error as exc:
            raise driver_error(self.connection, self.sql, exc) from None
        finally:
            self.cursor.close()

    def close(self) -> None:
        self.cursor.close()


#: ``Session.info`` key: a list of exit callbacks (``ExitStack.push``'s kind) that
#: :meth:`issuer.register.store.Register.writing` runs, newest first, once the transaction
#: has ended (committed or rolled back); present only in a writing transaction
AFTER_TRANSACTION = "issuer_after_transaction"


#: ``Session.info`` key: the pipeline the transaction's statements are going out in, while open
PIPELINE = "issuer_pipeline"


def pipeline_to_commit(session: Session) -> None:
    """From here to the end of the writing transaction, send statements without waiting
    for each one's answer (psycopg 3's pipeline mode on PostgreSQL; elsewhere nothing
    changes): the writes that end an act and its COMMIT go out together, one round trip
    instead of one each (:func:`commit_pipeline`); a statement that returns rows waits
    for its answer, and for nothing else (a pipeline opened before a transaction's first
    statement sends its BEGIN with it). Only :class:`Prepared` statements,
    :func:`insert_many` and the COMMIT may follow, until :func:`leave_pipeline` (Core and
    the ORM read a result's shape before it has come back)."""
    after = session.info.get(AFTER_TRANSACTION)
    if after is None or session.get_bind().dialect.name != "postgresql":
        return
    connection = session.connection()
    raw = connection.connection.dbapi_connection
    if raw is None or getattr(raw, "_pipeline", None) is not None:
        return
    pipeline: Any = raw.pipeline()  # psycopg's
    pipeline.__enter__()
    session.info[PIPELINE] = pipeline

    def leave(exc_type: Any, exc: Any, traceback: Any) -> bool:
        if PIPELINE not in session.info or session.info[PIPELINE] is not pipeline:
            return False  # left or committed already
        del session.info[PIPELINE]
        # always as if all went well: the driver then raises what is pending instead of
        # logging it; when the act failed already, its error is the one to see
        try:
            pipeline.__exit__(None, None, None)
        except Exception:
            if exc_type is None and not raw.closed:
                raise
        return False

    after.append(leave)


def leave_pipeline(session: Session) -> None:
    """Wait for every statement sent so far and go back to one statement at a time, so
    that Core and the ORM may run again (an act that found it needs them after all)."""
    pipeline = session.info.pop(PIPELINE, None)
    if pipeline is None:
        return
    connection = session.connection()
    try:
        pipeline.__exit__(None, None, None)
    except connection.dialect.loaded_dbapi.Error as exc:
        raise driver_error(connection, "(the statements sent in a pipeline)", exc) from None


def commit_pipeline(session: Session) -> None:
    """Commit a transaction whose statements are going out in a pipeline: COMMIT is sent
    in it and the pipeline is closed, so the last writes, the COMMIT and the pipeline's
    end go out in one round trip (the driver's own commit would end the pipeline with a
    second one). An error of any statement still pending, or of the COMMIT, comes back as
    SQLAlchemy's wrapped error; the caller's rollback follows. Without a pipeline (or with
    ORM changes still to flush) nothing happens here and the usual COMMIT follows."""
    pipeline = session.info.get(PIPELINE)
    if pipeline is None:
        return
    # (a writing session the ORM has not been used in holds nothing, and is not made to)
    if getattr(session, "joined", True) and (session.new or session.dirty or session.deleted):
        leave_pipeline(session)  # the flush goes before the COMMIT, one statement at a time
        return
    del session.info[PIPELINE]
    connection = session.connection()
    cursor: Any = connection.connection.dbapi_connection.cursor()  # type: ignore[union-attr]
    error = connection.dialect.loaded_dbapi.Error
    try:
        try:
            cursor.execute("COMMIT", prepare=False)  # (psycopg's cursor: not worth preparing)
        except error:
            # a refusal of a write sent earlier was back already and came out of the
            # COMMIT's send: the pipeline is aborted and is closed here (what else it held
            # is void), or the ROLLBACK that follows would meet the aborted pipeline
            try:
                pipeline.__exit__(None, None, None)
            except error:
                pass
            raise
        pipeline.__exit__(None, None, None)
    except error as exc:
        raise driver_error(connection, "COMMIT", exc) from None
    finally:
        cursor.close()


__all__ = ["AFTER_TRANSACTION", "PIPELINE", "Prepared", "Started", "begin_immediate", "bind_value", "commit_pipeline", "driver_error", "driver_rows", "execute_many", "insert_many", "leave_pipeline", "pipeline_to_commit", "stream_rows"]
