"""Who holds a code: set, clear, find, erase, purge.

The holder and note are personal data. Every change is logged as an act on the code
(who, when, which code) but the log never carries the texts themselves, so erasing
them leaves the hash chain whole. What it carries is a digest of the code's texts
before and after the act, salted with 16 random bytes of the code's own
(:func:`~issuer.register.standing.text_digest`): the replay holds the row to it, and
erasure clears the salt with the texts, so the digests left in the log can no longer be
tied to any text. A replacement carries its predecessor's holder and note, so erasure
follows the replacement links and clears every copy.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any, cast

from sqlalchemy import Integer, Table, bindparam, or_, select
from sqlalchemy.orm import Session

from issuer.errors import Conflict, InvalidFormat
from issuer.register.lifecycle import find_code, require_reason, shown_code
from issuer.register.log import NewEntry, append_entries, append_entry
from issuer.register.models import VOIDED, IssuedCode, Series, StockCount
from issuer.register.series import code_format, get_series
from issuer.register.standing import (
    clean_text,
    new_salts,
    prefix_range,
    search_key,
    standing,
    text_digest,
)
from issuer.register.store import Register

#: rows a ``find`` returns unless asked for fewer
FIND_LIMIT = 50
#: codes erased per transaction in a purge (each its own log entry)
PURGE_CHUNK = 2000
#: what stands where an erased holder was named (a stock count's scope)
ERASED = "(erased)"


@dataclass(frozen=True)
class HolderChange:
    """What a holder act did to one code (the new texts, for the caller to show)."""

    code: str
    display: str
    series: str
    holder: str | None
    note: str | None
    action: str

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


def _change(session: Session, row: IssuedCode, action: str) -> HolderChange:
    series = session.get(Series, row.series_id)
    assert series is not None
    return HolderChange(row.code, code_format(series).display(row.code), series.key, row.holder, row.note, action)


_KEEP = object()


def _text_before(row: IssuedCode) -> dict[str, Any]:
    """The digest of what a code holds, for the entry of an act about to change it; nothing
    when it holds text without a salt (given before salts existed: the log never knew it)."""
    try:
        return {"text_before": text_digest(row.text_salt, row.holder, row.note)}
    except ValueError:
        return {}


def _text_after(row: IssuedCode) -> dict[str, Any]:
    """A fresh salt for the texts a code now holds (none when it holds none: the old
    digests are then beyond linking), and their digest for the act's entry."""
    has_text = row.holder is not None or row.note is not None
    row.text_salt = next(new_salts(1)) if has_text else None
    return {"text_after": text_digest(row.text_salt, row.holder, row.note)}


def set_holder(register: Register, text: str, holder: str | None, *, note: Any = _KEEP) -> HolderChange:
    """Give a code a holder (and, when ``note`` is passed, a note; ``None`` clears it).
    A voided code keeps what it had: its holder can only be erased."""
    who = clean_text(holder, what="holder")
    if who is None:
        raise InvalidFormat("give the holder's text (use 'holder clear' to remove it)")
    return _write_holder(register, text, who, note, "holder.set")


def clear_holder(register: Register, text: str) -> HolderChange:
    """Take the holder off a code (the note stays; erasure removes both)."""
    return _write_holder(register, text, None, _KEEP, "holder.clear")


def _write_holder(register: Register, text: str, holder: str | None, note: Any, action: str) -> HolderChange:
    new_note = None if note is _KEEP else clean_text(note, what="note")

    def work(session: Session) -> HolderChange:
        row = find_code(session, text, lock=True)
        if row.status == VOIDED:
            raise Conflict(f"{shown_code(session, row)} is voided: its holder can no longer change (erase it if it must go)")
        # the log says what changed, never to what: the texts stay out of the chain
        detail: dict[str, Any] = {"holder": "set" if holder is not None else "cleared", **_text_before(row)}
        if holder is not None and row.holder is not None:
            detail["holder"] = "changed"
        row.holder, row.holder_key = holder, search_key(holder)
        if note is not _KEEP:
            detail["note"] = "set" if new_note is not None else "cleared"
            row.note, row.note_key = new_note, search_key(new_note)
        detail.update(_text_after(row))
        append_entry(session, NewEntry(action, row.series_id, row.code, None, detail),
                     actor=register.actor, at=register.clock())  # fmt: skip
        session.flush()
        return _change(session, row, action)

    return register.write(work)


@dataclass(frozen=True)
class Found:
    """A code whose holder or note starts with the searched text."""

    code: str
    display: str
    series: str
    status: str
    holder: str | None
    note: str | None
    matched: str  # "holder" or "note"
    valid_until: datetime | None

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


_FOUND_COLUMNS = (
    IssuedCode.id, IssuedCode.code, IssuedCode.series_id, IssuedCode.status, IssuedCode.holder,
    IssuedCode.note, IssuedCode.valid_until, IssuedCode.holder_key,
)  # fmt: skip


