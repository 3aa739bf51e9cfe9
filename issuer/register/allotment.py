"""Drawing numbers from a series and writing them down: the statements every issue runs.

Issuing a batch of any size, and replacing a code, take the same steps in one
transaction: claim the series' next numbers (the lock and the counter move are one
``UPDATE … RETURNING``), open the batch row (``INSERT … RETURNING id``), write the
code rows (one ``executemany``), and — only when imported numbers had to be skipped —
settle the counter where drawing ended. The statements are built and compiled once
(:class:`~issuer.register.driver.Prepared`); the two backends run the same ones.

In-order series hand out ``start, start+1, ...``; scattered series send the same
counter through the series' keyed permutation (FF1 with cycle walking), so numbers
look random yet can never collide and exhaustion is known exactly. Numbers brought in
by import are skipped by both.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any, cast

from sqlalchemy import Connection, Table, bindparam, func, insert, select, update
from sqlalchemy.orm import Session

from issuer.errors import Exhausted, InvalidFormat, NotFound
from issuer.register.bulk import check_room
from issuer.register.coderows import write_codes
from issuer.register.driver import Prepared, leave_pipeline, pipeline_to_commit
from issuer.register.models import SCATTERED, Batch, IssuedCode, Series
from issuer.register.sealing import keyring_of
from issuer.register.series import (
    capacity,
    code_format,
    permutation,
    scatter_protected,
    unknown_series,
)
from issuer.register.standing import BatchTexts, search_key, validity_for

#: batches at least this large make their numbers with numpy, chunk by chunk
BULK_FROM = 64

_SERIES = cast(Table, Series.__table__)
_BATCH = cast(Table, Batch.__table__)
_CODE = cast(Table, IssuedCode.__table__)

#: what a claim returns of the series row: its shape and counters (all plain values)
SERIES_FIELDS = (
    "id", "key", "scheme", "alphabet", "length", "prefix", "suffix", "grouping", "separator",
    "mode", "range_start", "range_end", "next_counter", "code_count", "imported_count", "scatter_key",
    "valid_for_days",
)  # fmt: skip
BATCH_COLUMNS = ("series_id", "kind", "request_id", "count", "created_at", "actor")


def _claim(where: Any) -> Prepared:
    # an UPDATE takes the row lock a FOR NO KEY UPDATE would (PostgreSQL): a log entry's
    # key-share lock through its foreign key to the series is never blocked by it
    return Prepared(
        update(_SERIES)
        .where(where)
        .values(
            next_counter=_SERIES.c.next_counter + bindparam("count"),
            code_count=_SERIES.c.code_count + bindparam("count"),
        )
        .returning(*(_SERIES.c[name] for name in SERIES_FIELDS))
    )


_CLAIM_BY_KEY = _claim(_SERIES.c.key == bindparam("series_key"))
_CLAIM_BY_ID = _claim(_SERIES.c.id == bindparam("series_id"))
_SETTLE_COUNTER = Prepared(
    update(_SERIES).where(_SERIES.c.id == bindparam("series_id")).values(next_counter=bindparam("counter"))
)
#: where a new batch's codes begin: above every code id there is now (on SQLite exactly
#: the first id its codes get; on PostgreSQL a bound, the sequence having moved on maybe)
NEXT_CODE_ID = select(func.coalesce(func.max(_CODE.c.id), 0) + 1).scalar_subquery()
_INSERT_BATCH = Prepared(
    insert(_BATCH)
    .values({**{name: bindparam(name) for name in BATCH_COLUMNS}, "code_id_from": NEXT_CODE_ID})
    .returning(_BATCH.c.id)
)
#: the same batch row, its series found by key: it goes out with the claim (one round trip
#: in a pipeline), and writes nothing when the key names no series
_INSERT_BATCH_BY_KEY = Prepared(
    insert(_BATCH)
    .from_select(
        [*BATCH_COLUMNS, "code_id_from"],
        select(
            _SERIES.c.id, *(bindparam(name, type_=_BATCH.c[name].type) for name in BATCH_COLUMNS[1:]), NEXT_CODE_ID
        ).where(_SERIES.c.key == bindparam("series_key")),
    )
    .returning(_BATCH.c.id)
)
#: where its codes end, once they are written: the highest code id this transaction sees
_CLOSE_BATCH = Prepared(
    update(_BATCH)
    .where(_BATCH.c.id == bindparam("batch_id"))
    .values(code_id_to=select(func.max(_CODE.c.id)).scalar_subquery())
)


@dataclass
class ClaimedSeries:
    """A series row as it stood before this transaction's claim (the claim has already
    moved the stored counters by the batch size)."""

    id: int
    key: str
    scheme: str
    alphabet: str
    length: int
    prefix: str
    suffix: str
    grouping: str
    separator: str
    mode: str
    range_start: int
    range_end: int
    next_counter: int
    code_count: int
    imported_count: int
    scatter_key: bytes | None
    #: how long a new code stays valid, in days (None: no end)
    valid_for_days: int | None = None
    #: a scattered series' FF1 key, opened with the register's key file at the claim
    opened_key: bytes | None = None

    @property
    def as_series(self) -> Series:
        """For the helpers that read a series' shape (same attribute names)."""
        return cast(Series, self)

    @property
    def protected(self) -> bool | None:
        """Whether a scattered series' permutation has its full strength (None: in order)."""
        return scatter_protected(self.as_series) if self.mode == SCATTERED else None


