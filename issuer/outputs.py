"""Every file issuer writes for people: exports, reports, rejects, labels, batch lists.

One rule set, whatever the command:

* an existing target is refused unless the person asked to replace it (``--force``);
* the register itself, its ``-wal``/``-shm``/``-journal`` files, any SQLite database,
  and anything that is not a regular file (a folder, a device node, a pipe) are refused
  even with ``--force``;
* the content goes to a hidden temporary file beside the target (owner-only) and is
  renamed into place whole; without ``--force`` the final step cannot replace a file
  that appeared meanwhile (a hard link, which fails on an existing name);
* a temporary is named ``.issuer-PID-TOKEN.part`` and noted in the user's state folder
  while it exists, so ``issuer doctor`` can report (and ``--fix`` remove) those a dead
  process left behind;
* missing folders are created owner-only (0700).

CSV cells are made safe for spreadsheets here too (:func:`safe_cell`).
"""

from __future__ import annotations

import os
import secrets
import stat
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import IO, Any

from issuer.errors import IssuerError
from issuer.limits import file_name

#: the journal files SQLite keeps beside a database
SQLITE_SIDE_FILES = ("-wal", "-shm", "-journal")
SQLITE_HEADER = b"SQLite format 3\x00"
TEMP_PREFIX = ".issuer-"
TEMP_SUFFIX = ".part"

#: registers this process has opened (resolved paths); outputs never land on them
_registers: set[Path] = set()


class OutputRefused(IssuerError):
    """A target file that must not be written (exists, is the register, not a file...)."""

    default_message = "the output file was refused"


def protect(path: str | os.PathLike[str]) -> None:
    """Note a register file: no output of this process may replace it or its journals."""
    _registers.add(Path(path).expanduser().resolve())


def _is_sqlite(path: Path) -> bool:
    try:
        with open(path, "rb") as handle:
            return handle.read(len(SQLITE_HEADER)) == SQLITE_HEADER
    except OSError:
        return False


def _register_reason(resolved: Path) -> str | None:
    """Why ``resolved`` is a register or one of its journals, or None."""
    if resolved in _registers:
        return "is the register"
    for side in SQLITE_SIDE_FILES:
        if resolved.name.endswith(side):
            base = resolved.with_name(resolved.name[: -len(side)])
            if base in _registers or _is_sqlite(base):
                return f"is the {side[1:]} file of a register"
    if _is_sqlite(resolved):
        return "is a SQLite database (a register?)"
    return None


def is_register_file(path: str | os.PathLike[str]) -> bool:
    """Whether ``path`` is a register this process opened, or a journal of one."""
    resolved = Path(path).expanduser().resolve()
    if resolved in _registers:
        return True
    return any(
        resolved.name.endswith(side) and resolved.with_name(resolved.name[: -len(side)]) in _registers
        for side in SQLITE_SIDE_FILES
    )


def check_target(path: str | os.PathLike[str], *, force: bool = False, what: str = "output file") -> Path:
    """The target as an absolute path, or :class:`OutputRefused` with one line saying why.

    Nothing is written: call this before any act whose output it is (``issue --out``
    checks before the batch commits).
    """
    file_name(what, path)
    shown = os.fspath(path)
    absolute = Path(os.path.abspath(Path(path).expanduser()))
    try:
        resolved = absolute.resolve()
        info: os.stat_result | None = os.stat(resolved)
    except FileNotFoundError:
        info = None
    except OSError as exc:
        raise OutputRefused(f"cannot use {what} {shown}: {exc.strerror or exc}") from None
    reason = _register_reason(resolved)
    if reason is not None:
        raise OutputRefused(f"{what} {shown} {reason}; issuer never writes over it, even with --force")
    if info is not None:
        if stat.S_ISDIR(info.st_mode):
            raise OutputRefused(f"{what} {shown} is a folder; name a file inside it")
        if not stat.S_ISREG(info.st_mode):
            raise OutputRefused(f"{what} {shown} is not a regular file (a device, pipe or socket); name a file")
        if not force:
            raise OutputRefused(f"{what} {shown} exists already; give --force to replace it")
    parent = absolute.parent
    if parent.exists() and not parent.is_dir():
        raise OutputRefused(f"{what} {shown}: {parent} is not a folder")
    return absolute


