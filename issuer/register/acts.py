"""What an interrupted act left behind, read from the log.

Every writing act appends its log entries in the same transaction as its rows, so the
entries an actor added after a mark are exactly what committed: a face that was
interrupted (Ctrl-C) marks the log before the act and, afterwards, asks here whether the
act committed and under which batch, instead of guessing.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

from sqlalchemy import func, select

from issuer.register.models import LogEntry, Series
from issuer.register.store import Register


@dataclass(frozen=True)
class Mark:
    """The log's newest entry when an act began, and who was acting."""

    log_id: int
    actor: str


@dataclass(frozen=True)
class Committed:
    """The entries an act committed after its mark (none: nothing happened)."""

    entries: int
    first_id: int | None
    last_id: int | None
    batches: tuple[int, ...]
    series: tuple[str, ...]

    def __bool__(self) -> bool:
        return self.entries > 0


def mark(register: Register) -> Mark:
    """Mark the log before an act (one indexed read)."""
    with register.reading() as session:
        newest = session.scalar(select(func.max(LogEntry.id)))
    return Mark(int(newest or 0), register.actor)


def committed_since(
    register: Register, since: Mark, actions: Iterable[str], *, series: str | None = None
) -> Committed:
    """The entries of ``actions`` that ``since.actor`` committed after the mark,
    optionally only for series ``series``. The engine's pooled connections are dropped
    first: an interruption may have left one in an unknown state."""
    register.engine.dispose()
    statement = (
        select(LogEntry.id, LogEntry.batch_id, Series.key)
        .outerjoin(Series, Series.id == LogEntry.series_id)
        .where(LogEntry.id > since.log_id, LogEntry.actor == since.actor, LogEntry.action.in_(list(actions)))
        .order_by(LogEntry.id)
    )
    if series is not None:
        statement = statement.where(Series.key == series)
    with register.reading() as session:
        rows = session.execute(statement).all()
    if not rows:
        return Committed(0, None, None, (), ())
    batches = tuple(dict.fromkeys(int(row[1]) for row in rows if row[1] is not None))
    keys = tuple(dict.fromkeys(str(row[2]) for row in rows if row[2] is not None))
    return Committed(len(rows), int(rows[0][0]), int(rows[-1][0]), batches, keys)