def claim_series(
    session: Session, count: int, *, key: str | None = None, series_id: int | None = None
) -> ClaimedSeries:
    """Lock a series and move its counters by ``count`` in one statement; refuse (the
    transaction then rolls back) when fewer than ``count`` numbers are left."""
    _check_count(count)
    connection = session.connection()
    if key is not None:
        row = _CLAIM_BY_KEY.one(connection, {"series_key": key, "count": count})
    else:
        row = _CLAIM_BY_ID.one(connection, {"series_id": series_id, "count": count})
    return _claimed(session, row, count, key=key, series_id=series_id)


def _check_count(count: int) -> None:
    if count < 1:
        raise InvalidFormat("the count must be at least 1")


def _claimed(
    session: Session, row: Any, count: int, *, key: str | None, series_id: int | None
) -> ClaimedSeries:
    """The claimed series from the claim's row (None: no such series)."""
    if row is None:
        leave_pipeline(session)  # the refusal reads the series' names through the ORM
        if key is not None:
            raise unknown_series(session, key)
        raise NotFound(f"no series #{series_id} in this register")
    series = ClaimedSeries(*row)
    series.next_counter -= count
    series.code_count -= count
    if series.scatter_key is not None:
        series.scatter_key = bytes(series.scatter_key)
        series.opened_key = keyring_of(session).open(series.key, series.scatter_key)
    check_room(series.as_series, count)
    return series


def settle_counter(connection: Connection, series: ClaimedSeries, count: int, counter: int) -> None:
    """Put the counter where drawing ended, when skipping imported numbers took it past
    the claim (the claim moved it by exactly ``count``)."""
    if counter != series.next_counter + count:
        _SETTLE_COUNTER.rows(connection, {"series_id": series.id, "counter": counter})


def close_batch(connection: Connection, batch_id: int) -> None:
    """Record where the batch's codes end (after they are all written, in the same
    transaction): with ``code_id_from`` the id range a reader finds them by."""
    _CLOSE_BATCH.rows(connection, {"batch_id": batch_id})


def open_batch(
    connection: Connection,
    series: ClaimedSeries,
    *,
    kind: str,
    count: int,
    request_id: str | None,
    at: datetime,
    actor: str,
) -> int:
    """Write the batch row (it records where its codes' ids begin); its id."""
    row = _INSERT_BATCH.one(
        connection,
        {"series_id": series.id, "kind": kind, "request_id": request_id, "count": count,
         "created_at": at, "actor": actor},
    )  # fmt: skip
    assert row is not None
    return int(row[0])


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


