"""Suggestions ranked by the likelihood of the slip, measured.

On a 3,000-code series issued in order and on one issued scattered, one random slip of
each class is made on 500 issued codes; the code that was meant must be among the
suggestions every time the slipped text is not itself issued, and first in at least
90 % of cases on the scattered series. The figures are printed (``pytest -s``) and held.
"""

from __future__ import annotations

import os
import random
from collections import Counter
from collections.abc import Callable

import pytest

from issuer.checking.codes import CodeFormat
from issuer.checking.likely import (
    CLOSE_RATIO,
    CONFUSION_FACTOR,
    THRESHOLD,
    advice,
    likelihood,
    rank,
    suggest,
)
from issuer.checking.neighbours import ERROR_CLASSES, PHONETIC_DIGITS, neighbours
from issuer.checking.schemes import get_scheme

SERIES = 3_000
SAMPLED = 500
#: the alphanumeric pass series runs too when long tests are asked for (it takes a minute)
LONG = pytest.mark.skipif(not os.environ.get("ISSUER_LONG_TESTS"), reason="long run: ISSUER_LONG_TESTS=1")

TOOLS = CodeFormat(get_scheme("damm"), length=7, prefix="QTL", group=(4, 4))
MEMBERS = CodeFormat(get_scheme("verhoeff"), length=9, prefix="QM", group=(5, 5))
PASSES = CodeFormat(get_scheme("damm", "crockford32"), length=6, prefix="DP", group=(4, 3))


def slip(shape: CodeFormat, code: str, error: str, rng: random.Random) -> str | None:
    """``code`` after one random slip of class ``error``; None where the code admits none."""
    head, tail = len(shape.prefix), len(code) - len(shape.suffix)
    middle = list(code[head:tail])
    scheme = shape.scheme
    symbols = [scheme.alphabet.symbols] * shape.length + [scheme.check_alphabet.symbols] * scheme.check_length
    n = len(middle)
    if error == "single":
        i = rng.randrange(n)
        middle[i] = rng.choice([s for s in symbols[i] if s != middle[i]])
    elif error in ("adjacent", "jump"):
        gap = 1 if error == "adjacent" else 2
        sites = [i for i in range(n - gap) if middle[i] != middle[i + gap]
                 and middle[i] in symbols[i + gap] and middle[i + gap] in symbols[i]]
        if not sites:
            return None
        i = rng.choice(sites)
        middle[i], middle[i + gap] = middle[i + gap], middle[i]
    elif error in ("twin", "jump_twin"):
        gap = 1 if error == "twin" else 2
        sites = [i for i in range(n - gap) if middle[i] == middle[i + gap]]
        if not sites:
            return None
        i = rng.choice(sites)
        other = rng.choice([s for s in symbols[i] if s != middle[i] and s in symbols[i + gap]])
        middle[i] = middle[i + gap] = other
    else:  # phonetic: a0 <-> 1a, a = 2..9
        sites = [i for i in range(n - 1)
                 if (middle[i] in PHONETIC_DIGITS and middle[i + 1] == "0")
                 or (middle[i] == "1" and middle[i + 1] in PHONETIC_DIGITS)]
        if not scheme.alphabet.is_decimal or not sites:
            return None
        i = rng.choice(sites)
        a, b = middle[i], middle[i + 1]
        middle[i], middle[i + 1] = ("1", a) if b == "0" else (b, "0")
    return code[:head] + "".join(middle) + code[tail:]


def measure(shape: CodeFormat, bases: list[int], seed: int) -> dict[str, Counter[str]]:
    rng = random.Random(seed)
    codes = [shape.code_for_base(base) for base in bases]
    issued = set(codes)

    def held(candidates: list[str]) -> set[str]:
        return issued.intersection(candidates)

    tally: dict[str, Counter[str]] = {}
    for code in rng.sample(codes, SAMPLED):
        for error in ERROR_CLASSES:
            counts = tally.setdefault(error, Counter())
            typed = slip(shape, code, error, rng)
            if typed is None:
                continue
            counts["slips"] += 1
            if typed in issued:
                counts["typo issued"] += 1
                continue
            found = [r.code for r in suggest(shape, typed, held)]
            counts["found"] += code in found
            counts["first"] += found[:1] == [code]
    return tally


