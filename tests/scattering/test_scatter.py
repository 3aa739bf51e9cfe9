"""FF1 paths agree with each other, and the scattered mapping is a bijection."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from issuer.errors import Exhausted, InvalidComponent, InvalidFormat, InvalidLength
from issuer.scattering.ff1 import (
    FF1,
    ff1_decrypt,
    ff1_decrypt_batch,
    ff1_encrypt,
    ff1_encrypt_batch,
    min_length,
    num_radix,
    str_radix,
)
from issuer.scattering.scatter import MAX_BASE, PROTECTED_DOMAIN, ScatterPermutation, new_key, range_is_protected

FAST = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])

keys = st.sampled_from([16, 24, 32]).flatmap(lambda n: st.binary(min_size=n, max_size=n))
tweaks = st.binary(max_size=40)
radixes = st.integers(min_value=2, max_value=36)


@st.composite
def strings(draw: st.DrawFn, max_length: int = 30) -> tuple[int, list[int]]:
    radix = draw(radixes)
    length = draw(st.integers(min_value=min_length(radix), max_value=max_length))
    values = draw(st.lists(st.integers(0, radix - 1), min_size=length, max_size=length))
    return radix, values


@st.composite
def batches(draw: st.DrawFn, max_length: int) -> tuple[int, np.ndarray]:
    radix = draw(radixes)
    length = draw(st.integers(min_value=min_length(radix), max_value=max_length))
    rows = draw(st.integers(min_value=1, max_value=6))
    flat = draw(st.lists(st.integers(0, radix - 1), min_size=rows * length, max_size=rows * length))
    return radix, np.array(flat, dtype=np.int64).reshape(rows, length)


# --- FF1 --------------------------------------------------------------------------------


@FAST
@given(keys, tweaks, strings())
def test_decrypt_inverts_encrypt(key: bytes, tweak: bytes, case: tuple[int, list[int]]) -> None:
    radix, x = case
    y = ff1_encrypt(key, tweak, radix, x)
    assert len(y) == len(x) and all(0 <= v < radix for v in y)
    assert ff1_decrypt(key, tweak, radix, y) == x


@FAST
@given(keys, tweaks, strings(max_length=60))
def test_value_path_equals_the_algorithm_as_written(
    key: bytes, tweak: bytes, case: tuple[int, list[int]]
) -> None:
    radix, x = case
    ff1, n = FF1(key, radix, tweak), len(x)
    y = ff1_encrypt(key, tweak, radix, x)
    assert ff1.encrypt_int(n, num_radix(x, radix)) == num_radix(y, radix)
    assert ff1.decrypt_int(n, num_radix(y, radix)) == num_radix(x, radix)
    assert str_radix(num_radix(x, radix), radix, n) == x


@FAST
@given(keys, tweaks, batches(max_length=22))
def test_batch_equals_scalar(key: bytes, tweak: bytes, case: tuple[int, np.ndarray]) -> None:
    radix, rows = case
    out = ff1_encrypt_batch(key, tweak, radix, rows)
    assert out.shape == rows.shape and out.dtype == np.int64
    assert out.tolist() == [ff1_encrypt(key, tweak, radix, row) for row in rows.tolist()]
    back = ff1_decrypt_batch(key, tweak, radix, out)
    assert back.tolist() == rows.tolist()


@settings(max_examples=15, deadline=None)
@given(keys, tweaks, batches(max_length=70))
def test_batch_of_long_strings_equals_scalar(
    key: bytes, tweak: bytes, case: tuple[int, np.ndarray]
) -> None:
    # Long strings leave the numpy path for the per-row one; both must stay exact.
    radix, rows = case
    out = ff1_encrypt_batch(key, tweak, radix, rows)
    assert out.tolist() == [ff1_encrypt(key, tweak, radix, row) for row in rows.tolist()]


def test_batch_path_reaches_the_widest_halves() -> None:
    # radix 36, 30 numerals: halves of 36**15 ~ 2**77.5 are beyond 64 bits; 22 numerals
    # (36**11 ~ 2**56.9) also leave the numpy path, 20 numerals (2**51.7) stay on it.
    ff1 = FF1(bytes(16), 36)
    assert ff1.shape(20).vector and not ff1.shape(22).vector
    rng = np.random.default_rng(7)
    rows = rng.integers(0, 36, size=(50, 20))
    assert ff1.encrypt_batch(rows).tolist() == [ff1.encrypt(r) for r in rows.tolist()]


@pytest.mark.parametrize("radix", range(2, 37))
def test_batch_at_the_widest_numpy_length(radix: int) -> None:
    # The longest strings the numpy path takes make y = NUM(S) mod radix**m the
    # longest Horner chain in 64-bit words; each radix once, deterministically.
    ff1 = FF1(bytes(range(24)), radix, b"wide")
    length = min_length(radix)
    while ff1.shape(length + 1).vector:
        length += 1
    rows = np.random.default_rng(radix).integers(0, radix, size=(8, length))
    out = ff1.encrypt_batch(rows)
    assert out.tolist() == [ff1.encrypt(r) for r in rows.tolist()]
    assert ff1.decrypt_batch(out).tolist() == rows.tolist()


def test_batch_of_no_rows() -> None:
    out = ff1_encrypt_batch(bytes(16), b"", 10, np.zeros((0, 8), dtype=np.int64))
    assert out.shape == (0, 8)


def test_bad_input_is_refused() -> None:
    with pytest.raises(ValueError, match="16, 24 or 32"):
        ff1_encrypt(bytes(15), b"", 10, [0] * 6)
    with pytest.raises(ValueError, match="radix"):
        ff1_encrypt(bytes(16), b"", 1, [0] * 6)
    with pytest.raises(InvalidLength):
        ff1_encrypt(bytes(16), b"", 10, [1])  # 10**1 < 100
    with pytest.raises(InvalidLength):
        ff1_encrypt(bytes(16), b"", 2, [1] * 6)  # 2**6 < 100
    with pytest.raises(InvalidComponent):
        ff1_encrypt(bytes(16), b"", 10, [1, 2, 10])
    with pytest.raises(InvalidComponent):
        ff1_encrypt_batch(bytes(16), b"", 10, np.array([[1, 2, 10]]))
    with pytest.raises(InvalidLength):
        ff1_encrypt_batch(bytes(16), b"", 10, np.array([1, 2, 3]))
    assert min_length(2) == 7 and min_length(10) == 2 and min_length(36) == 2


def test_value_outside_the_domain_is_refused() -> None:
    ff1 = FF1(bytes(16), 10)
    with pytest.raises(ValueError):
        ff1.encrypt_int(4, 10_000)
    with pytest.raises(ValueError):
        ff1.decrypt_int(4, -1)


def test_engine_repr_hides_the_key() -> None:
    key = bytes(range(16))
    assert key.hex() not in repr(FF1(key, 10)) and repr(key) not in repr(FF1(key, 10))


# --- the scattered mapping ------------------------------------------------------------------

KEY = bytes.fromhex("6f1e2d3c4b5a69788796a5b4c3d2e1f00f1e2d3c4b5a69788796a5b4c3d2e1f0")

SMALL_RANGES = [
    pytest.param(10, 0, 9, id="range of 10"),
    pytest.param(10, 5000, 5999, id="range of 1000 at 5000"),
    pytest.param(10, 1, 1, id="range of 1"),
    pytest.param(36, 100, 1599, id="radix 36, 1500 numbers, domain 46656"),
    pytest.param(2, 40, 339, id="radix 2, 300 numbers"),
    pytest.param(10, 777, 1776, id="radix 10, 1000 numbers off the grid"),
]


@pytest.mark.parametrize(("radix", "start", "end"), SMALL_RANGES)
def test_bijection_by_enumeration(radix: int, start: int, end: int) -> None:
    perm = ScatterPermutation(KEY, radix, start, end)
    counters = list(range(perm.capacity))
    scalar = [perm.base_for_counter(k) for k in counters]
    assert sorted(scalar) == list(range(start, end + 1))  # onto, and no number twice
    vector = perm.bases_for_counters(np.array(counters))
    assert vector.dtype == np.int64 and vector.tolist() == scalar
    assert [perm.counter_for_base(b) for b in scalar] == counters
    assert perm.counters_for_bases(vector).tolist() == counters


@pytest.mark.parametrize(("radix", "start", "end"), SMALL_RANGES)
def test_walk_follows_ff1_on_numeral_strings(radix: int, start: int, end: int) -> None:
    # Independent of the engine's shortcuts: FF1 exactly as written, then cycle walking.
    perm = ScatterPermutation(KEY, radix, start, end, tweak=b"members")
    n, digits = perm.capacity, perm.digits
    for k in list(range(min(n, 40))) + [n - 1]:
        x = str_radix(k, radix, digits)
        while True:
            x = ff1_encrypt(KEY, b"members", radix, x)
            if num_radix(x, radix) < n:
                break
        assert perm.base_for_counter(k) == start + num_radix(x, radix)


def test_scatter_actually_scatters() -> None:
    perm = ScatterPermutation(KEY, 10, 5000, 5999)
    bases = perm.bases_for_counters(np.arange(1000))
    assert not np.array_equal(bases, np.arange(5000, 6000))
    other = ScatterPermutation(new_key(), 10, 5000, 5999).bases_for_counters(np.arange(1000))
    assert not np.array_equal(bases, other)


@pytest.mark.parametrize(
    ("radix", "start", "end"),
    [
        pytest.param(10, 0, MAX_BASE, id="radix 10, all of int64"),
        pytest.param(36, 0, MAX_BASE, id="radix 36, domain beyond 2**64"),
        pytest.param(2, 1, MAX_BASE, id="radix 2, 63 numerals"),
        pytest.param(10, MAX_BASE - 10**12, MAX_BASE, id="top of int64"),
        pytest.param(32, 0, 32**12 - 1, id="radix 32, whole domain"),
    ],
)
def test_wide_ranges(radix: int, start: int, end: int) -> None:
    perm = ScatterPermutation(KEY, radix, start, end)
    n = perm.capacity
    counters = [0, 1, 2, n // 2, n - 2, n - 1, *range(1000, 1200)]
    vector = perm.bases_for_counters(np.array(counters, dtype=np.int64))
    scalar = [perm.base_for_counter(k) for k in counters]
    assert vector.tolist() == scalar
    assert all(start <= b <= end for b in scalar) and len(set(scalar)) == len(scalar)
    assert perm.counters_for_bases(vector).tolist() == counters
    assert [perm.counter_for_base(b) for b in scalar[:6]] == counters[:6]


@FAST
@given(
    key=keys,
    radix=radixes,
    start=st.integers(0, 10**12),
    size=st.integers(1, 10**15),
    picks=st.lists(st.integers(0, 10**15), min_size=1, max_size=5),
)
def test_counter_for_base_inverts(
    key: bytes, radix: int, start: int, size: int, picks: list[int]
) -> None:
    perm = ScatterPermutation(key, radix, start, start + size - 1)
    counters = [p % size for p in picks]
    bases = [perm.base_for_counter(k) for k in counters]
    assert all(start <= b < start + size for b in bases)
    assert [perm.counter_for_base(b) for b in bases] == counters
    assert perm.bases_for_counters(np.array(counters)).tolist() == bases


def test_shape_of_the_domain() -> None:
    assert ScatterPermutation(KEY, 10, 0, 9).digits == 2  # FF1's minimum, radix**2 >= 100
    assert ScatterPermutation(KEY, 2, 0, 9).digits == 7  # 2**7 = 128 >= 100
    assert ScatterPermutation(KEY, 10, 1, 1000).digits == 3
    assert ScatterPermutation(KEY, 10, 0, 1000).digits == 4
    perm = ScatterPermutation(KEY, 36, 0, 36**5)
    assert perm.capacity == 36**5 + 1 and perm.domain_size == 36**6


def test_is_protected_boundary() -> None:
    # NIST SP 800-38G Rev. 1: the FF1 domain radix**digits must reach one million.
    assert PROTECTED_DOMAIN == 1_000_000
    assert ScatterPermutation(KEY, 10, 0, 99_999).domain_size == 100_000
    assert not ScatterPermutation(KEY, 10, 0, 99_999).is_protected
    assert ScatterPermutation(KEY, 10, 0, 100_000).domain_size == 1_000_000
    assert ScatterPermutation(KEY, 10, 0, 100_000).is_protected
    assert ScatterPermutation(KEY, 10, 1, 1_000_000).is_protected
    assert not ScatterPermutation(KEY, 2, 0, 2**19 - 1).is_protected  # 524,288
    assert ScatterPermutation(KEY, 2, 0, 2**19).is_protected  # 1,048,576
    assert not ScatterPermutation(KEY, 36, 0, 36**3 - 1).is_protected  # 46,656
    # the register knows it without the key (a sealed key needs the key file to open)
    for radix, start, end in [(10, 0, 99_999), (10, 0, 100_000), (2, 0, 2**19 - 1), (2, 0, 2**19), (36, 0, 36**3 - 1)]:
        assert range_is_protected(radix, start, end) == ScatterPermutation(KEY, radix, start, end).is_protected
    assert ScatterPermutation(KEY, 36, 0, 36**3).is_protected  # 36**4 = 1,679,616


def test_exhaustion_and_bad_numbers() -> None:
    perm = ScatterPermutation(KEY, 10, 0, 9)
    with pytest.raises(Exhausted):
        perm.base_for_counter(10)
    with pytest.raises(Exhausted):
        perm.bases_for_counters(np.array([3, 10]))
    with pytest.raises(InvalidFormat):
        perm.base_for_counter(-1)
    with pytest.raises(InvalidFormat):
        perm.counter_for_base(10)
    with pytest.raises(InvalidFormat):
        perm.counters_for_bases(np.array([0, 10]))
    with pytest.raises(InvalidFormat):
        perm.bases_for_counters(np.array([0.5]))
    assert perm.bases_for_counters(np.zeros(0, dtype=np.int64)).shape == (0,)
    assert perm.bases_for_counters(np.arange(10).reshape(2, 5)).shape == (2, 5)


@pytest.mark.parametrize(
    ("start", "end"), [(5, 4), (-1, 10), (0, MAX_BASE + 1), (0.0, 10), (True, 10)]
)
def test_bad_ranges(start: int, end: int) -> None:
    with pytest.raises(InvalidFormat):
        ScatterPermutation(KEY, 10, start, end)


def test_bad_keys_and_radixes() -> None:
    with pytest.raises(ValueError):
        ScatterPermutation(bytes(20), 10, 0, 9)
    with pytest.raises(ValueError):
        ScatterPermutation(KEY, 1, 0, 9)


def test_key_stays_out_of_repr() -> None:
    perm = ScatterPermutation(KEY, 10, 0, 999, tweak=b"card")
    assert KEY.hex() not in repr(perm) and repr(KEY) not in repr(perm)
    assert "card" not in repr(perm)


def test_new_key() -> None:
    first, second = new_key(), ScatterPermutation.new_key()
    assert len(first) == 32 and len(second) == 32 and first != second


def test_numpy_integers_are_whole_numbers() -> None:
    perm = ScatterPermutation(KEY, 10, np.int64(5000), np.int64(5999))
    assert type(perm.start) is int and type(perm.end) is int
    base = perm.base_for_counter(np.int64(7))
    assert type(base) is int and base == perm.base_for_counter(7)
    assert perm.counter_for_base(np.int64(base)) == 7
    digits = np.array([0, 1, 2, 3, 4, 5, 6, 7, 8, 9])
    assert ff1_encrypt(KEY, b"", 10, digits) == ff1_encrypt(KEY, b"", 10, digits.tolist())
    with pytest.raises(InvalidComponent):
        ff1_encrypt(KEY, b"", 10, [1.0, 2, 3])
    with pytest.raises(InvalidComponent):
        ff1_encrypt(KEY, b"", 10, [True, 2, 3])
