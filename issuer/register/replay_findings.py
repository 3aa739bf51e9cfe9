"""The doctor's replay, second half: the register compared with what :mod:`issuer.register.replay`
worked out from the log, code by code, batch by batch and series by series."""

from __future__ import annotations

import heapq
from collections import Counter
from collections.abc import Iterable
from datetime import datetime
from functools import lru_cache
from itertools import chain, pairwise
from typing import Any

from sqlalchemy import text
from sqlalchemy.orm import Session

from issuer.register.log import rows_digest, stored_time, timestamp_text
from issuer.register.models import ISSUED, batch_range_sql
from issuer.register.replay import UNKNOWN, CodeExpect, Replay, replay_log, same_time
from issuer.register.sealing import KeyFileError, fingerprint, keyring_of
from issuer.register.series import SERIES_SETTINGS, SHAPE_COLUMNS

_CODE_ROWS = (
    "SELECT c.code, c.status, c.void_reason, c.holder, r1.code, r2.code, c.print_count, c.batch_id, "
    "c.voided_by, c.voided_at, c.last_seen_at, c.last_seen_where, c.note, c.expected_where, "
    "c.suspended_at, c.suspended_by, c.suspend_reason, c.erased_at, c.valid_until FROM issued_code c "
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
    if expect.voided_at is not UNKNOWN and not same_time(row[9], expect.voided_at):
        problems.append(f"{code}: voided at {row[9]}, the log's acts imply {expect.voided_at}{where}")
    problems += _standing_problems(row, expect, code, where)
    problems += [f"{code}: renewed by log entry #{entry} from an end the renewal before did not leave"
                 for entry in expect.valid_until_breaks]  # fmt: skip
    if (batch is not None and batch.valid_until is not UNKNOWN and expect.valid_until_first is not UNKNOWN
            and not same_time(expect.valid_until_first, batch.valid_until)):
        problems.append(f"{code}: its first renewal found it valid until {expect.valid_until_first}, "
                        f"its batch gave {batch.valid_until}{where}")  # fmt: skip
    if batch is None or batch.complete:
        held_seen = timestamp_text(row[10]) if isinstance(row[10], datetime) else row[10]
        if held_seen != expect.seen_at or row[11] != expect.seen_where:
            problems.append(f"{code}: last seen {held_seen} at {row[11]!r}, the log says "
                            f"{expect.seen_at} at {expect.seen_where!r}{where}")  # fmt: skip
        if row[13] != expect.expected_where:
            problems.append(f"{code}: expected at {row[13]!r}, the log's placings say {expect.expected_where!r}{where}")
    return problems


def _moment(value: Any) -> Any:
    """A stored time as an aware datetime, or the stored value itself when it is none."""
    try:
        return stored_time(value)
    except (TypeError, ValueError):
        return value


def _same(held: Any, implied: Any) -> bool:
    held, implied = _moment(held), _moment(implied)
    if isinstance(held, datetime) and isinstance(implied, datetime):
        return held == implied
    return bool(held == implied)


def _standing_problems(row: Any, expect: CodeExpect, code: str, where: str) -> list[str]:
    """Suspension, erasure and validity against the suspend, reinstate, restore, erase and
    renew acts that name the code."""
    problems = []
    held = (row[14], row[15], row[16])
    if expect.suspension is None and held != (None, None, None):
        problems.append(f"{code}: suspended since {row[14]} by {row[15]} ({row[16]!r}), "
                        f"but the log's acts leave it unsuspended{where}")  # fmt: skip
    elif expect.suspension not in (None, UNKNOWN):
        since, by, reason = expect.suspension
        if not (_same(row[14], since) and row[15] == by and row[16] == reason):
            problems.append(f"{code}: suspended since {row[14]} by {row[15]} ({row[16]!r}), "
                            f"the log says since {since} by {by} ({reason!r}){where}")  # fmt: skip
    if not _same(row[17], expect.erased_at):
        problems.append(f"{code}: erased at {row[17]}, the log's acts imply {expect.erased_at}{where}")
    if expect.valid_until is not UNKNOWN and not _same(row[18], expect.valid_until):
        problems.append(f"{code}: valid until {row[18]}, its last renewal says {expect.valid_until}{where}")
    return problems


#: a code holding holder or note text without a salt: its texts have no digest
_UNSALTED: Any = object()
_TEXT_COLUMNS = "id, code, batch_id, holder, holder_key, note, note_key, text_salt"
_HOLDS_TEXT = ("holder IS NOT NULL OR holder_key IS NOT NULL OR note IS NOT NULL OR note_key IS NOT NULL "
               "OR text_salt IS NOT NULL")  # fmt: skip


def _first(row: Any) -> Any:
    return row[0]


def _held_digest(salt: Any, payload: bytes | None) -> Any:
    from issuer.register.standing import payload_digest

    try:
        return payload_digest(salt, payload)
    except ValueError:
        return _UNSALTED


def _holder_problems(session: Session, replay: Replay) -> list[str]:
    """Holder and note, code by code where a code holds some (none: no work). Each search
    key is the one its text makes (a key edited alone would make ``find`` answer for a
    holder the code does not have); the texts are what the log's digests say: as the last
    holder act left them, and each batch's as its entry counted them (a code's share is the
    ``text_before`` of its first later act, else its row as it is). Codes given their text
    before digests were logged, by an act no later act followed, are not judged."""
    from issuer.register.standing import BatchTexts, search_key, text_payload

    # a batch's codes often share their texts: each text is folded and encoded once
    key_of, payload_of = lru_cache(maxsize=65_536)(search_key), lru_cache(maxsize=65_536)(text_payload)
    problems: list[str] = []
    batches: dict[int, BatchTexts | None] = {}  # None: a code's share cannot be told
    touched = sorted(code for code, expect in replay.codes.items() if expect.text_acts)
    # codes a holder act named that hold nothing now (erased, cleared), beside those that hold
    # text: both in id order, so each batch's digests are taken in the order they were made
    emptied: list[Any] = []
    for chunk in _chunks(touched):
        marks = ", ".join(f":c{i}" for i in range(len(chunk)))
        emptied += session.execute(text(
            f"SELECT {_TEXT_COLUMNS} FROM issued_code WHERE code IN ({marks}) AND NOT ({_HOLDS_TEXT})"
        ), {f"c{i}": code for i, code in enumerate(chunk)}).all()  # fmt: skip
    emptied.sort(key=_first)
    holding = session.execute(text(f"SELECT {_TEXT_COLUMNS} FROM issued_code WHERE {_HOLDS_TEXT} ORDER BY id"),
                              execution_options={"yield_per": 50_000})  # fmt: skip
    rows = heapq.merge(emptied, chain.from_iterable(holding.partitions(50_000)), key=_first)
    for _id, code, batch_id, holder, holder_key, note, note_key, salt in rows:
        if holder_key != key_of(holder):
            problems.append(f"{code}: its holder's search key is not the one its holder makes")
        if note_key != key_of(note):
            problems.append(f"{code}: its note's search key is not the one its note makes")
        now = _held_digest(salt, payload_of(holder, note))
        if now is None and salt is not None:
            problems.append(f"{code}: holds a text salt but no holder or note")
        expect = replay.codes.get(code)
        acts = expect.text_acts if expect is not None else []
        for (one, _b, left), (other, found, _a) in pairwise(acts):
            if left is not UNKNOWN and found is not UNKNOWN and left != found:
                problems.append(f"{code}: log entry #{other} found holder and note other than "
                                f"entry #{one} left them")  # fmt: skip
        batch = replay.batches.get(batch_id)
        known = batch is not None and batch.texts is not UNKNOWN
        if acts and acts[-1][2] is not UNKNOWN and now != acts[-1][2]:
            problems.append(f"{code}: holder or note differ from what log entry #{acts[-1][0]} left"
                            + (" (text without a salt)" if now is _UNSALTED else ""))  # fmt: skip
        elif not acts and known and now is _UNSALTED:
            problems.append(f"{code}: holds holder or note text without a salt")
        if known:
            share = acts[0][1] if acts else now
            texts = batches.setdefault(batch_id, BatchTexts())
            if share is UNKNOWN or share is _UNSALTED:
                batches[batch_id] = None
            elif texts is not None:
                texts.add(share)
    for batch_id, batch in sorted(replay.batches.items()):
        if batch.texts is UNKNOWN:
            continue
        texts = batches.get(batch_id, BatchTexts())
        logged = {"count": batch.texts.get("count"), "sha256": batch.texts.get("sha256")}
        if texts is None or texts.detail() != logged:
            problems.append(f"batch {batch_id}: its codes' holders and notes differ from those "
                            f"logged by entry #{batch.entry}")  # fmt: skip
    return problems


def replay_problems(session: Session) -> tuple[list[str], list[str], int]:
    """(problems, warnings, acts replayed): the register against its log."""
    replay = replay_log(session)
    problems: list[str] = []
    named = sorted(replay.codes)
    found: set[str] = set()
    renewed: Counter[tuple[int, Any]] = Counter()  # (batch, end of validity now) -> renewed codes
    for chunk in _chunks(named):
        marks = ", ".join(f":c{i}" for i in range(len(chunk)))
        params = {f"c{i}": code for i, code in enumerate(chunk)}
        for row in session.execute(text(_CODE_ROWS + f"WHERE c.code IN ({marks})"), params):
            found.add(row[0])
            fixed = list(row)
            fixed[9], fixed[10] = _moment(row[9]), _moment(row[10])
            expect = replay.codes[row[0]]
            problems += _code_problems(replay, fixed, expect)
            if expect.valid_until is not UNKNOWN:
                renewed[(row[7], _moment(row[18]))] += 1
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
        "OR c.expected_where IS NOT NULL OR c.suspended_at IS NOT NULL OR c.suspended_by IS NOT NULL "
        "OR c.suspend_reason IS NOT NULL OR c.erased_at IS NOT NULL"
    )):
        batch = replay.batches.get(row[10])
        if row[0] not in replay.codes and (batch is None or batch.complete or row[1] != ISSUED):
            what = {"status": row[1], "void reason": row[2], "replaces": row[3], "replaced by": row[4],
                    "print count": row[5], "last seen": row[6], "last seen where": row[7],
                    "voided at": row[8], "voided by": row[9], "expected at": row[11]}  # fmt: skip
            changed = ", ".join(f"{k} {v!r}" for k, v in what.items() if v not in (None, 0, ISSUED))
            problems.append(f"{row[0]}: {changed}, but no act in the log names this code")
    problems += _batch_problems(session, replay)
    problems += _validity_problems(session, replay, renewed)
    problems += _series_problems(session, replay)
    problems += _text_problems(session)
    problems += _holder_problems(session, replay)
    trees = session.execute(text("SELECT count(*) FROM log_tree")).scalar_one()
    if trees != 1:
        problems.append(f"log_tree holds {trees} rows; the sealed tree has one")
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
        created = stored_time(created_at)
        if kind != expect.kind:
            problems.append(f"batch {batch_id} is of kind {kind!r}, log entry #{expect.entry} made it by {expect.kind!r}")
        if actor != expect.actor or not same_time(created, expect.at):
            problems.append(f"batch {batch_id}: made by {actor} at {created}, log entry #{expect.entry} "
                            f"says {expect.actor} at {expect.at}")  # fmt: skip
        if expect.complete and request_id != expect.request_id:
            problems.append(f"batch {batch_id}: request id {request_id!r}, logged {expect.request_id!r}")
        if expect.holder is not UNKNOWN:
            for (code,) in session.execute(text(
                f"SELECT code FROM issued_code WHERE {batch_range_sql()} AND (holder <> :h OR holder IS NULL) "
                "ORDER BY id LIMIT 20" if expect.holder is not None else
                f"SELECT code FROM issued_code WHERE {batch_range_sql()} AND holder IS NOT NULL ORDER BY id LIMIT 20"
            ), {"b": batch_id, "h": expect.holder}):
                if code not in replay.codes or replay.codes[code].holder is UNKNOWN:
                    problems.append(f"{code}: holder differs from {expect.holder!r}, logged by entry #{expect.entry}")
        if expect.note is not UNKNOWN:
            for (code, note) in session.execute(text(
                f"SELECT code, note FROM issued_code WHERE {batch_range_sql()} ORDER BY id"), {"b": batch_id}
            ):  # fmt: skip
                if note != expect.note and (code not in replay.codes or replay.codes[code].note is UNKNOWN):
                    problems.append(f"{code}: note differs from the one logged by entry #{expect.entry}")
        if expect.rows_sha256 is not None:
            # an imported code's own time and issuer, or (where its file gave none) the batch's
            rows = [(stored_time(a), b) for a, b in session.execute(text(
                "SELECT coalesce(issued_code.origin_at, b.created_at), coalesce(issued_code.origin_by, b.actor) "
                f"FROM issued_code JOIN batch b ON b.id = issued_code.batch_id WHERE {batch_range_sql()} "
                "ORDER BY issued_code.id"
            ), {"b": batch_id})]  # fmt: skip
            if rows_digest(rows) != expect.rows_sha256:
                problems.append(f"batch {batch_id}: issue times or issuers differ from those "
                                f"logged by entry #{expect.entry}")  # fmt: skip
        if kind != "import":
            # an issued code's time and issuer are its batch's: a code row naming its own is forged
            for code, origin_by, origin_at in session.execute(text(
                f"SELECT code, origin_by, origin_at FROM issued_code WHERE {batch_range_sql()} "
                "AND (origin_by IS NOT NULL OR origin_at IS NOT NULL) ORDER BY id"
            ), {"b": batch_id}):
                problems.append(f"{code}: says issued by {origin_by} at {origin_at}, batch {batch_id} "
                                f"was made by {actor} at {created}")  # fmt: skip
    return problems


