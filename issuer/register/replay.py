"""The doctor's replay: what the log's acts imply, compared with what the register holds.

Each act has one expected effect (:data:`ACTS`, act -> effect); replaying the log from
the first entry gives, for every code an act names, the status, void reason, replacement
links, holder, print count and last sighting it must have now, for every batch its kind,
holder and author, and for every series its shape. A code no act names must still be as
its batch made it. An un-void, a changed print count or holder, a removed link or a
reshaped series done behind the tool's back (SQL with the triggers side-stepped) is
reported with the code or series it concerns.

A new act plugs in by adding its effect to :data:`ACTS`; an act the table does not know is
reported (as a warning), never silently skipped.
"""

from __future__ import annotations

import hashlib
import json
from collections import Counter
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from sqlalchemy import text
from sqlalchemy.orm import Session

from issuer.register.log import rows_digest, timestamp_text
from issuer.register.models import ISSUED, SUSPENDED, VOIDED
from issuer.register.series import SHAPE_COLUMNS

#: "the log does not say" (an entry written before the log carried this particular)
UNKNOWN: Any = object()


@dataclass
class CodeExpect:
    """What the acts that name one code imply for it."""

    status: str = ISSUED
    void_reason: str | None = None
    voided_by: str | None = None
    voided_at: datetime | None = None
    replaces: str | None = None
    replaced_by: str | None = None
    print_count: int = 0
    holder: Any = UNKNOWN  # UNKNOWN: as its batch says
    note: Any = UNKNOWN
    seen_at: str | None = None
    seen_where: str | None = None
    expected_where: str | None = None
    last_entry: int = 0


@dataclass
class BatchExpect:
    kind: str
    entry: int
    actor: str
    at: datetime
    holder: Any = UNKNOWN
    note: Any = UNKNOWN
    rows_sha256: str | None = None
    request_id: Any = UNKNOWN
    #: whether the entry carries every particular the replay checks (False: an older entry)
    complete: bool = True


@dataclass
class Replay:
    codes: dict[str, CodeExpect] = field(default_factory=dict)
    batches: dict[int, BatchExpect] = field(default_factory=dict)
    series: dict[int, dict[str, Any]] = field(default_factory=dict)
    series_entry: dict[int, tuple[int, str, datetime]] = field(default_factory=dict)
    unknown: Counter[str] = field(default_factory=Counter)

    def code(self, code: str, entry: int) -> CodeExpect:
        found = self.codes.get(code)
        if found is None:
            found = self.codes[code] = CodeExpect()
        found.last_entry = entry
        return found


@dataclass(frozen=True)
class Entry:
    id: int
    at: datetime
    actor: str
    action: str
    series_id: int | None
    code: str | None
    batch_id: int | None
    detail: dict[str, Any]


Effect = Callable[[Replay, Entry], None]


def _batch(kind: str) -> Effect:
    def effect(replay: Replay, e: Entry) -> None:
        if e.batch_id is None:
            return
        replay.batches[e.batch_id] = BatchExpect(
            kind, e.id, e.actor, e.at, e.detail.get("holder", UNKNOWN), e.detail.get("note", UNKNOWN),
            e.detail.get("rows_sha256"), e.detail.get("request_id"),
            complete=kind != "import" or "rows_sha256" in e.detail,
        )  # fmt: skip
        for old, new in e.detail.get("links", []):
            replay.code(new, e.id).replaces = old
            replay.code(old, e.id).replaced_by = new

    return effect


def _replace(replay: Replay, e: Entry) -> None:
    _batch("replace")(replay, e)
    if e.code is not None:
        new = replay.code(e.code, e.id)
        new.replaces = e.detail.get("replaces")
        new.holder = e.detail.get("holder", UNKNOWN)
        new.note = e.detail.get("note", UNKNOWN)


