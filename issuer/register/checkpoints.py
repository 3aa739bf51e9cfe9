"""Signed checkpoints of the log and inclusion receipts: the register's half.

The statements themselves (their text, signing and checking) are pure
(:mod:`issuer.proofs.statements`); here the log is sealed, its leaves read and the proofs
built. A checkpoint covers the sealed leaves only, and sealing is the one step that gives
positions, so a checkpoint's tree is a prefix that can never gain a member later.
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import UTC, datetime

from sqlalchemy import select

from issuer.errors import NotFound, ProofFailed
from issuer.proofs import merkle
from issuer.proofs.statements import Checkpoint, Receipt, check_private_key, sign_checkpoint
from issuer.register.admin import snapshot
from issuer.register.log import leaf_hashes, row_text, seal
from issuer.register.models import LogEntry, LogLeaf
from issuer.register.store import Register


def _at(clock: Callable[[], datetime]) -> str:
    return clock().astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def make_checkpoint(register: Register, private_pem: bytes) -> Checkpoint:
    """Seal what has committed and sign the tree's size and root."""
    check_private_key(private_pem)  # a key that cannot sign refuses before anything is sealed
    size = register.write(seal)
    with snapshot(register) as session:
        top = merkle.root(leaf_hashes(session, size))
    return sign_checkpoint(private_pem, size=size, root=top, at=_at(register.clock))


def extension_proof(register: Register, old: Checkpoint) -> tuple[int, bytes, list[bytes]]:
    """The sealed tree now (size, root) and the RFC 6962 consistency proof from ``old``'s size."""
    with snapshot(register) as session:
        leaves = leaf_hashes(session)
    if len(leaves) < old.size:
        raise ProofFailed(f"the log's sealed tree has {len(leaves)} leaves, fewer than the checkpoint's {old.size}: "
                          "entries were removed")  # fmt: skip
    return len(leaves), merkle.root(leaves), merkle.consistency_proof(old.size, leaves)


def receipt_for_batch(register: Register, batch_id: int, private_pem: bytes) -> Receipt:
    """Seal, sign a checkpoint and prove the log entry that opened ``batch_id`` is its leaf."""
    check_private_key(private_pem)
    size = register.write(seal)
    with snapshot(register) as session:
        found = session.execute(
            select(LogEntry, LogLeaf.position)
            .join(LogLeaf, LogLeaf.entry_id == LogEntry.id)
            .where(LogEntry.batch_id == batch_id)
            .order_by(LogEntry.id)
            .limit(1)
        ).first()
        if found is None:
            raise NotFound(f"batch {batch_id} has no sealed log entry")
        entry, position = found
        index = int(position)
        text = row_text(entry)
        leaves = leaf_hashes(session, size)
    path = merkle.inclusion_proof(index, leaves)  # hashes every other leaf once...
    top = merkle.root_from_path(index, size, leaves[index], path)  # ...the root from it
    assert top is not None
    checkpoint = sign_checkpoint(private_pem, size=size, root=top, at=_at(register.clock))
    return Receipt(text, index, path, checkpoint)
