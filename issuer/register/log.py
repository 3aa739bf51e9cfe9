"""The hash-chained log.

Every entry's hash is SHA-256 over a canonical JSON of its content and the previous
entry's hash; entry ids are consecutive. Recomputing the chain shows the first entry
that was altered (its hash no longer matches), deleted (a gap in ids or a broken
link) or inserted (a link that does not follow) behind the tool's back. It does not
prove more than that: someone who can rewrite the whole chain *and* the head can hide
it, which is why :func:`head` exists — write the head hash down somewhere else.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Generator, Iterable, Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any, cast

from sqlalchemy import Table, bindparam, insert, select, text, update
from sqlalchemy.orm import Session

from issuer.register.driver import Prepared
from issuer.register.models import LogEntry, LogHead

GENESIS = "0" * 64


def timestamp_text(at: datetime) -> str:
    """The one textual form of a time that goes into a hash."""
    return at.strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def entry_hash(
    *,
    entry_id: int,
    at: datetime,
    actor: str,
    action: str,
    series_id: int | None,
    code: str | None,
    batch_id: int | None,
    detail: str,
    prev_hash: str,
    login: str | None = None,
) -> str:
    content: dict[str, Any] = {
        "id": entry_id,
        "at": timestamp_text(at),
        "actor": actor,
        "action": action,
        "series": series_id,
        "code": code,
        "batch": batch_id,
        "detail": detail,
        "prev": prev_hash,
    }
    if login is not None:  # PostgreSQL's append function records the login (SQLite has none)
        content["login"] = login
    data = json.dumps(content, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(data.encode("utf-8")).hexdigest()


@dataclass(frozen=True)
class NewEntry:
    """What a caller logs; the chain fields are filled in by :func:`append_entries`."""

    action: str
    series_id: int | None = None
    code: str | None = None
    batch_id: int | None = None
    detail: Mapping[str, Any] | None = None


#: the columns of an imported row that its import's log entry covers (later acts never change them)
IMPORTED_COLUMNS = ("issued_at", "issued_by")  # never holder text: the log keeps no personal data


def rows_digest(rows: Iterable[Sequence[Any]]) -> str:
    """SHA-256 over rows of plain values, one JSON line each, times as :func:`timestamp_text`:
    an import's log entry covers who holds what, with which note, since when and from whom."""
    digest = hashlib.sha256()
    for row in rows:
        values = [timestamp_text(v) if isinstance(v, datetime) else v for v in row]
        digest.update(json.dumps(values, ensure_ascii=False).encode("utf-8") + b"\n")
    return digest.hexdigest()


def detail_text(detail: Mapping[str, Any] | None) -> str:
    return json.dumps(dict(detail or {}), sort_keys=True, ensure_ascii=False, default=str)


_HEAD = cast(Table, LogHead.__table__)
_ENTRY = cast(Table, LogEntry.__table__)
_ENTRY_COLUMNS = ("id", "at", "actor", "action", "series_id", "code", "batch_id", "detail", "prev_hash", "hash")
# built and compiled once: appending runs on every act, so it stays lean
_LOCK_HEAD = Prepared(select(_HEAD.c.last_id, _HEAD.c.last_hash).where(_HEAD.c.id == 1).with_for_update())
_INSERT_ENTRY = Prepared(insert(_ENTRY).values({name: bindparam(name) for name in _ENTRY_COLUMNS}))
_MOVE_HEAD = Prepared(
    update(_HEAD)
    .where(_HEAD.c.id == 1)
    .values(last_id=bindparam("new_id"), last_hash=bindparam("new_hash"))
)


def chain_rows(
    entries: Iterable[NewEntry], *, actor: str, at: datetime, last_id: int, last_hash: str
) -> list[dict[str, Any]]:
    """The log rows for ``entries``, chained after the entry ``last_id``/``last_hash``."""
    rows: list[dict[str, Any]] = []
    for entry in entries:
        last_id += 1
        detail = detail_text(entry.detail)
        digest = entry_hash(
            entry_id=last_id,
            at=at,
            actor=actor,
            action=entry.action,
            series_id=entry.series_id,
            code=entry.code,
            batch_id=entry.batch_id,
            detail=detail,
            prev_hash=last_hash,
        )
        rows.append(
            {
                "id": last_id,
                "at": at,
                "actor": actor,
                "action": entry.action,
                "series_id": entry.series_id,
                "code": entry.code,
                "batch_id": entry.batch_id,
                "detail": detail,
                "prev_hash": last_hash,
                "hash": digest,
            }
        )
        last_hash = digest
    return rows


