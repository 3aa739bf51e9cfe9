"""Issuance: allocate base numbers, append check characters, store codes and the log
entry, all in one transaction — a batch is issued whole or not at all.

In-order series hand out ``start, start+1, ...``; the counter moves in the same
transaction as the codes, so a rolled-back batch leaves no hole. Scattered series
send the same counter through the series' keyed permutation (FF1 with cycle walking),
so numbers look random yet can never collide and exhaustion is known exactly.
Numbers brought in by import are skipped by both.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, cast

from sqlalchemy import Table, bindparam, insert, select, update
from sqlalchemy.orm import Session

from issuer import limits
from issuer.errors import Conflict, DuplicateRow, Exhausted, InvalidFormat
from issuer.register.bulk import CHUNK, CodeSink, IssuedChunk, check_room, store_bulk
from issuer.register.log import NewEntry, append_entry
from issuer.register.models import ISSUED, SCATTERED, Batch, IssuedCode, Series
from issuer.register.series import capacity, code_format, get_series, permutation, unknown_series
from issuer.register.store import Register

#: batches at least this large take the bulk path (:mod:`issuer.register.bulk`)
BULK_FROM = 64

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


def _bases_for(series: Any, counters: Sequence[int] | Any) -> list[int]:
    """Base numbers for counters, in order."""
    if series.mode == SCATTERED:
        scatter = permutation(series)
        if len(counters) >= BULK_FROM:
            import numpy as np

            return scatter.bases_for_counters(np.asarray(counters, dtype=np.int64)).tolist()  # type: ignore[no-any-return]
        return [scatter.base_for_counter(int(k)) for k in counters]
    start = series.range_start
    return [start + int(k) for k in counters]


def _taken(session: Session, series: Any, bases: Sequence[int]) -> set[int]:
    """Which of ``bases`` the series already holds (only imports can be among them)."""
    found: set[int] = set()
    for at in range(0, len(bases), 500):
        chunk = list(bases[at: at + 500])
        found.update(
            session.scalars(
                select(IssuedCode.base).where(
                    IssuedCode.series_id == series.id, IssuedCode.base.in_(chunk)
                )
            )
        )
    return found


def allocate(session: Session, series: Series, count: int) -> list[int]:
    """Take the next ``count`` free base numbers of a locked series and move its counter."""
    bases, counter = plan_allocation(session, series, count)
    series.next_counter = counter
    series.code_count += count
    return bases


def plan_allocation(session: Session, series: Any, count: int) -> tuple[list[int], int]:
    """The next ``count`` free base numbers of a locked series (an ORM object or a row)
    and where its counter goes next; changes nothing."""
    if count < 1:
        raise InvalidFormat("the count must be at least 1")
    left = capacity(series) - series.code_count
    if count > left:
        raise Exhausted(
            f"series {series.key} has {left} number{'s' if left != 1 else ''} left; "
            f"{count} asked for, nothing issued"
        )
    counter = series.next_counter
    if series.imported_count == 0:
        bases = _bases_for(series, range(counter, counter + count))
        counter += count
    else:
        bases = []
        while len(bases) < count:
            need = count - len(bases)
            window = range(counter, min(counter + need, capacity(series)))
            if not window:  # pragma: no cover - guarded by the capacity check above
                raise Exhausted(f"series {series.key} ran out of numbers")
            candidates = _bases_for(series, window)
            taken = _taken(session, series, candidates)
            bases.extend(base for base in candidates if base not in taken)
            counter = window.stop
    return bases, counter


def codes_digest(codes: Sequence[str]) -> str:
    """SHA-256 over a batch's codes, one per line: the log entry covers what was issued."""
    digest = hashlib.sha256()
    for code in codes:
        digest.update(code.encode("ascii"))
        digest.update(b"\n")
    return digest.hexdigest()


