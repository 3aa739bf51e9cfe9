"""The Merkle tree against RFC 6962's published reference values, and properties of
every proof for random sizes."""

from __future__ import annotations

import hypothesis.strategies as st
from hypothesis import given, settings

from issuer.proofs import merkle

# source: the Certificate Transparency project's reference test data for RFC 6962
# (certificate-transparency, cpp/merkletree/merkle_tree_test.cc: the leaves "", 00, 10,
# 2021, ... and the roots, inclusion paths and consistency proofs below; the same values
# are repeated in Trillian's merkle/rfc6962 tests)
LEAF_DATA = [bytes.fromhex(h) for h in (
    "", "00", "10", "2021", "3031", "40414243", "5051525354555657", "606162636465666768696a6b6c6d6e6f",
)]  # fmt: skip
ROOTS = [bytes.fromhex(h) for h in (
    "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855",
    "6e340b9cffb37a989ca544e6bb780a2c78901d3fb33738768511a30617afa01d",
    "fac54203e7cc696cf0dfcb42c92a1d9dbaf70ad9e621f4bd8d98662f00e3c125",
    "aeb6bcfe274b70a14fb067a5e5578264db0fa9b51af5e0ba159158f329e06e77",
    "d37ee418976dd95753c1c73862b9398fa2a2cf9b4ff0fdfe8b30cd95209614b7",
    "4e3bbb1f7b478dcfe71fb631631519a3bca12c9aefca1612bfce4c13a86264d4",
    "76e67dadbcdf1e10e1b74ddc608abd2f98dfb16fbce75277b5232a127f2087ef",
    "ddb89be403809e325750d3d263cd78929c2942b7942a34b77e122c9594a74c8c",
    "5dc9da79a70659a9ad559cb701ded9a2ab9d823aad2f4960cfe370eff4604328",
)]  # fmt: skip
# source: as above; (leaf number counted from 1, tree size, path)
INCLUSION = [
    (1, 8, ["96a296d224f285c67bee93c30f8a309157f0daa35dc5b87e410b78630a09cfc7",
            "5f083f0a1a33ca076a95279832580db3e0ef4584bdff1f54c8a360f50de3031e",
            "6b47aaf29ee3c2af9af889bc1fb9254dabd31177f16232dd6aab035ca39bf6e4"]),
    (6, 8, ["bc1a0643b12e4d2d7c77918f44e0f4f79a838b6cf9ec5b5c283e1f4d88599e6b",
            "ca854ea128ed050b41b35ffc1b87b8eb2bde461e9e3b5596ece6b9d5975a0ae0",
            "d37ee418976dd95753c1c73862b9398fa2a2cf9b4ff0fdfe8b30cd95209614b7"]),
    (3, 3, ["fac54203e7cc696cf0dfcb42c92a1d9dbaf70ad9e621f4bd8d98662f00e3c125"]),
    (2, 5, ["6e340b9cffb37a989ca544e6bb780a2c78901d3fb33738768511a30617afa01d",
            "5f083f0a1a33ca076a95279832580db3e0ef4584bdff1f54c8a360f50de3031e",
            "bc1a0643b12e4d2d7c77918f44e0f4f79a838b6cf9ec5b5c283e1f4d88599e6b"]),
]  # fmt: skip
# source: as above; (first size, second size, proof)
CONSISTENCY = [
    (1, 1, []),
    (1, 8, ["96a296d224f285c67bee93c30f8a309157f0daa35dc5b87e410b78630a09cfc7",
            "5f083f0a1a33ca076a95279832580db3e0ef4584bdff1f54c8a360f50de3031e",
            "6b47aaf29ee3c2af9af889bc1fb9254dabd31177f16232dd6aab035ca39bf6e4"]),
    (6, 8, ["0ebc5d3437fbe2db158b9f126a1d118e308181031d0a949f8dededebc558ef6a",
            "ca854ea128ed050b41b35ffc1b87b8eb2bde461e9e3b5596ece6b9d5975a0ae0",
            "d37ee418976dd95753c1c73862b9398fa2a2cf9b4ff0fdfe8b30cd95209614b7"]),
    (2, 5, ["5f083f0a1a33ca076a95279832580db3e0ef4584bdff1f54c8a360f50de3031e",
            "bc1a0643b12e4d2d7c77918f44e0f4f79a838b6cf9ec5b5c283e1f4d88599e6b"]),
]  # fmt: skip