def _void(replay: Replay, e: Entry) -> None:
    if e.code is None:
        return
    code = replay.code(e.code, e.id)
    code.status, code.void_reason = VOIDED, e.detail.get("reason")
    if e.detail.get("imported"):  # brought in voided: when and by whom the file says
        code.voided_by = e.detail.get("voided_by", UNKNOWN)
        code.voided_at = _time(e.detail["voided_at"]) if "voided_at" in e.detail else UNKNOWN
    else:
        code.voided_by, code.voided_at = e.actor, e.at
    if "replaced_by" in e.detail:
        code.replaced_by = e.detail["replaced_by"]


def _restore(replay: Replay, e: Entry) -> None:
    if e.code is not None:
        code = replay.code(e.code, e.id)
        code.status, code.void_reason, code.voided_by, code.voided_at = ISSUED, None, None, None


def _printed(replay: Replay, e: Entry) -> None:
    if e.code is not None:
        replay.code(e.code, e.id).print_count += 1


def _seen(replay: Replay, e: Entry) -> None:
    if e.code is None or "seen_at" not in e.detail:
        return
    code = replay.code(e.code, e.id)
    if code.seen_at is None or e.detail["seen_at"] >= code.seen_at:  # never moves back
        code.seen_at, code.seen_where = e.detail["seen_at"], e.detail.get("where")


def _holder(replay: Replay, e: Entry) -> None:
    """Holder set, cleared or erased: the log carries no holder text, so from here on the
    holder and note are whatever the register holds."""
    if e.code is not None:
        code = replay.code(e.code, e.id)
        code.holder = code.note = UNKNOWN


def _status(status: str) -> Effect:
    def effect(replay: Replay, e: Entry) -> None:
        if e.code is not None:
            replay.code(e.code, e.id).status = status

    return effect


def _placed(replay: Replay, e: Entry) -> None:
    if e.code is not None:
        replay.code(e.code, e.id).expected_where = e.detail.get("to")


def _series(replay: Replay, e: Entry) -> None:
    if e.series_id is None:
        return
    if e.action == "series.add":
        replay.series_entry[e.series_id] = (e.id, e.actor, e.at)
        replay.series.pop(e.series_id, None)
    stored = e.detail.get("stored")
    shape = replay.series.setdefault(e.series_id, {})
    if isinstance(stored, dict):
        shape.update(stored)
    else:  # an entry from before the log recorded the stored shape: what it does say
        named = {"start": "range_start", "end": "range_end"}
        known = {"scheme", "alphabet", "length", "prefix", "suffix", "mode", "start", "end", "title"}
        for name, value in e.detail.items():
            if e.action == "series.add" and name in known:
                shape[named.get(name, name)] = value
            else:
                shape.pop(named.get(name, name), None)


def _nothing(replay: Replay, e: Entry) -> None:
    """An act that changes no code, batch or series (it is covered by the chain alone)."""


#: act -> its expected effect on the register
ACTS: dict[str, Effect] = {
    "series.add": _series,
    "series.change": _series,
    "issue": _batch("issue"),
    "import": _batch("import"),
    "replace": _replace,
    "void": _void,
    "restore": _restore,
    "print": _printed,
    "reprint": _printed,
    "seen": _seen,
    "holder.set": _holder,
    "holder.clear": _holder,
    "holder.erase": _holder,
    "suspend": _status(SUSPENDED),
    "reinstate": _status(ISSUED),
    "renew": _nothing,  # validity moves on; the status stays what it was
    "placed": _placed,
    "stocktake": _nothing,
    # stock counts keep their own tables; access tokens theirs: no code, batch or series changes
    "count_open": _nothing,
    "count_add": _nothing,
    "count_close": _nothing,
    "token-add": _nothing,
    "token-revoke": _nothing,
}


