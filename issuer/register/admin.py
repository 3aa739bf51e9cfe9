"""Looking after a register: opening it without changing it, its status, upgrades,
roles, backups, and checking the log against an anchor written down elsewhere.

:mod:`issuer.register.doctor` runs the full health check; :mod:`issuer.register.roles`
holds the role policy.
"""

from __future__ import annotations

import os
import shlex
import sqlite3
import stat
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sqlalchemy import func, select, text
from sqlalchemy.engine import make_url
from sqlalchemy.exc import DBAPIError
from sqlalchemy.orm import Session

from issuer import limits
from issuer.errors import Conflict, InvalidFormat, NoRegister, PermissionDenied, RegisterError
from issuer.outputs import is_register_file, temporary_beside
from issuer.register.log import ChainReport, verify_chain
from issuer.register.models import IssuedCode, LogEntry, Series
from issuer.register.store import (
    SCHEMA_HEAD,
    Register,
    database_url,
    make_engine,
    no_register,
    open_register,
    where,
)

Progress = Callable[[int, int], None]


def sqlite_path(register: Register) -> Path | None:
    """The register's file, or None when it is not a SQLite file."""
    if register.backend != "sqlite":
        return None
    database = register.engine.url.database
    if not database or database == ":memory:":
        return None
    return Path(database)


def open_existing(database: str, *, actor: str = "doctor", busy_timeout_ms: int = 15000) -> Register:
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
    register = Register(engine=engine, actor=actor)
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
        with Session(bind=connection, expire_on_commit=False) as session:
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


def init_register(database: str, *, actor: str) -> tuple[bool, str]:
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
    made = open_register(database, actor=actor, create=True)
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
            upgrade_to_head(register.engine)
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


# --- backup -------------------------------------------------------------------------


@dataclass(frozen=True)
class BackupResult:
    source: str
    destination: str
    size: int
    head_id: int
    head_hash: str

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


def _backup_target(destination: str | Path, force: bool) -> Path:
    """Where a backup may go: a new file, or with ``force`` an older backup (a regular
    file that is no open register nor its journal)."""
    limits.file_name("backup file", destination)
    target = Path(os.path.abspath(Path(destination).expanduser()))
    try:
        info = os.stat(target)
    except FileNotFoundError:
        info = None
    except OSError as exc:
        raise InvalidFormat(f"cannot use {target}: {exc.strerror}") from None
    if info is not None:
        if stat.S_ISDIR(info.st_mode):
            raise InvalidFormat(f"{target} is a folder; give a file name for the backup")
        if not stat.S_ISREG(info.st_mode):
            raise InvalidFormat(f"{target} is not a regular file (a device, pipe or socket)")
        if not force:
            raise Conflict(f"{target} exists already; use --force to overwrite it")
        if is_register_file(target):
            raise InvalidFormat(f"{target} is an open register or one of its journals; a backup never replaces it")
    if target.parent.exists() and not target.parent.is_dir():
        raise InvalidFormat(f"{target.parent} is not a folder")
    return target


def _create_private(path: Path) -> None:
    descriptor = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600)
    os.close(descriptor)
    os.chmod(path, 0o600)  # whatever the umask said


def _fsync_directory(folder: Path) -> None:
    try:
        descriptor = os.open(folder, os.O_RDONLY)
    except OSError:  # pragma: no cover - platforms without directory handles
        return
    try:
        os.fsync(descriptor)
    finally:
        os.close(descriptor)