def _find_statement(column: Any, in_series: bool) -> Any:
    """A prefix range on one search key, as plain rows; built once (a desk asks often)."""
    statement = select(*_FOUND_COLUMNS).where(column >= bindparam("low"), column < bindparam("high"))
    if in_series:
        statement = statement.where(IssuedCode.series_id == bindparam("series_id"))
    return statement.order_by(column, IssuedCode.id).limit(bindparam("limit", type_=Integer))


_SERIES = select(cast(Table, Series.__table__))
_FIND = (_find_statement(IssuedCode.holder_key, False), _find_statement(IssuedCode.note_key, False))
_FIND_IN_SERIES = (_find_statement(IssuedCode.holder_key, True), _find_statement(IssuedCode.note_key, True))


def find_holders(
    session: Session,
    text: str,
    *,
    series: str | None = None,
    limit: int = FIND_LIMIT,
    now: datetime | None = None,
) -> list[Found]:
    """Codes whose holder or note starts with ``text``, ignoring case, accents' forms
    and repeated spaces; holder matches first. Both searches are index ranges."""
    key = search_key(text)
    if key is None:
        raise InvalidFormat("give some text to look for")
    if limit < 1:
        raise InvalidFormat("the limit must be at least 1")
    low, high = prefix_range(key)
    series_id = get_series(session, series).id if series is not None else None
    values = {"low": low, "high": high if high is not None else low + "\U0010ffff", "limit": limit,
              "series_id": series_id}  # fmt: skip
    statements = _FIND_IN_SERIES if series_id is not None else _FIND
    by_id = {row.id: row for row in session.execute(statements[0], values)}
    for row in session.execute(statements[1], values):
        by_id.setdefault(row.id, row)
    rows = list(by_id.values())
    wanted = {row.series_id for row in rows}
    # series rows read as plain rows: code_format only reads their fields
    shapes = {s.id: (s.key, code_format(cast(Series, s))) for s in session.execute(_SERIES) if s.id in wanted}
    found = []
    for row in rows:
        key_of_series, shape = shapes[row.series_id]
        matched = "holder" if row.holder_key is not None and row.holder_key.startswith(key) else "note"
        found.append(Found(row.code, shape.display(row.code), key_of_series,
                           standing(row.status, row.valid_until, now), row.holder, row.note,
                           matched, row.valid_until))  # fmt: skip
    found.sort(key=lambda f: (f.matched != "holder", (f.holder or f.note or "").casefold(), f.code))
    return found[:limit]


# --- erasure ----------------------------------------------------------------------------


@dataclass(frozen=True)
class Erasure:
    """The codes whose holder and note were erased, and the reason logged."""

    codes: list[str]
    reason: str

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


def _linked(session: Session, row: IssuedCode) -> list[IssuedCode]:
    """The code and every code linked to it by replacement, either way, that carries a
    copy of its holder or note."""
    seen: dict[int, IssuedCode] = {row.id: row}
    todo = [row]
    while todo:
        current = todo.pop()
        for link in (current.replaces_id, current.replaced_by_id):
            if link is not None and link not in seen:
                other = session.get(IssuedCode, link, with_for_update={"key_share": True})
                assert other is not None
                seen[link] = other
                todo.append(other)
    texts = {t for t in (row.holder, row.note) if t}
    return [r for r in seen.values() if r is row or (texts & {r.holder, r.note})]


def _secure_sqlite(session: Session) -> None:
    """On SQLite, freed space is overwritten with zeros, so an erased text does not
    linger in the file's free pages."""
    if session.get_bind().dialect.name == "sqlite":
        session.connection().exec_driver_sql("PRAGMA secure_delete = ON")


def _erase_rows(session: Session, rows: Sequence[IssuedCode], at: datetime) -> dict[int, dict[str, Any]]:
    """Clear texts, keys and salt; per code id, the digests its entry logs (after: none)."""
    holders = {row.holder for row in rows if row.holder}
    logged = {}
    for row in rows:
        logged[row.id] = {**_text_before(row), "text_after": None}
        row.holder = row.note = row.holder_key = row.note_key = row.text_salt = None
        row.erased_at = at
    _erase_count_scopes(session, holders)
    return logged


def _erase_count_scopes(session: Session, holders: set[str]) -> None:
    """A stock count narrowed to a holder keeps the holder's text as its scope, and in its
    frozen result: both are overwritten when that holder is erased."""
    if not holders:
        return
    folded = {text.casefold() for text in holders}
    pattern = re.compile("|".join(re.escape(text) for text in sorted(holders, key=len, reverse=True)), re.IGNORECASE)
    for count in session.scalars(select(StockCount).where(StockCount.scope == "holder")):
        if count.scope_text is None or count.scope_text.casefold() not in folded:
            continue
        count.scope_text = ERASED
        if count.result:
            count.result = pattern.sub(ERASED, count.result)