def plan_allocation(session: Session, series: Any, count: int) -> tuple[list[int], int]:
    """The next ``count`` free base numbers of a claimed series (as it stood before the
    claim, which checked the room) and where its counter goes next; changes nothing."""
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


@dataclass(frozen=True)
class Placed:
    """A small batch written down: its series (as claimed), batch row and codes."""

    series: ClaimedSeries
    batch_id: int
    codes: list[str]
    bases: list[int]
    #: the end of validity the codes were given (the series' period, an explicit end, or none)
    valid_until: datetime | None = None
    #: what the log records of the holder and note texts they were given (BatchTexts.detail)
    texts: dict[str, Any] | None = None


def place_codes(
    session: Session,
    *,
    count: int,
    kind: str,
    at: datetime,
    actor: str,
    key: str | None = None,
    series_id: int | None = None,
    request_id: str | None = None,
    holder: str | None = None,
    note: str | None = None,
    replaces_id: int | None = None,
    valid_until: datetime | None = None,
    keep_until: bool = False,
    last_writes: bool = False,
) -> Placed:
    """Claim, open the batch and write ``count`` codes (fewer than :data:`BULK_FROM`);
    the caller logs the act. Four statements when no imported number is in the way.

    With ``key``, the batch row goes out with the claim (it finds its series by key). With
    ``last_writes`` (the caller only logs the act next) the statements go out in a pipeline
    on PostgreSQL (:func:`~issuer.register.driver.pipeline_to_commit`): the claim with the
    batch row, then the code rows with the log entry and the COMMIT; with the BEGIN that
    psycopg sends alone, three round trips."""
    connection = session.connection()
    if last_writes:
        pipeline_to_commit(session)
    if key is not None:  # the batch row goes out with the claim: it finds its series by key
        _check_count(count)
        claim = _CLAIM_BY_KEY.start(connection, {"series_key": key, "count": count})
        try:
            opening = _INSERT_BATCH_BY_KEY.start(
                connection,
                {"series_key": key, "kind": kind, "request_id": request_id, "count": count,
                 "created_at": at, "actor": actor},
            )  # fmt: skip
        except BaseException:
            claim.close()
            raise
        try:
            claimed = claim.rows()  # (an error the batch row met comes here, in a pipeline)
        except BaseException:
            opening.close()
            raise
        opened = opening.rows()
        series = _claimed(session, claimed[0] if claimed else None, count, key=key, series_id=None)
        batch_id = int(opened[0][0])
    else:
        series = claim_series(session, count, series_id=series_id)
        batch_id = open_batch(
            connection, series, kind=kind, count=count, request_id=request_id, at=at, actor=actor
        )
    if series.imported_count:
        leave_pipeline(session)  # looking past imported numbers reads through the ORM
    bases, counter = plan_allocation(session, series, count)
    shape = code_format(series.as_series)
    codes = [shape.code_for_base(base) for base in bases]
    # a replacement keeps its predecessor's end (keep_until); a new code gets the series' period
    until = valid_until if keep_until else validity_for(series.valid_for_days, at, valid_until)
    texts = BatchTexts()
    if last_writes:  # the caller only logs the act next: send the rest without waiting
        pipeline_to_commit(session)  # (again, if the claim had to leave it)
    write_codes(
        connection, series_id=series.id, batch_id=batch_id, codes=codes, bases=bases, holder=holder,
        note=note, holder_key=search_key(holder), note_key=search_key(note), replaces_id=replaces_id,
        valid_until=until, salts=texts.salted(len(codes), holder, note),
    )  # fmt: skip
    close_batch(connection, batch_id)
    settle_counter(connection, series, count, counter)
    return Placed(series, batch_id, codes, bases, until, texts.detail())


__all__ = [
    "BULK_FROM",
    "ClaimedSeries",
    "Placed",
    "claim_series",
    "close_batch",
    "codes_digest",
    "open_batch",
    "place_codes",
    "plan_allocation",
    "settle_counter",
]
