"""Suggestions one error away: a typo of each class points back to the original, ranked
by how common the error is, and the list is complete against a brute-force search."""

from __future__ import annotations

import random
import subprocess
import sys
from itertools import product

import pytest

from issuer.checking.codes import CodeFormat
from issuer.checking.neighbours import (
    ERROR_CLASSES,
    ERROR_WEIGHTS,
    neighbours,
    omission_insertion_candidates,
    ordinal,
)
from issuer.checking.schemes import SCHEMES, get_scheme
from issuer.errors import InvalidFormat

# source: J. Verhoeff, Error Detecting Decimal Codes, Mathematical Centre Tract 29,
# Mathematisch Centrum, Amsterdam, 1969 (12,112 errors on six-digit numbers), as
# tabulated in secondary sources: share of all errors per class
VERHOEFF_1969 = {
    "single": 0.7905,
    "adjacent": 0.1021,
    "jump": 0.0082,
    "twin": 0.0055,
    "phonetic": 0.0049,
    "jump_twin": 0.0029,
}


def test_weights_are_verhoeffs_frequencies() -> None:
    assert dict(ERROR_WEIGHTS) == VERHOEFF_1969
    assert set(ERROR_CLASSES) == set(VERHOEFF_1969)


def test_ordinals() -> None:
    cases = {1: "1st", 2: "2nd", 3: "3rd", 4: "4th", 11: "11th", 12: "12th", 13: "13th",
             21: "21st", 22: "22nd", 23: "23rd", 101: "101st", 111: "111th"}  # fmt: skip
    assert {n: ordinal(n) for n in cases} == cases


# -- an independent model of the error classes, written from their definitions ----------


def typos(code: str, positions: list[str], decimal: bool) -> dict[str, set[str]]:
    """Every text one error of each class makes from ``code`` (``positions[i]`` is the
    symbol set of position i). Symbols a position does not allow are left out: such a
    text fails parsing, so it never reaches the suggestion list."""
    out: dict[str, set[str]] = {key: set() for key in ERROR_CLASSES}
    n = len(code)

    def fits(text: str) -> bool:
        return all(ch in positions[i] for i, ch in enumerate(text))

    def put(i: int, ch: str, text: str = code) -> str:
        return text[:i] + ch + text[i + 1 :]

    for i in range(n):
        for ch in positions[i]:
            if ch != code[i]:
                out["single"].add(put(i, ch))
    for gap, swap_key, twin_key in ((1, "adjacent", "twin"), (2, "jump", "jump_twin")):
        for i in range(n - gap):
            j = i + gap
            a, b = code[i], code[j]
            if a != b:
                out[swap_key].add(put(j, a, put(i, b)))
            else:
                for ch in positions[i]:
                    if ch != a:
                        out[twin_key].add(put(j, ch, put(i, ch)))
    if decimal:
        for i in range(n - 1):
            x, y = code[i], code[i + 1]
            if x == "1" and y in "23456789":  # fifteen heard as fifty
                out["phonetic"].add(put(i + 1, "0", put(i, y)))
            if x in "23456789" and y == "0":
                out["phonetic"].add(put(i + 1, x, put(i, "1")))
    return {key: {t for t in texts if fits(t)} for key, texts in out.items()}


def _positions(shape: CodeFormat) -> list[str]:
    scheme = shape.scheme
    return [scheme.alphabet.symbols] * shape.length + [
        scheme.check_alphabet.symbols
    ] * scheme.check_length


@pytest.mark.parametrize("name", [n for n in SCHEMES if n != "none"])
def test_a_typo_of_each_class_points_back_to_the_original(name: str) -> None:
    scheme = get_scheme(name)
    shape = CodeFormat(scheme, length=6, prefix="QM")
    rng = random.Random(f"neighbours-{name}")
    positions = _positions(shape)
    seen: set[str] = set()
    for _ in range(15):
        chars = [rng.choice(scheme.alphabet.symbols) for _ in range(6)]
        chars[1], chars[5] = chars[0], chars[3]  # a twin and a jump twin to mistype
        body = "".join(chars)
        middle = scheme.append(body)
        for error, texts in typos(middle, positions, scheme.alphabet.is_decimal).items():
            for typed in rng.sample(sorted(texts), min(2, len(texts))):
                if scheme.is_valid(typed):
                    continue  # the check let this one through: nothing to suggest
                found = neighbours(shape, "QM" + typed)
                hits = [n for n in found if n.code == "QM" + middle]
                assert len(hits) == 1, (name, middle, typed, error)
                assert hits[0].error == error
                seen.add(error)
                codes = [n.code for n in found]
                assert len(codes) == len(set(codes)) and "QM" + typed not in codes
                ranks = [ERROR_WEIGHTS[n.error] for n in found]
                assert ranks == sorted(ranks, reverse=True)
                for n in found:
                    shape.validate(n.code)
    # every class the scheme ever catches was exercised (Luhn never catches a jump)
    assert {"single", "adjacent", "twin", "jump_twin"} <= seen