def backup_sqlite(
    register: Register, destination: str | Path, *, force: bool = False,
    progress: Progress | None = None,
) -> BackupResult:
    """Copy a SQLite register with SQLite's online backup API while desks keep working.

    The copy is written owner-only (0600) to a temporary file beside ``destination``,
    checked (``PRAGMA integrity_check``), switched out of WAL so it is one
    self-contained file, and only then renamed into place: an interrupted backup never
    leaves something that looks like a good one.
    """
    source = sqlite_path(register)
    if source is None:
        raise InvalidFormat("online backup works on a SQLite register file")
    if Path(os.path.abspath(Path(destination).expanduser())) == source.resolve():
        raise InvalidFormat("the backup cannot overwrite the register itself")
    # a backup is itself a register: refusing SQLite files would refuse every --force
    target = _backup_target(destination, force)
    partial, note = temporary_beside(target)
    try:
        head_id, head_hash = _copy(source, partial, progress)
        if not force and os.path.lexists(target):
            raise Conflict(f"{target} appeared meanwhile; use --force to overwrite it")
        os.replace(partial, target)
        _fsync_directory(target.parent)
    except BaseException:
        for leftover in (partial, Path(f"{partial}-journal"), Path(f"{partial}-wal"), Path(f"{partial}-shm")):
            leftover.unlink(missing_ok=True)
        raise
    finally:
        if note is not None:
            note.unlink(missing_ok=True)
    return BackupResult(str(source), str(target), target.stat().st_size, head_id, head_hash)


def _copy(source: Path, partial: Path, progress: Progress | None) -> tuple[int, str]:
    reader = sqlite3.connect(source, isolation_level=None, timeout=15)
    writer = sqlite3.connect(partial, isolation_level=None)
    try:
        # one read transaction: every step copies the same moment of the register,
        # however many desks commit meanwhile
        reader.execute("BEGIN")
        reader.execute("SELECT count(*) FROM sqlite_master").fetchone()

        def report(_status: int, remaining: int, total: int) -> None:
            if progress is not None:
                progress(total - remaining, total)

        reader.backup(writer, pages=4096, progress=report)
        reader.execute("COMMIT")
        writer.execute("PRAGMA journal_mode = DELETE")
        check = writer.execute("PRAGMA integrity_check").fetchall()
        if check != [("ok",)]:
            raise RegisterError(f"the copy failed its integrity check: {check[0][0]}")
        writer.execute("SELECT count(*) FROM log_chain").fetchone()  # a register has its chains' heads
        row = writer.execute("SELECT id, hash FROM log_entry ORDER BY id DESC LIMIT 1").fetchone() or (0, "0" * 64)
    except sqlite3.Error as exc:
        raise RegisterError(f"the backup failed: {exc}") from None
    finally:
        writer.close()
        reader.close()
    with open(partial, "rb+") as handle:
        os.fsync(handle.fileno())
    if row is None:
        raise RegisterError("the copy has no log head: is the source a register?")
    return int(row[0]), str(row[1])


def pg_dump_command(register: Register, destination: str) -> list[str]:
    """The pg_dump command that backs up a PostgreSQL register (we do not run it:
    the server's own tool knows its version and format best)."""
    return [
        "pg_dump",
        "--format=custom",
        f"--file={destination}",
        f"--dbname={_libpq_url(register)}",
    ]


def pg_restore_command(register: Register, destination: str) -> list[str]:
    return ["pg_restore", "--clean", "--if-exists", f"--dbname={_libpq_url(register)}", destination]


def _libpq_url(register: Register) -> str:
    """The register's URL for the server's own tools, with no password in it: they read
    it from PGPASSWORD or ~/.pgpass, so a printed command line never carries it."""
    from sqlalchemy.engine import URL

    url = register.engine.url
    # URL.set() ignores None, so the password is dropped by building the URL afresh
    bare = URL.create("postgresql", username=url.username, host=url.host, port=url.port,
                      database=url.database, query=url.query)
    return bare.render_as_string(hide_password=False)


def shell_line(command: list[str]) -> str:
    return shlex.join(command)


# --- anchors --------------------------------------------------------------------------


@dataclass(frozen=True)
class Anchor:
    """Written down somewhere the register cannot reach: the sealed tree's size and root
    (``tree:SIZE:ROOT``, what ``log anchor`` prints), or one entry's id and hash
    (``ID:HASH``, what it printed before the log was chained per series)."""

    entry_id: int  # a tree anchor: the tree's size
    hash: str
    tree: bool = False

    def __str__(self) -> str:
        return f"tree:{self.entry_id}:{self.hash}" if self.tree else f"{self.entry_id}:{self.hash}"


