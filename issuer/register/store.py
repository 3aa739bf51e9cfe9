"""Engines, sessions and the one transaction helper.

Backend quirks live here and nowhere else:

* SQLite: WAL journal, ``synchronous=FULL`` (a commit is durable), a busy timeout,
  foreign keys on, and every writing transaction opened with ``BEGIN IMMEDIATE`` — a
  deferred transaction that reads the counter and then writes fails at once under
  contention, whatever the busy timeout. New files are created owner-only (0600).
* PostgreSQL (psycopg 3): writers lock the series row (its counter moves in one
  ``UPDATE … RETURNING``); serialization failures (SQLSTATE 40001) and deadlocks (40P01) are
  retried. No ping on checkout: pooled connections are recycled after
  :data:`POOL_RECYCLE_S`, and a connection found dead before the act's COMMIT was sent is
  retried on a fresh one (nothing was committed); lost during the COMMIT, the outcome is
  unknown and the act says so in one line (:class:`~issuer.errors.ConnectionLost`).

The database is created and upgraded by Alembic (:mod:`issuer.register.migrate`);
opening a register whose schema is already current never imports Alembic.
"""

from __future__ import annotations

import functools
import os
import random
import sqlite3
import sys
import time
from collections.abc import Callable, Iterator
from contextlib import ExitStack, contextmanager
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, TypeVar

from sqlalchemy import Connection, Engine, create_engine, event, text
from sqlalchemy.engine import make_url
from sqlalchemy.exc import ArgumentError, DBAPIError, IntegrityError, OperationalError
from sqlalchemy.orm import Session

from issuer import limits
from issuer.errors import (
    CommitUnconfirmed,
    ConnectionLost,
    DuplicateRow,
    IssuerError,
    NoRegister,
    PermissionDenied,
    RegisterError,
    redact,
)
from issuer.outputs import private_folder, protect
from issuer.register.driver import AFTER_TRANSACTION, begin_immediate, commit_pipeline
from issuer.register.sealing import SESSION_INFO, Keyring, default_key_file

T = TypeVar("T")

#: the Alembic revision the code expects; a test keeps it equal to the migrations' head
SCHEMA_HEAD = "lean_append"

#: how often a writing transaction is tried when another desk holds the lock
WRITE_ATTEMPTS = 20

#: seconds after which a pooled PostgreSQL connection is replaced rather than reused
#: (instead of a ping on every checkout, which costs a round trip per act)
POOL_RECYCLE_S = 1800


def _constraint_line(exc: IntegrityError) -> str:
    """One line for a refused row: which value repeated, where the driver says."""
    lines = [line.strip() for line in str(exc.orig).splitlines() if line.strip()]
    detail = next((line for line in lines if line.startswith("DETAIL:")), None)
    if detail:  # PostgreSQL: "Key (code)=(C00003202) already exists."
        return "the register refused a row: " + detail.removeprefix("DETAIL:").strip()
    first = lines[0] if lines else "a constraint failed"
    if first.startswith("UNIQUE constraint failed: "):  # SQLite
        return f"the register refused a row: its {first.split(': ', 1)[1]} is held already"
    return f"the register refused a row: {first}"


def key_path(key_file: str | os.PathLike[str] | None) -> Path | None:
    if key_file is None or key_file == "":
        return None
    limits.file_name("the key file", key_file)
    return Path(key_file).expanduser().absolute()


def utc_now() -> datetime:
    return datetime.now(UTC)


def database_url(database: str) -> str:
    """A SQLAlchemy URL for a path or URL given by the user."""
    if "://" in database:
        try:
            url = make_url(database)
        except ArgumentError:
            raise RegisterError(f"not a database URL: {redact(database)}") from None
        if url.drivername in ("postgresql", "postgres"):
            url = url.set(drivername="postgresql+psycopg")
        return url.render_as_string(hide_password=False)
    path = Path(database).expanduser().resolve()
    return f"sqlite:///{path}"


