"""Exhaustive proofs of every table the schemes use.

Quasigroups (Damm's published table and every generated one): Latin square, zero
diagonal, weak total anti-symmetry over all n³ triples. Dihedral groups: the group
axioms over all triples and Gumm's mapping anti-symmetric over all pairs. Finite
fields: irreducible moduli and the field axioms.
"""

from __future__ import annotations

from itertools import product

import numpy as np
import pytest

from issuer.checking.schemes import damm as damm_module
from issuer.checking.schemes.dihedral import dihedral_table, gumm_mapping, permutation_powers
from issuer.checking.schemes.quasigroups import (
    NAMED_IRREDUCIBLE,
    damm_quasigroup,
    first_irreducible,
    galois_field,
    is_irreducible,
    refusal,
)
from issuer.checking.schemes.verhoeff import D5_TABLE, INVERSE, PERMUTATION

# every generated order up to 64, with the ones the alphabets need (16 hex, 32 Crockford,
# 36 alphanumeric) among them
GENERATED_ORDERS = [n for n in range(3, 65) if refusal(n) is None]


def assert_damm_quasigroup(rows: object) -> None:
    table = np.asarray(rows, dtype=np.int64)
    n = table.shape[0]
    everything = np.arange(n)
    assert table.shape == (n, n)
    # Latin square: each row and each column a permutation of 0..n-1
    assert (np.sort(table, axis=1) == everything).all()
    assert (np.sort(table, axis=0) == everything[:, None]).all()
    # zero diagonal
    assert (np.diagonal(table) == 0).all()
    # weak total anti-symmetry: (c*x)*y = (c*y)*x only when x = y, all n³ triples
    twice = table[table]  # twice[c, x, y] = (c*x)*y
    equal = twice == twice.transpose(0, 2, 1)
    assert (equal == np.eye(n, dtype=bool)[None, :, :]).all()


def test_generated_orders_cover_the_alphabets() -> None:
    assert {16, 32, 36} <= set(GENERATED_ORDERS)
    assert not {2, 6, 10, 14, 18, 26, 30} & set(GENERATED_ORDERS)


def test_published_damm_table_is_a_weakly_totally_antisymmetric_quasigroup() -> None:
    # source: H. M. Damm, dissertation, Marburg 2004 (order-10 table as widely reproduced)
    assert damm_module.PUBLISHED_TABLE[0] == (0, 3, 1, 7, 5, 9, 8, 6, 4, 2)
    assert damm_module.PUBLISHED_TABLE[9] == (2, 5, 8, 1, 4, 3, 6, 7, 9, 0)
    assert_damm_quasigroup(damm_module.PUBLISHED_TABLE)


@pytest.mark.parametrize("order", GENERATED_ORDERS)
def test_generated_table_is_a_weakly_totally_antisymmetric_quasigroup(order: int) -> None:
    assert_damm_quasigroup(damm_quasigroup(order).rows)


def test_refused_orders_say_why() -> None:
    assert "Damm 2007" in (refusal(6) or "")
    assert "order 26" in (refusal(26) or "")
    with pytest.raises(ValueError):
        damm_quasigroup(26)


@pytest.mark.parametrize("pk", sorted(NAMED_IRREDUCIBLE))
def test_named_polynomials_are_irreducible_and_first(pk: tuple[int, int]) -> None:
    p, k = pk
    modulus = NAMED_IRREDUCIBLE[pk]
    assert len(modulus) == k + 1 and modulus[-1] == 1
    # brute force: no monic factor of any degree 1..k-1 (not only up to k/2)
    for degree in range(1, k):
        for lower in product(range(p), repeat=degree):
            quotient_free = _remainder(modulus, (*lower, 1), p)
            assert any(quotient_free), (modulus, lower)
    assert is_irreducible(modulus, p)
    assert first_irreducible(p, k) == modulus


def _remainder(value: tuple[int, ...], divisor: tuple[int, ...], p: int) -> list[int]:
    """Schoolbook long division over GF(p), written independently of the module."""
    rest = list(value)
    d = len(divisor) - 1
    while len(rest) - 1 >= d and any(rest):
        while rest and rest[-1] == 0:
            rest.pop()
        if len(rest) - 1 < d:
            break
        shift = len(rest) - 1 - d
        lead = rest[-1]
        for i, c in enumerate(divisor):
            rest[shift + i] = (rest[shift + i] - lead * c) % p
    return rest


@pytest.mark.parametrize("q", [3, 4, 5, 7, 8, 9, 16, 25, 27, 32])
def test_field_axioms(q: int) -> None:
    field = galois_field(q)
    add = np.asarray(field.add)
    mul = np.asarray(field.mul)
    elements = np.arange(q)
    # additive group: commutative, identity 0, every row a permutation, associative
    assert (add == add.T).all() and (add[0] == elements).all()
    assert (np.sort(add, axis=1) == elements).all()
    x, y, z = np.meshgrid(elements, elements, elements, indexing="ij")
    assert (add[add[x, y], z] == add[x, add[y, z]]).all()
    # multiplicative group on the non-zero elements, and distributivity
    assert (mul == mul.T).all() and (mul[1] == elements).all() and (mul[0] == 0).all()
    assert (np.sort(mul[1:, 1:], axis=1) == elements[1:]).all()
    assert (mul[mul[x, y], z] == mul[x, mul[y, z]]).all()
    assert (mul[x, add[y, z]] == add[mul[x, y], mul[x, z]]).all()


DIHEDRAL_N = [3, 5, 7, 9, 11, 13, 15, 17, 19]


@pytest.mark.parametrize("n", DIHEDRAL_N)
def test_dihedral_group_axioms(n: int) -> None:
    table = np.asarray(dihedral_table(n))
    size = 2 * n
    elements = np.arange(size)
    assert (table[0] == elements).all() and (table[:, 0] == elements).all()  # identity 0
    assert (np.sort(table, axis=1) == elements).all()  # inverses exist (rows permute)
    assert (np.sort(table, axis=0) == elements[:, None]).all()
    x, y, z = np.meshgrid(elements, elements, elements, indexing="ij")
    assert (table[table[x, y], z] == table[x, table[y, z]]).all()  # associative
    assert not (table == table.T).all()  # D_n is not commutative for n >= 3
    # the defining relations: r of order n, s of order 2, s r s = r^-1
    r, s = 1, n
    power = 0
    for _ in range(n):
        power = table[power, r]
    assert power == 0 and table[s, s] == 0
    assert table[table[s, r], s] == n - 1  # r^(n-1) = r^-1


@pytest.mark.parametrize("n", DIHEDRAL_N)
def test_gumm_mapping_is_antisymmetric(n: int) -> None:
    table = dihedral_table(n)
    sigma = gumm_mapping(n)
    assert sorted(sigma) == list(range(2 * n))  # a permutation
    for x in range(2 * n):
        for y in range(2 * n):
            if x != y:
                # the condition that makes every adjacent transposition detectable
                assert table[x][sigma[y]] != table[y][sigma[x]], (n, x, y)


def test_verhoeff_tables() -> None:
    # source: J. Verhoeff 1969 (D5 table, permutation, inverses; they agree with
    # python-stdnum's internal tables)
    assert D5_TABLE == dihedral_table(5)  # his numbering is the dihedral encoding used here
    for x in range(10):
        assert D5_TABLE[x][INVERSE[x]] == 0
    assert len(permutation_powers(PERMUTATION)) == 8  # p has order 8
    for x in range(10):
        for y in range(10):
            if x != y:
                assert D5_TABLE[x][PERMUTATION[y]] != D5_TABLE[y][PERMUTATION[x]]
