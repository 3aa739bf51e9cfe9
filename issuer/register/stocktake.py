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

from issuer.register.driver import bind_value, driver_rows, execute_many
from issuer.register.log import NewEntry, append_entries, timestamp_text
from issuer.register.models import ISSUED, VOIDED, IssuedCode, Series
from issuer.register.series import get_series
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


class CodeSet:
    """A set of codes held as one sorted numpy array (fixed-width bytes when every code is
    ASCII of one width, else text): a million codes cost a few megabytes, not a million
    Python strings, and membership of a whole array is one ``searchsorted``."""

    def __init__(self, codes: Any) -> None:
        import numpy as np

        array = np.asarray(codes)
        if array.dtype == object or array.size == 0:
            array = np.array(sorted(str(code) for code in array.tolist()), dtype=str) if array.size else np.array([], dtype="S1")
        array = np.unique(array) if array.size else array
        self.array = array

    @classmethod
    def from_lines(cls, text: str | None) -> CodeSet:
        """Codes joined by newlines, as the database hands them back."""
        import numpy as np

        if not text:
            return cls(np.array([], dtype="S1"))
        data = text.encode("utf-8")
        first = data.find(b"\n")
        width = len(data) if first < 0 else first
        if text.isascii() and (len(data) + 1) % (width + 1) == 0:
            rows = np.frombuffer(data + b"\n", dtype=np.uint8).reshape(-1, width + 1)
            if (rows[:, width] == ord("\n")).all():
                return cls(np.ascontiguousarray(rows[:, :width]).view(f"S{width}").ravel())
        return cls(np.array(text.split("\n"), dtype=str))

    def _cast(self, values: Any) -> Any:
        import numpy as np

        values = np.asarray(values)
        kind = self.array.dtype.kind
        if values.dtype.kind == kind:
            return values
        if kind == "S":
            return np.char.encode(values.astype(str), "utf-8") if values.size else values.astype("S1")
        return np.char.decode(values, "utf-8") if values.dtype.kind == "S" else values.astype(str)

    def contains(self, values: Any) -> Any:
        """For each of ``values`` (an array), whether it is in the set."""
        import numpy as np

        values = self._cast(values)
        if self.array.size == 0 or values.size == 0:
            return np.zeros(values.shape, dtype=bool)
        at = np.searchsorted(self.array, values)
        at[at == self.array.size] = 0
        return self.array[at] == values  # type: ignore[no-any-return]

    def __contains__(self, code: object) -> bool:
        if not isinstance(code, str) or self.array.size == 0:
            return False
        value = code.encode("utf-8") if self.array.dtype.kind == "S" else code
        import numpy as np

        at = int(np.searchsorted(self.array, value))
        return at < self.array.size and self.array[at] == value  # type: ignore[no-any-return]

    def __len__(self) -> int:
        return int(self.array.size)

    def codes(self, mask: Any = None) -> list[str]:
        """The codes (those where ``mask`` holds, if given) as text, in sorted order."""
        chosen = self.array if mask is None else self.array[mask]
        if chosen.dtype.kind == "S":
            return [value.decode("utf-8") for value in chosen.tolist()]
        return [str(value) for value in chosen.tolist()]

    def subset(self, codes: Iterable[str]) -> CodeSet:
        """The members of this set that are among ``codes``."""
        import numpy as np

        wanted = list(codes)
        if not wanted:
            return CodeSet(self.array[:0])
        values = self._cast(np.array(wanted, dtype=str))
        return CodeSet(values[self.contains(values)])


@dataclass(frozen=True)
class HeldCodes:
    """A series' codes by status."""

    issued: CodeSet
    voided: CodeSet


def held_codes(session: Session, series: Series) -> HeldCodes:
    """The series' issued and voided codes in one round trip: the database joins each
    set into one text, so a million codes cost no million row objects (nor strings)."""
    dialect = session.get_bind().dialect.name
    join = "group_concat({}, char(10))" if dialect == "sqlite" else "string_agg({}, chr(10))"
    issued = join.format(f"CASE WHEN status = '{ISSUED}' THEN code END")
    voided = join.format(f"CASE WHEN status = '{VOIDED}' THEN code END")
    # on SQLite '+series_id' reads the table in order instead of through an index
    where = "+series_id" if dialect == "sqlite" else "series_id"
    ((issued_text, voided_text),) = driver_rows(
        session, f"SELECT {issued}, {voided} FROM issued_code WHERE {where} = ?", (series.id,)
    )
    return HeldCodes(CodeSet.from_lines(issued_text), CodeSet.from_lines(voided_text))


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
    "CodeSet",
    "HeldCodes",
    "LastSeen",
    "Sighting",
    "VoidDetail",
    "held_codes",
    "last_seen",
    "record_sightings",
    "write_sightings",
    "series_codes",
    "void_details",
]