def _prepare_sqlite_file(url: str) -> None:
    """Create the file owner-only, with its folder, so nobody else can read the register."""
    database = make_url(url).database
    if not database or database == ":memory:":
        return
    path = Path(database)
    protect(path)
    try:
        # a folder made for a register is the owner's alone, like the file in it
        private_folder(path.parent)
        if not path.exists():
            descriptor = os.open(path, os.O_CREAT | os.O_WRONLY, 0o600)
            os.close(descriptor)
    except OSError as exc:
        raise RegisterError(f"cannot create the register at {path}: {exc.strerror}") from None
    if not os.access(path, os.R_OK | os.W_OK) or not os.access(path.parent, os.W_OK):
        raise RegisterError(f"the register at {path} cannot be written (check permissions)")


def where(url: str) -> str:
    """How to name a register's place to a person: a file's path, or the URL without its
    password."""
    parsed = make_url(url)
    if parsed.drivername.startswith("sqlite"):
        return parsed.database or ":memory:"
    return parsed.render_as_string(hide_password=True)


def no_register(url: str) -> NoRegister:
    place = where(url)
    return NoRegister(
        f"no register at {place}: create one with 'issuer db init --db {place}' "
        "(or 'issuer series add ... --db PATH'; 'issuer demo' builds an example)"
    )


def _refuse_missing_file(url: str) -> None:
    database = make_url(url).database
    local = url.startswith("sqlite") and database and database != ":memory:"
    if local and not Path(str(database)).is_file():
        raise no_register(url)


@functools.cache
def sqlite_has_json() -> bool:
    """Whether this Python's SQLite has the JSON functions (built in from 3.38, or the JSON1
    extension before): the issuing statement reads a batch's numbers with ``json_each``."""
    probe = sqlite3.connect(":memory:")
    try:
        probe.execute("SELECT value FROM json_each('[1]')").fetchall()
    except sqlite3.OperationalError:
        return False
    finally:
        probe.close()
    return True


def _begin_deferred(pooled: Any) -> None:
    """SQLite: BEGIN, unless the connection is in a transaction already (a writing one,
    begun IMMEDIATE by :func:`~issuer.register.driver.begin_immediate`)."""
    raw = pooled.dbapi_connection
    if not raw.in_transaction:
        # straight to the driver; an error comes back as SQLAlchemy's wrapped one
        try:
            raw.execute("BEGIN")
        except sqlite3.Error as exc:
            raise DBAPIError.instance("BEGIN", None, exc, sqlite3.Error) from None


def make_engine(url: str, *, busy_timeout_ms: int = 15000) -> Engine:
    if url.startswith("sqlite"):
        if not sqlite_has_json():
            raise RegisterError(
                f"this Python's SQLite ({sqlite3.sqlite_version}) has no JSON functions, which issuer "
                "needs: use a Python whose SQLite is 3.38 or newer (or built with JSON1)"
            )
        _prepare_sqlite_file(url)
        engine = create_engine(url, connect_args={"timeout": busy_timeout_ms / 1000})

        @event.listens_for(engine, "connect")
        def _on_connect(dbapi_connection: Any, _record: Any) -> None:
            # the driver's own transaction handling is off; we say BEGIN ourselves
            dbapi_connection.isolation_level = None
            cursor = dbapi_connection.cursor()
            cursor.execute(f"PRAGMA busy_timeout = {int(busy_timeout_ms)}")
            cursor.execute("PRAGMA journal_mode = WAL")
            cursor.execute("PRAGMA synchronous = FULL")
            cursor.execute("PRAGMA foreign_keys = ON")
            cursor.close()

        # BEGIN is said by the dialect's own hook for it (SQLAlchemy calls ``do_begin`` with
        # the pooled connection on every transaction it begins), not by a "begin" event: an
        # engine with a connection event dispatches events on every connect, begin, commit and
        # close, which cost an act more than its BEGIN. A writing transaction has said BEGIN
        # IMMEDIATE already (driver.begin_immediate); anything else begins deferred.
        engine.dialect.do_begin = _begin_deferred  # type: ignore[method-assign,assignment]
        return engine
    engine = create_engine(url, pool_recycle=POOL_RECYCLE_S)

    @event.listens_for(engine, "connect")
    def _hear_warnings(dbapi_connection: Any, record: Any) -> None:
        # PostgreSQL says "canceling wait for synchronous replication" as a WARNING and
        # still reports the COMMIT as done; Register.writing listens for it
        heard: list[str] = record.info.setdefault(_WARNINGS, [])

        def hear(diagnostic: Any) -> None:
            if diagnostic.severity_nonlocalized == "WARNING":
                heard.append(str(diagnostic.message_primary or "a warning"))

        dbapi_connection.add_notice_handler(hear)

    return engine


