"""The Merkle tree of RFC 6962 section 2.1, over leaf hashes.

* leaf hash ``SHA-256(0x00 || data)``, node hash ``SHA-256(0x01 || left || right)``;
* the tree of n > 1 leaves splits at k, the largest power of two smaller than n;
* inclusion proofs (RFC 6962 2.1.1, PATH) and consistency proofs (2.1.2, PROOF),
  checked with the verification algorithms of RFC 9162 sections 2.1.3.2 and 2.1.4.2.

Everything here takes leaf *hashes* (32 bytes each), so a caller hashes each leaf once.
:class:`Frontier` keeps only the roots of the perfect subtrees along the tree's right
edge (at most log2 n of them), so a tree grows by one leaf in O(log n) and its root
needs no other leaf.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from dataclasses import dataclass, field

EMPTY_ROOT = hashlib.sha256(b"").digest()


def leaf_hash(data: bytes) -> bytes:
    return hashlib.sha256(b"\x00" + data).digest()


def node_hash(left: bytes, right: bytes) -> bytes:
    return hashlib.sha256(b"\x01" + left + right).digest()


def _split(n: int) -> int:
    """The largest power of two smaller than n (n > 1)."""
    return 1 << ((n - 1).bit_length() - 1)


def root(leaves: Sequence[bytes]) -> bytes:
    """MTH over leaf hashes (the empty tree's root is SHA-256 of nothing)."""
    if not leaves:
        return EMPTY_ROOT
    frontier = Frontier()
    for leaf in leaves:
        frontier.append(leaf)
    return frontier.root()


def _subtree(leaves: Sequence[bytes], start: int, end: int) -> bytes:
    n = end - start
    if n == 1:
        return leaves[start]
    k = _split(n)
    return node_hash(_subtree(leaves, start, start + k), _subtree(leaves, start + k, end))


def inclusion_proof(index: int, leaves: Sequence[bytes]) -> list[bytes]:
    """PATH(index, D[n]): the audit path of leaf ``index`` in the tree of ``leaves``."""
    n = len(leaves)
    if not 0 <= index < n:
        raise ValueError(f"leaf {index} is not in a tree of {n}")
    path: list[bytes] = []
    start, end = 0, n
    while end - start > 1:
        k = _split(end - start)
        if index - start < k:
            path.append(_subtree(leaves, start + k, end))
            end = start + k
        else:
            path.append(_subtree(leaves, start, start + k))
            start += k
    path.reverse()  # RFC 6962 lists the path from the leaf upwards
    return path


def consistency_proof(first: int, leaves: Sequence[bytes]) -> list[bytes]:
    """PROOF(first, D[n]): that the tree of the first ``first`` leaves is a prefix of this one."""
    n = len(leaves)
    if not 0 <= first <= n:
        raise ValueError(f"a tree of {first} is not a prefix of a tree of {n}")
    if first in (0, n):
        return []
    proof: list[bytes] = []
    start, end, whole = 0, n, True
    m = first
    while m != end - start:
        k = _split(end - start)
        if m <= k:
            proof.append(_subtree(leaves, start + k, end))
            end = start + k
        else:
            proof.append(_subtree(leaves, start, start + k))
            start += k
            m -= k
            whole = False
    if not whole:
        proof.append(_subtree(leaves, start, end))
    proof.reverse()
    return proof


def root_from_path(index: int, size: int, leaf: bytes, path: Sequence[bytes]) -> bytes | None:
    """The root that ``path`` leads to from leaf hash ``leaf`` at ``index`` of a tree of
    ``size`` (the computation of RFC 9162 section 2.1.3.2), or None when the path does not
    fit the tree's shape: O(log n), so a prover who has built a path need not hash every
    leaf a second time for the root."""
    if not 0 <= index < size:
        return None
    fn, sn, r = index, size - 1, leaf
    for p in path:
        if sn == 0:
            return None
        if fn & 1 or fn == sn:
            r = node_hash(p, r)
            if not fn & 1:
                while not fn & 1 and fn != 0:
                    fn >>= 1
                    sn >>= 1
        else:
            r = node_hash(r, p)
        fn >>= 1
        sn >>= 1
    return r if sn == 0 else None


def verify_inclusion(
    index: int, size: int, leaf: bytes, path: Sequence[bytes], expected_root: bytes
) -> bool:
    """RFC 9162 section 2.1.3.2: whether ``path`` proves leaf hash ``leaf`` at ``index``."""
    found = root_from_path(index, size, leaf, path)
    return found is not None and found == expected_root


def verify_consistency(
    first: int, second: int, proof: Sequence[bytes], first_root: bytes, second_root: bytes
) -> bool:
    """RFC 9162 section 2.1.4.2: whether ``proof`` shows the tree of ``second`` leaves
    (root ``second_root``) extends the tree of ``first`` leaves (root ``first_root``)."""
    if not 0 <= first <= second:
        return False
    if first == second:
        return not proof and first_root == second_root
    if first == 0:  # every tree extends the empty one
        return not proof and first_root == EMPTY_ROOT
    path = list(proof)
    if not path:
        return False
    if first & (first - 1) == 0:  # an exact power of two: the old root is a node of the new tree
        path.insert(0, first_root)
    fn, sn = first - 1, second - 1
    while fn & 1:
        fn >>= 1
        sn >>= 1
    fr = sr = path[0]
    for c in path[1:]:
        if sn == 0:
            return False
        if fn & 1 or fn == sn:
            fr = node_hash(c, fr)
            sr = node_hash(c, sr)
            if not fn & 1:
                while not fn & 1 and fn != 0:
                    fn >>= 1
                    sn >>= 1
        else:
            sr = node_hash(sr, c)
        fn >>= 1
        sn >>= 1
    return fr == first_root and sr == second_root and sn == 0


@dataclass
class Frontier:
    """The roots of the perfect subtrees of a tree, left to right (sizes falling powers
    of two): enough to append a leaf or to give the root without the leaves."""

    size: int = 0
    nodes: list[bytes] = field(default_factory=list)

    def append(self, leaf: bytes) -> None:
        self.nodes.append(leaf)
        self.size += 1
        # a completed pair of equal subtrees merges, as many times as the new size's trailing ones
        merges = (self.size & -self.size).bit_length() - 1
        for _ in range(merges):
            right = self.nodes.pop()
            left = self.nodes.pop()
            self.nodes.append(node_hash(left, right))

    def root(self) -> bytes:
        if not self.nodes:
            return EMPTY_ROOT
        result = self.nodes[-1]
        for node in reversed(self.nodes[:-1]):
            result = node_hash(node, result)
        return result

    def to_text(self) -> str:
        return ",".join(node.hex() for node in self.nodes)

    @classmethod
    def from_text(cls, size: int, text: str) -> Frontier:
        nodes = [bytes.fromhex(part) for part in text.split(",") if part]
        if len(nodes) != bin(size).count("1"):
            raise ValueError(f"a tree of {size} leaves has {bin(size).count('1')} frontier nodes, not {len(nodes)}")
        return cls(size, nodes)