def _validity_problems(session: Session, replay: Replay, renewed: Counter[tuple[int, Any]]) -> list[str]:
    """Every code never renewed is valid until what its batch's entry gave it. One grouped
    read of the register: a batch whose codes hold another end than its entry logged is
    looked at code by code only when renewed codes do not account for the difference."""
    problems: list[str] = []
    for batch_id, held, count in session.execute(text(
        "SELECT batch_id, valid_until, count(*) FROM issued_code GROUP BY batch_id, valid_until"
    )):  # fmt: skip
        expect = replay.batches.get(batch_id)
        if expect is None or expect.valid_until is UNKNOWN or same_time(held, expect.valid_until):
            continue
        if renewed[(batch_id, _moment(held))] == count:
            continue
        which = "valid_until IS NULL" if held is None else "valid_until = :v"
        for (code,) in session.execute(text(
            f"SELECT code FROM issued_code WHERE {batch_range_sql()} AND {which} ORDER BY id LIMIT 50"
        ), {"b": batch_id, "v": held}):  # fmt: skip
            if code not in replay.codes or replay.codes[code].valid_until is UNKNOWN:
                problems.append(f"{code}: valid until {_moment(held)}, log entry #{expect.entry} "
                                f"gave its batch {expect.valid_until} and no renewal names it")  # fmt: skip
    for batch_id, expect in replay.batches.items():
        if expect.valid_until_sha256 is None:
            continue
        # each code's end when the batch was made: before its first renewal, else as it is now
        ends = []
        for code, held in session.execute(text(
            f"SELECT code, valid_until FROM issued_code WHERE {batch_range_sql()} ORDER BY id"
        ), {"b": batch_id}):  # fmt: skip
            named = replay.codes.get(code)
            first = named.valid_until_first if named is not None and named.renewals else _moment(held)
            if first is UNKNOWN:
                break
            ends.append((stored_time(first),))
        else:
            if rows_digest(ends) != expect.valid_until_sha256:
                problems.append(f"batch {batch_id}: its codes' ends of validity differ from those "
                                f"logged by entry #{expect.entry}")  # fmt: skip
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
        for part in rows.partitions(50_000):
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
    named = (*SHAPE_COLUMNS, *SERIES_SETTINGS)
    columns = ", ".join(named)
    held_ids: set[int] = set()
    for row in session.execute(text(
        f"SELECT id, created_by, created_at, scatter_key, {columns} FROM series ORDER BY id"
    )):
        series_id, created_by, held = row[0], row[1], dict(zip(named, row[4:]))
        held["holds_people"] = bool(held["holds_people"])  # SQLite keeps 0/1
        held_ids.add(int(series_id))
        if row[3] is None:
            held["scatter_key_sha256"] = None
        else:  # the key is sealed: its fingerprint is the raw key's, opened with the key file
            try:
                held["scatter_key_sha256"] = fingerprint(keyring_of(session).open(str(held["key"]), bytes(row[3])))
            except KeyFileError as exc:
                problems.append(f"series {held['key']}: {exc.message}")
        if series_id not in replay.series_entry:
            problems.append(f"series {held['key']}: its definition is not in the log")
            continue
        entry, actor, at = replay.series_entry[series_id]
        if created_by != actor or not same_time(stored_time(row[2]), at):
            problems.append(f"series {held['key']}: created by {created_by} at {row[2]}, "
                            f"log entry #{entry} says {actor} at {at}")  # fmt: skip
        for column, implied in replay.series.get(series_id, {}).items():
            if column in held and str(held[column]) != str(implied):
                problems.append(f"series {held['key']}: {column} is {held[column]!r}, the log implies {implied!r}")
    # a series the log defined is gone (a superuser's replica mode skips the foreign keys)
    for series_id, (entry, _actor, _at) in sorted(replay.series_entry.items()):
        if series_id not in held_ids:
            key = replay.series.get(series_id, {}).get("key", f"#{series_id}")
            problems.append(f"series {key}: defined by log entry #{entry}, it is missing from the register")
    return problems
