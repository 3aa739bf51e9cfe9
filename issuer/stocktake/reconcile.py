"""Stocktake reconciliation: a scan of the shelves (or of the cards shown at an event)
against the register.

Every scanned line falls in one class:

``issued``        a code the register holds and that is in use, found where expected;
``elsewhere``     found, but not at its expected place (expected vs seen in the report);
``out_of_scope``  issued in this series, but outside the count's scope (another range,
                  batch, holder or place);
``voided``        a code the register voided (lost, replaced): it should have been pulled;
``other_series``  a code another series of the register holds (named);
``bad_check``   the check character does not match: a misread or mistyped code;
``not_issued``  a valid code the register never issued (a typo the check missed, or a
                forgery);
``malformed``   not the series' shape at all (wrong length, prefix or characters).

Across lines: ``duplicates`` are codes scanned more than once (a tag scanned twice, or
two tags with one number), and ``missing`` are the issued codes nobody scanned. For a
``bad_check`` or ``not_issued`` line the likely intended codes are the issued codes one
common error away (:func:`issuer.checking.neighbours.neighbours`, ranked as at the desk); among
them a code that is also missing from the scan is the likeliest, and is offered first.

Counts of codes are of distinct codes (a tag scanned twice is one item); ``malformed``
counts lines; ``duplicates`` counts codes scanned more than once; ``missing`` counts
expected codes (the scope's issued codes) not scanned. Blank and comment lines are
counted beside them, alike in every file format.

The work is done by set operations in memory over one query's worth of the series'
codes and a bulk reading of the scans (:func:`issuer.readers.bulkread.read_codes`): a million
scans never cost a million queries.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from datetime import datetime
from pathlib import Path
from typing import Any

from issuer import limits
from issuer.checking.codes import CodeFormat, normalise_text
from issuer.checking.likely import rank
from issuer.errors import InvalidFormat, OutOfLimits
from issuer.readers.bulkread import BAD_CHECK, MALFORMED, read_codes
from issuer.readers.scanfile import Table, read_table
from issuer.register.codeset import CodeSet
from issuer.register.counting import CountInfo, scope_query_filter
from issuer.register.models import EXPIRED, ISSUED, SUSPENDED, VOIDED
from issuer.register.places import codes_of_other_series, expected_places, same_place, scope_codes
from issuer.register.series import code_format, get_series
from issuer.register.stocktake import (
    Sighting,
    held_codes,
    last_seen,
    record_sightings,
    standing_details,
    void_details,
)
from issuer.register.store import Register
from issuer.stocktake.results import (
    COUNT_KEYS,
    LINE_CLASSES,
    Likely,
    MissingCode,
    Reconciliation,
    ScanLine,
    Tally,
    close_advice,
)
from issuer.stocktake.zones import parse_scan_time, zone_named

#: header names read as the time of a scan, and as its place
TIME_COLUMNS = ("scanned_at", "timestamp", "time", "datetime", "date_time", "scan_time", "seen_at", "when", "date")
WHERE_COLUMNS = (
    "location", "where", "site", "shelf", "room", "bin", "zone", "place", "area", "station", "reader",
)  # fmt: skip


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
    shape: CodeFormat, typed: str, candidates: Sequence[Any], issued: CodeSet, scanned: Tally
) -> tuple[Likely, ...]:
    """The issued candidates ranked as at the desk (:mod:`issuer.checking.likely`), except
    that a code also missing from the scan comes before codes found on the shelf: a tag
    scanned in its place is not the one that was misread."""
    ranked = rank(shape, typed, candidates, issued)
    found = [
        Likely(r.code, shape.display(r.code), r.error, r.description, r.code not in scanned, r.likelihood)
        for r in ranked
    ]
    return tuple(sorted(found, key=lambda item: (not item.missing, -item.likelihood)))


def _seen_where(table: Table, count: CountInfo | None) -> list[str] | None:
    """Where each line was seen: its place column, else the place a count covers."""
    default = count.scope_text if count is not None and count.scope == "where" else None
    where = table.role("where")
    if where is None:
        return [default] * len(table) if default else None
    return [place or default for place in where] if default else where


def _away(canonical: Sequence[str | None], seen: list[str] | None, places: dict[str, str]) -> set[str]:
    """Codes seen only at places other than their expected one (a line with no place
    proves nothing either way)."""
    if not places or seen is None:
        return set()
    home: dict[str, bool] = {}
    for code, where in zip(canonical, seen):
        if code is None or not where:
            continue
        expected = places.get(code)
        if expected is not None:
            home[code] = home.get(code, False) or same_place(expected, where)
    return {code for code, at_home in home.items() if not at_home}


def reconcile(
    register: Register, key: str, table: Table, *, count: CountInfo | None = None, zone: str = "UTC"
) -> Reconciliation:
    """Reconcile the scans in ``table`` against series ``key`` (within ``count``'s scope
    when given); ``zone`` is the zone of scan times written without one."""
    import numpy as np

    from issuer.checking.neighbours import neighbours, omission_insertion_candidates

    seen = _seen_where(table, count)
    where_count = count.scope_text if count is not None and count.scope == "where" else None
    with register.reading() as session:
        series = get_series(session, key)
        shape = code_format(series)
        held = held_codes(session, series, register.clock())
        issued, voided, suspended, expired = held.issued, held.voided, held.suspended, held.expired
        read = read_codes(shape, table.codes)
        canonical, fixed = read.canonical, read.fixed
        assert fixed is not None
        readable = read.state != MALFORMED
        # one class per line, worked out over whole arrays
        in_issued = issued.contains(fixed) & readable
        in_expired = expired.contains(fixed) & in_issued
        in_voided = voided.contains(fixed) & readable & ~in_issued
        in_suspended = suspended.contains(fixed) & readable & ~in_issued & ~in_voided
        kinds = np.select(
            [read.state == MALFORMED, read.state == BAD_CHECK, in_expired, in_issued, in_voided, in_suspended],
            [0, 1, 5, 2, 3, 6], 4,
        ).astype(np.int8)
        del in_issued, in_voided, in_expired, in_suspended
        names = ("malformed", "bad_check", ISSUED, VOIDED, "not_issued", EXPIRED, SUSPENDED)
        statuses = [names[kind] for kind in kinds.tolist()]
        expected = issued
        if count is not None and count.scope != "all":
            expected = issued.subset(scope_codes(session, series, *scope_query_filter(count)))
        places = expected_places(session, series)
        strays = {i: table.codes[i] for i in np.flatnonzero((kinds <= 1) | (kinds == 4)).tolist()}
        others = codes_of_other_series(session, series, strays)
        times = Tally(fixed[readable], issued)
        voided_seen = voided.codes(times.codes.contains_keys(voided.array))
        voids = void_details(session, voided_seen)
        held_back = [*expired.codes(times.codes.contains_keys(expired.array)),
                     *suspended.codes(times.codes.contains_keys(suspended.array))]  # fmt: skip
        standings = standing_details(session, held_back) if held_back else {}
        # a suspended code (a card reported lost) is not among those expected on the shelf
        missing = expected.codes(~times.codes.contains_keys(expected.array))
        seen_before = last_seen(session, series) if missing else {}
    away = _away(canonical, seen, places)
    for index, status in enumerate(statuses):
        if status == ISSUED:
            code = canonical[index]
            assert code is not None
            if expected is not issued and code not in expected:
                moved = where_count is not None and code in places and not same_place(places[code], where_count)
                statuses[index] = "elsewhere" if moved else "out_of_scope"
            elif code in away:
                statuses[index] = "elsewhere"
        elif index in others:
            statuses[index] = "other_series"
    tallied = times.codes.array
    # bad check, never issued
    unknown = set(times.codes.codes(
        ~issued.contains_keys(tallied) & ~voided.contains_keys(tallied) & ~suspended.contains_keys(tallied)
    ))  # fmt: skip
    unknown.difference_update(canonical[index] for index in others)
    first_line: dict[str, int] = {}
    if unknown:
        for number, scanned in zip(table.lines, canonical):
            if scanned in unknown and scanned not in first_line:
                first_line[scanned] = number
    likely: dict[str, tuple[Likely, ...]] = {}
    for code in sorted(unknown, key=first_line.__getitem__):  # in file order
        # membership is asked before the check is computed: most candidates are not issued
        likely[code] = _likely(shape, code, neighbours(shape, code, known=issued.__contains__), issued, times)
    likely_by_line: dict[int, tuple[Likely, ...]] = {}
    for index in read.reasons:
        if index in others:
            continue
        candidates = omission_insertion_candidates(shape, table.codes[index], known=issued.__contains__)
        if candidates:
            typed = normalise_text(table.codes[index])
            likely_by_line[index] = _likely(shape, typed, candidates, issued, times)
    perhaps: dict[str, int] = {}
    for code, options in likely.items():
        if options and options[0].missing and close_advice(options) is None:
            perhaps.setdefault(options[0].code, first_line[code])
    for index, options in likely_by_line.items():
        if options and options[0].missing and close_advice(options) is None:
            perhaps.setdefault(options[0].code, table.lines[index])
    counts = _counts(statuses, canonical, others, times, len(missing))
    reasons = read.reasons
    del read, fixed, kinds  # the arrays go before the result is built
    counts["blank_lines"], counts["comment_lines"] = table.blank_lines, table.comment_lines
    return Reconciliation(
        series=key,
        source=table.source,
        shape=shape,
        table=table,
        canonical=canonical,
        statuses=statuses,
        times=times,
        reasons=reasons,
        voids=voids,
        likely=likely,
        likely_by_line=likely_by_line,
        missing=missing,
        seen_before=seen_before,
        perhaps=perhaps,
        counts=counts,
        scans=len(table),
        places=places,
        seen_where=seen,
        others=others,
        scope=count.describe_scope(lambda base: shape.display(shape.code_for_base(base))) if count is not None else f"all of series {key}",
        zone=zone,
        expected=len(expected),
        found=len(expected) - len(missing),
        standings=standings,
    )


def _counts(
    statuses: list[str], canonical: list[str | None], others: dict[int, Any], times: Tally, missing: int
) -> dict[str, int]:
    """Distinct codes per class (lines for malformed, another series' codes for
    ``other_series``); issued is what is left of the distinct codes scanned."""
    distinct: dict[str, set[Any]] = {name: set() for name in LINE_CLASSES}
    for index, status in enumerate(statuses):
        if status == ISSUED:
            continue
        if status == "malformed":
            distinct[status].add(index)
        elif status == "other_series":
            distinct[status].add(others[index].code)
        else:
            distinct[status].add(canonical[index])
    counts = {name: len(found) for name, found in distinct.items()}
    counted = set().union(*(distinct[name] for name in LINE_CLASSES if name not in ("issued", "malformed", "other_series")))
    counted.update(canonical[index] for index in others if canonical[index] is not None)
    counts["issued"] = len(times) - len(counted)
    counts["duplicates"] = int((times.counts > 1).sum())
    counts["missing"] = missing
    return {key: counts[key] for key in COUNT_KEYS}


def sightings(recon: Reconciliation) -> list[Sighting]:
    """One sighting per code found in the register (issued or voided): its latest scan,
    with that scan's time (read in the count's zone when written without one) and place."""
    times_text = recon.table.role("time")
    where_text = recon.seen_where
    zone = zone_named(recon.zone)
    latest: dict[str, tuple[datetime | None, str | None, str]] = {}
    for index, (number, code, status) in enumerate(
        zip(recon.table.lines, recon.canonical, recon.statuses)
    ):
        if status not in (ISSUED, EXPIRED, SUSPENDED, VOIDED, "elsewhere", "out_of_scope") or code is None:
            continue
        when = None
        if times_text is not None and times_text[index]:
            when = parse_scan_time(times_text[index], number, zone)
        where = where_text[index] or None if where_text is not None else None
        try:
            limits.text("location", where)
        except OutOfLimits as exc:
            raise InvalidFormat(f"line {number}: {exc.message}") from None
        before = latest.get(code)
        if before is None or when is None or (before[0] is not None and when >= before[0]):
            latest[code] = (when, where, VOIDED if status == VOIDED else ISSUED)
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
    "parse_scan_time",
    "read_scans",
    "reconcile",
    "record_seen",
    "sightings",
]
