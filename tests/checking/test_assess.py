"""The assessment engine: published detection facts measured by the engine itself, the
vectorised counts against a plain brute force, and sampling against the exact figures."""

from __future__ import annotations

import math
from itertools import product

import pytest

from issuer.checking.assess import STRUCTURAL_NOTE, assess, wilson_interval
from issuer.checking.neighbours import ERROR_CLASSES
from issuer.checking.schemes import SCHEMES, get_scheme
from issuer.errors import InvalidLength

# source: J. Verhoeff, Error Detecting Decimal Codes, Mathematical Centre Tract 29,
# Mathematisch Centrum, Amsterdam, 1969, as tabulated in secondary sources
VERHOEFF_1969 = {"single": 79.05, "adjacent": 10.21, "jump": 0.82, "twin": 0.55,
                 "phonetic": 0.49, "jump_twin": 0.29}  # fmt: skip


def _needs(name: str) -> None:
    if name not in SCHEMES:
        pytest.skip(f"scheme {name} is not in the registry yet")


# -- published facts, measured ---------------------------------------------------------


def test_luhn_catches_every_single_substitution_but_not_09_90() -> None:
    # source: ISO/IEC 7812-1 Annex B; common practice: Luhn detects every single-digit
    # error and every adjacent transposition except 09 <-> 90
    result = assess(get_scheme("luhn"), 5)
    assert result.exhaustive
    assert result.rates["single"] == 1.0
    adjacent = result.results["adjacent"]
    assert adjacent is not None
    # of the 90 ordered pairs of different digits only 09 and 90 pass unnoticed
    assert adjacent.errors - adjacent.detected == adjacent.errors * 2 // 90
    # common practice: Luhn misses the twins 22<->55, 33<->66, 44<->77 (6 of 90)
    twin = result.results["twin"]
    assert twin is not None and twin.errors - twin.detected == twin.errors * 6 // 90
    # positions two apart carry the same Luhn weight: no jump transposition is caught
    assert result.rates["jump"] == 0.0


def test_luhn_09_90_really_passes() -> None:
    # the measured gap is the real one: swapping 09 into 90 keeps a Luhn code valid
    scheme = get_scheme("luhn")
    for body in ("4090123", "1234509", "9000001"):
        code = scheme.append(body)
        at = code.find("09") if "09" in code else code.find("90")
        swapped = code[:at] + code[at + 1] + code[at] + code[at + 2 :]
        assert swapped != code and scheme.is_valid(swapped)


@pytest.mark.parametrize(("name", "alphabet", "length"), [
    ("verhoeff", None, 5),  # source: Verhoeff 1969 (dihedral group D5 scheme)
    ("damm", None, 5),  # source: H. M. Damm, dissertation, Marburg 2004
    ("iso7064-11-2", None, 5),  # source: ISO/IEC 7064 (MOD 11-2)
    ("iso7064-37-2", None, 3),  # source: ISO/IEC 7064 (MOD 37-2)
    ("damm", "hex", 4),  # source: Damm 2007 (quasigroups of every order but 2 and 6)
    ("damm", "crockford32", 3),
    ("damm", "alnum", 3),
    ("dihedral", None, 3),  # source: H. P. Gumm, IEEE Trans. Inf. Theory 31 (1985), D13
    ("dihedral", "digits", 5),  # Gumm's method on D5
])  # fmt: skip
def test_full_strength_schemes_catch_every_single_and_adjacent_error(
    name: str, alphabet: str | None, length: int
) -> None:
    _needs(name)
    result = assess(get_scheme(name, alphabet), length, classes=("single", "adjacent"))
    assert result.exhaustive
    assert result.rates == {"single": 1.0, "adjacent": 1.0}


@pytest.mark.parametrize("name", sorted(SCHEMES))
def test_every_promise_a_scheme_makes_is_measured_true(name: str) -> None:
    """Each scheme states the classes it always detects; the engine holds it to that."""
    scheme = get_scheme(name)
    length = 4 if scheme.alphabet.size <= 10 else 3
    result = assess(scheme, length)
    assert result.exhaustive
    for key in scheme.guarantees():
        assert result.rates[key] == 1.0, key


