"""Stock counts that span days: open one (a series, narrowed to a place, a range, a batch
or a holder), add the scanners' files as they come in, look at its progress, close it.

A file is read whole and checked (every scan time parsed, in the count's zone when it
has none) before anything is written; it then goes into the register in one transaction
(:func:`issuer.register.counting.add_scan_file`), so a desk killed mid-way leaves the
count as it was. The same file added twice is refused by its SHA-256 digest.

Looking at a count reads its scans back and reconciles them as one stocktake
(:func:`issuer.stocktake.reconcile.reconcile`, the same path as a single scan file), so a
void or a move since the scanning shows; closing freezes that result in the register.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from issuer.errors import InvalidFormat
from issuer.readers.scanfile import Table
from issuer.register.counting import (
    CountInfo,
    CountScope,
    close_count,
    count_info,
    get_count,
    list_counts,
    open_count,
)
from issuer.register.places import clean_place, move_places
from issuer.register.scanfiles import (
    FileInfo,
    ScanFile,
    ScanRow,
    add_scan_file,
    count_files,
    count_scans,
)
from issuer.register.stocktake import write_sightings
from issuer.register.store import Register
from issuer.stocktake.reconcile import read_scans, reconcile, sightings
from issuer.stocktake.report import as_json
from issuer.stocktake.results import COUNT_KEYS, Reconciliation
from issuer.stocktake.zones import parse_scan_time, resolve_zone, zone_named

#: bytes hashed at a time
DIGEST_BLOCK = 1 << 20


def file_digest(path: Path) -> str:
    """The SHA-256 of the file's bytes: the same scan, renamed or copied, is one file."""
    digest = hashlib.sha256()
    try:
        with path.open("rb") as stream:
            while block := stream.read(DIGEST_BLOCK):
                digest.update(block)
    except OSError as exc:
        raise InvalidFormat(f"cannot read {path}: {exc.strerror}") from None
    return digest.hexdigest()


def read_scan_file(
    path: Path,
    *,
    zone: str,
    scanner: str | None = None,
    column: str | None = None,
    time_column: str | None = None,
    where_column: str | None = None,
) -> ScanFile:
    """Read and check a scan file for a count: every time parsed (``zone`` for times
    written without one), every place within its limits. Nothing is written."""
    digest = file_digest(path)
    table = read_scans(path, column=column, time_column=time_column, where_column=where_column)
    tz = zone_named(zone)
    when, where = table.role("time"), table.role("where")
    rows = []
    for index, (line, text) in enumerate(zip(table.lines, table.codes)):
        at = parse_scan_time(when[index], line, tz) if when is not None and when[index] else None
        place = None
        if where is not None and where[index]:
            try:
                place = clean_place(where[index])
            except InvalidFormat as exc:
                raise InvalidFormat(f"{path.name}: line {line}: {exc.message}") from None
        rows.append(ScanRow(line, text, at, place))
    return ScanFile(
        digest, path.name, scanner.strip() if scanner and scanner.strip() else None, zone, rows,
        table.blank_lines, table.comment_lines,
    )  # fmt: skip


def start_count(
    register: Register, name: str, key: str, scope: CountScope | None = None, *, tz: str | None = None
) -> CountInfo:
    """Open a count; ``tz`` names the zone of scan times without one (default: the machine's)."""
    return open_count(register, name, key, scope or CountScope(), zone=resolve_zone(tz))


def add_files(
    register: Register,
    name: str,
    paths: Sequence[Path],
    *,
    scanner: str | None = None,
    tz: str | None = None,
    column: str | None = None,
    time_column: str | None = None,
    where_column: str | None = None,
    progress: Callable[[int], None] | None = None,
    reading: Callable[[Path, ScanFile], None] | None = None,
) -> list[FileInfo]:
    """Add scan files to the open count ``name``, each whole or not at all, in order; the
    first bad or repeated file stops the rest (those before it stay added)."""
    info = count_info(register, name)
    zone = resolve_zone(tz) if tz else info.zone
    added = []
    for path in paths:
        scan_file = read_scan_file(
            path, zone=zone, scanner=scanner, column=column, time_column=time_column, where_column=where_column
        )
        if reading is not None:
            reading(path, scan_file)
        added.append(add_scan_file(register, name, scan_file, progress=progress))
    return added


def count_table(register: Register, name: str) -> tuple[CountInfo, list[FileInfo], Table]:
    """A count's scans as one table: the file (scanner:name) beside each line, times in UTC."""
    with register.reading() as session:
        count = get_count(session, name)
        files = count_files(session, count)
        scans = count_scans(session, count)
    info = count_info(register, name)
    table = Table(source=f"count {info.name}", header=["file", "scanned_at", "location"], code_column="scanned")
    table.lines, table.codes = scans.lines, scans.scanned
    table.columns = {"file": [scans.names[slot] for slot in scans.files], "scanned_at": scans.at, "location": scans.where}
    table.roles = {"time": "scanned_at", "where": "location"}
    table.blank_lines = sum(item.blank_lines for item in files)
    table.comment_lines = sum(item.comment_lines for item in files)
    return info, files, table


