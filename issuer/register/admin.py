"""Looking after a register: opening it without changing it, its status, upgrades and
roles.

:mod:`issuer.register.doctor` runs the full health check; :mod:`issuer.register.roles`
holds the role policy; :mod:`issuer.register.backup` copies a register and
:mod:`issuer.register.anchors` checks the log against an anchor written down elsewhere.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sqlalchemy import func, select, text
from sqlalchemy.engine import make_url
from sqlalchemy.exc import DBAPIError
from sqlalchemy.orm import Session

from issuer.errors import InvalidFormat, NoRegister, PermissionDenied, RegisterError
from issuer.register.models import IssuedCode, LogEntry, Series
from issuer.register.store import (
    SCHEMA_HEAD,
    key_path,
    Register,
    database_url,
    make_engine,
    no_register,
    open_register,
    where,
)


def sqlite_path(register: Register) -> Path | None:
    """The register's file, or None when it is not a SQLite file."""
    if register.backend != "sqlite":
        return None
    database = register.engine.url.database
    if not database or database == ":memory:":
        return None
    return Path(database)


def open_existing(
    database: str, *, actor: str = "doctor", busy_timeout_ms: int = 15000, key_file: str | os.PathLike[str] | None = None
) -> Register:
    """Open a register as it is: no upgrade, and no empty file made where none was."""
    url = database_url(database)
    if url.startswith("sqlite"):
        path = make_url(url).database
        if path and path != ":memory:" and not Path(path).is_file():
            raise no_register(url)
    try:
        engine = make_engine(url, busy_timeout_ms=busy_timeout_ms)
    except (ImportError, ValueError) as exc:
        raise RegisterError(f"cannot open the register {database}: {exc}") from None
    register = Register(engine=engine, actor=actor, key_file=key_path(key_file))
    try:
        with engine.connect():
            pass
    except DBAPIError as exc:
        engine.dispose()
        raise RegisterError(
            f"cannot open the register {database}: {str(exc.orig).splitlines()[0]}"
        ) from None
    return register


@contextmanager
def snapshot(register: Register) -> Iterator[Session]:
    """A read-only session that sees one consistent moment of the register, even while
    other desks write (PostgreSQL: REPEATABLE READ; SQLite: one read transaction)."""
    with register.engine.connect() as connection:
        if register.backend == "postgresql":
            connection = connection.execution_options(isolation_level="REPEATABLE READ")
        with Session(bind=connection, expire_on_commit=False, info=register.session_info()) as session:
            try:
                yield session
            finally:
                session.rollback()


def redacted_url(register: Register) -> str:
    return register.engine.url.render_as_string(hide_password=True)


# --- status and upgrade -----------------------------------------------------------


@dataclass(frozen=True)
class RegisterStatus:
    backend: str
    database: str
    revision: str | None
    expected: str
    series: int
    codes: int
    log_entries: int
    head_id: int
    head_hash: str

    @property
    def current(self) -> bool:
        return self.revision == self.expected

    def as_dict(self) -> dict[str, Any]:
        data = dict(self.__dict__)
        data["current"] = self.current
        return data


def register_status(register: Register) -> RegisterStatus:
    revision = register.schema_revision()
    series = codes = entries = head_id = 0
    head_hash = ""
    if revision == SCHEMA_HEAD:
        from issuer.register.log import head

        with snapshot(register) as session:
            series = int(session.scalar(select(func.count()).select_from(Series)) or 0)
            codes = int(session.scalar(select(func.count()).select_from(IssuedCode)) or 0)
            entries = int(session.scalar(select(func.count()).select_from(LogEntry)) or 0)
            head_id, head_hash = head(session)
    return RegisterStatus(
        backend=register.backend,
        database=redacted_url(register),
        revision=revision,
        expected=SCHEMA_HEAD,
        series=series,
        codes=codes,
        log_entries=entries,
        head_id=head_id,
        head_hash=head_hash,
    )


def init_register(database: str, *, actor: str, key_file: str | os.PathLike[str] | None = None) -> tuple[bool, str]:
    """Make a register at ``database`` on purpose (a new SQLite file, owner-only in an
    owner-only folder, or issuer's tables in an empty PostgreSQL database); a register
    already there is left as it is. Returns (created, where it is)."""
    try:
        existing: Register | None = open_existing(database, actor=actor)
    except NoRegister:
        existing = None
    if existing is not None:
        revision = existing.schema_revision()
        existing.close()
        if revision is not None:
            return False, where(existing.engine.url.render_as_string(hide_password=False))
    made = open_register(database, actor=actor, create=True, key_file=key_file)
    made.close()
    return True, where(made.engine.url.render_as_string(hide_password=False))


def upgrade_register(register: Register) -> tuple[str | None, str | None]:
    """Bring the schema to this issuer's head; returns (before, after). A database with
    no register in it is refused: 'issuer db init' makes one on purpose."""
    from issuer.register.migrate import upgrade_to_head

    try:
        before = register.schema_revision()
        if before is None:
            raise no_register(register.engine.url.render_as_string(hide_password=False))
        if before != SCHEMA_HEAD:
            upgrade_to_head(register.engine, register.keyring)
        return before, register.schema_revision()
    except DBAPIError as exc:
        raise RegisterError(f"cannot upgrade the register: {str(exc.orig).splitlines()[0]}") from None


# --- roles (PostgreSQL) -------------------------------------------------------------


def roles_script(register: Register, *, clerk: str, admin: str) -> list[str]:
    """The role statements for this register's database and schema."""
    from issuer.register.roles import roles_statements

    if register.backend != "postgresql":
        raise InvalidFormat(
            "roles are a PostgreSQL feature; a SQLite register is guarded by its file's "
            "permissions (issuer creates it owner-only)"
        )
    try:
        with register.engine.connect() as connection:
            database, schema = connection.execute(
                text("SELECT current_database(), current_schema()")
            ).one()
            tables = sorted(connection.execute(
                text("SELECT tablename FROM pg_catalog.pg_tables WHERE schemaname = :s"),
                {"s": schema},
            ).scalars())
    except DBAPIError as exc:
        raise RegisterError(f"cannot read the register: {str(exc.orig).splitlines()[0]}") from None
    if "log_entry" not in tables:
        raise RegisterError("this database holds no register yet: run 'issuer db init' first")
    return roles_statements(
        database=str(database), schema=str(schema), tables=tables, clerk=clerk, admin=admin
    )


def apply_statements(register: Register, statements: list[str]) -> None:
    """Run the statements in one transaction (as a role allowed to grant)."""
    try:
        with register.engine.begin() as connection:
            # the driver's own cursor, without parameters: the SQL holds a literal '%'
            cursor = connection.connection.cursor()
            for statement in statements:
                if not statement.startswith("--"):
                    cursor.execute(statement)
            cursor.close()
    except (DBAPIError, register.engine.dialect.loaded_dbapi.Error) as exc:
        # the driver's own cursor raises the driver's errors, unwrapped
        original = exc.orig if isinstance(exc, DBAPIError) else exc
        message = str(original).splitlines()[0]
        if getattr(original, "sqlstate", None) == "42501":
            raise PermissionDenied(
                f"the connected role may not set up roles ({message}); connect as the "
                "register's owner or a superuser"
            ) from None
        raise RegisterError(f"the role statements failed: {message}") from None