def test_two_check_characters_under_their_own_condition() -> None:
    # source: ISO/IEC 7064: a pure system's code is valid when the whole number is
    # congruent to 1 modulo M, so under MOD 97-10 check 01 verifies wherever 98 does
    scheme = get_scheme("iso7064-97-10")
    body = next(f"{n:04d}" for n in range(10_000) if scheme.compute(f"{n:04d}") == "98")
    assert scheme.is_valid(body + "01")
    result = assess(scheme, 6)
    assert not result.exhaustive  # too big to verify every altered code one by one
    assert assess(scheme, 4).exhaustive


def test_phonetic_only_for_decimal_alphabets() -> None:
    assert assess(get_scheme("luhn", "hex"), 3).rates["phonetic"] is None
    assert assess(get_scheme("luhn"), 3).rates["phonetic"] is not None


# -- the vectorised counts against a brute force written from the definitions ----------


def brute_force(name: str, alphabet: str | None, length: int) -> dict[str, tuple[int, int]]:
    """(errors that change the code, detected) per class, one code and one error at a time.

    An error that puts a symbol where its position does not allow it counts as detected.
    """
    scheme = get_scheme(name, alphabet)
    body_symbols, check_symbols = scheme.alphabet.symbols, scheme.check_alphabet.symbols
    positions = [body_symbols] * length + [check_symbols] * scheme.check_length
    symbols = body_symbols + "".join(ch for ch in check_symbols if ch not in body_symbols)
    checks = {"".join(b): scheme.compute("".join(b)) for b in product(body_symbols, repeat=length)}
    known: dict[str, bool] = {}

    def valid(text: str) -> bool:
        # the scheme's own condition (ISO/IEC 7064 MOD 97-10 accepts 97 as well as 00)
        if text not in known:
            known[text] = all(ch in positions[i] for i, ch in enumerate(text)) and (
                scheme.verify_values(
                    scheme.alphabet.values(text[:length]),
                    scheme.check_alphabet.values(text[length:]),
                )
            )
        return known[text]

    def put(text: str, changes: dict[int, str]) -> str:
        chars = list(text)
        for i, ch in changes.items():
            chars[i] = ch
        return "".join(chars)

    counts = {key: [0, 0] for key in ERROR_CLASSES}

    def count(key: str, code: str, typed: str) -> None:
        if typed != code:
            counts[key][0] += 1
            counts[key][1] += not valid(typed)

    width = length + scheme.check_length
    for body, check in checks.items():
        code = body + check
        for i in range(width):
            for ch in positions[i]:
                count("single", code, put(code, {i: ch}))
        for gap, swap, twin in ((1, "adjacent", "twin"), (2, "jump", "jump_twin")):
            for i in range(width - gap):
                j = i + gap
                count(swap, code, put(code, {i: code[j], j: code[i]}))
                if code[i] == code[j]:
                    for ch in symbols:
                        if ch in positions[i] and ch in positions[j]:
                            count(twin, code, put(code, {i: ch, j: ch}))
        if scheme.alphabet.is_decimal:
            for i in range(width - 1):
                x, y = code[i], code[i + 1]
                if x in "23456789" and y == "0":
                    count("phonetic", code, put(code, {i: "1", i + 1: x}))
                if x == "1" and y in "23456789":
                    count("phonetic", code, put(code, {i: y, i + 1: "0"}))
    return {key: (e, d) for key, (e, d) in counts.items()}


SMALL_SHAPES = [(name, None, 2) for name in SCHEMES] + [
    ("luhn", None, 3), ("luhn", "hex", 2), ("damm", "hex", 2), ("verhoeff", None, 3),
]  # fmt: skip


@pytest.mark.parametrize(("name", "alphabet", "length"), SMALL_SHAPES)
def test_exhaustive_counts_match_a_brute_force(
    name: str, alphabet: str | None, length: int
) -> None:
    expected = brute_force(name, alphabet, length)
    result = assess(get_scheme(name, alphabet), length)
    assert result.exhaustive
    for key, outcome in result.results.items():
        if outcome is None:
            assert expected[key] == (0, 0), key
            continue
        assert (outcome.errors, outcome.detected) == expected[key], key