def reconcile_count(register: Register, name: str) -> tuple[CountInfo, list[FileInfo], Reconciliation]:
    """Everything a count's files hold so far, reconciled within its scope."""
    info, files, table = count_table(register, name)
    recon = reconcile(register, info.series, table, count=info, zone=info.zone)
    return info, files, recon


@dataclass(frozen=True)
class CountStatus:
    """Where a count stands: expected codes found so far, and the scans it did not expect."""

    info: CountInfo
    files: list[FileInfo]
    expected: int
    found: int
    unexpected: int
    counts: dict[str, int]

    def as_dict(self) -> dict[str, Any]:
        return {
            **self.info.as_dict(), "expected": self.expected, "found": self.found, "unexpected": self.unexpected,
            "counts": self.counts, "files": [item.as_dict() for item in self.files],
        }  # fmt: skip


def _unexpected(counts: dict[str, int]) -> int:
    return sum(counts[key] for key in COUNT_KEYS if key not in ("issued", "elsewhere", "duplicates", "missing"))


def count_status(register: Register, name: str) -> CountStatus:
    """A count's progress (a closed count answers from its frozen result)."""
    info = count_info(register, name)
    if info.result is not None:
        with register.reading() as session:
            files = count_files(session, get_count(session, name))
        result = info.result
        return CountStatus(info, files, result["expected"], result["found"], _unexpected(result["counts"]), result["counts"])
    info, files, recon = reconcile_count(register, name)
    return CountStatus(info, files, recon.expected, recon.found, _unexpected(recon.counts), dict(recon.counts))


def count_result(register: Register, name: str) -> tuple[CountInfo, list[FileInfo], dict[str, Any]]:
    """A count's result as data (its frozen result once closed), with its files."""
    info = count_info(register, name)
    if info.result is not None:
        with register.reading() as session:
            files = count_files(session, get_count(session, name))
        return info, files, info.result
    info, files, recon = reconcile_count(register, name)
    return info, files, frozen(recon)


def frozen(recon: Reconciliation) -> dict[str, Any]:
    """What a closed count keeps: its counts and every list but the plain issued codes
    (their number is in the counts; there may be a million of them)."""
    data = as_json(recon, list_issued=False)
    data.pop("issued")
    return data


@dataclass(frozen=True)
class Closed:
    info: CountInfo
    recorded: int
    moved: int


def finish_count(
    register: Register,
    name: str,
    *,
    record: bool = False,
    relocate: bool = False,
    progress: Callable[[int], None] | None = None,
) -> Closed:
    """Close the count ``name`` and freeze its result. ``record`` also logs a sighting of
    every code found (its last-seen time and place); ``relocate`` (with ``record``) moves
    the expected place of each code found elsewhere to where it was seen."""
    if relocate and not record:
        raise InvalidFormat("moving expected places goes with recording the count: add --record")
    info, _files, recon = reconcile_count(register, name)
    if info.state != "open":
        raise InvalidFormat(f"count {info.name!r} is closed already")
    result = frozen(recon)
    found = sightings(recon) if record else []
    moves = _moves(recon) if relocate else []
    done = {"recorded": 0, "moved": 0}

    def write(session: Any, series: Any, now: Any) -> None:
        if record:
            summary = {key: recon.counts[key] for key in COUNT_KEYS} | {"scans": recon.scans, "count": info.name}
            done["recorded"] = write_sightings(
                session, register, series, found, source=f"count {info.name}", summary=summary, now=now,
                progress=progress,
            )  # fmt: skip
        if moves:
            done["moved"] = len(move_places(session, register, moves, now))

    closed = close_count(register, name, result, record=write if (record or moves) else None)
    return Closed(closed, done["recorded"], done["moved"])


def _moves(recon: Reconciliation) -> list[tuple[str, str]]:
    """(code, place) for each code found elsewhere: the place of its latest sighting."""
    latest: dict[str, str] = {}
    if recon.seen_where is None:
        return []
    for index, status in enumerate(recon.statuses):
        code, place = recon.canonical[index], recon.seen_where[index]
        if status == "elsewhere" and code is not None and place:
            latest[code] = place
    return sorted(latest.items())


__all__ = [
    "Closed",
    "CountScope",
    "CountStatus",
    "add_files",
    "count_result",
    "count_status",
    "count_table",
    "file_digest",
    "finish_count",
    "list_counts",
    "read_scan_file",
    "reconcile_count",
    "start_count",
]
