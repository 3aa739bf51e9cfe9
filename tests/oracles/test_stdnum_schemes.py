"""Every scheme that python-stdnum (a general-purpose reference library) also implements,
against stdnum on thousands of seeded random bodies: the computed check must agree, and
so must the verdict on valid codes and on codes with one random character changed."""

from __future__ import annotations

import random
from collections.abc import Callable

import pytest
from stdnum import damm, ean, isbn, luhn, verhoeff
from stdnum.iso7064 import mod_11_2, mod_11_10, mod_37_2, mod_37_36, mod_97_10

from issuer.checking.alphabets import get_alphabet
from issuer.checking.schemes import Scheme, get_scheme

BODIES = 3000


def random_bodies(symbols: str, seed: int, lengths: range = range(1, 21)) -> list[str]:
    rng = random.Random(seed)
    return ["".join(rng.choice(symbols) for _ in range(rng.choice(lengths))) for _ in range(BODIES)]


def one_changed(code: str, symbols: str, rng: random.Random) -> str:
    """``code`` with one random position replaced by a random symbol (maybe the same)."""
    at = rng.randrange(len(code))
    return code[:at] + rng.choice(symbols) + code[at + 1 :]


def agree(
    scheme: Scheme,
    bodies: list[str],
    calc: Callable[[str], str],
    is_valid: Callable[[str], bool],
    mutate_symbols: str,
    seed: int,
) -> None:
    rng = random.Random(seed)
    for body in bodies:
        ours = scheme.compute(body)
        assert ours == calc(body), body
        code = body + ours
        assert scheme.is_valid(code) and is_valid(code), code
        changed = one_changed(code, mutate_symbols, rng)
        assert scheme.is_valid(changed) == is_valid(changed), changed


def test_luhn_decimal() -> None:
    # source: python-stdnum stdnum.luhn (ISO/IEC 7812-1 Annex B)
    agree(
        get_scheme("luhn"),
        random_bodies("0123456789", 1),
        luhn.calc_check_digit,
        luhn.is_valid,
        "0123456789",
        2,
    )


@pytest.mark.parametrize(
    "alphabet",
    ["hex", "letters", "alnum", "crockford32", "custom:ACDEFHJKMNPRTWXY", "custom:ABCDEFG"],
)
def test_luhn_mod_n(alphabet: str) -> None:
    # source: python-stdnum stdnum.luhn with its `alphabet` parameter (Luhn mod N)
    scheme = get_scheme("luhn", alphabet)
    symbols = scheme.alphabet.symbols
    agree(
        scheme,
        random_bodies(symbols, 3),
        lambda body: luhn.calc_check_digit(body, alphabet=symbols),
        lambda code: luhn.is_valid(code, alphabet=symbols),
        symbols,
        4,
    )


def test_verhoeff() -> None:
    # source: python-stdnum stdnum.verhoeff (Verhoeff 1969)
    agree(
        get_scheme("verhoeff"),
        random_bodies("0123456789", 5),
        verhoeff.calc_check_digit,
        verhoeff.is_valid,
        "0123456789",
        6,
    )


def test_damm_order_10() -> None:
    # source: python-stdnum stdnum.damm, whose default table is Damm's order-10 table
    agree(
        get_scheme("damm"),
        random_bodies("0123456789", 7),
        damm.calc_check_digit,
        damm.is_valid,
        "0123456789",
        8,
    )


def test_damm_generated_table_through_stdnum() -> None:
    # source: python-stdnum stdnum.damm.checksum accepts any operation table; fed our
    # generated GF(9) table (digits 0-8 are its elements), it must agree with the scheme
    scheme = get_scheme("damm", "custom:012345678")
    table = [list(row) for row in scheme.table]  # type: ignore[attr-defined]
    agree(
        scheme,
        random_bodies("012345678", 9),
        lambda body: str(damm.checksum(body, table=table)),
        lambda code: damm.is_valid(code, table=table),
        "012345678",
        10,
    )


def test_iso7064_mod_11_2() -> None:
    # source: python-stdnum stdnum.iso7064.mod_11_2
    agree(
        get_scheme("iso7064-11-2"),
        random_bodies("0123456789", 11),
        mod_11_2.calc_check_digit,
        mod_11_2.is_valid,
        "0123456789X",
        12,
    )