def parse_anchor(value: str) -> Anchor:
    text_ = value.strip()
    tree = text_.lower().startswith("tree:")
    entry, sep, digest = text_[5:].partition(":") if tree else text_.partition(":")
    digest = digest.strip().lower()
    if (
        not sep
        or not entry.strip().isdigit()
        or len(digest) != 64
        or any(ch not in "0123456789abcdef" for ch in digest)
    ):
        raise InvalidFormat(f"an anchor looks like tree:SIZE:<64 hex digits> or ID:<64 hex digits>, not {value!r}")
    return Anchor(int(entry), digest, tree)


@dataclass(frozen=True)
class AnchorCheck:
    anchor: Anchor
    problem: str | None

    @property
    def holds(self) -> bool:
        return self.problem is None


def check_anchor(session: Session, report: ChainReport, anchor: Anchor) -> AnchorCheck:
    """Whether the log still holds what the anchor vouches for.

    A tree anchor: the first SIZE sealed leaves still give ROOT, so every entry sealed then
    is as it was, in the same places, whichever chain it is on. An entry anchor: the entry
    is still in its chain with the same hash; with the chain intact up to it, every entry
    of that chain up to it is as it was (before the log was chained per series, that was
    the whole log).
    """
    if anchor.tree:
        return _check_tree_anchor(session, report, anchor)
    stored = session.scalar(select(LogEntry.hash).where(LogEntry.id == anchor.entry_id))
    if stored is None:
        return AnchorCheck(anchor, f"entry {anchor.entry_id} is no longer in the log")
    if stored != anchor.hash:
        return AnchorCheck(
            anchor, f"entry {anchor.entry_id} has a different hash now: the log was rewritten"
        )
    if report.problem is not None and report.problem.entry_id <= anchor.entry_id:
        return AnchorCheck(
            anchor, f"the chain breaks at entry {report.problem.entry_id}, before the anchor"
        )
    return AnchorCheck(anchor, None)


def _check_tree_anchor(session: Session, report: ChainReport, anchor: Anchor) -> AnchorCheck:
    from issuer.proofs.merkle import root
    from issuer.register.log import leaf_hashes
    from issuer.register.models import LogLeaf

    size = anchor.entry_id
    leaves = leaf_hashes(session, size)
    if len(leaves) < size:
        return AnchorCheck(anchor, f"the log's sealed tree has {len(leaves)} leaves, fewer than the anchor's {size}: "
                                   "entries were removed")  # fmt: skip
    if root(leaves).hex() != anchor.hash:
        return AnchorCheck(anchor, f"the first {size} leaves no longer give the anchor's root: the log was rewritten")
    if report.problem is not None:
        position = session.scalar(select(LogLeaf.position).where(LogLeaf.entry_id == report.problem.entry_id))
        if position is not None and position < size:
            return AnchorCheck(anchor, f"the chain breaks at entry {report.problem.entry_id}, inside the anchored tree")
    return AnchorCheck(anchor, None)


def verify_log(
    register: Register, anchors: Sequence[Anchor] = ()
) -> tuple[ChainReport, list[AnchorCheck]]:
    """Recompute every chain and the sealed tree in one consistent snapshot; check anchors."""
    with snapshot(register) as session:
        report = verify_chain(session)
        checks = [check_anchor(session, report, anchor) for anchor in anchors]
    return report, checks


def current_anchor(register: Register) -> tuple[Anchor, Any]:
    """Seal what has committed and give the tree's size and root, with the newest sealed
    entry's time."""
    from issuer.proofs.merkle import root
    from issuer.register.log import leaf_hashes, seal
    from issuer.register.models import LogLeaf

    size = register.write(seal)
    with snapshot(register) as session:
        top = root(leaf_hashes(session, size))
        at = session.scalar(
            select(LogEntry.at).join(LogLeaf, LogLeaf.entry_id == LogEntry.id).where(LogLeaf.position == size - 1)
        ) if size else None
    return Anchor(size, top.hex(), tree=True), at
