"""Acts as the log holds them: what an interrupted act left behind, and the log's
entries grouped one line per act.

Every writing act appends its log entries in the same transaction as its rows, so the
entries an actor added after a mark are exactly what committed: a face that was
interrupted (Ctrl-C) marks the log before the act and, afterwards, asks here whether the
act committed and under which batch, instead of guessing.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any

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


# --- the log, one line per act ---------------------------------------------------------

#: actions that accompany another act's entry rather than name the act (a replacement's
#: void, an import's voided rows, a stocktake's sightings)
_ACCOMPANYING = ("void", "seen")


@dataclass(frozen=True)
class Act:
    """The log entries one act wrote in one transaction (same moment, same actor)."""

    first_id: int
    last_id: int
    at: Any
    actor: str
    action: str
    series: str | None
    batch: int | None
    entries: int
    codes: tuple[str, ...]
    detail: str

    def as_dict(self) -> dict[str, Any]:
        import json

        data = dict(self.__dict__)
        data["codes"] = list(self.codes)
        data["detail"] = json.loads(self.detail)
        return data


def group_acts(events: Sequence[Any]) -> list[Act]:
    """Consecutive log events with the same moment and actor, as one act each: a print
    of 298 labels is one line, a replacement's void and replace are one."""
    acts: list[Act] = []
    group: list[Any] = []

    def close() -> None:
        if not group:
            return
        main = next((e for e in group if e.action not in _ACCOMPANYING), group[0])
        codes = tuple(e.code for e in group if e.code)
        series = main.series or next((e.series for e in group if e.series), None)
        batch = main.batch or next((e.batch for e in group if e.batch), None)
        acts.append(Act(group[0].id, group[-1].id, main.at, main.actor, main.action, series, batch,
                        len(group), codes, main.detail))
        group.clear()

    for event in events:
        if group and (event.at != group[0].at or event.actor != group[0].actor):
            close()
        group.append(event)
    close()
    return acts
