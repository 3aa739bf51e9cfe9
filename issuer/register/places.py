"""Where things belong: each code may carry an expected place (a shelf, a room, a bin), set
by ``issuer place`` or a column on import, and moved when a count records what it saw.
A count that sees a tag anywhere else reports it as found elsewhere.

Also here, because only the register may ask: which codes of a series a count's scope
covers, and which scanned texts are codes of another series.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from issuer.errors import InvalidFormat
from issuer.register.driver import driver_rows, execute_many
from issuer.register.log import NewEntry, append_entries
from issuer.register.models import IssuedCode, Series
from issuer.register.series import all_series, code_format
from issuer.register.store import Register

#: ``IN (...)`` lists are at most this long
IN_CHUNK = 500
#: log entries appended per round
LOG_CHUNK = 5_000


def clean_place(text: str) -> str:
    """A place as stored: trimmed, inner runs of spaces made one; refused when empty or
    outside the ``location`` limit (:mod:`issuer.limits`)."""
    from issuer import limits

    place = " ".join(text.split())
    if not place:
        raise InvalidFormat("a place needs a name (a shelf, room or bin)")
    limits.text("location", place, label="a place name")
    return place


def same_place(one: str | None, other: str | None) -> bool:
    """Two place names name one place (case and spacing aside)."""
    if not one or not other:
        return False
    return " ".join(one.split()).casefold() == " ".join(other.split()).casefold()


@dataclass(frozen=True)
class Placed:
    code: str
    before: str | None
    after: str | None


def _move(
    session: Session, register: Register, moves: Sequence[tuple[IssuedCode, str | None]], at: datetime, source: str
) -> list[Placed]:
    done = [Placed(row.code, row.expected_where, place) for row, place in moves]
    execute_many(session, "UPDATE issued_code SET expected_where = ? WHERE id = ?", [(place, row.id) for row, place in moves])
    entries = [
        NewEntry("placed", row.series_id, row.code, None, {"from": row.expected_where, "to": place, "by": source})
        for row, place in moves
    ]
    for start in range(0, len(entries), LOG_CHUNK):
        append_entries(session, entries[start: start + LOG_CHUNK], actor=register.actor, at=at)
    return done


def place_codes(register: Register, texts: Sequence[str], place: str | None) -> list[Placed]:
    """Give each typed code the expected place ``place`` (None: no place any more). Every
    text must name a code the register holds; all are placed, or none."""
    from issuer.register.lifecycle import find_code

    where = clean_place(place) if place is not None else None

    def work(session: Session) -> list[Placed]:
        rows: dict[str, IssuedCode] = {}
        for text in texts:
            row = find_code(session, text)
            rows.setdefault(row.code, row)
        moves = [(row, where) for row in rows.values()]
        return _move(session, register, moves, register.clock(), "place")

    return register.write(work)


def move_places(session: Session, register: Register, moves: Iterable[tuple[str, str]], at: datetime) -> list[Placed]:
    """Inside a count's closing: move each code's expected place to where it was seen."""
    wanted = dict(moves)
    rows: list[tuple[IssuedCode, str | None]] = []
    codes = list(wanted)
    for start in range(0, len(codes), IN_CHUNK):
        found = session.scalars(select(IssuedCode).where(IssuedCode.code.in_(codes[start: start + IN_CHUNK])))
        rows.extend((row, clean_place(wanted[row.code])) for row in found)
    return _move(session, register, rows, at, "count")


def expected_places(session: Session, series: Series) -> dict[str, str]:
    """Every code of the series that has an expected place, with it."""
    rows = driver_rows(
        session, "SELECT code, expected_where FROM issued_code WHERE series_id = ? AND expected_where IS NOT NULL",
        (series.id,),
    )
    return dict(rows)


def scope_codes(session: Session, series: Series, condition: str, params: tuple[Any, ...]) -> set[str]:
    """The series' codes (any status) that a count's scope covers."""
    rows = driver_rows(
        session, f"SELECT code FROM issued_code WHERE series_id = ? AND {condition}", (series.id, *params)
    )
    return {code for (code,) in rows}


@dataclass(frozen=True)
class OtherSeries:
    """A scanned text that is a code of another series the register holds."""

    series: str
    title: str
    code: str
    status: str
    #: the code as people read it, in its own series' display form
    display: str | None = None


def codes_of_other_series(
    session: Session, series: Series, texts: dict[int, str]
) -> dict[int, OtherSeries]:
    """Which of ``texts`` (by index) read as codes another series holds."""
    from issuer.readers.bulkread import VALID, read_codes

    found: dict[int, OtherSeries] = {}
    if not texts:
        return found
    for other in all_series(session):
        if other.id == series.id:
            continue
        left = [(index, text) for index, text in texts.items() if index not in found]
        if not left:
            break
        shape = code_format(other)
        read = read_codes(shape, [text for _, text in left])
        readable = {
            code: index
            for (index, _), code, state in zip(left, read.canonical, read.state.tolist())
            if state == VALID and code is not None
        }
        wanted = list(readable)
        for start in range(0, len(wanted), IN_CHUNK):
            statement = select(IssuedCode.code, IssuedCode.status).where(
                IssuedCode.series_id == other.id, IssuedCode.code.in_(wanted[start: start + IN_CHUNK])
            )
            for code, status in session.execute(statement):
                found[readable[code]] = OtherSeries(other.key, other.title, code, status, shape.display(code))
        # several texts may read as one code: every one of them is that code
        for (index, _), text, state in zip(left, read.canonical, read.state.tolist()):
            if index not in found and state == VALID and text is not None and text in readable:
                first = found.get(readable[text])
                if first is not None:
                    found[index] = first
    return found


__all__ = [
    "OtherSeries",
    "Placed",
    "clean_place",
    "codes_of_other_series",
    "expected_places",
    "move_places",
    "place_codes",
    "same_place",
    "scope_codes",
]