def private_folder(folder: str | os.PathLike[str]) -> Path:
    """``folder``, creating it and any missing parents owner-only (0700)."""
    path = Path(folder)
    missing = []
    probe = path
    while not probe.exists() and probe != probe.parent:
        missing.append(probe)
        probe = probe.parent
    for step in reversed(missing):
        try:
            step.mkdir(mode=0o700)
        except FileExistsError:
            continue
        except OSError as exc:
            raise OutputRefused(f"cannot create the folder {step}: {exc.strerror or exc}") from None
        os.chmod(step, 0o700)  # whatever the umask says
    return path


# --- temporaries and their notes -----------------------------------------------------


def pending_folder() -> Path:
    """Where temporaries in progress are noted (one small file each)."""
    from platformdirs import user_state_dir

    return Path(user_state_dir("issuer")) / "pending"


def temporary_beside(target: Path, *, suffix: str = "") -> tuple[Path, Path | None]:
    """A new empty owner-only temporary in ``target``'s folder, and the note naming it.

    ``suffix`` (e.g. ``.pdf``) ends the name, for writers that choose a format by it."""
    folder = private_folder(target.parent)
    token = secrets.token_hex(6)
    temp = folder / f"{TEMP_PREFIX}{os.getpid()}-{token}{TEMP_SUFFIX}{suffix[:16]}"
    try:
        descriptor = os.open(temp, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600)
        os.close(descriptor)
    except OSError as exc:
        raise OutputRefused(f"cannot write in {folder}: {exc.strerror or exc}") from None
    note: Path | None
    try:
        notes = private_folder(pending_folder())
        note = notes / f"{os.getpid()}-{token}"
        note.write_text(str(temp), encoding="utf-8")
    except (OSError, IssuerError):
        note = None  # the note helps doctor; the output does not depend on it
    return temp, note


def place(temp: Path, target: Path, *, force: bool) -> None:
    """Move a finished temporary onto ``target``: never over a file that appeared meanwhile
    unless ``force``, never over a register or a non-regular file."""
    check_target(target, force=True)
    if force:
        os.replace(temp, target)
    else:
        try:
            os.link(temp, target)
        except FileExistsError:
            raise OutputRefused(f"output file {target} appeared meanwhile; give --force to replace it") from None
        except OSError:  # a file system without hard links: check, then rename
            if os.path.lexists(target):
                raise OutputRefused(f"output file {target} appeared meanwhile; give --force to replace it") from None
            os.replace(temp, target)
        else:
            temp.unlink()
    _fsync_folder(target.parent)


def _fsync_folder(folder: Path) -> None:
    try:
        descriptor = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(descriptor)
    except OSError:
        pass
    finally:
        os.close(descriptor)


def _forget(temp: Path, note: Path | None, *, remove: bool) -> None:
    if remove:
        temp.unlink(missing_ok=True)
    if note is not None:
        note.unlink(missing_ok=True)


@contextmanager
def staged_path(
    path: str | os.PathLike[str], *, force: bool = False, what: str = "output file", keep_on_failure: bool = False
) -> Iterator[Path]:
    """A temporary path to write (by name) that becomes ``path`` when the block succeeds.

    For writers that want a file name (reportlab, SQLite); the temporary ends in the
    target's suffix. ``keep_on_failure`` keeps the temporary when only the final move
    fails (because what it holds is recorded elsewhere already).
    """
    target = check_target(path, force=force, what=what)
    temp, note = temporary_beside(target, suffix=target.suffix)
    try:
        yield temp
    except BaseException:
        _forget(temp, note, remove=True)
        raise
    try:
        place(temp, target, force=force)
    except (OSError, OutputRefused) as exc:
        detail = exc.message if isinstance(exc, OutputRefused) else f"cannot write {target}: {exc.strerror}"
        _forget(temp, note, remove=not keep_on_failure)
        if keep_on_failure:
            # a visible name: what it holds is recorded in the register already
            kept = target.with_name(f"{target.name[:200]}.{os.getpid()}.kept")
            try:
                os.replace(temp, kept)
            except OSError:
                kept = temp
            detail = f"{detail}; the output is kept in {kept}"
        raise OutputRefused(detail) from None
    _forget(temp, note, remove=False)


@contextmanager
def output_text(path: str | os.PathLike[str], *, force: bool = False, what: str = "output file") -> Iterator[IO[str]]:
    """A UTF-8 text stream whose content appears at ``path`` whole, or not at all."""
    with staged_path(path, force=force, what=what) as temp, open(temp, "w", newline="", encoding="utf-8") as stream:
        yield stream
        stream.flush()
        os.fsync(stream.fileno())


