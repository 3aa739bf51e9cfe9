"""A stock count's scan files, as the register keeps them: each file added whole in one
transaction or not at all, once (by digest), and its scanned lines read back in file and
line order for :mod:`issuer.stocktake.counts`. The count itself is
:mod:`issuer.register.counting`."""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from issuer.errors import Conflict, DuplicateRow, InvalidFormat
from issuer.register.counting import get_count
from issuer.register.driver import bind_value, execute_many
from issuer.register.log import NewEntry, append_entry, stored_time
from issuer.register.models import COUNT_OPEN, StockCount, StockCountFile, StockCountScan
from issuer.register.store import Register

#: scanned lines inserted per statement round
SCAN_CHUNK = 20_000
#: the scanned text and file name kept (a longer scan is malformed whatever follows)
SCANNED_WIDTH = 200
FILE_NAME_WIDTH = 200


@dataclass(frozen=True)
class ScanRow:
    """One scanned line of a file: its number, the text as scanned, when and where."""

    line: int
    scanned: str
    at: datetime | None = None
    where: str | None = None


@dataclass(frozen=True)
class ScanFile:
    """A scan file read and ready to add: its digest names it for good."""

    digest: str
    name: str
    scanner: str | None
    zone: str
    rows: Sequence[ScanRow]
    blank_lines: int = 0
    comment_lines: int = 0


@dataclass(frozen=True)
class FileInfo:
    name: str
    scanner: str | None
    digest: str
    zone: str
    scans: int
    blank_lines: int
    comment_lines: int
    added_at: datetime
    added_by: str

    def as_dict(self) -> dict[str, Any]:
        return {**self.__dict__, "added_at": self.added_at.isoformat()}


def add_scan_file(
    register: Register, name: str, scan_file: ScanFile, *, progress: Callable[[int], None] | None = None
) -> FileInfo:
    """Add one scan file to the open count ``name``, whole, in one transaction; a file
    whose digest the count holds already is refused."""
    from issuer import limits

    if not scan_file.rows:
        raise InvalidFormat(f"{scan_file.name} holds no scans")
    limits.text("scanner", scan_file.scanner, label="a scanner's name")

    def work(session: Session) -> FileInfo:
        count = get_count(session, name, lock="share")
        if count.state != COUNT_OPEN:
            raise Conflict(f"count {count.name!r} is closed; open a new count to scan again")
        _refuse_twice(session, count, scan_file)
        now = register.clock()
        record = StockCountFile(
            count_id=count.id, digest=scan_file.digest, name=scan_file.name[-FILE_NAME_WIDTH:],
            scanner=scan_file.scanner or None, zone=scan_file.zone,
            scans=len(scan_file.rows), blank_lines=scan_file.blank_lines, comment_lines=scan_file.comment_lines,
            added_at=now, added_by=register.actor,
        )  # fmt: skip
        session.add(record)
        session.flush()
        column = StockCountScan.__table__.c.seen_at
        sql = (
            "INSERT INTO stock_count_scan (count_id, file_id, line, scanned, seen_at, seen_where) "
            "VALUES (?, ?, ?, ?, ?, ?)"
        )
        rows = scan_file.rows
        for at in range(0, len(rows), SCAN_CHUNK):
            part = rows[at: at + SCAN_CHUNK]
            execute_many(session, sql, [
                (count.id, record.id, row.line, row.scanned[:SCANNED_WIDTH],
                 bind_value(session, column, row.at) if row.at is not None else None,  # type: ignore[arg-type]
                 row.where)
                for row in part
            ])  # fmt: skip
            if progress is not None:
                progress(len(part))
        detail = {"count": count.name, "file": record.name, "digest": record.digest, "scans": record.scans,
                  "zone": record.zone, "blank_lines": record.blank_lines, "comment_lines": record.comment_lines,
                  "scans_sha256": scans_digest((row.line, row.scanned[:SCANNED_WIDTH], row.at, row.where)
                                               for row in sorted(rows, key=_line_of))}  # fmt: skip
        if record.scanner:
            detail["scanner"] = record.scanner
        append_entry(session, NewEntry("count_add", count.series_id, None, None, detail), actor=register.actor, at=now)
        return _file_info(record)

    try:
        return register.write(work)
    except DuplicateRow:
        # another desk added the same file at the same moment; its digest is taken now
        raise Conflict(f"{scan_file.name} was added to count {name!r} already (same contents)") from None