def _checkpoint(register: Register) -> None:
    """Fold SQLite's write-ahead file back into the database and empty it, so the old
    page images (with the erased texts) leave the disk too; skipped while others read."""
    if register.backend != "sqlite":
        return
    from contextlib import closing

    with closing(register.engine.raw_connection()) as pooled:
        # outside any transaction: a checkpoint cannot pass a snapshot its own connection holds
        pooled.driver_connection.execute("PRAGMA wal_checkpoint(TRUNCATE)")  # type: ignore[union-attr]


def erase_holder(register: Register, text: str, *, reason: str) -> Erasure:
    """Remove holder and note from a code and from every code that carries a copy of
    them through replacement; the log records the act and the reason, not the texts."""
    why = clean_text(require_reason(reason), what="reason")
    assert why is not None

    def work(session: Session) -> Erasure:
        _secure_sqlite(session)
        row = find_code(session, text, lock=True)
        rows = _linked(session, row)
        texts = [t.casefold() for r in rows for t in (r.holder, r.note) if t]
        if any(t in why.casefold() for t in texts):
            raise InvalidFormat("the reason repeats the text being erased: say why without it")
        if not texts:
            raise Conflict(f"{shown_code(session, row)} holds no holder or note to erase")
        at = register.clock()
        logged = _erase_rows(session, rows, at)
        append_entries(
            session,
            [NewEntry("holder.erase", r.series_id, r.code, None,
                      {"reason": why, **logged[r.id]} if r is row
                      else {"reason": why, "copy_of": row.code, **logged[r.id]})
             for r in rows],
            actor=register.actor, at=at,
        )  # fmt: skip
        session.flush()
        return Erasure([r.code for r in rows], why)

    result = register.write(work)
    _checkpoint(register)
    return result


@dataclass(frozen=True)
class Purge:
    """A bulk erasure by age: which rule, how many codes (listed on a dry run)."""

    rule: str
    before: datetime
    count: int
    dry_run: bool
    codes: list[str]

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


def _purge_statement(rule: str, before: datetime) -> Any:
    carries = or_(IssuedCode.holder.is_not(None), IssuedCode.note.is_not(None))
    if rule == "voided-before":
        return select(IssuedCode.id).where(IssuedCode.status == VOIDED, IssuedCode.voided_at < before, carries)
    if rule == "expired-before":
        return select(IssuedCode.id).where(IssuedCode.valid_until < before, carries)
    raise InvalidFormat("purge by voided-before or expired-before")


def purge_holders(
    register: Register,
    *,
    voided_before: datetime | None = None,
    expired_before: datetime | None = None,
    dry_run: bool = False,
    progress: Callable[[int], None] | None = None,
) -> Purge:
    """Erase holder and note of every code voided, or expired, before a moment: the
    retention rule an organisation's policy sets. Each code gets its own log entry."""
    if (voided_before is None) == (expired_before is None):
        raise InvalidFormat("give exactly one of --voided-before and --expired-before")
    rule, before = ("voided-before", voided_before) if voided_before is not None else ("expired-before", expired_before)
    assert before is not None
    if before > register.clock() + timedelta(days=1):  # tomorrow's date means "so far"
        raise InvalidFormat(f"{rule} {before.date()} lies in the future: a typo? (nothing was erased)")
    statement = _purge_statement(rule, before)
    with register.reading() as session:
        ids = list(session.scalars(statement.order_by(IssuedCode.id)))
        codes = list(session.scalars(select(IssuedCode.code).where(IssuedCode.id.in_(ids[:FIND_LIMIT])))) if dry_run else []
    if dry_run:
        return Purge(rule, before, len(ids), True, sorted(codes))
    detail = {"reason": f"retention: {rule} {before.date().isoformat()}"}
    done = 0
    for start in range(0, len(ids), PURGE_CHUNK):
        chunk = ids[start: start + PURGE_CHUNK]

        def work(session: Session, chunk: list[int] = chunk) -> int:
            _secure_sqlite(session)
            # read again under lock: a code may have changed since the list was made
            locked = list(session.scalars(
                select(IssuedCode).where(IssuedCode.id.in_(chunk), IssuedCode.id.in_(statement))
                .with_for_update(key_share=True)
            ))  # fmt: skip
            at = register.clock()
            logged = _erase_rows(session, locked, at)
            append_entries(session, [NewEntry("holder.erase", r.series_id, r.code, None, {**detail, **logged[r.id]})
                                     for r in locked], actor=register.actor, at=at)  # fmt: skip
            return len(locked)

        done += register.write(work)
        if progress is not None:
            progress(len(chunk))
    if done:
        _checkpoint(register)
    return Purge(rule, before, done, False, [])


__all__ = [
    "Erasure",
    "Found",
    "HolderChange",
    "Purge",
    "clear_holder",
    "erase_holder",
    "find_holders",
    "purge_holders",
    "set_holder",
]