def store_codes(
    session: Session,
    register: Register,
    series: Series,
    batch: Batch,
    bases: Sequence[int],
    *,
    holder: str | None,
    note: str | None,
    replaces_id: int | None = None,
    progress: Progress | None = None,
) -> list[str]:
    """Insert the codes for ``bases``; returns their canonical texts in order."""
    shape = code_format(series)
    if len(bases) >= BULK_FROM:
        import numpy as np

        codes = shape.codes_for_bases(np.asarray(bases, dtype=np.int64))
    else:
        codes = [shape.code_for_base(base) for base in bases]
    at = register.clock()
    for start in range(0, len(codes), CHUNK):
        rows = [
            {
                "series_id": series.id,
                "code": code,
                "base": base,
                "status": ISSUED,
                "batch_id": batch.id,
                "holder": holder,
                "note": note,
                "issued_at": at,
                "issued_by": register.actor,
                "replaces_id": replaces_id,
                "print_count": 0,
            }
            for code, base in zip(codes[start: start + CHUNK], bases[start: start + CHUNK])
        ]
        session.execute(insert(IssuedCode), rows)
        if progress:
            progress(len(rows))
    return codes


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
        select(IssuedCode.holder, IssuedCode.note).where(IssuedCode.batch_id == batch.id)
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
        .where(IssuedCode.batch_id == batch.id)
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
) -> IssueResult:
    """Issue ``count`` codes from series ``key`` in one transaction.

    With ``request_id``, a retry of the same request returns the codes issued the
    first time instead of issuing new ones. Batches of :data:`BULK_FROM` codes or more
    go straight to the driver in chunks (:mod:`issuer.register.bulk`); with
    ``collect=False`` the result carries only the first and last code, and ``sink``
    (e.g. :class:`~issuer.register.bulk.CodesCsv`) receives every code as it is made.
    A bulk batch of a scattered series lists its codes in number order (they are all
    issued at one instant; see :func:`~issuer.register.bulk.allocate_chunks`).
    """
    limits.number("count", count)
    limits.text("holder", holder)
    limits.text("note", note)
    limits.text("request id", request_id)
    if request_id is not None and not request_id.strip():
        raise InvalidFormat("a request id cannot be empty")

    def work(session: Session) -> IssueResult:
        if sink is not None:
            sink.restart()
        if request_id is not None:
            replay = _replay(session, request_id, key, count, holder=holder, note=note, collect=collect, sink=sink)
            if replay is not None:
                return replay
        if count < BULK_FROM:
            return _issue_few(session, register, key, count, holder, note, request_id, sink)
        series = get_series(session, key, lock=True)
        at = register.clock()
        check_room(series, count)  # before the batch row exists
        batch = Batch(
            series_id=series.id,
            kind="issue",
            request_id=request_id,
            count=count,
            created_at=at,
            actor=register.actor,
        )
        session.add(batch)
        session.flush()
        shape = code_format(series)
        outcome = store_bulk(
            session, series=series, batch=batch, count=count, holder=holder, note=note,
            at=at, actor=register.actor, collect=collect, sink=sink, progress=progress,
        )  # fmt: skip
        assert outcome.first is not None and outcome.last is not None
        digest = outcome.digest.hexdigest()
        infos = [IssuedInfo(code, display, base, holder) for code, display, base in outcome.collected]
        first_code, last_code = outcome.first[0], outcome.last[0]
        head = IssuedInfo(first_code, shape.display(first_code), outcome.first[1], holder)
        tail = IssuedInfo(last_code, shape.display(last_code), outcome.last[1], holder)
        detail: dict[str, Any] = {
            "count": count,
            "first": first_code,
            "last": last_code,
            "codes_sha256": digest,
        }
        if request_id is not None:
            detail["request_id"] = request_id
        append_entry(
            session,
            NewEntry(
                action="issue",
                series_id=series.id,
                code=first_code if count == 1 else None,
                batch_id=batch.id,
                detail=detail,
            ),
            actor=register.actor,
            at=at,
        )
        protected = permutation(series).is_protected if series.mode == SCATTERED else None
        return IssueResult(
            batch.id, series.key, count, infos if collect else [], protected=protected,
            head=head, tail=tail,
        )  # fmt: skip

    if count < BULK_FROM and request_id is None and sink is None and register.backend == "sqlite":
        from issuer.register.sqlite_desk import issue_plain

        plain = issue_plain(register, key, count, holder=holder, note=note)
        if plain is not None:
            return plain
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


_SERIES = cast(Table, Series.__table__)
_BATCH = cast(Table, Batch.__table__)
_CODE = cast(Table, IssuedCode.__table__)
# Core statements built once: a counter issues one code at a time, so the path is lean
# FOR NO KEY UPDATE (key_share): a plain FOR UPDATE also blocks the key-share lock that a
# log entry's foreign key to the series takes, and deadlocks against a void or replace
# holding the log head (PostgreSQL); see series.get_series
_LOCK_SERIES = (
    select(_SERIES).where(_SERIES.c.key == bindparam("series_key")).with_for_update(key_share=True)
)
_MOVE_COUNTER = (
    update(_SERIES)
    .where(_SERIES.c.id == bindparam("series_id"))
    .values(next_counter=bindparam("counter"), code_count=_SERIES.c.code_count + bindparam("added"))
)
_INSERT_BATCH = _BATCH.insert()
_INSERT_CODE = _CODE.insert()


def issue_detail(codes: Sequence[str], request_id: str | None) -> dict[str, Any]:
    """What the log entry of a small batch says about it."""
    detail: dict[str, Any] = {
        "count": len(codes),
        "first": codes[0],
        "last": codes[-1],
        "codes_sha256": codes_digest(codes),
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
) -> IssueResult:
    """A small batch through Core statements on the session's connection: the same
    rows and log entry as the bulk path, with as few round trips as it takes."""
    connection = session.connection()
    found = connection.execute(_LOCK_SERIES, {"series_key": key}).one_or_none()
    if found is None:
        raise unknown_series(session, key)
    series = cast(Series, found)  # a row with the same fields, read without the ORM
    bases, counter = plan_allocation(session, series, count)
    at = register.clock()
    batch_id = connection.execute(
        _INSERT_BATCH,
        {"series_id": series.id, "kind": "issue", "request_id": request_id, "count": count,
         "created_at": at, "actor": register.actor},
    ).inserted_primary_key[0]  # type: ignore[index]  # fmt: skip
    shape = code_format(series)
    codes = [shape.code_for_base(base) for base in bases]
    connection.execute(
        _INSERT_CODE,
        [
            {"series_id": series.id, "code": code, "base": base, "status": ISSUED,
             "batch_id": batch_id, "holder": holder, "note": note, "issued_at": at,
             "issued_by": register.actor, "replaces_id": None, "print_count": 0}
            for code, base in zip(codes, bases)
        ],
    )  # fmt: skip
    connection.execute(_MOVE_COUNTER, {"series_id": series.id, "counter": counter, "added": count})
    append_entry(
        session,
        NewEntry(
            "issue", series.id, codes[0] if count == 1 else None, batch_id,
            issue_detail(codes, request_id),
        ),
        actor=register.actor,
        at=at,
    )
    infos = [IssuedInfo(code, shape.display(code), base, holder) for code, base in zip(codes, bases)]
    if sink is not None:
        sink.write(IssuedChunk(series.key, batch_id, shape, codes, list(bases), holder))
    protected = permutation(series).is_protected if series.mode == SCATTERED else None
    return IssueResult(batch_id, series.key, count, infos, protected=protected,
                       head=infos[0], tail=infos[-1])  # fmt: skip
