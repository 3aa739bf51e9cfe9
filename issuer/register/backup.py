"""Backing up a register: SQLite's online backup into a checked, owner-only file that
appears only when complete, and the PostgreSQL server's own commands (printed, not run)."""

from __future__ import annotations

import os
import shlex
import sqlite3
import stat
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from issuer import limits
from issuer.errors import Conflict, InvalidFormat, RegisterError
from issuer.outputs import is_register_file, temporary_beside
from issuer.register.admin import sqlite_path
from issuer.register.store import Register

Progress = Callable[[int, int], None]


@dataclass(frozen=True)
class BackupResult:
    source: str
    destination: str
    size: int
    head_id: int
    head_hash: str
    #: the copy of the register's key file beside the backup (None: the register has none)
    key_file: str | None = None

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
        key_copy = _copy_key_file(register, target)
        _fsync_directory(target.parent)
    except BaseException:
        for leftover in (partial, Path(f"{partial}-journal"), Path(f"{partial}-wal"), Path(f"{partial}-shm")):
            leftover.unlink(missing_ok=True)
        raise
    finally:
        if note is not None:
            note.unlink(missing_ok=True)
    return BackupResult(str(source), str(target), target.stat().st_size, head_id, head_hash,
                        None if key_copy is None else str(key_copy))


def _copy_key_file(register: Register, target: Path) -> Path | None:
    """The register's key file beside the backup (``backup.sqlite.key``), owner-only, so the
    copy issues from its scattered series when restored; None when there is no key file."""
    from issuer.register.sealing import default_key_file

    source = register.keyring.path
    if not source.is_file():
        return None
    copy = default_key_file(f"sqlite:///{target}")
    partial = copy.with_name(f".{copy.name}.{os.getpid()}.part")
    descriptor = os.open(partial, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    with os.fdopen(descriptor, "wb") as handle:
        handle.write(source.read_bytes())
        handle.flush()
        os.fsync(handle.fileno())
    os.replace(partial, copy)
    return copy


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