#: PostgreSQL: the one append path (SECURITY DEFINER, migration log_rights): it locks the head,
#: computes the hashes and records the login itself
_APPEND_FUNCTION = text("SELECT issuer_log_append(:at, :actor, :entries)")


def append_entries(
    session: Session, entries: Iterable[NewEntry], *, actor: str, at: datetime
) -> int:
    """Append entries to the chain inside the caller's transaction; returns how many.

    The one place where the log grows: every act appends through here. On PostgreSQL the
    database's own SECURITY DEFINER function appends (it locks the head, computes the hashes
    and records the login), so no role needs the right to write the log's tables. Otherwise
    the head row is locked first, so concurrent writers append one after another; then the entries go
    in (one statement) and the head moves (one more). Writes go straight to the
    session's connection (flush ORM objects they refer to first): an ORM object that
    the caller loaded from these tables would not see them.
    """
    connection = session.connection()
    if connection.dialect.name == "postgresql":
        payload = [
            {"action": e.action, "series": e.series_id, "code": e.code, "batch": e.batch_id,
             "detail": detail_text(e.detail)}
            for e in entries
        ]  # fmt: skip
        if not payload:
            return 0
        added = connection.execute(
            _APPEND_FUNCTION, {"at": at, "actor": actor, "entries": json.dumps(payload)}
        ).scalar_one()
        return int(added)
    found = _LOCK_HEAD.one(connection)
    assert found is not None, "the register has no log head (not created by its migrations?)"
    rows = chain_rows(entries, actor=actor, at=at, last_id=int(found[0]), last_hash=str(found[1]))
    if len(rows) == 1:
        _INSERT_ENTRY.rows(connection, rows[0])
    elif rows:
        _INSERT_ENTRY.many(connection, rows)
    if rows:
        _MOVE_HEAD.rows(connection, {"new_id": rows[-1]["id"], "new_hash": rows[-1]["hash"]})
    return len(rows)


def append_entry(session: Session, entry: NewEntry, *, actor: str, at: datetime) -> None:
    append_entries(session, [entry], actor=actor, at=at)


def head(session: Session) -> tuple[int, str]:
    """The newest entry's id and hash: the anchor to write down elsewhere."""
    row = session.execute(select(LogHead.last_id, LogHead.last_hash).where(LogHead.id == 1)).one()
    return int(row[0]), str(row[1])


@dataclass(frozen=True)
class ChainProblem:
    entry_id: int
    problem: str


@dataclass(frozen=True)
class ChainReport:
    entries: int
    head_id: int
    head_hash: str
    problem: ChainProblem | None

    @property
    def intact(self) -> bool:
        return self.problem is None


def _stream(session: Session) -> Generator[LogEntry, None, None]:
    statement = select(LogEntry).order_by(LogEntry.id).execution_options(yield_per=5000)
    result = session.scalars(statement)
    try:
        yield from result
    finally:
        result.close()  # PostgreSQL streams through a server-side cursor: close it early


def verify_chain(session: Session) -> ChainReport:
    """Recompute the chain from the start; report the first entry that does not fit."""
    expected_id, previous = 0, GENESIS
    count = 0
    problem: ChainProblem | None = None
    entries = _stream(session)
    for entry in entries:
        count += 1
        expected_id += 1
        if entry.id != expected_id:
            problem = ChainProblem(expected_id, f"entry {expected_id} is missing (next found: {entry.id})")
            break
        if entry.prev_hash != previous:
            problem = ChainProblem(entry.id, "does not link to the entry before it (inserted or reordered)")
            break
        recomputed = entry_hash(
            entry_id=entry.id,
            at=entry.at,
            actor=entry.actor,
            action=entry.action,
            series_id=entry.series_id,
            code=entry.code,
            batch_id=entry.batch_id,
            detail=entry.detail,
            prev_hash=entry.prev_hash,
            login=entry.login,
        )
        if recomputed != entry.hash:
            problem = ChainProblem(entry.id, "its content no longer matches its hash (altered)")
            break
        previous = entry.hash
    entries.close()
    head_id, head_hash = head(session)
    if problem is None and expected_id > head_id:
        problem = ChainProblem(
            head_id + 1, f"lies beyond the chain's head (#{head_id}): added behind the tool's back"
        )
    elif problem is None and expected_id < head_id:
        missing = f"{expected_id + 1}" if expected_id + 1 == head_id else f"{expected_id + 1}-{head_id}"
        problem = ChainProblem(expected_id + 1, f"entries {missing} are missing (removed at the end)")
    elif problem is None and head_hash != previous:
        problem = ChainProblem(head_id, "the chain's head does not match its last entry")
    return ChainReport(entries=count, head_id=head_id, head_hash=head_hash, problem=problem)
