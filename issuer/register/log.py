"""The hash-chained log: one chain per series, one for the register, sealed into a Merkle tree.

Every entry's hash is SHA-256 over a canonical JSON of its content and the previous
hash *in its chain*. A series' acts chain on that series (``chain`` = the series' id),
everything else — acts on no series, a series being added — on the register's chain
(``chain`` = 0; every entry written before the log was chained per series is there too,
unchanged). Each chain has a head row in ``log_chain`` that its writer locks, so acts on
different series never wait for each other. Recomputing every chain shows the first
entry that was altered, deleted (a broken link, or a head that names an entry no longer
there) or inserted (a link that does not follow): :mod:`issuer.register.logverify`.

The chains are tied together by *sealing* (:func:`seal`): under a lock only sealing takes
(``log_tree``), every committed entry not yet sealed gets the next leaf position
(``log_leaf``), oldest id first. Within a chain entries commit in id order (the next
writer waits for the chain's lock), so what sealing sees of each chain is a prefix and a
position, once given, never changes. The leaves in position order form the Merkle tree of
RFC 6962 (leaf data: the entry's 32-byte hash), whose size and root are the register-wide
digest: :func:`anchor` and signed checkpoints are that pair. Someone who can rewrite a
chain *and* its head can hide an edit from the chain alone, and someone who can also
rewrite the leaves from the tree alone; a root written down elsewhere cannot be rewritten.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any, cast

from sqlalchemy import Table, Text, bindparam, func, insert, select, text, update
from sqlalchemy.orm import Session

from issuer.register.driver import Prepared
from issuer.register.models import LogChain, LogEntry, LogLeaf, LogTree, UTCDateTime

GENESIS = "0" * 64


#: made once (``json.dumps`` with options makes an encoder per call): the hashed text and
#: a detail's text, exactly as ``json.dumps`` with these options writes them
_CANONICAL = json.JSONEncoder(sort_keys=True, separators=(",", ":"), ensure_ascii=False)
_DETAIL = json.JSONEncoder(sort_keys=True, ensure_ascii=False, default=str)


def timestamp_text(at: datetime) -> str:
    """The one textual form of a time that goes into a hash."""
    return at.strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def validity_detail(valid_until: datetime | None) -> str | None:
    """How a log entry records the end of validity an act gave its codes (None: no end):
    the replay holds every code never renewed since to it."""
    return None if valid_until is None else timestamp_text(valid_until)


def stored_time(value: Any) -> datetime | None:
    """A stored or logged time read by plain SQL (SQLite gives text; naive means UTC) as
    an aware UTC datetime."""
    if value is None:
        return None
    when = value if isinstance(value, datetime) else datetime.fromisoformat(str(value))
    return when.replace(tzinfo=UTC) if when.tzinfo is None else when.astimezone(UTC)


def entry_text(
    *,
    entry_id: int,
    at: datetime,
    actor: str,
    action: str,
    series_id: int | None,
    code: str | None,
    batch_id: int | None,
    detail: str,
    prev_hash: str,
    login: str | None = None,
    chain: int = 0,
) -> str:
    """The canonical JSON an entry's hash is taken over (keys sorted, no spaces; one line)."""
    content: dict[str, Any] = {
        "id": entry_id,
        "at": timestamp_text(at),
        "actor": actor,
        "action": action,
        "series": series_id,
        "code": code,
        "batch": batch_id,
        "detail": detail,
        "prev": prev_hash,
    }
    if login is not None:  # PostgreSQL's append function records the login (SQLite has none)
        content["login"] = login
    if chain:  # a series' chain; the register's chain (0) hashes as the single chain always did
        content["chain"] = chain
    return _CANONICAL.encode(content)


def entry_hash(**fields: Any) -> str:
    """SHA-256 (hex) of :func:`entry_text`."""
    return hashlib.sha256(entry_text(**fields).encode("utf-8")).hexdigest()


def row_text(entry: LogEntry) -> str:
    """:func:`entry_text` of a stored entry."""
    return entry_text(
        entry_id=entry.id, at=entry.at, actor=entry.actor, action=entry.action, series_id=entry.series_id,
        code=entry.code, batch_id=entry.batch_id, detail=entry.detail, prev_hash=entry.prev_hash,
        login=entry.login, chain=int(entry.chain),
    )  # fmt: skip


@dataclass(frozen=True)
class NewEntry:
    """What a caller logs; the chain fields are filled in by :func:`append_entries`."""

    action: str
    series_id: int | None = None
    code: str | None = None
    batch_id: int | None = None
    detail: Mapping[str, Any] | None = None