def report(name: str, tally: dict[str, Counter[str]]) -> tuple[int, int, int]:
    slips = sum(c["slips"] - c["typo issued"] for c in tally.values())
    found = sum(c["found"] for c in tally.values())
    first = sum(c["first"] for c in tally.values())
    print(f"\n{name}: {slips} slips not themselves issued; meant code suggested {found}, first {first} "
          f"({first / slips:.1%})")
    for error, c in tally.items():
        print(f"  {error:10} slips {c['slips']:4}  issued {c['typo issued']:3}  found {c['found']:4}  first {c['first']:4}")
    return slips, found, first


@pytest.mark.parametrize("shape", [TOOLS, pytest.param(PASSES, marks=LONG)], ids=["tools", "passes"])
def test_in_order_series_the_meant_code_is_always_suggested(shape: CodeFormat) -> None:
    start = 1_121_300 if shape is TOOLS else 1_000
    slips, found, first = report(f"in order {shape.prefix}", measure(shape, list(range(start, start + SERIES)), 11))
    assert slips > 5 * SAMPLED // 2
    assert found == slips
    # in order, neighbouring numbers crowd one slip away; the ranking still puts the meant one first often
    assert first / slips >= 0.6


@pytest.mark.parametrize("shape", [MEMBERS, pytest.param(PASSES, marks=LONG)], ids=["members", "passes"])
def test_scattered_series_the_meant_code_is_suggested_and_first(shape: CodeFormat) -> None:
    rng = random.Random(7)
    bases = rng.sample(range(shape.capacity), SERIES)
    slips, found, first = report(f"scattered {shape.prefix}", measure(shape, bases, 23))
    assert found == slips
    assert first / slips >= 0.90


def test_a_swap_is_not_ranked_below_every_substitution() -> None:
    # an in-order series: 'L0012543' typed for 'L0012534' (the example shape)
    shape = CodeFormat(get_scheme("luhn"), length=7, prefix="L")
    issued = {shape.code_for_base(base) for base in range(12_000, 13_000)}
    meant = shape.code_for_base(12_534)
    typed = meant[:5] + meant[6] + meant[5] + meant[7:]
    ranked = suggest(shape, typed, lambda codes: issued.intersection(codes))
    assert meant in [r.code for r in ranked]
    assert len(ranked) > 5 or ranked[0].code == meant  # no fixed five: every candidate over the threshold
    assert all(r.likelihood >= THRESHOLD for r in ranked)
    assert [r.likelihood for r in ranked] == sorted((r.likelihood for r in ranked), reverse=True)


def test_likelihood_spreads_the_class_share_over_the_slips_a_code_admits() -> None:
    shape = CodeFormat(get_scheme("luhn"), length=7)
    code = "12345674"  # source: Luhn check of 1234567 is 4 (common practice)
    assert shape.scheme.append("1234567") == code
    # 8 positions, 9 other digits each: 72 single substitutions
    assert likelihood(shape, code, "12345679", "single") == pytest.approx(0.7905 / 72)
    # every neighbouring pair differs: 7 adjacent transpositions
    assert likelihood(shape, code, "21345674", "adjacent") == pytest.approx(0.1021 / 7)


def test_close_candidates_are_said_in_words() -> None:
    assert advice([0.01, 0.009]) == "two issued codes are one slip away: ask the person to read it again"
    assert advice([0.01, 0.01, 0.008]) == "three issued codes are one slip away: ask the person to read it again"
    assert advice([0.01, 0.01 * CLOSE_RATIO / 2]) is None
    assert advice([0.01]) is None


def test_every_candidate_over_the_threshold_is_kept() -> None:
    shape = MEMBERS
    code = shape.code_for_base(123_456_789)
    typed = code[:-1] + str((int(code[-1]) + 1) % 10)
    candidates = neighbours(shape, typed)
    everything = {c.code for c in candidates}
    ranked = rank(shape, typed, candidates, everything)
    assert {r.code for r in ranked} == everything  # with all of them issued, none is cut


def held_by(codes: set[str]) -> Callable[[list[str]], set[str]]:
    return lambda candidates: codes.intersection(candidates)


def test_a_scanner_confusion_outranks_another_substitution_in_a_letter_series() -> None:
    shape = PASSES
    meant = next(c for c in map(shape.code_for_base, range(1, 10_000)) if "8" in c[2:-1])
    at = meant.index("8", 2)
    confused = meant[:at] + "B" + meant[at + 1:]  # 8 read as B (common practice: shape confusion)
    other = meant[:at] + "E" + meant[at + 1:]
    assert likelihood(shape, meant, confused, "single") == pytest.approx(
        CONFUSION_FACTOR * likelihood(shape, meant, other, "single"))
    assert suggest(shape, meant, held_by({meant})) == []  # an issued code suggests nothing for itself