# --- what a dead process left behind -----------------------------------------------------


@dataclass(frozen=True)
class Leftover:
    path: Path
    pid: int
    size: int


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _pid_of(name: str) -> int | None:
    """The process id in a temporary's name ``.issuer-PID-TOKEN.part[.ext]``, or None."""
    if not name.startswith(TEMP_PREFIX) or TEMP_SUFFIX not in name:
        return None
    middle = name[len(TEMP_PREFIX): name.index(TEMP_SUFFIX)]
    pid, _, token = middle.partition("-")
    return int(pid) if pid.isdigit() and token.isalnum() else None


def leftovers(folders: Iterable[str | os.PathLike[str]] = ()) -> list[Leftover]:
    """Temporaries of processes no longer running: those noted in the state folder, and
    any found in ``folders`` (e.g. the register's own folder)."""
    found: dict[Path, Leftover] = {}
    candidates: list[Path] = []
    notes = pending_folder()
    if notes.is_dir():
        for note in notes.iterdir():
            try:
                candidates.append(Path(note.read_text(encoding="utf-8").strip()))
            except (OSError, UnicodeDecodeError):
                continue
    for folder in folders:
        try:
            candidates.extend(Path(folder).glob(f"{TEMP_PREFIX}*{TEMP_SUFFIX}*"))
        except OSError:
            continue
    for candidate in candidates:
        pid = _pid_of(candidate.name)
        if pid is None or _alive(pid):
            continue
        try:
            info = candidate.lstat()
        except OSError:
            continue
        if stat.S_ISREG(info.st_mode):
            found[candidate] = Leftover(candidate, pid, info.st_size)
    return sorted(found.values(), key=lambda item: str(item.path))


def remove_leftovers(items: Iterable[Leftover]) -> int:
    """Remove the given temporaries and their notes; the number removed."""
    removed = 0
    for item in items:
        try:
            item.path.unlink()
            removed += 1
        except FileNotFoundError:
            pass
    notes = pending_folder()
    if notes.is_dir():
        for note in notes.iterdir():
            pid = note.name.partition("-")[0]
            if pid.isdigit() and not _alive(int(pid)):
                note.unlink(missing_ok=True)
    return removed


# --- spreadsheet-safe CSV ------------------------------------------------------------------

#: a cell starting with one of these is read as a formula by spreadsheet programs
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
#: what neutralises such a cell: a leading apostrophe, which spreadsheets show as text
NEUTRALISER = "'"


def safe_cell(value: Any) -> Any:
    """A CSV cell that no spreadsheet runs as a formula: a text starting with ``=``,
    ``+``, ``-``, ``@``, tab or CR gets a leading apostrophe (and so does one that
    already starts with an apostrophe, so :func:`restore_cell` is exact)."""
    if isinstance(value, str) and value.startswith((*FORMULA_STARTS, NEUTRALISER)):
        return NEUTRALISER + value
    return value


def safe_row(row: Iterable[Any]) -> list[Any]:
    return [safe_cell(cell) for cell in row]


def restore_cell(value: str) -> str:
    """The cell as it was before :func:`safe_cell` (for reading our own exports)."""
    if value.startswith(NEUTRALISER) and value[1:].startswith((*FORMULA_STARTS, NEUTRALISER)):
        return value[1:]
    return value


class SafeCsvWriter:
    """``csv.writer`` whose every cell passes through :func:`safe_cell`."""

    def __init__(self, stream: IO[str], **options: Any) -> None:
        import csv

        self._writer = csv.writer(stream, **options)

    def writerow(self, row: Iterable[Any]) -> Any:
        return self._writer.writerow(safe_row(row))

    def writerows(self, rows: Iterable[Iterable[Any]]) -> None:
        self._writer.writerows(safe_row(row) for row in rows)


__all__ = [
    "FORMULA_STARTS",
    "Leftover",
    "OutputRefused",
    "SafeCsvWriter",
    "check_target",
    "leftovers",
    "output_text",
    "place",
    "private_folder",
    "protect",
    "remove_leftovers",
    "restore_cell",
    "safe_cell",
    "safe_row",
    "staged_path",
    "temporary_beside",
]