def rows_digest(rows: Iterable[Sequence[Any]]) -> str:
    """SHA-256 over rows of plain values, one JSON line each, times as :func:`timestamp_text`:
    an import's log entry covers who holds what, with which note, since when and from whom."""
    digest = hashlib.sha256()
    for row in rows:
        values = [timestamp_text(v) if isinstance(v, datetime) else v for v in row]
        digest.update(json.dumps(values, ensure_ascii=False).encode("utf-8") + b"\n")
    return digest.hexdigest()


def detail_text(detail: Mapping[str, Any] | None) -> str:
    return _DETAIL.encode(dict(detail or {}))


#: acts logged on the register's chain although they name a series (the series' own
#: chain starts after it exists); the PostgreSQL append function decides the same way
REGISTER_ACTS = frozenset({"series.add"})


def chain_of(action: str, series_id: int | None) -> int:
    """The chain an entry is appended to: its series' chain, else the register's (0)."""
    return 0 if series_id is None or action in REGISTER_ACTS else series_id


_CHAIN = cast(Table, LogChain.__table__)
_ENTRY = cast(Table, LogEntry.__table__)
_ENTRY_COLUMNS = (
    "id", "at", "actor", "action", "series_id", "code", "batch_id", "detail", "prev_hash", "hash", "chain",
)  # fmt: skip
# built and compiled once: appending runs on every act, so it stays lean
_NEWEST_ID = select(func.coalesce(func.max(_ENTRY.c.id), 0)).scalar_subquery()
#: a chain's head, and the newest entry id of any chain (the next entry's id follows it)
_LOCK_CHAIN = Prepared(
    select(_CHAIN.c.last_hash, _NEWEST_ID).where(_CHAIN.c.chain == bindparam("chain")).with_for_update()
)
_NEW_CHAIN = Prepared(insert(_CHAIN).values(chain=bindparam("chain"), last_id=0, last_hash=GENESIS))
_LAST_ID = Prepared(select(_NEWEST_ID))
_INSERT_ENTRY = Prepared(insert(_ENTRY).values({name: bindparam(name) for name in _ENTRY_COLUMNS}))
_MOVE_CHAIN = Prepared(
    update(_CHAIN)
    .where(_CHAIN.c.chain == bindparam("at_chain"))
    .values(last_id=bindparam("new_id"), last_hash=bindparam("new_hash"))
)


def chain_rows(
    entries: Iterable[NewEntry], *, actor: str, at: datetime, last_id: int, heads: dict[int, str]
) -> list[dict[str, Any]]:
    """The log rows for ``entries``, numbered after ``last_id``, each chained after its
    chain's newest hash in ``heads`` (which moves along)."""
    rows: list[dict[str, Any]] = []
    for entry in entries:
        last_id += 1
        chain = chain_of(entry.action, entry.series_id)
        detail = detail_text(entry.detail)
        prev_hash = heads[chain]
        digest = entry_hash(
            entry_id=last_id, at=at, actor=actor, action=entry.action, series_id=entry.series_id,
            code=entry.code, batch_id=entry.batch_id, detail=detail, prev_hash=prev_hash, chain=chain,
        )  # fmt: skip
        rows.append({
            "id": last_id, "at": at, "actor": actor, "action": entry.action, "series_id": entry.series_id,
            "code": entry.code, "batch_id": entry.batch_id, "detail": detail, "prev_hash": prev_hash,
            "chain": chain, "hash": digest,
        })  # fmt: skip
        heads[chain] = digest
    return rows


#: PostgreSQL: the one append path (SECURITY DEFINER, migrations log_rights, log_chains, lean_append):
#: it locks the entries' chains, computes the hashes and records the login itself
_APPEND_FUNCTION = Prepared(select(func.issuer_log_append(
    bindparam("at", type_=UTCDateTime()), bindparam("actor", type_=Text()), bindparam("entries", type_=Text())
)))


