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

import json
from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from sqlalchemy import text
from sqlalchemy.orm import Session

from issuer.register.log import stored_time
from issuer.register.models import ISSUED, SUSPENDED, VOIDED
from issuer.register.series import SERIES_SETTINGS

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
    #: (since, by, reason) while suspended, None when not; UNKNOWN: as an imported file said
    suspension: Any = None
    #: what the last renewal made it (UNKNOWN: never renewed, as its batch made it)
    valid_until: Any = UNKNOWN
    #: what the first renewal found (UNKNOWN: never renewed, or an older renewal not saying):
    #: the end its batch gave it, unless it was changed behind the tool's back before
    valid_until_first: Any = UNKNOWN
    renewals: int = 0
    #: renewals that found another end than the renewal before them left (log entry ids)
    valid_until_breaks: list[int] = field(default_factory=list)
    erased_at: datetime | None = None
    last_entry: int = 0
    #: the holder and note acts that name it: (entry, digest before, digest after), each
    #: UNKNOWN where the entry does not say (written before the log carried digests)
    text_acts: list[tuple[int, Any, Any]] = field(default_factory=list)


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
    #: the end of validity the batch gave its codes (text or None); UNKNOWN: an entry written
    #: before issue and replace entries logged it (the replay then judges only renewed codes)
    valid_until: Any = UNKNOWN
    #: an import's codes each have their own: a digest over them in id order (None: not logged)
    valid_until_sha256: str | None = None
    #: {"count", "sha256"}: the codes given holder or note text and their digests (BatchTexts)
    texts: Any = UNKNOWN


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
            valid_until=e.detail.get("valid_until", UNKNOWN), valid_until_sha256=e.detail.get("valid_until_sha256"),
            texts=texts if isinstance(texts := e.detail.get("texts"), dict) else UNKNOWN,
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
        code.voided_at = stored_time(e.detail["voided_at"]) if "voided_at" in e.detail else UNKNOWN
    else:
        code.voided_by, code.voided_at = e.actor, e.at
    if "replaced_by" in e.detail:
        code.replaced_by = e.detail["replaced_by"]


def _restore(replay: Replay, e: Entry) -> None:
    if e.code is not None:
        code = replay.code(e.code, e.id)
        code.status, code.void_reason, code.voided_by, code.voided_at = ISSUED, None, None, None
        code.suspension = None  # a restore clears a suspension too


def _printed(replay: Replay, e: Entry) -> None:
    if e.code is not None:
        replay.code(e.code, e.id).print_count += 1


def _seen(replay: Replay, e: Entry) -> None:
    if e.code is None or "seen_at" not in e.detail:
        return
    code = replay.code(e.code, e.id)
    if code.seen_at is None or e.detail["seen_at"] >= code.seen_at:  # never moves back
        code.seen_at, code.seen_where = e.detail["seen_at"], e.detail.get("where")


def _text_act(code: CodeExpect, e: Entry) -> None:
    code.text_acts.append((e.id, e.detail.get("text_before", UNKNOWN), e.detail.get("text_after", UNKNOWN)))


def _holder(replay: Replay, e: Entry) -> None:
    """Holder set or cleared: the log carries no holder text, only the digests of the
    code's texts before and after (their salt is the code's own)."""
    if e.code is not None:
        code = replay.code(e.code, e.id)
        code.holder = code.note = UNKNOWN
        _text_act(code, e)


def _erased(replay: Replay, e: Entry) -> None:
    """Holder and note erased: both gone for good, and when is logged."""
    if e.code is not None:
        code = replay.code(e.code, e.id)
        code.holder = code.note = None
        code.erased_at = e.at
        _text_act(code, e)


def _suspended(replay: Replay, e: Entry) -> None:
    if e.code is not None:
        code = replay.code(e.code, e.id)
        code.status = SUSPENDED
        # an import takes the time from its file; otherwise the act's own moment and actor
        code.suspension = UNKNOWN if e.detail.get("imported") else (e.at, e.actor, e.detail.get("reason"))


def _reinstated(replay: Replay, e: Entry) -> None:
    if e.code is not None:
        code = replay.code(e.code, e.id)
        code.status, code.suspension = ISSUED, None


def _renewed(replay: Replay, e: Entry) -> None:
    if e.code is None or "valid_until" not in e.detail:
        return
    code = replay.code(e.code, e.id)
    previous = e.detail.get("previous", UNKNOWN)
    if code.renewals == 0:
        code.valid_until_first = previous
    elif previous is not UNKNOWN and code.valid_until is not UNKNOWN and not same_time(previous, code.valid_until):
        code.valid_until_breaks.append(e.id)  # the end was changed between two renewals
    code.valid_until = e.detail["valid_until"]
    code.renewals += 1


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
    if isinstance(stored, dict):  # a change: the columns that moved, as stored
        shape.update(stored)
        # a field the change names without its stored value (an older entry): no longer known
        for name in e.detail:
            if name in SERIES_SETTINGS and name not in stored:
                shape.pop(name, None)
        return
    named = {"start": "range_start", "end": "range_end"}
    known = {"key", "scheme", "alphabet", "length", "prefix", "suffix", "grouping", "separator",
             "mode", "start", "end", "title", "scatter_key_sha256", *SERIES_SETTINGS}  # fmt: skip
    for name, value in e.detail.items():
        if e.action == "series.add" and name in known:
            shape[named.get(name, name)] = value
        else:  # an older change entry: what it names is no longer known
            shape.pop(named.get(name, name), None)
    if e.action == "series.add" and "key" in e.detail:  # the definition names every column
        shape.setdefault("scatter_key_sha256", None)


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
    "holder.erase": _erased,
    "suspend": _suspended,
    "reinstate": _reinstated,
    "renew": _renewed,  # validity moves on; the status stays what it was
    "placed": _placed,
    "stocktake": _nothing,
    # stock counts keep their own tables, access tokens theirs (replay_rows compares them): no code,
    # batch or series changes
    "count_open": _nothing,
    "count_add": _nothing,
    "count_close": _nothing,
    "token-add": _nothing,
    "token-revoke": _nothing,
}


def json_object(raw: Any) -> dict[str, Any]:
    """A JSON object's text (a log entry's detail, a frozen result) as a dict; anything else: empty."""
    try:
        detail = json.loads(raw)
    except (TypeError, ValueError):
        return {}
    return detail if isinstance(detail, dict) else {}


def replay_log(session: Session) -> Replay:
    replay = Replay()
    rows = session.execute(
        text("SELECT id, at, actor, action, series_id, code, batch_id, detail FROM log_entry ORDER BY id"),
        execution_options={"yield_per": 5000},
    )
    for row in rows:
        entry = Entry(row[0], stored_time(row[1]), row[2], row[3], row[4], row[5], row[6],  # type: ignore[arg-type]
                      json_object(row[7]))  # fmt: skip
        effect = ACTS.get(entry.action)
        if effect is None:
            replay.unknown[entry.action] += 1
        else:
            effect(replay, entry)
    return replay


def same_time(one: Any, other: Any) -> bool:
    """Whether two stored or logged times (datetime or text, None for none) are one moment."""
    if one is None or other is None:
        return one is other
    return stored_time(one) == stored_time(other)
