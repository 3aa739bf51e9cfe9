"""Worked examples printed by standards and reference documents, and the schemes that no
reference library implements (MOD 661-26, MOD 1271-36, Crockford's check symbol)
against their published defining formula, computed independently here."""

from __future__ import annotations

import random

import pytest

from issuer.checking.schemes import get_scheme


@pytest.mark.parametrize(
    ("scheme", "body", "check"),
    [
        ("verhoeff", "236", "3"),  # from memory: Verhoeff's worked example, 236 -> 2363
        ("damm", "572", "4"),  # source: Damm 2004 worked example (as widely reproduced)
        ("luhn", "7992739871", "3"),  # from memory: the widely reproduced Luhn example
        ("iso7064-11-2", "0794", "0"),  # from memory: ISO/IEC 7064 MOD 11-2 example
        ("iso7064-11-2", "079", "X"),  # source: python-stdnum mod_11_2 doctest
        ("iso7064-37-2", "G123489654321", "Y"),  # source: python-stdnum mod_37_2 doctest
        ("iso7064-37-36", "A12425GABC1234002", "M"),  # source: python-stdnum mod_37_36 doctest
        ("iso7064-11-10", "00200667308", "5"),  # source: python-stdnum mod_37_36 doctest
        ("iso7064-97-10", "794", "44"),  # from memory: ISO/IEC 7064 MOD 97-10 example
        ("iso7064-97-10", "1733", "40"),  # source: @konfirm/iso7064 test vectors
        ("iso7064-97-10", "001937967935", "37"),  # source: @konfirm/iso7064 test vectors
        ("iso7064-1271-36", "ISO79", "3W"),  # source: iso-7064 crate docs (docs.rs), ISO 79
        # source: @konfirm/iso7064 test vectors (MOD 661-26 and MOD 27,26)
        ("iso7064-661-26", "XKFSHTWWCOMYYASPSYTHJW", "CJ"),
        ("iso7064-27-26", "JEJLMGJ", "S"),
        ("iso7064-27-26", "MUFEMSTCATLIT", "B"),
        ("iso7064-27-26", "OWNYDSZNWIBFVBRWRA", "U"),
    ],
)
def test_published_examples(scheme: str, body: str, check: str) -> None:
    bound = get_scheme(scheme)
    assert bound.compute(body) == check
    assert bound.is_valid(body + check)


def test_published_invalid_example() -> None:
    # source: @konfirm/iso7064 test vectors: one letter off is rejected
    assert not get_scheme("iso7064-661-26").is_valid("XKFSHTWWCOMYYASPSYTHJWCI")
    assert not get_scheme("iso7064-27-26").is_valid("IEJLMGJS")


def iso7064_pure_sum(text: str, symbols: str, modulus: int, radix: int) -> int:
    """ISO/IEC 7064 pure-system condition written as the standard states it: the sum of
    a_i · r^(i-1), positions i counted from the right starting at 1, modulo M."""
    return sum(symbols.index(ch) * radix**i for i, ch in enumerate(reversed(text))) % modulus


@pytest.mark.parametrize(
    ("scheme", "symbols", "modulus", "radix"),
    [
        ("iso7064-661-26", "ABCDEFGHIJKLMNOPQRSTUVWXYZ", 661, 26),
        ("iso7064-1271-36", "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ", 1271, 36),
        ("iso7064-97-10", "0123456789", 97, 10),
        ("iso7064-11-2", "0123456789X", 11, 2),
        ("iso7064-37-2", "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ*", 37, 2),
    ],
)
def test_pure_systems_meet_the_defining_congruence(
    scheme: str, symbols: str, modulus: int, radix: int
) -> None:
    # source: ISO/IEC 7064, pure systems: a valid string has Σ a_i r^(i-1) ≡ 1 (mod M)
    bound = get_scheme(scheme)
    body_symbols = bound.alphabet.symbols
    rng = random.Random(scheme)
    for _ in range(3000):
        body = "".join(rng.choice(body_symbols) for _ in range(rng.randrange(1, 25)))
        code = bound.append(body)
        assert iso7064_pure_sum(code, symbols, modulus, radix) == 1, code
        # and any ending that meets the congruence is accepted, any other refused
        checks = bound.check_alphabet.symbols
        ending = "".join(rng.choice(checks) for _ in range(bound.check_length))
        candidate = body + ending
        expected = iso7064_pure_sum(candidate, symbols, modulus, radix) == 1
        assert bound.is_valid(candidate) == expected, candidate


def test_two_letter_checks_use_the_range_0_to_m_minus_1() -> None:
    # the computed check value is (1 - P) mod M, so it never reaches M itself
    bound = get_scheme("iso7064-661-26")
    rng = random.Random(7)
    for _ in range(2000):
        body = "".join(rng.choice(bound.alphabet.symbols) for _ in range(8))
        check = bound.compute(body)
        symbols = bound.check_alphabet.symbols
        value = 26 * symbols.index(check[0]) + symbols.index(check[1])
        assert 0 <= value < 661


CROCKFORD = "0123456789ABCDEFGHJKMNPQRSTVWXYZ"
CROCKFORD_CHECK = CROCKFORD + "*~$=U"  # source: Crockford Base32 specification, check symbols


def test_crockford_check_symbol_is_the_value_mod_37() -> None:
    # source: Douglas Crockford, Base32 specification: the check symbol encodes the
    # number modulo 37, with * ~ $ = U for 32..36
    bound = get_scheme("crockford37")
    rng = random.Random(37)
    for _ in range(3000):
        body = "".join(rng.choice(CROCKFORD) for _ in range(rng.randrange(1, 30)))
        number = 0
        for ch in body:
            number = number * 32 + CROCKFORD.index(ch)
        assert bound.compute(body) == CROCKFORD_CHECK[number % 37], body


def test_crockford_worked_by_hand() -> None:
    # 16J = 1·1024 + 6·32 + 18 = 1234; 1234 = 33·37 + 13 -> symbol 13 = D
    assert get_scheme("crockford37").compute("16J") == "D"
    # 36 -> U, and a typed lower-case u is read as U
    assert get_scheme("crockford37").compute("14") == "U"  # 1·32 + 4 = 36
    assert get_scheme("crockford37").is_valid("14u")


def test_gs1_weights_by_hand() -> None:
    # source: GS1 General Specifications, check digit calculation: weights 3,1,3,...
    # from the right of the body; 205170: 0·3 + 7·1 + 1·3 + 5·1 + 0·3 + 2·1 = 17 -> 3
    assert get_scheme("gs1").compute("205170") == "3"


def test_mod11_x_by_hand() -> None:
    # ISBN-10 weights (source: ISO 2108): body 10 digits weighted 10..2 from the left;
    # body 000000001: 1·2 = 2, check c with 2 + c ≡ 0 mod 11 -> 9;
    # body 000000005: 5·2 = 10 -> check 1; body 000000010: 1·3 = 3 -> 8
    bound = get_scheme("mod11")
    assert bound.compute("000000001") == "9"
    assert bound.compute("000000005") == "1"
    assert bound.compute("000000010") == "8"
    # a check value of 10 is written X: 6·2 = 12 ≡ 1, so c ≡ -1 ≡ 10
    assert bound.compute("000000006") == "X"
    assert bound.is_valid("000000006X") and bound.is_valid("000000006x")