#: where a PostgreSQL connection keeps the warnings it heard (the pool entry's info)
_WARNINGS = "issuer_warnings"


def _is_retryable(exc: DBAPIError) -> bool:
    """Lock contention that a later attempt may get past."""
    original = exc.orig
    sqlstate = getattr(original, "sqlstate", None)
    if sqlstate in ("40001", "40P01", "55P03"):  # serialization, deadlock, lock not available
        return True
    message = str(original).lower()
    return "database is locked" in message or "database is busy" in message


def _is_permission_error(exc: DBAPIError) -> bool:
    sqlstate = getattr(exc.orig, "sqlstate", None)
    return sqlstate == "42501" or "permission denied" in str(exc.orig).lower()


def _refused(exc: DBAPIError) -> PermissionDenied:
    first = str(exc.orig).splitlines()[0] if str(exc.orig).strip() else type(exc.orig).__name__
    return PermissionDenied(f"the database refused this act for the connected role ({first})")


def _after_transaction(callbacks: list[Any], exc_info: Any) -> None:
    """Run (newest first, as an ``ExitStack`` would) what an act registered to run once its
    transaction has ended (:data:`~issuer.register.driver.AFTER_TRANSACTION`); nothing is
    made when nothing registered."""
    if not callbacks:
        return
    stack = ExitStack()
    for callback in callbacks:
        stack.push(callback)
    callbacks.clear()
    stack.__exit__(*exc_info)


def _ended(session: _WritingSession, after: list[Any], exc_info: Any) -> None:
    """Once a writing transaction has ended: the ORM's session closed (if it was made),
    then what the act registered to run."""
    try:
        if session.joined:
            session.close()
    finally:
        _after_transaction(after, exc_info)


class _WritingSession(Session):
    """The session of one writing transaction (:meth:`Register.writing`), bound to the
    connection whose transaction it is. :meth:`connection` and :meth:`get_bind` hand back
    that connection without starting the session's own transaction: the statements an act
    runs on it are in the connection's transaction already.

    The session's own state (identity map, the ORM's registry of sessions) is made the
    first time anything else of the session is asked for, and it then joins the
    connection's transaction (``rollback_only``: its commit flushes, the connection
    commits). Until then it is only the connection and ``info``: an act whose statements
    all go to the connection (an issue) never makes it, and nothing needs closing."""

    def __init__(self, connection: Connection, info: dict[str, Any]) -> None:
        # not Session.__init__ yet (see _join); ``info`` is Session's memoized property,
        # so the instance's own entry is the one every reader sees
        self.__dict__.update(_writing_on=connection, info=info, _joined=False)

    def _join(self) -> None:
        """Make the session's own state now; whatever was set on it before stays."""
        given = dict(self.__dict__)
        given["_joined"] = True
        Session.__init__(self, bind=self._writing_on, expire_on_commit=False,
                         join_transaction_mode="rollback_only")  # fmt: skip
        self.__dict__.update(given)

    def __getattr__(self, name: str) -> Any:
        # only called for what the instance lacks: before the first use, the session's state
        if name.startswith("__") or self.__dict__.get("_joined", True):
            raise AttributeError(name)
        self._join()
        return getattr(self, name)

    @property
    def joined(self) -> bool:
        """Whether the ORM was used (the session's state made, its transaction joined)."""
        return bool(self.__dict__["_joined"])

    def connection(self, bind_arguments: Any = None, execution_options: Any = None) -> Connection:
        if bind_arguments is None and execution_options is None:
            return self._writing_on  # type: ignore[no-any-return]
        return super().connection(bind_arguments, execution_options)

    def get_bind(self, mapper: Any = None, **kw: Any) -> Any:
        if mapper is None and not kw:
            return self._writing_on
        return super().get_bind(mapper, **kw)