def append_entries(
    session: Session, entries: Iterable[NewEntry], *, actor: str, at: datetime
) -> int:
    """Append entries to their chains inside the caller's transaction; returns how many.

    The one place where the log grows: every act appends through here. On PostgreSQL the
    database's own SECURITY DEFINER function appends (it locks each chain's head, computes
    the hashes and records the login), so no role needs the right to write the log's
    tables. Otherwise (SQLite: one writer at a time) each chain's head row is read, the
    entries go in (one statement) and each chain's head moves. Writes go straight to the
    session's connection (flush ORM objects they refer to first): an ORM object that the
    caller loaded from these tables would not see them.
    """
    entries = list(entries)
    if not entries:
        return 0
    connection = session.connection()
    if connection.dialect.name == "postgresql":
        payload = [
            {"action": e.action, "series": e.series_id, "code": e.code, "batch": e.batch_id,
             "detail": detail_text(e.detail)}
            for e in entries
        ]  # fmt: skip
        # sent, not waited for: an issue's last writes, this and its COMMIT go out together
        # (pipeline mode); the function appends every entry or raises
        _APPEND_FUNCTION.send(connection, {"at": at, "actor": actor, "entries": json.dumps(payload)})
        return len(payload)
    heads: dict[int, str] = {}
    last_id = None
    for chain in sorted({chain_of(e.action, e.series_id) for e in entries}):  # one order: no deadlock
        found = _LOCK_CHAIN.one(connection, {"chain": chain})
        if found is None:
            _NEW_CHAIN.rows(connection, {"chain": chain})
            found = (GENESIS, None)
        heads[chain], last_id = str(found[0]), found[1]
    if last_id is None:  # (the newest chain read is new: no head row to read it with)
        last = _LAST_ID.one(connection)
        last_id = last[0] if last else 0
    rows = chain_rows(entries, actor=actor, at=at, last_id=int(last_id), heads=heads)
    if len(rows) == 1:
        _INSERT_ENTRY.rows(connection, rows[0])
    else:
        _INSERT_ENTRY.many(connection, rows)
    newest = {row["chain"]: row for row in rows}
    for chain, row in newest.items():
        _MOVE_CHAIN.rows(connection, {"at_chain": chain, "new_id": row["id"], "new_hash": row["hash"]})
    return len(rows)


def append_entry(session: Session, entry: NewEntry, *, actor: str, at: datetime) -> None:
    append_entries(session, [entry], actor=actor, at=at)


def head(session: Session) -> tuple[int, str]:
    """The newest entry's id and hash (whatever its chain)."""
    row = session.execute(select(LogEntry.id, LogEntry.hash).order_by(LogEntry.id.desc()).limit(1)).first()
    return (0, GENESIS) if row is None else (int(row[0]), str(row[1]))


# --- sealing: leaf positions for the Merkle tree ------------------------------------

#: SQLite's copy of what PostgreSQL's ``issuer_log_seal`` runs (migration log_chains): the
#: committed entries not yet sealed, per chain after its newest sealed one, numbered on
_SEAL_SQLITE = text(
    "INSERT INTO log_leaf (position, entry_id, chain) "
    "SELECT :size + row_number() OVER (ORDER BY e.id) - 1, e.id, e.chain "
    "FROM log_chain c JOIN log_entry e ON e.chain = c.chain "
    "AND e.id > coalesce((SELECT max(l.entry_id) FROM log_leaf l WHERE l.chain = c.chain), 0)"
)


def seal(session: Session) -> int:
    """Give every committed, unsealed entry its leaf position; returns the tree's size.

    Takes the one lock only sealing takes (the ``log_tree`` row), never a chain's: desks
    keep appending meanwhile, and what they commit later is sealed next time.
    """
    connection = session.connection()
    if connection.dialect.name == "postgresql":
        return int(connection.execute(text("SELECT issuer_log_seal()")).scalar_one())
    size = int(connection.execute(text("SELECT size FROM log_tree WHERE id = 1")).scalar_one())
    added = connection.execute(_SEAL_SQLITE, {"size": size}).rowcount
    if added:
        connection.execute(text("UPDATE log_tree SET size = :s WHERE id = 1"), {"s": size + added})
    return size + added


def leaf_hashes(session: Session, size: int | None = None) -> list[bytes]:
    """The Merkle leaf hashes in position order (the first ``size`` of them)."""
    from issuer.proofs.merkle import leaf_hash

    statement = (
        select(LogEntry.hash)
        .join(LogLeaf, LogLeaf.entry_id == LogEntry.id)
        .order_by(LogLeaf.position)
    )
    if size is not None:
        statement = statement.where(LogLeaf.position < size)
    return [leaf_hash(bytes.fromhex(h)) for h in session.scalars(statement)]


def tree_size(session: Session) -> int:
    return int(session.scalar(select(LogTree.size).where(LogTree.id == 1)) or 0)
