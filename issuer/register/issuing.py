"""Issuance: a batch of codes and its log entry in one transaction — issued whole or
not at all.

Every issue, of one code or a million, takes the same steps (:mod:`issuer.register.allotment`):
claim the series' numbers, open the batch, write the codes, log the act. Only the
making of the codes differs with size: a few are made one by one, a large batch with
numpy a chunk at a time (:mod:`issuer.register.bulk`), written by the same statement.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from sqlalchemy import select, text
from sqlalchemy.exc import DBAPIError
from sqlalchemy.orm import Session

from issuer import limits
from issuer.errors import Conflict, DuplicateRow, InvalidFormat
from issuer.register.allotment import (
    BULK_FROM,
    claim_series,
    close_batch,
    codes_digest,
    open_batch,
    place_codes,
    settle_counter,
)
from issuer.register.bulk import CHUNK, CodeSink, IssuedChunk, store_bulk
from issuer.register.log import NewEntry, append_entry, validity_detail
from issuer.register.models import Batch, IssuedCode, Series, in_batch
from issuer.register.series import code_format
from issuer.register.standing import clean_text, validity_for
from issuer.register.store import Register

Progress = Callable[[int], None]


@dataclass(frozen=True)
class IssuedInfo:
    code: str
    display: str
    base: int
    holder: str | None = None

    def as_dict(self) -> dict[str, Any]:
        return {"code": self.code, "display": self.display, "base": self.base, "holder": self.holder}


@dataclass(frozen=True)
class IssueResult:
    """A batch. ``codes`` lists every code unless the caller asked not to collect them
    (a million :class:`IssuedInfo` are rarely wanted); ``first`` and ``last`` are
    always there."""

    batch: int
    series: str
    count: int
    codes: list[IssuedInfo] = field(repr=False)
    replayed: bool = False
    protected: bool | None = None
    head: IssuedInfo | None = None
    tail: IssuedInfo | None = None

    @property
    def first(self) -> IssuedInfo | None:
        return self.codes[0] if self.codes else self.head

    @property
    def last(self) -> IssuedInfo | None:
        return self.codes[-1] if self.codes else self.tail


def request_differences(
    was: tuple[str, int, str | None, str | None], now: tuple[str, int, str | None, str | None]
) -> list[str]:
    """How a retry differs from the request first sent under its id, field by field
    (series, count, holder, note): a replay must be the same request, or it is refused."""
    words = []
    for name, before, after in zip(("series", "count", "holder", "note"), was, now):
        if (before or None) != (after or None):
            shown = [repr(value) if isinstance(value, str) else str(value) for value in (before, after)]
            words.append(f"{name} was {shown[0] if before is not None else 'not given'}, "
                         f"now {shown[1] if after is not None else 'not given'}")
    return words


def _replay(
    session: Session,
    request_id: str,
    key: str,
    count: int,
    *,
    holder: str | None = None,
    note: str | None = None,
    collect: bool = True,
    sink: CodeSink | None = None,
) -> IssueResult | None:
    batch = session.scalar(select(Batch).where(Batch.request_id == request_id))
    if batch is None:
        return None
    series = session.get(Series, batch.series_id)
    assert series is not None
    first = session.execute(
        select(IssuedCode.holder, IssuedCode.note).where(in_batch(batch.id))
        .order_by(IssuedCode.id).limit(1)
    ).first()
    was = (series.key, batch.count, *(first or (None, None)))
    differences = request_differences(was, (key, count, holder, note))
    if differences:
        raise Conflict(
            f"request id {request_id!r} was used for a different request ({'; '.join(differences)}): "
            "nothing was issued; use a new id for a new request"
        )
    shape = code_format(series)
    rows = session.execute(
        select(IssuedCode.code, IssuedCode.base, IssuedCode.holder)
        .where(in_batch(batch.id))
        .order_by(IssuedCode.id)
        .execution_options(yield_per=CHUNK)
    )
    codes: list[IssuedInfo] = []
    head = tail = None
    for part in rows.partitions():
        chunk = IssuedChunk(
            series.key, batch.id, shape, [r[0] for r in part], [r[1] for r in part], part[0][2]
        )
        displays = chunk.displays()
        if head is None:
            head = IssuedInfo(chunk.codes[0], displays[0], chunk.bases[0], part[0][2])
        tail = IssuedInfo(chunk.codes[-1], displays[-1], chunk.bases[-1], part[-1][2])
        if collect:
            codes.extend(
                IssuedInfo(code, display, base, row[2])
                for code, display, base, row in zip(chunk.codes, displays, chunk.bases, part)
            )
        if sink is not None:
            sink.write(chunk)
    return IssueResult(batch.id, series.key, batch.count, codes, replayed=True, head=head, tail=tail)


def _durable_like_an_issue(session: Session) -> None:
    """Make a replay's COMMIT wait as an issue's does. On PostgreSQL a transaction that
    writes no WAL commits without waiting for a synchronous standby, so a replay could
    hand out codes whose first commit is on the primary alone (its wait was cancelled, or
    its session ended before the standby confirmed). A transactional message in the WAL
    (read only by logical decoding, which may ignore it) makes this COMMIT wait for the
    standby to confirm it, and with it everything before it in the WAL. An engine
    without the function replays without the wait."""
    if session.get_bind().dialect.name != "postgresql":
        return
    try:
        with session.begin_nested():
            session.execute(text("SELECT pg_logical_emit_message(true, 'issuer', 'replay')"))
    except DBAPIError:
        pass


def issue_codes(
    register: Register,
    key: str,
    count: int = 1,
    *,
    holder: str | None = None,
    note: str | None = None,
    request_id: str | None = None,
    progress: Progress | None = None,
    collect: bool = True,
    sink: CodeSink | None = None,
    valid_until: datetime | None = None,
) -> IssueResult:
    """Issue ``count`` codes from series ``key`` in one transaction.

    With ``request_id``, a retry of the same request returns the codes issued the
    first time instead of issuing new ones. Batches of :data:`BULK_FROM` codes or more
    go straight to the driver in chunks (:mod:`issuer.register.bulk`); with
    ``collect=False`` the result carries only the first and last code, and ``sink``
    (e.g. :class:`~issuer.register.bulk.CodesCsv`) receives every code as it is made.
    A bulk batch of a scattered series lists its codes in number order (they are all
    issued at one instant; see :func:`~issuer.register.bulk.allocate_chunks`).
    ``valid_until`` ends the codes' validity; without it the series' default period
    (if any) runs from the moment of issue.
    """
    limits.text("series key", key)  # the claim finds the series by key in the database's own statement
    limits.number("count", count)
    limits.text("request id", request_id)
    holder = clean_text(holder, what="holder")
    note = clean_text(note, what="note")
    if valid_until is not None and valid_until <= register.clock():
        raise InvalidFormat("--valid-until has passed already: a code cannot be issued expired")
    if request_id is not None and not request_id.strip():
        raise InvalidFormat("a request id cannot be empty")

    def work(session: Session) -> IssueResult:
        if sink is not None:
            sink.restart()
        if request_id is not None:
            replay = _replay(session, request_id, key, count, holder=holder, note=note, collect=collect, sink=sink)
            if replay is not None:
                _durable_like_an_issue(session)
                return replay
        if count < BULK_FROM:
            return _issue_few(session, register, key, count, holder, note, request_id, sink, valid_until)
        return _issue_many(
            session, register, key, count, holder, note, request_id, collect, sink, progress, valid_until
        )

    try:
        return register.write(work)
    except DuplicateRow:
        # two desks sent the same request id at once: the other one won; replay it
        if request_id is None:
            raise
        with register.reading() as session:
            if sink is not None:
                sink.restart()
            replay = _replay(session, request_id, key, count, holder=holder, note=note, collect=collect, sink=sink)
        if replay is None:
            raise
        return replay


def issue_detail(
    codes: Sequence[str],
    request_id: str | None,
    holder: str | None = None,
    note: str | None = None,
    valid_until: datetime | None = None,
    texts: dict[str, Any] | None = None,
) -> dict[str, Any]:
    """What the log entry of a small batch says about it (never holder text: the log keeps
    no personal data)."""
    detail: dict[str, Any] = {
        "count": len(codes),
        "first": codes[0],
        "last": codes[-1],
        "codes_sha256": codes_digest(codes),
        "valid_until": validity_detail(valid_until),
        "texts": texts,
    }
    if request_id is not None:
        detail["request_id"] = request_id
    return detail


def _issue_few(
    session: Session,
    register: Register,
    key: str,
    count: int,
    holder: str | None,
    note: str | None,
    request_id: str | None,
    sink: CodeSink | None,
    valid_until: datetime | None = None,
) -> IssueResult:
    """A small batch: claim, batch row, codes (:func:`~issuer.register.allotment.place_codes`)
    and the log entry."""
    at = register.clock()
    placed = place_codes(
        session, key=key, count=count, kind="issue", at=at, actor=register.actor,
        request_id=request_id, holder=holder, note=note, valid_until=valid_until, last_writes=True,
    )  # fmt: skip
    series, batch_id, codes, bases = placed.series, placed.batch_id, placed.codes, placed.bases
    append_entry(
        session,
        NewEntry("issue", series.id, codes[0] if count == 1 else None, batch_id,
                 issue_detail(codes, request_id, holder, note, placed.valid_until, placed.texts)),
        actor=register.actor,
        at=at,
    )  # fmt: skip
    shape = code_format(series.as_series)
    infos = [IssuedInfo(code, shape.display(code), base, holder) for code, base in zip(codes, bases)]
    if sink is not None:
        sink.write(IssuedChunk(series.key, batch_id, shape, codes, list(bases), holder))
    return IssueResult(batch_id, series.key, count, infos, protected=series.protected,
                       head=infos[0], tail=infos[-1])  # fmt: skip


def _issue_many(
    session: Session,
    register: Register,
    key: str,
    count: int,
    holder: str | None,
    note: str | None,
    request_id: str | None,
    collect: bool,
    sink: CodeSink | None,
    progress: Progress | None,
    valid_until: datetime | None = None,
) -> IssueResult:
    """A large batch: the same claim, batch row, code statement and log entry as a
    small one; the codes are made with numpy and written a chunk at a time."""
    connection = session.connection()
    series = claim_series(session, count, key=key)
    start = series.next_counter
    at = register.clock()
    batch_id = open_batch(
        connection, series, kind="issue", count=count, request_id=request_id, at=at, actor=register.actor
    )
    shape = code_format(series.as_series)
    until = validity_for(series.valid_for_days, at, valid_until)
    outcome = store_bulk(
        session, series=series.as_series, batch_id=batch_id, count=count, holder=holder, note=note,
        at=at, actor=register.actor, collect=collect, sink=sink, progress=progress, valid_until=until,
    )  # fmt: skip
    close_batch(connection, batch_id)
    drawn_to = series.next_counter  # drawing moves the counters on as it goes
    series.next_counter, series.code_count = start, series.code_count - count
    settle_counter(connection, series, count, drawn_to)
    assert outcome.first is not None and outcome.last is not None
    infos = [IssuedInfo(code, display, base, holder) for code, display, base in outcome.collected]
    first_code, last_code = outcome.first[0], outcome.last[0]
    detail: dict[str, Any] = {
        "count": count,
        "first": first_code,
        "last": last_code,
        "codes_sha256": outcome.digest.hexdigest(),
        "valid_until": validity_detail(until),
        "texts": outcome.texts.detail(),
    }
    if request_id is not None:
        detail["request_id"] = request_id
    append_entry(
        session,
        NewEntry("issue", series.id, first_code if count == 1 else None, batch_id, detail),
        actor=register.actor,
        at=at,
    )
    head = IssuedInfo(first_code, shape.display(first_code), outcome.first[1], holder)
    tail = IssuedInfo(last_code, shape.display(last_code), outcome.last[1], holder)
    return IssueResult(
        batch_id, series.key, count, infos if collect else [], protected=series.protected,
        head=head, tail=tail,
    )  # fmt: skip


__all__ = ["BULK_FROM", "IssueResult", "IssuedInfo", "codes_digest", "issue_codes", "issue_detail"]