def test_iso7064_mod_11_10() -> None:
    # source: python-stdnum stdnum.iso7064.mod_11_10
    agree(
        get_scheme("iso7064-11-10"),
        random_bodies("0123456789", 13),
        mod_11_10.calc_check_digit,
        mod_11_10.is_valid,
        "0123456789",
        14,
    )


def test_iso7064_mod_37_2() -> None:
    # source: python-stdnum stdnum.iso7064.mod_37_2
    symbols = get_alphabet("alnum").symbols
    agree(
        get_scheme("iso7064-37-2"),
        random_bodies(symbols, 15),
        mod_37_2.calc_check_digit,
        mod_37_2.is_valid,
        symbols + "*",
        16,
    )


def test_iso7064_mod_37_36() -> None:
    # source: python-stdnum stdnum.iso7064.mod_37_36
    symbols = get_alphabet("alnum").symbols
    agree(
        get_scheme("iso7064-37-36"),
        random_bodies(symbols, 17),
        mod_37_36.calc_check_digit,
        mod_37_36.is_valid,
        symbols,
        18,
    )


def test_iso7064_mod_27_26_through_stdnum_hybrid() -> None:
    # source: python-stdnum stdnum.iso7064.mod_37_36, which documents that its
    # `alphabet` parameter turns it into any hybrid MOD (x+1, x): here MOD 27,26
    symbols = get_alphabet("letters").symbols
    agree(
        get_scheme("iso7064-27-26"),
        random_bodies(symbols, 19),
        lambda body: mod_37_36.calc_check_digit(body, alphabet=symbols),
        lambda code: mod_37_36.is_valid(code, alphabet=symbols),
        symbols,
        20,
    )


def test_iso7064_mod_97_10() -> None:
    # source: python-stdnum stdnum.iso7064.mod_97_10 (two check digits, 02-98)
    agree(
        get_scheme("iso7064-97-10"),
        random_bodies("0123456789", 21),
        mod_97_10.calc_check_digits,
        mod_97_10.is_valid,
        "0123456789",
        22,
    )


def test_iso7064_mod_97_10_accepts_what_stdnum_accepts() -> None:
    # source: python-stdnum stdnum.iso7064.mod_97_10.is_valid (the congruence ≡ 1 mod 97):
    # random two-digit endings, valid or not, get the same verdict
    scheme = get_scheme("iso7064-97-10")
    rng = random.Random(23)
    for body in random_bodies("0123456789", 24):
        code = body + f"{rng.randrange(100):02d}"
        assert scheme.is_valid(code) == mod_97_10.is_valid(code), code


def test_gs1_against_ean() -> None:
    # source: python-stdnum stdnum.ean.calc_check_digit (GS1 weights 3,1 from the right)
    agree(
        get_scheme("gs1"),
        random_bodies("0123456789", 25),
        ean.calc_check_digit,
        lambda code: ean.calc_check_digit(code[:-1]) == code[-1],
        "0123456789",
        26,
    )


def test_gs1_ean13_verdicts() -> None:
    # source: python-stdnum stdnum.ean.is_valid on 13-digit codes
    scheme = get_scheme("gs1")
    rng = random.Random(27)
    for body in random_bodies("0123456789", 28, range(12, 13)):
        code = body + scheme.compute(body)
        assert ean.is_valid(code)
        changed = one_changed(code, "0123456789", rng)
        assert scheme.is_valid(changed) == ean.is_valid(changed), changed


def test_mod11_against_isbn10() -> None:
    # source: python-stdnum stdnum.isbn.is_valid on 10-character ISBNs (9-digit bodies);
    # the check is the one candidate of 0-9, X that stdnum accepts
    scheme = get_scheme("mod11")
    rng = random.Random(29)
    for body in random_bodies("0123456789", 30, range(9, 10)):
        accepted = [c for c in "0123456789X" if isbn.is_valid(body + c)]
        assert accepted == [scheme.compute(body)], body
        changed = one_changed(body + accepted[0], "0123456789X", rng)
        assert scheme.is_valid(changed) == isbn.is_valid(changed), changed
