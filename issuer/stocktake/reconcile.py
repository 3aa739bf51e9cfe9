"""Stocktake reconciliation: a scan of the shelves (or of the cards shown at an event)
against the register.

Every scanned line falls in one class:

``issued``      a code the register holds and that is in use;
``voided``      a code the register voided (lost, replaced): it should have been pulled;
``bad_check``   the check character does not match: a misread or mistyped code;
``not_issued``  a valid code the register never issued (a typo the check missed, or a
                forgery);
``malformed``   not the series' shape at all (wrong length, prefix or characters).

Across lines: ``duplicates`` are codes scanned more than once (a tag scanned twice, or
two tags with one number), and ``missing`` are the issued codes nobody scanned. For a
``bad_check`` or ``not_issued`` line the likely intended codes are the issued codes one
common error away (:func:`issuer.checking.neighbours.neighbours`, ranked as at the desk); among
them a code that is also missing from the scan is the likeliest, and is offered first.

Counts of ``issued``, ``voided``, ``bad_check`` and ``not_issued`` are of distinct
codes (a tag scanned twice is one item); ``malformed`` counts lines; ``duplicates``
counts codes scanned more than once; ``missing`` counts issued codes not scanned.

The work is done by set operations in memory over one query's worth of the series'
codes and a bulk reading of the scans (:func:`issuer.readers.bulkread.read_codes`): a million
scans never cost a million queries.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from issuer.checking.codes import CodeFormat
from issuer.errors import InvalidFormat
from issuer.readers.bulkread import BAD_CHECK, MALFORMED, read_codes
from issuer.readers.scanfile import Table, read_table
from issuer.register.models import ISSUED, VOIDED
from issuer.register.series import code_format, get_series
from issuer.register.stocktake import (
    LastSeen,
    Sighting,
    VoidDetail,
    held_codes,
    last_seen,
    record_sightings,
    void_details,
)
from issuer.register.store import Register

#: the classes of a scanned line, in report order
LINE_CLASSES = ("issued", "voided", "bad_check", "not_issued", "malformed")
#: the keys of ``counts``
COUNT_KEYS = ("issued", "voided", "bad_check", "not_issued", "malformed", "duplicates", "missing")
#: suggestions kept per line
MAX_SUGGESTIONS = 5

#: header names read as the time of a scan, and as its place
TIME_COLUMNS = ("scanned_at", "timestamp", "time", "datetime", "date_time", "scan_time", "seen_at", "when", "date")
WHERE_COLUMNS = (
    "location", "where", "site", "shelf", "room", "bin", "zone", "place", "area", "station", "reader",
)  # fmt: skip


@dataclass(frozen=True)
class Likely:
    """An issued code one common error away from what was scanned."""

    code: str
    display: str
    error: str
    description: str
    missing: bool

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass(frozen=True)
class ScanLine:
    """One scanned line, classified."""

    line: int
    scanned: str
    code: str | None
    display: str | None
    status: str
    times: int
    detail: str
    likely: tuple[Likely, ...]
    extra: dict[str, str]


@dataclass(frozen=True)
class MissingCode:
    code: str
    display: str
    last_seen_at: datetime | None
    last_seen_where: str | None
    perhaps: str | None  # a scanned line that is probably this code, mistyped

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass
class Reconciliation:
    """A stocktake reconciled against one series, kept column-wise so that a million
    lines cost no more than they must; :meth:`lines` yields them one by one."""

    series: str
    source: str
    shape: CodeFormat = field(repr=False)
    table: Table = field(repr=False)
    canonical: list[str | None] = field(repr=False)
    statuses: list[str] = field(repr=False)
    times: Counter[str] = field(repr=False)
    reasons: dict[int, str] = field(repr=False)
    voids: dict[str, VoidDetail] = field(repr=False)
    likely: dict[str, tuple[Likely, ...]] = field(repr=False)
    likely_by_line: dict[int, tuple[Likely, ...]] = field(repr=False)
    missing: list[str] = field(repr=False)
    seen_before: dict[str, LastSeen] = field(repr=False)
    perhaps: dict[str, int] = field(repr=False)
    counts: dict[str, int] = field(default_factory=dict)
    scans: int = 0

    @property
    def time_column(self) -> str | None:
        return self.table.roles.get("time")

    @property
    def where_column(self) -> str | None:
        return self.table.roles.get("where")

    @property
    def clean(self) -> bool:
        """Every scan an issued code, each once, and nothing missing."""
        return all(self.counts[key] == 0 for key in COUNT_KEYS if key != "issued")

    def detail(self, index: int, code: str | None, status: str) -> str:
        """What the report says about line ``index`` beside its status."""
        if status == "malformed":
            return self.reasons.get(index, "")
        if status == "voided" and code is not None:
            void = self.voids.get(code)
            if void is None:
                return "voided"
            text = f"voided: {void.reason}" if void.reason else "voided"
            return f"{text}; replaced by {void.replacement}" if void.replacement else text
        if status == "bad_check":
            return "the check character does not match: a misread or mistyped code"
        if status == "not_issued":
            return "a valid code this register never issued"
        return ""

    def line(self, index: int) -> ScanLine:
        """The ``index``-th scanned line (counting from 0, blank lines left out)."""
        table = self.table
        code, status = self.canonical[index], self.statuses[index]
        if code is not None:
            likely = self.likely.get(code, ())
        else:
            likely = self.likely_by_line.get(index, ())
        return ScanLine(
            line=table.lines[index],
            scanned=table.codes[index],
            code=code,
            display=self.shape.display(code) if code is not None else None,
            status=status,
            times=self.times[code] if code is not None else 1,
            detail=self.detail(index, code, status),
            likely=likely,
            extra={header: values[index] for header, values in table.columns.items()},
        )

    def lines(self, *, skip_issued: bool = False) -> Iterator[ScanLine]:
        """Every scanned line in file order (only those not simply issued, if asked)."""
        if skip_issued:
            for index, status in enumerate(self.statuses):
                if status != ISSUED:
                    yield self.line(index)
            return
        for index in range(len(self.statuses)):
            yield self.line(index)

    def missing_codes(self) -> Iterator[MissingCode]:
        """The issued codes nobody scanned, in code order."""
        for code in self.missing:
            seen = self.seen_before.get(code)
            yield MissingCode(
                code,
                self.shape.display(code),
                seen.at if seen else None,
                seen.where if seen else None,
                f"line {self.perhaps[code]}" if code in self.perhaps else None,
            )

    def duplicates(self) -> list[tuple[str, int, list[int], list[str]]]:
        """(code, times scanned, lines, distinct places) for each code scanned twice or more."""
        repeated = {code for code, n in self.times.items() if n > 1}
        lines: dict[str, list[int]] = {code: [] for code in repeated}
        places: dict[str, dict[str, None]] = {code: {} for code in repeated}
        where = self.table.role("where")
        for index, (number, code) in enumerate(zip(self.table.lines, self.canonical)):
            if code in repeated:
                lines[code].append(number)
                if where is not None and where[index]:
                    places[code][where[index]] = None
        return [(code, self.times[code], lines[code], list(places[code])) for code in lines]


def read_scans(
    path: Path,
    *,
    column: str | None = None,
    time_column: str | None = None,
    where_column: str | None = None,
    max_line_bytes: int | None = None,
) -> Table:
    """Read a stocktake scan file (see :mod:`issuer.readers.scanfile`)."""
    return read_table(
        path,
        column=column,
        roles={"time": TIME_COLUMNS, "where": WHERE_COLUMNS},
        chosen={"time": time_column, "where": where_column},
        max_line_bytes=max_line_bytes,
    )


def _likely(
    shape: CodeFormat, candidates: Sequence[Any], issued: set[str], scanned: Counter[str]
) -> tuple[Likely, ...]:
    found = []
    for candidate in candidates:
        if candidate.code in issued:
            found.append(
                Likely(candidate.code, shape.display(candidate.code), candidate.error,
                       candidate.description, candidate.code not in scanned)
            )
            if len(found) == MAX_SUGGESTIONS:
                break
    # a code that is also missing from the scan is the likelier one; order is kept otherwise
    return tuple(sorted(found, key=lambda item: not item.missing))


def reconcile(register: Register, key: str, table: Table) -> Reconciliation:
    """Reconcile the scans in ``table`` against series ``key``."""
    import numpy as np

    from issuer.checking.neighbours import neighbours, omission_insertion_candidates

    with register.reading() as session:
        series = get_series(session, key)
        shape = code_format(series)
        held = held_codes(session, series)
        issued, voided = held.issued, held.voided
        read = read_codes(shape, table.codes)
        states = read.state.tolist()
        canonical = read.canonical
        statuses = [
            "malformed" if state == MALFORMED else "bad_check" if state == BAD_CHECK
            else ISSUED if code in issued else VOIDED if code in voided else "not_issued"
            for state, code in zip(states, canonical)
        ]  # fmt: skip
        times: Counter[str] = Counter(canonical)  # type: ignore[arg-type]
        times.pop(None, None)  # type: ignore[call-overload]
        voided_seen = voided.intersection(times)
        voids = void_details(session, voided_seen)
        missing = sorted(issued.difference(times))
        seen_before = last_seen(session, series) if missing else {}
    unknown = set(times).difference(issued, voided)  # bad check or never issued
    first_line: dict[str, int] = {}
    if unknown:
        for number, scanned in zip(table.lines, canonical):
            if scanned in unknown and scanned not in first_line:
                first_line[scanned] = number
    likely: dict[str, tuple[Likely, ...]] = {}
    for code in sorted(unknown, key=first_line.__getitem__):  # in file order
        likely[code] = _likely(shape, neighbours(shape, code), issued, times)
    likely_by_line: dict[int, tuple[Likely, ...]] = {}
    for index in read.reasons:
        candidates = omission_insertion_candidates(shape, table.codes[index])
        if candidates:
            likely_by_line[index] = _likely(shape, candidates, issued, times)
    perhaps: dict[str, int] = {}
    for code, options in likely.items():
        if options and options[0].missing:
            perhaps.setdefault(options[0].code, first_line[code])
    for index, options in likely_by_line.items():
        if options and options[0].missing:
            perhaps.setdefault(options[0].code, table.lines[index])
    bad = {canonical[index] for index in np.flatnonzero(read.state == BAD_CHECK).tolist()}
    counts = {
        "issued": len(times) - len(unknown) - len(voided_seen),
        "voided": len(voided_seen),
        "bad_check": len(bad),
        "not_issued": len(unknown) - len(bad),
        "malformed": len(read.reasons),
        "duplicates": sum(1 for n in times.values() if n > 1),
        "missing": len(missing),
    }
    return Reconciliation(
        series=key,
        source=table.source,
        shape=shape,
        table=table,
        canonical=canonical,
        statuses=statuses,
        times=times,
        reasons=read.reasons,
        voids=voids,
        likely=likely,
        likely_by_line=likely_by_line,
        missing=missing,
        seen_before=seen_before,
        perhaps=perhaps,
        counts=counts,
        scans=len(table),
    )


def parse_scan_time(text: str, line: int) -> datetime:
    """A scan's time: ISO 8601 (``2026-03-14T09:30:00+01:00``, ``2026-03-14 09:30``,
    ``2026-03-14``); a time without a zone is taken as UTC."""
    try:
        moment = datetime.fromisoformat(text.strip())
    except ValueError:
        raise InvalidFormat(
            f"line {line}: {text!r} is not a date and time like 2026-03-14T09:30:00Z"
        ) from None
    return moment.replace(tzinfo=UTC) if moment.tzinfo is None else moment.astimezone(UTC)


def sightings(recon: Reconciliation) -> list[Sighting]:
    """One sighting per code found in the register (issued or voided): its latest scan
    in the file, with that scan's time and place."""
    times_text = recon.table.role("time")
    where_text = recon.table.role("where")
    latest: dict[str, tuple[datetime | None, str | None, str]] = {}
    for index, (number, code, status) in enumerate(
        zip(recon.table.lines, recon.canonical, recon.statuses)
    ):
        if status not in (ISSUED, VOIDED) or code is None:
            continue
        when = None
        if times_text is not None and times_text[index]:
            when = parse_scan_time(times_text[index], number)
        where = where_text[index] or None if where_text is not None else None
        before = latest.get(code)
        if before is None or when is None or (before[0] is not None and when >= before[0]):
            latest[code] = (when, where, status)
    return [Sighting(code, status, when, where) for code, (when, where, status) in latest.items()]


def record_seen(
    register: Register,
    recon: Reconciliation,
    *,
    found: list[Sighting] | None = None,
    progress: Callable[[int], None] | None = None,
) -> int:
    """Log a ``seen`` event per code of the stocktake found in the register, and set its
    last-seen time and place. All of it in one transaction; returns how many.

    ``found`` is :func:`sightings` of ``recon`` when the caller worked it out already
    (to refuse a bad scan time before writing anything at all)."""
    if found is None:
        found = sightings(recon)  # every time is parsed before anything is written
    return record_sightings(
        register,
        recon.series,
        found,
        source=Path(recon.source).name,
        summary={key: recon.counts[key] for key in COUNT_KEYS} | {"scans": recon.scans},
        progress=progress,
    )


__all__ = [
    "COUNT_KEYS",
    "LINE_CLASSES",
    "Likely",
    "MissingCode",
    "Reconciliation",
    "ScanLine",
    "read_scans",
    "reconcile",
    "record_seen",
    "sightings",
]
