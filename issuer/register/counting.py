"""The register's side of a stock count that spans days: the count (its name, series and
scope), opening it, and closing it with its frozen result.

The scan files added to a count live in :mod:`issuer.register.scanfiles`. Two desks adding
files to one count at once both land (the count row is share-locked; closing takes it
exclusively, so nothing is added to a count while it closes). The reading of scans against
the register happens above (:mod:`issuer.stocktake.counts`), from the rows kept here.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from issuer.errors import Conflict, DuplicateRow, InvalidFormat, NotFound
from issuer.register.log import NewEntry, append_entries, append_entry
from issuer.register.models import (
    COUNT_CLOSED,
    COUNT_OPEN,
    Batch,
    Series,
    StockCount,
    StockCountFile,
    batch_range_sql,
)
from issuer.register.places import clean_place
from issuer.register.series import code_format, get_series
from issuer.register.store import Register

#: scopes of a count
SCOPES = ("all", "where", "range", "batch", "holder")


@dataclass(frozen=True)
class CountScope:
    """What a count expects: the whole series, or one place, a range of codes (as typed),
    one batch, or one holder's codes."""

    kind: str = "all"
    text: str | None = None
    first: str | None = None
    last: str | None = None
    batch: int | None = None


@dataclass(frozen=True)
class CountInfo:
    name: str
    series: str
    scope: str
    scope_text: str | None
    scope_first: int | None
    scope_last: int | None
    zone: str
    state: str
    opened_at: datetime
    opened_by: str
    closed_at: datetime | None
    closed_by: str | None
    files: int = 0
    scans: int = 0
    result: dict[str, Any] | None = field(default=None, repr=False)

    def describe_scope(self, display: Callable[[int], str] | None = None) -> str:
        """The scope in words: ``all of series tools``, ``place Shelf A``, ..."""
        if self.scope == "where":
            return f"place {self.scope_text}"
        if self.scope == "holder":
            return f"holder {self.scope_text}"
        if self.scope == "batch":
            return f"batch {self.scope_first}"
        if self.scope == "range" and self.scope_first is not None and self.scope_last is not None:
            if display is None:
                return f"numbers {self.scope_first}..{self.scope_last}"
            return f"codes {display(self.scope_first)} to {display(self.scope_last)}"
        return f"all of series {self.series}"

    def as_dict(self) -> dict[str, Any]:
        data = {key: value for key, value in self.__dict__.items() if key != "result"}
        for key in ("opened_at", "closed_at"):
            data[key] = data[key].isoformat() if data[key] is not None else None
        return data


def check_count_name(name: str) -> str:
    from issuer import limits

    text = name.strip()
    limits.text("count name", text, label="a count's name")
    return text


def _info(session: Session, count: StockCount, series_key: str | None = None) -> CountInfo:
    files, scans = session.execute(
        select(func.count(StockCountFile.id), func.coalesce(func.sum(StockCountFile.scans), 0)).where(
            StockCountFile.count_id == count.id
        )
    ).one()
    key = series_key or session.get(Series, count.series_id).key  # type: ignore[union-attr]
    return CountInfo(
        count.name, key, count.scope, count.scope_text, count.scope_first, count.scope_last, count.zone,
        count.state, count.opened_at, count.opened_by, count.closed_at, count.closed_by, int(files),
        int(scans), json.loads(count.result) if count.result else None,
    )  # fmt: skip


def get_count(session: Session, name: str, *, lock: str | None = None) -> StockCount:
    """The count called ``name`` (``lock``: ``share`` or ``update`` on PostgreSQL)."""
    statement = select(StockCount).where(StockCount.name == name.strip())
    if lock is not None:
        statement = statement.with_for_update(read=lock == "share").execution_options(populate_existing=True)
    count = session.scalars(statement).first()
    if count is None:
        raise NotFound(f"no count called {name.strip()!r} (see 'issuer stocktake list')")
    return count


def count_info(register: Register, name: str) -> CountInfo:
    with register.reading() as session:
        return _info(session, get_count(session, name))


def list_counts(register: Register) -> list[CountInfo]:
    with register.reading() as session:
        counts = session.scalars(select(StockCount).order_by(StockCount.opened_at, StockCount.id)).all()
        return [_info(session, count) for count in counts]