def replay_log(session: Session) -> Replay:
    replay = Replay()
    rows = session.execute(
        text("SELECT id, at, actor, action, series_id, code, batch_id, detail FROM log_entry ORDER BY id"),
        execution_options={"yield_per": 5000},
    )
    for row in rows:
        try:
            detail = json.loads(row[7])
        except ValueError:
            detail = {}
        entry = Entry(row[0], _time(row[1]), row[2], row[3], row[4], row[5], row[6],  # type: ignore[arg-type]
                      detail if isinstance(detail, dict) else {})  # fmt: skip
        effect = ACTS.get(entry.action)
        if effect is None:
            replay.unknown[entry.action] += 1
        else:
            effect(replay, entry)
    return replay


def _time(value: Any) -> datetime | None:
    """A stored time read by plain SQL (SQLite gives text) as an aware UTC datetime."""
    from datetime import UTC

    if value is None:
        return None
    if not isinstance(value, datetime):
        value = datetime.fromisoformat(str(value))
    return value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)


def _same_time(one: Any, other: Any) -> bool:
    if one is None or other is None:
        return one is other
    if not isinstance(one, datetime):
        one = datetime.fromisoformat(str(one))
    if one.tzinfo is None:
        from datetime import UTC

        one = one.replace(tzinfo=UTC)
    return bool(one == other)


_CODE_ROWS = (
    "SELECT c.code, c.status, c.void_reason, c.holder, r1.code, r2.code, c.print_count, c.batch_id, "
    "c.voided_by, c.voided_at, c.last_seen_at, c.last_seen_where, c.note, c.expected_where FROM issued_code c "
    "LEFT JOIN issued_code r1 ON r1.id = c.replaces_id LEFT JOIN issued_code r2 ON r2.id = c.replaced_by_id "
)


def _chunks(items: list[str], size: int = 500) -> Iterable[list[str]]:
    for at in range(0, len(items), size):
        yield items[at: at + size]


def _code_problems(replay: Replay, row: Any, expect: CodeExpect) -> list[str]:
    code, where = row[0], f" (log entry #{expect.last_entry})"
    problems = []
    batch = replay.batches.get(row[7])
    holder = expect.holder if expect.holder is not UNKNOWN else (batch.holder if batch else UNKNOWN)
    note = expect.note if expect.note is not UNKNOWN else (batch.note if batch else UNKNOWN)
    pairs: list[tuple[str, Any, Any]] = [
        ("status", row[1], expect.status), ("void reason", row[2], expect.void_reason),
        ("holder", row[3], holder), ("note", row[12], note), ("replaces", row[4], expect.replaces),
        ("replaced by", row[5], expect.replaced_by), ("print count", row[6], expect.print_count),
        ("voided by", row[8], expect.voided_by),
    ]  # fmt: skip
    for name, held, implied in pairs:
        if implied is not UNKNOWN and held != implied:
            problems.append(f"{code}: {name} is {held!r}, the log's acts imply {implied!r}{where}")
    if expect.voided_at is not UNKNOWN and not _same_time(row[9], expect.voided_at):
        problems.append(f"{code}: voided at {row[9]}, the log's acts imply {expect.voided_at}{where}")
    if batch is None or batch.complete:
        held_seen = timestamp_text(row[10]) if isinstance(row[10], datetime) else row[10]
        if held_seen != expect.seen_at or row[11] != expect.seen_where:
            problems.append(f"{code}: last seen {held_seen} at {row[11]!r}, the log says "
                            f"{expect.seen_at} at {expect.seen_where!r}{where}")  # fmt: skip
        if row[13] != expect.expected_where:
            problems.append(f"{code}: expected at {row[13]!r}, the log's placings say {expect.expected_where!r}{where}")
    return problems


