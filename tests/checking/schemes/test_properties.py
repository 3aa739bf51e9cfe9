"""Properties over the whole registry (hypothesis): every computed code verifies, bulk
equals scalar, and every error a scheme promises to catch is caught."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from issuer.checking.schemes import SCHEMES, Scheme, get_scheme

# every scheme on its natural alphabet, plus the generated Damm tables and other D_n
BOUND = [get_scheme(name) for name in SCHEMES] + [
    get_scheme("damm", "hex"),
    get_scheme("damm", "crockford32"),
    get_scheme("damm", "alnum"),
    get_scheme("dihedral", "digits"),
    get_scheme("dihedral", "custom:ACEHKMPRTWXY34"),
    get_scheme("luhn", "alnum"),
    get_scheme("luhn", "custom:ACEHKMP"),
]
IDS = [f"{s.name}/{s.alphabet.name}" for s in BOUND]


def bodies(scheme: Scheme, max_length: int = 12) -> st.SearchStrategy[str]:
    longest = min(max_length, scheme.max_body_length or max_length)
    return st.text(alphabet=scheme.alphabet.symbols, min_size=1, max_size=longest)


def symbol_sets(scheme: Scheme, code: str) -> list[str]:
    cut = len(code) - scheme.check_length
    return [scheme.alphabet.symbols] * cut + [scheme.check_alphabet.symbols] * scheme.check_length


@pytest.mark.parametrize("scheme", BOUND, ids=IDS)
@settings(max_examples=60, deadline=None)
@given(data=st.data())
def test_every_computed_code_verifies(scheme: Scheme, data: st.DataObject) -> None:
    body = data.draw(bodies(scheme))
    code = scheme.append(body)
    assert len(code) == len(body) + scheme.check_length
    assert scheme.is_valid(code)


@pytest.mark.parametrize("scheme", BOUND, ids=IDS)
@settings(max_examples=25, deadline=None)
@given(data=st.data())
def test_bulk_equals_scalar(scheme: Scheme, data: st.DataObject) -> None:
    length = data.draw(st.integers(1, min(12, scheme.max_body_length or 12)))
    rows = data.draw(
        st.lists(
            st.lists(st.integers(0, scheme.alphabet.size - 1), min_size=length, max_size=length),
            min_size=1,
            max_size=20,
        )
    )
    matrix = np.asarray(rows, dtype=np.int64)
    assert scheme.compute_bulk(matrix).tolist() == [list(scheme.compute_values(r)) for r in rows]
    codes = [scheme.alphabet.text(r) + scheme.check_alphabet.text(scheme.compute_values(r))
             for r in rows]  # fmt: skip
    assert scheme.verify_bulk(scheme.code_matrix(codes, length + scheme.check_length)).all()


PROMISE_SINGLE = [s for s in BOUND if "single" in s.guarantees()]
PROMISE_ADJACENT = [s for s in BOUND if "adjacent" in s.guarantees()]
PROMISE_JUMP = [s for s in BOUND if "jump" in s.guarantees()]


def test_the_full_strength_schemes_make_their_promises() -> None:
    promised = {s.name for s in PROMISE_ADJACENT}
    assert {"verhoeff", "damm", "dihedral", "iso7064-11-2", "iso7064-37-2"} <= promised
    assert "luhn" not in promised and "gs1" not in promised


@pytest.mark.parametrize(
    "scheme", PROMISE_SINGLE, ids=[f"{s.name}/{s.alphabet.name}" for s in PROMISE_SINGLE]
)
@settings(max_examples=25, deadline=None)
@given(data=st.data())
def test_every_single_substitution_is_caught(scheme: Scheme, data: st.DataObject) -> None:
    code = scheme.append(data.draw(bodies(scheme, 10)))
    for at, symbols in enumerate(symbol_sets(scheme, code)):
        for symbol in symbols:
            if symbol != code[at]:
                wrong = code[:at] + symbol + code[at + 1 :]
                assert not scheme.is_valid(wrong), (code, wrong)


def swapped(code: str, i: int, j: int) -> str:
    chars = list(code)
    chars[i], chars[j] = chars[j], chars[i]
    return "".join(chars)


@pytest.mark.parametrize(
    "scheme", PROMISE_ADJACENT, ids=[f"{s.name}/{s.alphabet.name}" for s in PROMISE_ADJACENT]
)
@settings(max_examples=40, deadline=None)
@given(data=st.data())
def test_every_adjacent_transposition_is_caught(scheme: Scheme, data: st.DataObject) -> None:
    code = scheme.append(data.draw(bodies(scheme, 10)))
    for i in range(len(code) - 1):
        if code[i] != code[i + 1]:
            assert not scheme.is_valid(swapped(code, i, i + 1)), (code, i)


@pytest.mark.parametrize(
    "scheme", PROMISE_JUMP, ids=[f"{s.name}/{s.alphabet.name}" for s in PROMISE_JUMP]
)
@settings(max_examples=40, deadline=None)
@given(data=st.data())
def test_every_jump_transposition_is_caught(scheme: Scheme, data: st.DataObject) -> None:
    code = scheme.append(data.draw(bodies(scheme, 10)))
    for i in range(len(code) - 2):
        if code[i] != code[i + 2]:
            assert not scheme.is_valid(swapped(code, i, i + 2)), (code, i)


def test_luhn_promises_nothing_on_odd_alphabets() -> None:
    # doubling with digit sums is not a permutation for odd N: 1 and 2 both give 2 mod 3
    scheme = get_scheme("luhn", "custom:ABC")
    assert scheme.guarantees() == frozenset()
    assert scheme.compute("AB") == scheme.compute("AC")  # single substitution B->C missed
