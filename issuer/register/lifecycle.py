"""Void, replace, restore, and the history of a code.

Rows are never deleted and counters never move back, so a voided code can come back
only through :func:`restore_code` — never through issuance.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import or_, select, union_all
from sqlalchemy.orm import Session

from issuer import limits
from issuer.checking.reading import Read, Reading, read_code, shown
from issuer.errors import Conflict, InvalidCheck, InvalidFormat, NotFound
from issuer.register.allotment import place_codes
from issuer.register.log import NewEntry, append_entry, validity_detail
from issuer.register.models import ISSUED, VOIDED, Batch, IssuedCode, LogEntry, Series, series_arms
from issuer.register.series import all_series, code_format, unknown_series
from issuer.register.standing import standing
from issuer.register.store import Register


def require_reason(reason: str | None) -> str:
    text = (limits.text("reason", reason) or "").strip()
    if not text:
        raise InvalidFormat("a reason is required (say why, for the log)")
    return text


def read_typed(session: Session, text: str, *, series: str | None = None) -> tuple[list[tuple[Series, Reading]], Read]:
    """Each series ``text`` reads as a code of (by :func:`issuer.checking.reading.read_code`),
    with that reading; and the whole reading, for its problem when there is none."""
    known = {one.key: one for one in all_series(session)}
    read = read_code([(key, code_format(one)) for key, one in known.items()], text, series=series)
    return [(known[r.series], r) for r in read.readings], read


def find_code(session: Session, text: str, *, lock: bool = False, series: str | None = None) -> IssuedCode:
    """The stored code a typed text names; raise when it names none. With ``series``, a
    code of another series is refused, naming the series it belongs to."""
    candidates, read = read_typed(session, text, series=series)
    if not candidates:
        if read.other_series is not None:
            raise InvalidFormat(read.problem)
        raise InvalidFormat(f"{shown(text)} does not have the shape of a code ({read.problem or 'empty'})")
    statement = select(IssuedCode).where(IssuedCode.code.in_([r.canonical for _, r in candidates]))
    if lock:
        # NO KEY UPDATE, like the series lock: rows referring to this one must not wait
        statement = statement.with_for_update(key_share=True).execution_options(
            populate_existing=True
        )
    row = session.scalars(statement).first()
    if row is None:
        first = candidates[0][1]
        if read.ambiguous:
            raise InvalidFormat(f"{shown(text)}: {read.problem}")
        if not any(r.valid for _, r in candidates):
            raise InvalidCheck(f"{first.display}: the check character does not match (a typo?)")
        raise NotFound(f"{first.display} was never issued by this register")
    return row


@dataclass(frozen=True)
class CodeRecord:
    """A stored code, for display."""

    code: str
    display: str
    series: str
    status: str
    base: int
    holder: str | None
    note: str | None
    issued_at: datetime
    issued_by: str
    batch: int
    void_reason: str | None
    voided_at: datetime | None
    replaces: str | None
    replaced_by: str | None
    print_count: int
    last_seen_at: datetime | None
    last_seen_where: str | None
    valid_until: datetime | None = None
    suspended_at: datetime | None = None
    suspended_by: str | None = None
    suspend_reason: str | None = None
    erased_at: datetime | None = None
    #: the status as it answers at the time asked: ``expired`` past validity
    standing: str = ""
    #: where the item belongs (``issuer place``)
    expected_where: str | None = None
    #: the linked codes in display form
    replaces_display: str | None = None
    replaced_by_display: str | None = None

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


def code_record(session: Session, row: IssuedCode, now: datetime | None = None) -> CodeRecord:
    series = session.get(Series, row.series_id)
    batch = session.get(Batch, row.batch_id)
    assert series is not None and batch is not None

    def code_of(row_id: int | None) -> str | None:
        if row_id is None:
            return None
        return session.scalar(select(IssuedCode.code).where(IssuedCode.id == row_id))

    shape = code_format(series)

    def in_display(code: str | None) -> str | None:
        return shape.display(code) if code is not None else None

    replaces, replaced_by = code_of(row.replaces_id), code_of(row.replaced_by_id)

    return CodeRecord(
        code=row.code,
        display=shape.display(row.code),
        series=series.key,
        status=row.status,
        base=row.base,
        holder=row.holder,
        note=row.note,
        issued_at=row.origin_at or batch.created_at,  # the batch says, unless an import brought its own
        issued_by=row.origin_by or batch.actor,
        batch=row.batch_id,
        void_reason=row.void_reason,
        voided_at=row.voided_at,
        replaces=replaces,
        replaced_by=replaced_by,
        print_count=row.print_count,
        last_seen_at=row.last_seen_at,
        last_seen_where=row.last_seen_where,
        valid_until=row.valid_until,
        suspended_at=row.suspended_at,
        suspended_by=row.suspended_by,
        suspend_reason=row.suspend_reason,
        erased_at=row.erased_at,
        standing=standing(row.status, row.valid_until, now),
        expected_where=row.expected_where,
        replaces_display=in_display(replaces),
        replaced_by_display=in_display(replaced_by),
    )


def shown_code(session: Session, row: IssuedCode) -> str:
    """A stored code in the form people read (every message names a code this way)."""
    series = session.get(Series, row.series_id)
    return code_format(series).display(row.code) if series is not None else row.code


_display = shown_code


def _void(session: Session, register: Register, row: IssuedCode, reason: str, at: datetime) -> None:
    if row.status == VOIDED:
        raise Conflict(f"{_display(session, row)} is voided already ({row.void_reason})")
    row.status = VOIDED
    row.void_reason = reason
    row.voided_at = at
    row.voided_by = register.actor


def void_code(register: Register, text: str, *, reason: str) -> CodeRecord:
    """Void an issued code. It stays in the register and is never issued again."""
    why = require_reason(reason)

    def work(session: Session) -> CodeRecord:
        row = find_code(session, text, lock=True)
        at = register.clock()
        _void(session, register, row, why, at)
        append_entry(
            session,
            NewEntry("void", row.series_id, row.code, None, {"reason": why}),
            actor=register.actor,
            at=at,
        )
        session.flush()
        return code_record(session, row)

    return register.write(work)


@dataclass(frozen=True)
class Replacement:
    code: str
    display: str
    replaces: str
    batch: int
    replaces_display: str = ""


def replace_code(register: Register, text: str, *, reason: str) -> Replacement:
    """Void a code and issue its replacement from the same series, linked both ways."""
    why = require_reason(reason)

    def work(session: Session) -> Replacement:
        old = find_code(session, text, lock=True)
        at = register.clock()
        _void(session, register, old, why, at)
        placed = place_codes(
            session, series_id=old.series_id, count=1, kind="replace", at=at, actor=register.actor,
            holder=old.holder, note=old.note, replaces_id=old.id, valid_until=old.valid_until, keep_until=True,
        )  # fmt: skip
        series, (new_code,) = placed.series, placed.codes
        new_id = session.scalar(select(IssuedCode.id).where(IssuedCode.code == new_code))
        old.replaced_by_id = new_id
        append_entry(
            session,
            NewEntry("void", series.id, old.code, None, {"reason": why, "replaced_by": new_code}),
            actor=register.actor,
            at=at,
        )
        append_entry(
            session,
            NewEntry("replace", series.id, new_code, placed.batch_id,
                     {"reason": why, "replaces": old.code, "valid_until": validity_detail(placed.valid_until),
                      "texts": placed.texts}),
            actor=register.actor,
            at=at,
        )
        session.flush()
        shape = code_format(series.as_series)
        return Replacement(new_code, shape.display(new_code), old.code, placed.batch_id, shape.display(old.code))

    return register.write(work)


def restore_code(register: Register, text: str, *, reason: str) -> CodeRecord:
    """Undo a mistaken void. A code that was replaced cannot come back while its
    replacement is in use: void the replacement first."""
    why = require_reason(reason)

    def work(session: Session) -> CodeRecord:
        row = find_code(session, text, lock=True)
        if row.status != VOIDED:
            raise Conflict(f"{_display(session, row)} is not voided")
        if row.replaced_by_id is not None:
            replacement = session.get(IssuedCode, row.replaced_by_id)
            assert replacement is not None
            if replacement.status != VOIDED:
                raise Conflict(
                    f"{_display(session, row)} was replaced by {_display(session, replacement)}; void that first"
                )
        at = register.clock()
        previous = row.void_reason
        row.status = ISSUED
        row.void_reason = None
        row.voided_at = None
        row.voided_by = None
        row.suspended_at = row.suspended_by = row.suspend_reason = None
        append_entry(
            session,
            NewEntry("restore", row.series_id, row.code, None, {"reason": why, "void_reason": previous}),
            actor=register.actor,
            at=at,
        )
        session.flush()
        return code_record(session, row)

    return register.write(work)


@dataclass(frozen=True)
class Event:
    id: int
    at: datetime
    actor: str
    action: str
    series: str | None
    code: str | None
    batch: int | None
    detail: str
    #: the code in display form, and the detail with its codes in display form (for people)
    display: str | None = None
    shown_detail: str = "{}"

    def as_dict(self) -> dict[str, Any]:
        import json

        data = dict(self.__dict__)
        data["detail"] = json.loads(self.detail)
        del data["shown_detail"]
        return data


#: detail fields that hold a canonical code, shown in display form to people
CODE_FIELDS = ("replaces", "replaced_by", "first", "last")


def _events(session: Session, statement: Any) -> list[Event]:
    import json

    known = {series.id: series for series in all_series(session)}
    shapes = {series_id: code_format(series) for series_id, series in known.items()}
    events = []
    for e in session.scalars(statement):
        shape = shapes.get(e.series_id) if e.series_id else None
        display = shape.display(e.code) if shape is not None and e.code else e.code
        shown = e.detail
        if shape is not None and any(f'"{name}"' in e.detail for name in CODE_FIELDS):
            data = json.loads(e.detail)
            for name in CODE_FIELDS:
                if isinstance(data.get(name), str):
                    data[name] = shape.display(data[name])
            shown = json.dumps(data)
        key = known[e.series_id].key if e.series_id in known else None
        events.append(Event(e.id, e.at, e.actor, e.action, key, e.code, e.batch_id, e.detail, display, shown))
    return events


def code_history(
    session: Session, text: str, now: datetime | None = None
) -> tuple[CodeRecord, list[Event]]:
    """A code's record (standing at ``now``) and every logged event that concerns it,
    oldest first."""
    row = find_code(session, text)
    statement = (
        select(LogEntry)
        .where(
            or_(
                LogEntry.code == row.code,
                (LogEntry.batch_id == row.batch_id) & LogEntry.action.in_(("issue", "import")),
            )
        )
        .order_by(LogEntry.id)
    )
    return code_record(session, row, now), _events(session, statement)


def log_entries(
    session: Session,
    *,
    series: str | None = None,
    actor: str | None = None,
    since: datetime | None = None,
    limit: int | None = None,
) -> list[Event]:
    """Logged events, oldest first, filtered."""
    filters = []
    arms: tuple[Any, ...] = ()
    if series is not None:
        series_id = session.scalar(select(Series.id).where(Series.key == limits.text("series key", series)))
        if series_id is None:
            raise unknown_series(session, series)
        arms = series_arms(series_id)
    if actor is not None:
        filters.append(LogEntry.actor == limits.text("actor", actor))
    if since is not None:
        filters.append(LogEntry.at >= limits.moment("since", since))
    if limit is None:
        if arms:
            filters.append(or_(*arms))
        return _events(session, select(LogEntry).where(*filters).order_by(LogEntry.id))
    limits.number("entries", limit)
    statement = select(LogEntry).where(*filters).order_by(LogEntry.id.desc()).limit(limit)
    if arms:  # the newest of each part, each read backwards along its own index, then of both
        newest = [
            select(LogEntry.id).where(arm, *filters).order_by(LogEntry.id.desc()).limit(limit).subquery()
            for arm in arms
        ]
        statement = statement.where(LogEntry.id.in_(union_all(*(select(part.c.id) for part in newest))))
    return list(reversed(_events(session, statement)))
