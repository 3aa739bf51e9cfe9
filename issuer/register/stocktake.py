"""The register's side of a stocktake: what a series holds, in one query, and the
sightings a stocktake records.

Reconciling a million scans never asks the database about one code at a time: the
series' codes and statuses come back in one query and the comparison happens in
memory (:mod:`issuer.stocktake.reconcile`). Recording sightings is one transaction: one
``UPDATE`` per code through the driver's ``executemany`` and one ``seen`` log entry per
code, so ``issuer history`` shows when and where a tag was last seen.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session, aliased

from issuer.register.codeset import CodeSet
from issuer.register.driver import bind_value, driver_rows, execute_many
from issuer.register.log import NewEntry, append_entries, timestamp_text
from issuer.register.models import ISSUED, SUSPENDED, VOIDED, IssuedCode, Series
from issuer.register.series import code_format, get_series
from issuer.register.store import Register

#: ``IN (...)`` lists are at most this long
IN_CHUNK = 500
#: log entries appended per round while recording sightings
LOG_CHUNK = 5_000
#: ``last_seen_where`` holds at most this many characters
WHERE_WIDTH = 200


def series_codes(session: Session, series: Series) -> dict[str, str]:
    """Every code the series holds, with its status (issued or voided), in one query."""
    rows = driver_rows(session, "SELECT code, status FROM issued_code WHERE series_id = ?", (series.id,))
    return dict(rows)


@dataclass(frozen=True)
class HeldCodes:
    """A series' codes by status."""

    issued: CodeSet
    voided: CodeSet
    suspended: CodeSet
    #: the issued codes past their validity at the time asked (a part of ``issued``)
    expired: CodeSet


def held_codes(session: Session, series: Series, now: datetime | None = None) -> HeldCodes:
    """The series' issued, voided and suspended codes (and which issued ones have expired
    at ``now``) in one round trip: the database joins each set into one text, so a
    million codes cost no million row objects (nor strings)."""
    dialect = session.get_bind().dialect.name
    join = "group_concat({}, char(10))" if dialect == "sqlite" else "string_agg({}, chr(10))"
    issued = join.format(f"CASE WHEN status = '{ISSUED}' THEN code END")
    voided = join.format(f"CASE WHEN status = '{VOIDED}' THEN code END")
    suspended = join.format(f"CASE WHEN status = '{SUSPENDED}' THEN code END")
    expired = join.format(f"CASE WHEN status = '{ISSUED}' AND valid_until < ? THEN code END")
    # on SQLite '+series_id' reads the table in order instead of through an index
    where = "+series_id" if dialect == "sqlite" else "series_id"
    column = IssuedCode.__table__.c.valid_until
    moment = bind_value(session, column, now) if now is not None else None  # type: ignore[arg-type]
    ((issued_text, voided_text, suspended_text, expired_text),) = driver_rows(
        session,
        f"SELECT {issued}, {voided}, {suspended}, {expired} FROM issued_code WHERE {where} = ?",
        (moment, series.id),
    )
    shape = code_format(series)
    symbols = shape.scheme.alphabet.symbols + shape.scheme.check_alphabet.symbols
    form: dict[str, Any] = {"prefix": shape.prefix, "suffix": shape.suffix, "width": shape.total_width, "symbols": symbols}
    return HeldCodes(
        CodeSet.from_lines(issued_text, **form),
        CodeSet.from_lines(voided_text, **form),
        CodeSet.from_lines(suspended_text, **form),
        CodeSet.from_lines(expired_text, **form),
    )


@dataclass(frozen=True)
class StandingDetail:
    """Why a code found in a stocktake is not simply in use."""

    valid_until: datetime | None
    suspended_at: datetime | None
    suspend_reason: str | None


def standing_details(session: Session, codes: Iterable[str]) -> dict[str, StandingDetail]:
    """Validity and suspension of each of ``codes``."""
    wanted = list(dict.fromkeys(codes))
    found: dict[str, StandingDetail] = {}
    for at in range(0, len(wanted), IN_CHUNK):
        statement = select(
            IssuedCode.code, IssuedCode.valid_until, IssuedCode.suspended_at, IssuedCode.suspend_reason
        ).where(IssuedCode.code.in_(wanted[at: at + IN_CHUNK]))
        for code, until, since, reason in session.execute(statement):
            found[code] = StandingDetail(until, since, reason)
    return found


