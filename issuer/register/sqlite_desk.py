"""One code at a time on SQLite, straight through the driver.

A counter issues codes one by one, each in its own durable transaction, and there the
cost of building statements dominates the cost of writing them. This path writes the
very rows the general path writes (batch, codes, counter, chained log entry, log
head) with the driver's own ``execute`` inside ``BEGIN IMMEDIATE``. It serves plain
issues only; a request id, a code sink or a series holding imported numbers take
the general path.
"""

from __future__ import annotations

import random
import sqlite3
import time
from contextlib import closing
from datetime import UTC, datetime
from types import SimpleNamespace
from typing import TYPE_CHECKING, Any, cast

from issuer.errors import NotFound, RegisterError, did_you_mean
from issuer.register.log import NewEntry, chain_rows
from issuer.register.models import SCATTERED
from issuer.register.series import code_format, permutation
from issuer.register.store import WRITE_ATTEMPTS

if TYPE_CHECKING:
    from issuer.register.issuing import IssueResult
    from issuer.register.store import Register

_SELECT_SERIES = "SELECT * FROM series WHERE key = ?"
_INSERT_BATCH = (
    "INSERT INTO batch (series_id, kind, request_id, count, created_at, actor) "
    "VALUES (?, 'issue', NULL, ?, ?, ?)"
)
_INSERT_CODE = (
    "INSERT INTO issued_code (series_id, code, base, status, batch_id, holder, note, "
    "issued_at, issued_by, print_count) VALUES (?, ?, ?, 'issued', ?, ?, ?, ?, ?, 0)"
)
_MOVE_COUNTER = "UPDATE series SET next_counter = ?, code_count = code_count + ? WHERE id = ?"
_HEAD = "SELECT last_id, last_hash FROM log_head WHERE id = 1"
_INSERT_ENTRY = (
    "INSERT INTO log_entry (id, at, actor, action, series_id, code, batch_id, detail, "
    "prev_hash, hash) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)"
)
_MOVE_HEAD = "UPDATE log_head SET last_id = ?, last_hash = ? WHERE id = 1"


def sqlite_time(at: datetime) -> str:
    """A UTC time as SQLAlchemy's SQLite dialect stores it (so both paths read alike)."""
    return at.astimezone(UTC).strftime("%Y-%m-%d %H:%M:%S.%f")


def _busy(exc: sqlite3.OperationalError) -> bool:
    message = str(exc).lower()
    return "locked" in message or "busy" in message


def issue_plain(
    register: Register, key: str, count: int, *, holder: str | None, note: str | None
) -> IssueResult | None:
    """Issue ``count`` codes in one durable transaction; ``None`` when this series needs
    the general path (it holds imported numbers)."""
    for attempt in range(1, WRITE_ATTEMPTS + 1):
        pooled = register.engine.raw_connection()  # a pooled driver connection, set up by store
        with closing(pooled):
            raw = cast(sqlite3.Connection, pooled.driver_connection)
            try:
                raw.execute("BEGIN IMMEDIATE")
            except sqlite3.OperationalError as exc:
                if not _busy(exc):
                    raise
                if attempt == WRITE_ATTEMPTS:
                    raise RegisterError(
                        "the register stayed busy (another desk is writing); try again"
                    ) from None
                time.sleep(random.uniform(0.5, 1.0) * min(0.01 * 2**attempt, 0.5))
                continue
            try:
                result = _issue(raw, register, key, count, holder, note)
            except BaseException:
                raw.execute("ROLLBACK")
                raise
            raw.execute("COMMIT" if result is not None else "ROLLBACK")
            return result
    raise AssertionError("unreachable")  # pragma: no cover


def _issue(
    raw: sqlite3.Connection,
    register: Register,
    key: str,
    count: int,
    holder: str | None,
    note: str | None,
) -> IssueResult | None:
    from issuer.register.issuing import IssuedInfo, IssueResult, issue_detail, plan_allocation

    cursor = raw.execute(_SELECT_SERIES, (key,))
    found = cursor.fetchone()
    if found is None:
        keys = [row[0] for row in raw.execute("SELECT key FROM series ORDER BY key")]
        raise NotFound(f"no series {key!r} in this register{did_you_mean(key, keys, 'series')}")
    series: Any = SimpleNamespace(**dict(zip([d[0] for d in cursor.description], found)))
    if series.imported_count:
        return None
    bases, counter = plan_allocation(cast(Any, None), series, count)
    at = register.clock()
    stamp = sqlite_time(at)
    actor = register.actor
    batch_id = raw.execute(_INSERT_BATCH, (series.id, count, stamp, actor)).lastrowid
    shape = code_format(series)
    codes = [shape.code_for_base(base) for base in bases]
    raw.executemany(
        _INSERT_CODE,
        [(series.id, code, base, batch_id, holder, note, stamp, actor) for code, base in zip(codes, bases)],
    )
    raw.execute(_MOVE_COUNTER, (counter, count, series.id))
    last_id, last_hash = raw.execute(_HEAD).fetchone()
    entry = NewEntry("issue", series.id, codes[0] if count == 1 else None, batch_id,
                     issue_detail(codes, None))  # fmt: skip
    (row,) = chain_rows([entry], actor=actor, at=at, last_id=last_id, last_hash=last_hash)
    raw.execute(
        _INSERT_ENTRY,
        (row["id"], stamp, actor, row["action"], row["series_id"], row["code"], row["batch_id"],
         row["detail"], row["prev_hash"], row["hash"]),
    )  # fmt: skip
    raw.execute(_MOVE_HEAD, (row["id"], row["hash"]))
    infos = [IssuedInfo(code, shape.display(code), base, holder) for code, base in zip(codes, bases)]
    protected = permutation(series).is_protected if series.mode == SCATTERED else None
    assert batch_id is not None
    return IssueResult(batch_id, series.key, count, infos, protected=protected,
                       head=infos[0], tail=infos[-1])  # fmt: skip