@pytest.mark.parametrize(
    ("name", "alphabet", "length"),
    [("luhn", None, 3), ("iso7064-11-2", None, 2), ("iso7064-97-10", None, 2), ("damm", "hex", 2)],
)
def test_the_list_is_complete(name: str, alphabet: str | None, length: int) -> None:
    """Every valid code from which one error makes the typed text, and nothing else."""
    scheme = get_scheme(name, alphabet)
    shape = CodeFormat(scheme, length=length)
    positions = _positions(shape)
    meant_by: dict[str, set[str]] = {}
    # every code the scheme accepts (ISO/IEC 7064 MOD 97-10 accepts 97 as well as 00)
    valid_codes = [
        "".join(body) + "".join(check)
        for body in product(scheme.alphabet.symbols, repeat=length)
        for check in product(scheme.check_alphabet.symbols, repeat=scheme.check_length)
        if scheme.verify_values(
            scheme.alphabet.values("".join(body)), scheme.check_alphabet.values("".join(check))
        )
    ]
    for code in valid_codes:
        for texts in typos(code, positions, scheme.alphabet.is_decimal).values():
            for typed in texts:
                meant_by.setdefault(typed, set()).add(code)
    rng = random.Random(7)
    sample = rng.sample(sorted(meant_by), 300)
    for typed in sample:
        assert {n.code for n in neighbours(shape, typed)} == meant_by[typed] - {typed}


def test_descriptions_name_the_error_that_made_the_text() -> None:
    shape = CodeFormat(get_scheme("luhn"), length=5, prefix="QTL")
    original = "QTL" + shape.scheme.append("12345")  # QTL123455
    by_text = {
        "QTL123545": ("adjacent", "7th and 8th characters swapped (45 typed as 54)"),
        "QTL128455": ("single", "6th character: 3 typed as 8"),
        "QTL123450": ("single", "9th character: 5 typed as 0"),
    }
    for typed, (error, description) in by_text.items():
        hit = next(n for n in neighbours(shape, typed) if n.code == original)
        assert (hit.error, hit.description) == (error, description)


def test_twin_and_phonetic_descriptions() -> None:
    scheme = get_scheme("verhoeff")
    shape = CodeFormat(scheme, length=6)
    twin = scheme.append("511734")
    typed = "522734" + twin[-1]
    hit = next(n for n in neighbours(shape, typed) if n.code == twin)
    assert hit.description == "twin 11 typed as 22 at 2nd\u20133rd characters"
    spoken = scheme.append("215734")  # "fifteen" heard as "fifty"
    typed = "250734" + spoken[-1]
    hit = next(n for n in neighbours(shape, typed) if n.code == spoken)
    assert (hit.error, hit.description) == (
        "phonetic",
        "phonetic: 15 heard as 50 at 2nd\u20133rd characters",
    )


def test_check_character_outside_the_body_alphabet() -> None:
    scheme = get_scheme("iso7064-11-2")
    shape = CodeFormat(scheme, length=6)
    body = next(b for b in (f"{n:06d}" for n in range(1000)) if scheme.compute(b) == "X")
    found = neighbours(shape, body + "7")
    assert any(n.code == body + "X" and n.error == "single" for n in found)


def test_omission_and_insertion() -> None:
    shape = CodeFormat(get_scheme("damm"), length=6, prefix="QM")
    code = "QM" + shape.scheme.append("405193")
    short = code[:5] + code[6:]
    found = omission_insertion_candidates(shape, short)
    assert any(n.code == code and n.error == "omission" for n in found)
    long = code[:4] + "8" + code[4:]
    found = omission_insertion_candidates(shape, long)
    hit = next(n for n in found if n.code == code)
    assert (hit.error, hit.description) == ("insertion", "extra 8 typed as 5th character")
    assert all(shape.matches_shape(n.code) and shape.validate(n.code) for n in found)
    assert omission_insertion_candidates(shape, code[:-2]) == []
    assert omission_insertion_candidates(shape, "XX" + code[2:]) == []


def test_text_that_does_not_parse_is_refused() -> None:
    shape = CodeFormat(get_scheme("luhn"), length=5)
    for text in ("1234", "1234567", "12a456", ""):
        with pytest.raises(InvalidFormat):
            neighbours(shape, text)


def test_no_numpy_on_import() -> None:
    code = "import sys, issuer.checking.neighbours; assert 'numpy' not in sys.modules"
    subprocess.run([sys.executable, "-c", code], check=True)