LEAVES = [merkle.leaf_hash(data) for data in LEAF_DATA]


def test_roots_of_the_reference_trees() -> None:
    frontier = merkle.Frontier()
    assert merkle.root([]) == ROOTS[0] == frontier.root()
    for n in range(1, 9):
        assert merkle.root(LEAVES[:n]) == ROOTS[n], n
        frontier.append(LEAVES[n - 1])
        assert frontier.root() == ROOTS[n], n
        again = merkle.Frontier.from_text(frontier.size, frontier.to_text())
        assert again.root() == ROOTS[n]


def test_reference_inclusion_paths() -> None:
    for number, size, path in INCLUSION:
        proof = merkle.inclusion_proof(number - 1, LEAVES[:size])
        assert [p.hex() for p in proof] == path
        assert merkle.verify_inclusion(number - 1, size, LEAVES[number - 1], proof, ROOTS[size])
        assert not merkle.verify_inclusion(number - 1, size, LEAVES[number - 1], proof, ROOTS[size - 1])
        # the root a receipt signs is the one its path leads to
        assert merkle.root_from_path(number - 1, size, LEAVES[number - 1], proof) == ROOTS[size]


def test_reference_consistency_proofs() -> None:
    for first, second, expected in CONSISTENCY:
        proof = merkle.consistency_proof(first, LEAVES[:second])
        assert [p.hex() for p in proof] == expected
        assert merkle.verify_consistency(first, second, proof, ROOTS[first], ROOTS[second])


def _flips(values: list[bytes]) -> list[list[bytes]]:
    """Every copy of ``values`` with one bit of one byte flipped (each byte position once)."""
    out = []
    for i, value in enumerate(values):
        for j in range(len(value)):
            changed = bytearray(value)
            changed[j] ^= 0x01
            out.append([*values[:i], bytes(changed), *values[i + 1:]])
    return out


trees = st.integers(min_value=1, max_value=70).flatmap(
    lambda n: st.tuples(st.just(n), st.integers(0, n - 1), st.integers(1, n), st.randoms(use_true_random=False))
)


@settings(max_examples=60, deadline=None)
@given(trees)
def test_every_proof_verifies_and_no_flipped_byte_does(case: tuple) -> None:
    n, index, first, rng = case
    leaves = [merkle.leaf_hash(rng.randbytes(rng.randint(0, 9))) for _ in range(n)]
    top = merkle.root(leaves)
    path = merkle.inclusion_proof(index, leaves)
    assert merkle.verify_inclusion(index, n, leaves[index], path, top)
    assert merkle.root_from_path(index, n, leaves[index], path) == top
    for bad in _flips(path):
        assert not merkle.verify_inclusion(index, n, leaves[index], bad, top)
    for bad_leaf, bad_root in ((_flips([leaves[index]])[5][0], top), (leaves[index], _flips([top])[7][0])):
        assert not merkle.verify_inclusion(index, n, bad_leaf, path, bad_root)
    old = merkle.root(leaves[:first])
    proof = merkle.consistency_proof(first, leaves)
    assert merkle.verify_consistency(first, n, proof, old, top)
    for bad in _flips(proof):
        assert not merkle.verify_consistency(first, n, bad, old, top)
    assert not merkle.verify_consistency(first, n, proof, _flips([old])[3][0], top)
    assert not merkle.verify_consistency(first, n, proof, old, _flips([top])[30][0])


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 300))
def test_the_frontier_agrees_with_the_recursive_definition(n: int) -> None:
    leaves = [merkle.leaf_hash(i.to_bytes(4, "big")) for i in range(n)]
    frontier = merkle.Frontier()
    for leaf in leaves:
        frontier.append(leaf)
    expected = merkle._subtree(leaves, 0, n) if n else merkle.EMPTY_ROOT
    assert frontier.root() == expected == merkle.root(leaves)