def _scope_numbers(session: Session, series: Series, scope: CountScope) -> tuple[str | None, int | None, int | None]:
    if scope.kind not in SCOPES:
        raise InvalidFormat(f"a count's scope is one of {', '.join(SCOPES)}, not {scope.kind!r}")
    if scope.kind in ("where", "holder"):
        text = clean_place(scope.text or "") if scope.kind == "where" else (scope.text or "").strip()
        if not text:
            raise InvalidFormat(f"a {scope.kind} count needs the {scope.kind} it covers")
        return text, None, None
    if scope.kind == "batch":
        batch = session.get(Batch, scope.batch) if scope.batch is not None else None
        if batch is None or batch.series_id != series.id:
            raise NotFound(f"series {series.key} has no batch {scope.batch}")
        return None, batch.id, None
    if scope.kind == "range":
        shape = code_format(series)
        if not scope.first or not scope.last:
            raise InvalidFormat("a range count needs --from CODE and --to CODE")
        first, last = (shape.base_of(shape.validate(text)) for text in (scope.first, scope.last))
        if first > last:
            raise InvalidFormat(f"--from {scope.first} comes after --to {scope.last}; swap them")
        return None, first, last
    return None, None, None


def open_count(register: Register, name: str, key: str, scope: CountScope, *, zone: str) -> CountInfo:
    """Open a count called ``name`` of series ``key`` within ``scope``; scan times written
    without a zone will be read in ``zone``."""
    name = check_count_name(name)

    def work(session: Session) -> CountInfo:
        series = get_series(session, key)
        if session.scalars(select(StockCount.id).where(StockCount.name == name)).first() is not None:
            raise Conflict(f"a count called {name!r} exists already; choose another name")
        text, first, last = _scope_numbers(session, series, scope)
        now = register.clock()
        count = StockCount(
            name=name, series_id=series.id, scope=scope.kind, scope_text=text, scope_first=first,
            scope_last=last, zone=zone, state=COUNT_OPEN, opened_at=now, opened_by=register.actor,
        )  # fmt: skip
        session.add(count)
        session.flush()
        detail: dict[str, Any] = {"count": name, "scope": scope.kind, "zone": zone}
        if text is not None and scope.kind != "holder":  # a holder's name stays out of the log
            detail["scope_text"] = text
        if first is not None:  # a range's numbers, a batch's id
            detail["scope_first"] = first
        if last is not None:
            detail["scope_last"] = last
        append_entry(session, NewEntry("count_open", series.id, None, None, detail), actor=register.actor, at=now)
        return _info(session, count, series.key)

    try:
        return register.write(work)
    except DuplicateRow:
        raise Conflict(f"a count called {name!r} exists already; choose another name") from None


def close_count(
    register: Register,
    name: str,
    result: dict[str, Any],
    *,
    record: Callable[[Session, Series, datetime], Any] | None = None,
) -> CountInfo:
    """Freeze the open count ``name`` with ``result``; ``record`` (sightings, moves) runs
    in the same transaction, so a count is closed with its record or not at all."""

    def work(session: Session) -> CountInfo:
        count = get_count(session, name, lock="update")
        if count.state != COUNT_OPEN:
            raise Conflict(f"count {count.name!r} was closed already ({count.closed_at:%Y-%m-%d %H:%M} UTC)")
        series = session.get(Series, count.series_id)
        assert series is not None
        now = register.clock()
        if record is not None:
            record(session, series, now)
        count.state, count.closed_at, count.closed_by = COUNT_CLOSED, now, register.actor
        count.result = json.dumps(result, separators=(",", ":"), default=str)
        # the frozen result's digest: the doctor compares the stored result with it
        detail = {"count": count.name, **result.get("counts", {}), "result_sha256": result_digest(count.result)}
        append_entries(session, [NewEntry("count_close", series.id, None, None, detail)], actor=register.actor, at=now)
        session.flush()
        return _info(session, count, series.key)

    return register.write(work)


def result_digest(result: str) -> str:
    """SHA-256 (hex) of a count's stored result text, as its close entry logs it."""
    return hashlib.sha256(result.encode("utf-8")).hexdigest()


def scope_query_filter(count: StockCount | CountInfo) -> tuple[str, tuple[Any, ...]]:
    """The SQL condition (on ``issued_code``) of a count's scope, and its parameters."""
    if count.scope == "where":
        return "lower(expected_where) = lower(?)", (count.scope_text,)
    if count.scope == "holder":
        return "holder = ?", (count.scope_text,)
    if count.scope == "batch":
        return batch_range_sql("?"), (count.scope_first,) * 3
    if count.scope == "range":
        return "base BETWEEN ? AND ?", (count.scope_first, count.scope_last)
    return "1 = 1", ()


__all__ = [
    "SCOPES",
    "CountInfo",
    "CountScope",
    "check_count_name",
    "close_count",
    "count_info",
    "get_count",
    "list_counts",
    "open_count",
    "result_digest",
    "scope_query_filter",
]