@pytest.mark.parametrize(("name", "alphabet", "length"), [
    ("luhn", None, 4), ("iso7064-11-2", None, 4), ("iso7064-97-10", None, 3), ("damm", "hex", 3),
    ("iso7064-37-2", None, 2),
])  # fmt: skip
def test_sampling_agrees_with_the_exact_figures(
    name: str, alphabet: str | None, length: int
) -> None:
    scheme = get_scheme(name, alphabet)
    exact = assess(scheme, length)
    sampled = assess(scheme, length, exhaustive=False, samples=40_000, seed=11)
    assert not sampled.exhaustive and sampled.samples == 40_000
    for key, outcome in sampled.results.items():
        truth = exact.rates[key]
        if outcome is None:
            assert truth is None
            continue
        assert outcome.errors == 40_000
        assert outcome.low is not None and outcome.high is not None and outcome.rate is not None
        assert outcome.low <= outcome.rate <= outcome.high
        # well inside four standard errors of the exact rate
        assert truth is not None
        spread = math.sqrt(max(truth * (1 - truth), 1e-6) / 40_000)
        assert abs(outcome.rate - truth) <= 4 * spread + 1e-9, key


def test_big_shapes_are_sampled_with_an_interval() -> None:
    result = assess(get_scheme("luhn", "alnum"), 8, samples=5_000, seed=3)
    assert not result.exhaustive
    data = result.to_dict()
    assert data["confidence"] == 0.95 and data["samples_per_class"] == 5_000
    assert data["intervals"]["single"] == [pytest.approx(wilson_interval(5_000, 5_000)[0]), 1.0]
    assert data["rates"]["phonetic"] is None
    again = assess(get_scheme("luhn", "alnum"), 8, samples=5_000, seed=3)
    assert again.rates == result.rates  # seeded: repeatable


# -- the weighted figure and the output ---------------------------------------------


def test_weighted_undetected_share() -> None:
    result = assess(get_scheme("luhn"), 4)
    rates = result.rates
    total = sum(VERHOEFF_1969.values())
    expected = sum(w * (1 - (rates[k] or 0)) for k, w in VERHOEFF_1969.items()) / total
    assert result.undetected_weighted == pytest.approx(expected)
    assert sum(result.weights_used.values()) == pytest.approx(1.0)
    # off decimal alphabets phonetic is not measured, so the weights renormalise without it
    hexed = assess(get_scheme("damm", "hex"), 3)
    assert "phonetic" not in hexed.weights_used
    assert hexed.undetected_weighted is not None and hexed.undetected_weighted < 0.01


def test_no_check_character_detects_nothing() -> None:
    result = assess(get_scheme("none"), 3)
    assert all(rate == 0.0 for rate in result.rates.values())
    assert result.undetected_weighted == pytest.approx(1.0)


def test_to_dict_shape() -> None:
    data = assess(get_scheme("verhoeff"), 3).to_dict()
    assert {"scheme", "alphabet", "length", "exhaustive", "rates", "undetected_weighted"} <= set(
        data
    )
    assert set(data["rates"]) == set(ERROR_CLASSES)
    assert data["omission_insertion"] == STRUCTURAL_NOTE


def test_wilson_interval() -> None:
    # source: E. B. Wilson, JASA 22 (1927): with no failures in n trials the interval's
    # far end is n / (n + z^2)
    z = 1.959963984540054
    low, high = wilson_interval(100, 100)
    assert high == 1.0 and low == pytest.approx(100 / (100 + z * z))
    low, high = wilson_interval(50, 100)
    assert low == pytest.approx(1 - high) and 0.40 < low < 0.41


def test_bad_lengths() -> None:
    with pytest.raises(InvalidLength):
        assess(get_scheme("luhn"), 0)
    with pytest.raises(InvalidLength):
        assess(get_scheme("luhn"), 3, samples=0)


@pytest.mark.parametrize("module", ["issuer.checking.assess", "issuer.checking.neighbours", "issuer.checking.verify"])
def test_docstring_examples(module: str) -> None:
    import doctest
    import importlib

    outcome = doctest.testmod(importlib.import_module(module))
    assert outcome.attempted > 0 and outcome.failed == 0