@dataclass
class Register:
    """An open register: an engine plus who is acting and the clock to use."""

    engine: Engine
    actor: str
    clock: Callable[[], datetime] = field(default=utc_now)
    #: the file the scatter keys are sealed under (None: the default place for this register)
    key_file: Path | None = None
    _keyring: Keyring | None = field(default=None, repr=False, compare=False)

    @property
    def backend(self) -> str:
        return self.engine.dialect.name

    @property
    def connections(self) -> int:
        """How many connections the engine's pool holds at most at once (at least 1); a
        server sizes its threads for register calls by it."""
        pool = self.engine.pool
        size = getattr(pool, "size", None)
        if not callable(size):
            return 1
        held = int(size())
        overflow = int(getattr(pool, "_max_overflow", 0))
        if overflow < 0:  # no limit on overflow
            overflow = held
        return max(1, held + overflow)

    @property
    def keyring(self) -> Keyring:
        """The register's key file, read once when a scatter key is first needed."""
        if self._keyring is None:
            self._keyring = Keyring(self.key_file or default_key_file(self.engine.url))
        return self._keyring

    def session_info(self) -> dict[str, Any]:
        """What every session of this register carries (its keyring)."""
        return {SESSION_INFO: self.keyring}

    @contextmanager
    def reading(self) -> Iterator[Session]:
        """A session for reads; nothing it does is committed. A read the database refuses
        to the connected role (a login without rights on a table) is one
        :class:`PermissionDenied` line, as it is for :meth:`write`."""
        with Session(self.engine, expire_on_commit=False, info=self.session_info()) as session:
            try:
                yield session
            except DBAPIError as exc:
                if _is_permission_error(exc):
                    raise _refused(exc) from None
                raise

    @contextmanager
    def writing(self, steps: list[str] | None = None) -> Iterator[Session]:
        """One writing transaction: committed whole on success, rolled back whole on any
        error. Use :meth:`write` to get the retries as well. ``steps`` (if given) gets
        ``"commit"`` once the work is done and the COMMIT is about to be sent.

        The transaction is the connection's (BEGIN IMMEDIATE on SQLite); the session
        joins it only when the ORM is used, and what the ORM holds is flushed before the
        COMMIT. An act that runs its statements on the connection (an issue) pays for no
        session at all: it is made on the ORM's first use (:class:`_WritingSession`)."""
        after: list[Any] = []  # exit callbacks, run once the transaction has ended
        with self.engine.connect() as connection:
            heard: list[str] | None = connection.info.get(_WARNINGS)
            session = _WritingSession(connection, {**self.session_info(), AFTER_TRANSACTION: after})
            try:
                begin_immediate(connection)  # SQLite: the write lock first
                with connection.begin():
                    try:
                        yield session
                        if heard:
                            heard.clear()  # only what the COMMIT itself brings counts
                        if steps is not None:
                            steps.append("commit")
                        # an act whose last writes are in a pipeline commits in it (one round trip)
                        commit_pipeline(session)
                        if session.joined and session.in_transaction():
                            # the ORM's changes go out now; the session joined the
                            # connection's transaction, so its commit leaves the COMMIT to it
                            session.commit()
                    except BaseException:
                        # a pipeline still open is closed before the ROLLBACK (an aborted
                        # pipeline refuses it)
                        _after_transaction(after, sys.exc_info())
                        raise
            except BaseException:
                _ended(session, after, sys.exc_info())
                raise
            _ended(session, after, (None, None, None))
            if heard:
                # committed on this server, but the wait for its synchronous standby was
                # cut short (a cancel): the standby may not have the act
                raise CommitUnconfirmed(
                    f"the database committed this act but warned: {heard[0]}; its standby may not "
                    "have it, so after a failover its outcome is unknown: repeat it with the same "
                    "request id"
                )

    def write(self, work: Callable[[Session], T]) -> T:
        """Run ``work`` in one writing transaction, retried (with jitter) while another
        desk holds the lock; ``work`` must be safe to run again from the start."""
        for attempt in range(1, WRITE_ATTEMPTS + 1):
            steps: list[str] = []
            try:
                with self.writing(steps) as session:
                    return work(session)
            except IntegrityError as exc:
                raise DuplicateRow(_constraint_line(exc)) from exc
            except DBAPIError as exc:
                if exc.connection_invalidated:
                    if steps:  # lost while committing: the server may have committed or not
                        raise ConnectionLost(
                            "the connection to the register was lost while the act committed; "
                            "its outcome is unknown"
                        ) from None
                    # lost before COMMIT was sent (a pooled connection the server had closed,
                    # say): nothing was committed, so the act runs again on a fresh connection
                    if attempt < WRITE_ATTEMPTS:
                        continue
                    raise ConnectionLost(
                        "the connection to the register kept dropping; nothing was written"
                    ) from None
                if _is_permission_error(exc):
                    raise _refused(exc) from None
                if not _is_retryable(exc) or attempt == WRITE_ATTEMPTS:
                    if isinstance(exc, OperationalError) and _is_retryable(exc):
                        raise RegisterError(
                            "the register stayed busy (another desk is writing); try again"
                        ) from None
                    raise
                # capped exponential back-off with jitter: desks that collided spread out
                time.sleep(random.uniform(0.5, 1.0) * min(0.01 * 2**attempt, 0.5))
        raise AssertionError("unreachable")  # pragma: no cover

    def schema_revision(self) -> str | None:
        """The Alembic revision the database is at, or None for an empty database."""
        with self.engine.connect() as connection:
            try:
                row = connection.execute(text("SELECT version_num FROM alembic_version")).first()
            except DBAPIError:
                connection.rollback()
                return None
            return None if row is None else str(row[0])

    def close(self) -> None:
        self.engine.dispose()