@dataclass(frozen=True)
class VoidDetail:
    reason: str | None
    replacement: str | None


def void_details(session: Session, codes: Iterable[str]) -> dict[str, VoidDetail]:
    """Why each of ``codes`` (voided codes) was voided, and what replaced it."""
    wanted = list(dict.fromkeys(codes))
    replacement = aliased(IssuedCode)
    found: dict[str, VoidDetail] = {}
    for at in range(0, len(wanted), IN_CHUNK):
        statement = (
            select(IssuedCode.code, IssuedCode.void_reason, replacement.code)
            .outerjoin(replacement, replacement.id == IssuedCode.replaced_by_id)
            .where(IssuedCode.code.in_(wanted[at: at + IN_CHUNK]), IssuedCode.status == VOIDED)
        )
        for code, reason, new_code in session.execute(statement):
            found[code] = VoidDetail(reason, new_code)
    return found


@dataclass(frozen=True)
class LastSeen:
    at: datetime
    where: str | None


def last_seen(session: Session, series: Series) -> dict[str, LastSeen]:
    """Every issued code of the series that was ever seen, with when and where."""
    statement = select(IssuedCode.code, IssuedCode.last_seen_at, IssuedCode.last_seen_where).where(
        IssuedCode.series_id == series.id,
        IssuedCode.status == ISSUED,
        IssuedCode.last_seen_at.is_not(None),
    )
    return {code: LastSeen(at, where) for code, at, where in session.execute(statement) if at is not None}


@dataclass(frozen=True)
class Sighting:
    """A code seen in a stocktake: when (the scan's own time, if it had one) and where."""

    code: str
    status: str
    at: datetime | None = None
    where: str | None = None


def write_sightings(
    session: Session,
    register: Register,
    series: Series,
    sightings: Sequence[Sighting],
    *,
    source: str,
    summary: Mapping[str, Any],
    now: datetime,
    progress: Callable[[int], None] | None = None,
) -> int:
    """Inside a writing transaction: a ``seen`` entry per sighting, each code's last-seen
    time and place moved forward (never back), and one ``stocktake`` entry summing up."""
    column = IssuedCode.__table__.c.last_seen_at
    updates = []
    entries = []
    for sighting in sightings:
        when = sighting.at or now
        where = sighting.where[:WHERE_WIDTH] if sighting.where else None
        bound = bind_value(session, column, when)  # type: ignore[arg-type]
        updates.append((bound, where, sighting.code, series.id, bound))
        detail: dict[str, Any] = {"seen_at": timestamp_text(when), "source": source, "status": sighting.status}
        if where:
            detail["where"] = where
        entries.append(NewEntry("seen", series.id, sighting.code, None, detail))
    execute_many(
        session,
        "UPDATE issued_code SET last_seen_at = ?, last_seen_where = ? "
        "WHERE code = ? AND series_id = ? AND (last_seen_at IS NULL OR last_seen_at <= ?)",
        updates,
    )
    for at in range(0, len(entries), LOG_CHUNK):
        part = entries[at: at + LOG_CHUNK]
        append_entries(session, part, actor=register.actor, at=now)
        if progress is not None:
            progress(len(part))
    detail = {"source": source, "recorded": len(entries), **summary}
    append_entries(session, [NewEntry("stocktake", series.id, None, None, detail)], actor=register.actor, at=now)
    return len(entries)


def record_sightings(
    register: Register,
    key: str,
    sightings: Sequence[Sighting],
    *,
    source: str,
    summary: Mapping[str, Any],
    progress: Callable[[int], None] | None = None,
) -> int:
    """Log a ``seen`` entry per sighting and move each code's last-seen time and place
    forward (never back: an older scan does not hide a newer one); one ``stocktake``
    entry sums the act up. Returns how many sightings were recorded."""

    def work(session: Session) -> int:
        series = get_series(session, key)
        return write_sightings(
            session, register, series, sightings, source=source, summary=summary, now=register.clock(),
            progress=progress,
        )  # fmt: skip

    return register.write(work)


__all__ = [
    "HeldCodes",
    "LastSeen",
    "Sighting",
    "StandingDetail",
    "VoidDetail",
    "held_codes",
    "last_seen",
    "record_sightings",
    "series_codes",
    "standing_details",
    "void_details",
    "write_sightings",
]