def replay_problems(session: Session) -> tuple[list[str], list[str], int]:
    """(problems, warnings, acts replayed): the register against its log."""
    replay = replay_log(session)
    problems: list[str] = []
    named = sorted(replay.codes)
    found: set[str] = set()
    for chunk in _chunks(named):
        marks = ", ".join(f":c{i}" for i in range(len(chunk)))
        params = {f"c{i}": code for i, code in enumerate(chunk)}
        for row in session.execute(text(_CODE_ROWS + f"WHERE c.code IN ({marks})"), params):
            found.add(row[0])
            fixed = list(row)
            fixed[9], fixed[10] = _time(row[9]), _time(row[10])
            problems += _code_problems(replay, fixed, replay.codes[row[0]])
    problems += [f"{code}: named by log entry #{replay.codes[code].last_entry} but not in the register"
                 for code in named if code not in found]  # fmt: skip
    # codes no act names: as their batch made them
    for row in session.execute(text(
        "SELECT c.code, c.status, c.void_reason, c.replaces_id, c.replaced_by_id, c.print_count, "
        "c.last_seen_at, c.last_seen_where, c.voided_at, c.voided_by, c.batch_id, c.expected_where "
        "FROM issued_code c "
        "WHERE c.status <> 'issued' OR c.void_reason IS NOT NULL OR c.replaces_id IS NOT NULL "
        "OR c.replaced_by_id IS NOT NULL OR c.print_count <> 0 OR c.last_seen_at IS NOT NULL "
        "OR c.last_seen_where IS NOT NULL OR c.voided_at IS NOT NULL OR c.voided_by IS NOT NULL "
        "OR c.expected_where IS NOT NULL"
    )):
        batch = replay.batches.get(row[10])
        if row[0] not in replay.codes and (batch is None or batch.complete or row[1] != ISSUED):
            what = {"status": row[1], "void reason": row[2], "replaces": row[3], "replaced by": row[4],
                    "print count": row[5], "last seen": row[6], "last seen where": row[7],
                    "voided at": row[8], "voided by": row[9], "expected at": row[11]}  # fmt: skip
            changed = ", ".join(f"{k} {v!r}" for k, v in what.items() if v not in (None, 0, ISSUED))
            problems.append(f"{row[0]}: {changed}, but no act in the log names this code")
    problems += _batch_problems(session, replay)
    problems += _series_problems(session, replay)
    problems += _text_problems(session)
    heads = session.execute(text("SELECT count(*) FROM log_head")).scalar_one()
    if heads != 1:
        problems.append(f"log_head holds {heads} rows; the chain has one head")
    warnings = [f"{count} log entr{'y' if count == 1 else 'ies'} of act {act!r}: this issuer knows no "
                "effect to replay for it" for act, count in sorted(replay.unknown.items())]  # fmt: skip
    return problems, warnings, len(replay.codes) + len(replay.batches)


