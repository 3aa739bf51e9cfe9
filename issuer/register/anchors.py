"""Checking the log against an anchor: a log entry's id and hash, written down somewhere
the register cannot reach, and the whole chain recomputed in one snapshot."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from issuer.errors import InvalidFormat
from issuer.register.admin import snapshot
from issuer.register.logverify import ChainReport, verify_chain
from issuer.register.models import LogEntry
from issuer.register.store import Register


@dataclass(frozen=True)
class Anchor:
    """Written down somewhere the register cannot reach: the sealed tree's size and root
    (``tree:SIZE:ROOT``, what ``log anchor`` prints), or one entry's id and hash
    (``ID:HASH``, what it printed before the log was chained per series)."""

    entry_id: int  # a tree anchor: the tree's size
    hash: str
    tree: bool = False

    def __str__(self) -> str:
        return f"tree:{self.entry_id}:{self.hash}" if self.tree else f"{self.entry_id}:{self.hash}"


def parse_anchor(value: str) -> Anchor:
    text_ = value.strip()
    tree = text_.lower().startswith("tree:")
    entry, sep, digest = text_[5:].partition(":") if tree else text_.partition(":")
    digest = digest.strip().lower()
    if (
        not sep
        or not entry.strip().isdigit()
        or len(digest) != 64
        or any(ch not in "0123456789abcdef" for ch in digest)
    ):
        raise InvalidFormat(f"an anchor looks like tree:SIZE:<64 hex digits> or ID:<64 hex digits>, not {value!r}")
    return Anchor(int(entry), digest, tree)


@dataclass(frozen=True)
class AnchorCheck:
    anchor: Anchor
    problem: str | None

    @property
    def holds(self) -> bool:
        return self.problem is None


def check_anchor(session: Session, report: ChainReport, anchor: Anchor) -> AnchorCheck:
    """Whether the log still holds what the anchor vouches for.

    A tree anchor: the first SIZE sealed leaves still give ROOT, so every entry sealed then
    is as it was, in the same places, whichever chain it is on. An entry anchor: the entry
    is still in its chain with the same hash; with the chain intact up to it, every entry
    of that chain up to it is as it was (before the log was chained per series, that was
    the whole log).
    """
    if anchor.tree:
        return _check_tree_anchor(session, report, anchor)
    stored = session.scalar(select(LogEntry.hash).where(LogEntry.id == anchor.entry_id))
    if stored is None:
        return AnchorCheck(anchor, f"entry {anchor.entry_id} is no longer in the log")
    if stored != anchor.hash:
        return AnchorCheck(
            anchor, f"entry {anchor.entry_id} has a different hash now: the log was rewritten"
        )
    if report.problem is not None and report.problem.entry_id <= anchor.entry_id:
        return AnchorCheck(
            anchor, f"the chain breaks at entry {report.problem.entry_id}, before the anchor"
        )
    return AnchorCheck(anchor, None)


def _check_tree_anchor(session: Session, report: ChainReport, anchor: Anchor) -> AnchorCheck:
    from issuer.proofs.merkle import root
    from issuer.register.log import leaf_hashes
    from issuer.register.models import LogLeaf

    size = anchor.entry_id
    leaves = leaf_hashes(session, size)
    if len(leaves) < size:
        return AnchorCheck(anchor, f"the log's sealed tree has {len(leaves)} leaves, fewer than the anchor's {size}: "
                                   "entries were removed")  # fmt: skip
    if root(leaves).hex() != anchor.hash:
        return AnchorCheck(anchor, f"the first {size} leaves no longer give the anchor's root: the log was rewritten")
    if report.problem is not None:
        position = session.scalar(select(LogLeaf.position).where(LogLeaf.entry_id == report.problem.entry_id))
        if position is not None and position < size:
            return AnchorCheck(anchor, f"the chain breaks at entry {report.problem.entry_id}, inside the anchored tree")
    return AnchorCheck(anchor, None)


def verify_log(
    register: Register, anchors: Sequence[Anchor] = ()
) -> tuple[ChainReport, list[AnchorCheck]]:
    """Recompute every chain and the sealed tree in one consistent snapshot; check anchors."""
    with snapshot(register) as session:
        report = verify_chain(session)
        checks = [check_anchor(session, report, anchor) for anchor in anchors]
    return report, checks


def current_anchor(register: Register) -> tuple[Anchor, Any]:
    """Seal what has committed and give the tree's size and root, with the newest sealed
    entry's time."""
    from issuer.proofs.merkle import root
    from issuer.register.log import leaf_hashes, seal
    from issuer.register.models import LogLeaf

    size = register.write(seal)
    with snapshot(register) as session:
        top = root(leaf_hashes(session, size))
        at = session.scalar(
            select(LogEntry.at).join(LogLeaf, LogLeaf.entry_id == LogEntry.id).where(LogLeaf.position == size - 1)
        ) if size else None
    return Anchor(size, top.hex(), tree=True), at