def _line_of(row: ScanRow) -> int:
    return row.line


def scans_digest(rows: Iterable[tuple[int, str, Any, str | None]]) -> str:
    """SHA-256 (hex) over a file's scanned lines as stored (line, text, time, place) in line
    order: its add entry logs it, and the doctor recomputes it from the rows (an edited
    scan changes what the count answers). Times count as UTC instants, whatever their
    stored form (a naive time means UTC, as the register stores it); each text is
    preceded by its length, so no two rows read alike."""
    digest = hashlib.sha256()
    for line, scanned, at, where in rows:
        digest.update(scan_line_text(line, scanned, at, where))
    return digest.hexdigest()


def scan_line_text(line: int, scanned: str, at: Any, where: str | None) -> bytes:
    """One scanned line as :func:`scans_digest` hashes it (its time as the ISO text of the
    UTC instant, without a zone: cheap to make from either backend's stored form)."""
    when = stored_time(at)
    moment = "" if when is None else when.replace(tzinfo=None).isoformat()
    place = "" if where is None else f"{len(where)}:{where}"
    return f"{line}\t{len(scanned)}:{scanned}\t{moment}\t{place}\n".encode("utf-8", "surrogatepass")


def _refuse_twice(session: Session, count: StockCount, scan_file: ScanFile) -> None:
    before = session.scalars(
        select(StockCountFile).where(StockCountFile.count_id == count.id, StockCountFile.digest == scan_file.digest)
    ).first()
    if before is not None:
        raise Conflict(
            f"{scan_file.name} was added to count {count.name!r} already (same contents as {before.name}, "
            f"added {before.added_at:%Y-%m-%d %H:%M} UTC by {before.added_by})"
        )


def _file_info(record: StockCountFile) -> FileInfo:
    return FileInfo(
        record.name, record.scanner, record.digest, record.zone, record.scans, record.blank_lines,
        record.comment_lines, record.added_at, record.added_by,
    )  # fmt: skip


def count_files(session: Session, count: StockCount) -> list[FileInfo]:
    records = session.scalars(
        select(StockCountFile).where(StockCountFile.count_id == count.id).order_by(StockCountFile.id)
    ).all()
    return [_file_info(record) for record in records]


@dataclass
class CountScans:
    """A count's scanned lines, column by column, in the order their files were added:
    ``files[i]`` indexes ``names``; ``at`` holds UTC times as ISO text (or '')."""

    names: list[str]
    files: list[int]
    lines: list[int]
    scanned: list[str]
    at: list[str]
    where: list[str]


def count_scans(session: Session, count: StockCount) -> CountScans:
    """Every scanned line of the count, streamed from the database in file and line order."""
    from issuer.register.driver import driver_rows

    records = count_files(session, count)
    ids = session.scalars(
        select(StockCountFile.id).where(StockCountFile.count_id == count.id).order_by(StockCountFile.id)
    ).all()
    slot = {file_id: index for index, file_id in enumerate(ids)}
    names = [f"{record.scanner}:{record.name}" if record.scanner else record.name for record in records]
    scans = CountScans(names, [], [], [], [], [])
    places: dict[str, str] = {}
    rows = driver_rows(
        session,
        "SELECT file_id, line, scanned, seen_at, seen_where FROM stock_count_scan WHERE count_id = ? "
        "ORDER BY file_id, line",
        (count.id,),
    )
    for file_id, line, scanned, seen_at, seen_where in rows:
        scans.files.append(slot[file_id])
        scans.lines.append(line)
        scans.scanned.append(scanned)
        scans.at.append("" if seen_at is None else _moment_text(seen_at))
        where = seen_where or ""
        scans.where.append(places.setdefault(where, where))  # one string per place, not per line
    return scans


def _moment_text(moment: Any) -> str:
    """A stored time as the driver gives it (text on SQLite, a datetime elsewhere) as UTC ISO text."""
    return str(stored_time(moment).isoformat())  # type: ignore[union-attr]


__all__ = [
    "SCAN_CHUNK",
    "CountScans",
    "FileInfo",
    "ScanFile",
    "ScanRow",
    "add_scan_file",
    "count_files",
    "count_scans",
    "scan_line_text",
    "scans_digest",
]