def _batch_problems(session: Session, replay: Replay) -> list[str]:
    problems = []
    for batch_id, kind, actor, created_at, request_id in session.execute(
        text("SELECT id, kind, actor, created_at, request_id FROM batch ORDER BY id")
    ):
        expect = replay.batches.get(batch_id)
        if expect is None:
            continue  # the "log and codes" check reports a batch without its entry
        created = _time(created_at)
        if kind != expect.kind:
            problems.append(f"batch {batch_id} is of kind {kind!r}, log entry #{expect.entry} made it by {expect.kind!r}")
        if actor != expect.actor or not _same_time(created, expect.at):
            problems.append(f"batch {batch_id}: made by {actor} at {created}, log entry #{expect.entry} "
                            f"says {expect.actor} at {expect.at}")  # fmt: skip
        if expect.complete and request_id != expect.request_id:
            problems.append(f"batch {batch_id}: request id {request_id!r}, logged {expect.request_id!r}")
        if expect.holder is not UNKNOWN:
            for (code,) in session.execute(text(
                "SELECT code FROM issued_code WHERE batch_id = :b AND (holder <> :h OR holder IS NULL) "
                "ORDER BY id LIMIT 20" if expect.holder is not None else
                "SELECT code FROM issued_code WHERE batch_id = :b AND holder IS NOT NULL ORDER BY id LIMIT 20"
            ), {"b": batch_id, "h": expect.holder}):
                if code not in replay.codes or replay.codes[code].holder is UNKNOWN:
                    problems.append(f"{code}: holder differs from {expect.holder!r}, logged by entry #{expect.entry}")
        if expect.note is not UNKNOWN:
            for (code, note) in session.execute(text(
                "SELECT code, note FROM issued_code WHERE batch_id = :b ORDER BY id"), {"b": batch_id}
            ):  # fmt: skip
                if note != expect.note and (code not in replay.codes or replay.codes[code].note is UNKNOWN):
                    problems.append(f"{code}: note differs from the one logged by entry #{expect.entry}")
        if expect.rows_sha256 is not None:
            rows = [(_time(a), b) for a, b in session.execute(text(
                "SELECT issued_at, issued_by FROM issued_code WHERE batch_id = :b ORDER BY id"
            ), {"b": batch_id})]  # fmt: skip
            if rows_digest(rows) != expect.rows_sha256:
                problems.append(f"batch {batch_id}: issue times or issuers differ from those "
                                f"logged by entry #{expect.entry}")  # fmt: skip
        if kind != "import":
            for code, issued_by, issued_at in session.execute(text(
                "SELECT code, issued_by, issued_at FROM issued_code WHERE batch_id = :b ORDER BY id"
            ), {"b": batch_id}):
                if issued_by != actor or (kind in ("issue", "replace") and not _same_time(_time(issued_at), created)):
                    problems.append(f"{code}: issued by {issued_by} at {issued_at}, batch {batch_id} "
                                    f"was made by {actor} at {created}")  # fmt: skip
    return problems


def _text_problems(session: Session) -> list[str]:
    """Every code's text is what its series' shape makes of its number."""
    import numpy as np

    from issuer.register.models import Series
    from issuer.register.series import code_format

    problems: list[str] = []
    for series in session.query(Series).all():
        shape = code_format(series)
        rows = session.execute(
            text("SELECT code, base FROM issued_code WHERE series_id = :s ORDER BY id"), {"s": series.id},
            execution_options={"yield_per": 50_000},
        )
        for part in rows.partitions():
            codes = [str(r[0]) for r in part]
            bases = np.asarray([int(r[1]) for r in part], dtype=np.int64)
            try:
                made = shape.codes_for_bases(bases)
            except (ValueError, OverflowError, IndexError):
                made = [shape.code_for_base(int(b)) if 0 <= b < shape.capacity else "" for b in bases]
            problems += [f"{code}: its text is not the code of its number {int(base)} in series {series.key}"
                         for code, base, want in zip(codes, bases, made) if code != want]  # fmt: skip
    return problems


def _series_problems(session: Session, replay: Replay) -> list[str]:
    problems = []
    columns = ", ".join(SHAPE_COLUMNS)
    for row in session.execute(text(
        f"SELECT id, created_by, created_at, scatter_key, {columns} FROM series ORDER BY id"
    )):
        series_id, created_by, held = row[0], row[1], dict(zip(SHAPE_COLUMNS, row[4:]))
        held["scatter_key_sha256"] = hashlib.sha256(bytes(row[3])).hexdigest() if row[3] is not None else None
        if series_id not in replay.series_entry:
            problems.append(f"series {held['key']}: its definition is not in the log")
            continue
        entry, actor, at = replay.series_entry[series_id]
        if created_by != actor or not _same_time(_time(row[2]), at):
            problems.append(f"series {held['key']}: created by {created_by} at {row[2]}, "
                            f"log entry #{entry} says {actor} at {at}")  # fmt: skip
        for column, implied in replay.series.get(series_id, {}).items():
            if column in held and str(held[column]) != str(implied):
                problems.append(f"series {held['key']}: {column} is {held[column]!r}, the log implies {implied!r}")
    return problems
