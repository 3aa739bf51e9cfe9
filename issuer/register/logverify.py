"""Verifying the hash-chained log (see :mod:`issuer.register.log`): every chain recomputed
from its start, each chain's head row against its last entry, and the sealed Merkle tree's
leaves against the entries; the first thing that does not fit is reported.
"""

from __future__ import annotations

import hashlib
from collections.abc import Generator
from dataclasses import dataclass
from typing import Any

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from issuer.register.log import GENESIS, row_text, tree_size
from issuer.register.models import LogChain, LogEntry, LogLeaf


@dataclass(frozen=True)
class ChainProblem:
    entry_id: int
    problem: str


@dataclass(frozen=True)
class ChainReport:
    entries: int
    #: the newest entry (any chain)
    head_id: int
    head_hash: str
    problem: ChainProblem | None
    chains: int = 1
    #: the sealed Merkle tree: leaves and root (hex)
    tree_size: int = 0
    tree_root: str = ""

    @property
    def intact(self) -> bool:
        return self.problem is None


def _stream(session: Session) -> Generator[LogEntry, None, None]:
    statement = select(LogEntry).order_by(LogEntry.id).execution_options(yield_per=5000)
    result = session.scalars(statement)
    try:
        yield from result
    finally:
        result.close()  # PostgreSQL streams through a server-side cursor: close it early


def _chain_name(chain: int) -> str:
    return "the register's chain" if chain == 0 else f"the chain of series #{chain}"


def verify_chain(session: Session) -> ChainReport:
    """Recompute every chain from its start and the sealed tree; report the first thing
    that does not fit."""
    from issuer.proofs.merkle import Frontier, leaf_hash

    tails: dict[int, tuple[int, str]] = {}  # chain -> (newest id, its hash) seen so far
    # memory grows with the number of chains, never with the number of entries
    count = 0
    problem: ChainProblem | None = None
    newest = (0, GENESIS)
    entries = _stream(session)
    for entry in entries:
        count += 1
        chain = int(entry.chain)
        last_id, previous = tails.get(chain, (0, GENESIS))
        if entry.prev_hash != previous:
            # (the hash has no index: this reads the log, once, on a log already found broken)
            known = session.scalar(select(LogEntry.id).where(LogEntry.hash == entry.prev_hash).limit(1))
            if entry.prev_hash != GENESIS and known is None:
                what = (f"links to an entry no longer in the log: an entry of {_chain_name(chain)} "
                        f"after #{last_id} is missing (deleted)") if last_id else (
                        f"links to an entry no longer in the log: the start of {_chain_name(chain)} is missing")
            else:
                what = f"does not link to the entry before it in {_chain_name(chain)} (inserted or reordered)"
            problem = ChainProblem(entry.id, what)
            break
        recomputed = hashlib.sha256(row_text(entry).encode("utf-8")).hexdigest()
        if recomputed != entry.hash:
            problem = ChainProblem(entry.id, "its content no longer matches its hash (altered)")
            break
        tails[chain] = (entry.id, entry.hash)
        newest = (entry.id, entry.hash)
    entries.close()
    heads = {int(c): (int(i), str(h)) for c, i, h in session.execute(
        select(LogChain.chain, LogChain.last_id, LogChain.last_hash).order_by(LogChain.chain))}  # fmt: skip
    if problem is None:
        problem = _heads_problem(tails, heads)
    size = tree_size(session)
    frontier = Frontier()
    if problem is None:
        problem = _tree_problem(session, size, frontier, leaf_hash)
    return ChainReport(
        entries=count, head_id=newest[0], head_hash=newest[1], problem=problem, chains=len(heads),
        tree_size=size, tree_root=frontier.root().hex(),
    )


def _heads_problem(tails: dict[int, tuple[int, str]], heads: dict[int, tuple[int, str]]) -> ChainProblem | None:
    for chain in sorted(set(tails) | set(heads)):
        seen_id, seen_hash = tails.get(chain, (0, GENESIS))
        if chain not in heads:
            return ChainProblem(seen_id, f"{_chain_name(chain)} has no head row (removed behind the tool's back)")
        head_id, head_hash = heads[chain]
        if seen_id > head_id:
            return ChainProblem(
                seen_id, f"lies beyond the chain's head (#{head_id}, {_chain_name(chain)}): added behind the tool's back"
            )
        if seen_id < head_id:
            return ChainProblem(head_id, f"entry {head_id} is missing (removed at the end of {_chain_name(chain)})")
        if head_hash != seen_hash:
            return ChainProblem(head_id, f"the head of {_chain_name(chain)} does not match its last entry")
    return None


def _tree_problem(session: Session, size: int, frontier: Any, leaf_hash: Any) -> ChainProblem | None:
    """The sealed leaves: positions 0..size-1, each an entry of the log once, in its chain
    in id order with nothing of the chain left out before it (what sealing gives); the
    frontier gets every leaf. Runs after every chain verified, so the hashes are the entries'."""
    sealed: dict[int, int] = {}  # chain -> its newest sealed entry's id
    counts: dict[int, int] = {}  # chain -> how many of its entries are sealed
    expected = 0
    rows = session.execute(
        select(LogLeaf.position, LogLeaf.entry_id, LogLeaf.chain, LogEntry.chain, LogEntry.hash)
        .outerjoin(LogEntry, LogEntry.id == LogLeaf.entry_id)
        .order_by(LogLeaf.position)
        .execution_options(yield_per=5000)
    )
    for position, entry_id, leaf_chain, entry_chain, entry_hash_ in rows:
        if position != expected:
            rows.close()
            return ChainProblem(int(entry_id), f"leaf {expected} of the sealed tree is missing (next found: {position})")
        if entry_chain is None:
            rows.close()
            return ChainProblem(int(entry_id), f"leaf {position} names an entry no longer in the log")
        chain = int(leaf_chain)
        if chain != int(entry_chain) or int(entry_id) <= sealed.get(chain, 0):
            rows.close()
            return ChainProblem(int(entry_id), f"leaf {position} is out of its chain's order (leaves moved)")
        sealed[chain] = int(entry_id)
        counts[chain] = counts.get(chain, 0) + 1
        frontier.append(leaf_hash(bytes.fromhex(entry_hash_)))
        expected += 1
    if expected != size:
        return ChainProblem(0, f"the sealed tree holds {expected} leaves but its size says {size}")
    # each chain's sealed entries are its oldest ones: as many entries up to the newest sealed one as leaves
    for chain, newest in sorted(sealed.items()):
        before = session.scalar(
            select(func.count()).select_from(LogEntry).where(LogEntry.chain == chain, LogEntry.id <= newest)
        )
        if int(before or 0) != counts[chain]:
            return ChainProblem(newest, f"{_chain_name(chain)} has entries before #{newest} that no leaf holds "
                                        "(leaves moved)")  # fmt: skip
    return None