def open_register(
    database: str,
    *,
    actor: str,
    clock: Callable[[], datetime] = utc_now,
    busy_timeout_ms: int = 15000,
    upgrade: bool = True,
    create: bool = True,
    key_file: str | os.PathLike[str] | None = None,
) -> Register:
    """Open (upgrading as needed) the register at ``database``.

    With ``create=False`` a missing SQLite file, or a database without issuer's tables,
    raises :class:`NoRegister` and nothing is made: a mistyped path must not become an
    empty register. ``create=True`` makes the register there when there is none.
    ``key_file`` is where the scatter keys are sealed (default: :func:`default_key_file`);
    it is made when the register is made.
    """
    limits.text("actor", actor)
    url = database_url(database)
    if not create:
        _refuse_missing_file(url)
    try:
        engine = make_engine(url, busy_timeout_ms=busy_timeout_ms)
    except (ArgumentError, ImportError) as exc:
        raise RegisterError(f"cannot open the register {database}: {exc}") from None
    register = Register(engine=engine, actor=actor, clock=clock, key_file=key_path(key_file))
    try:
        revision = register.schema_revision()
    except DBAPIError as exc:
        engine.dispose()
        raise RegisterError(f"cannot open the register {database}: {str(exc.orig).splitlines()[0]}") from None
    if revision is None and not create:
        engine.dispose()
        raise no_register(url)
    if revision != SCHEMA_HEAD:
        if not upgrade:
            raise RegisterError(
                f"the register is at schema {revision or 'none'}, this issuer needs {SCHEMA_HEAD}: "
                "run 'issuer db upgrade'"
            )
        from issuer.register.migrate import upgrade_to_head

        try:
            upgrade_to_head(register.engine, register.keyring)
        except IssuerError:
            raise
        except DBAPIError as exc:
            raise RegisterError(
                f"cannot prepare the register {database}: {str(exc.orig).splitlines()[0]}"
            ) from None
    return register
