"""The reading rules (issuer.checking.reading): what a typed or scanned code reads as."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from issuer.checking.codes import CodeFormat
from issuer.checking.reading import MAX_TYPED, read_code, shown, typed_form
from issuer.checking.schemes import get_scheme
from issuer.errors import InvalidFormat

TOOLS = CodeFormat(get_scheme("damm"), length=7, prefix="QTL", group=(4, 4))
MEMBERS = CodeFormat(get_scheme("verhoeff"), length=9, prefix="QM", group=(5, 5))
PASSES = CodeFormat(get_scheme("damm", "crockford32"), length=6, prefix="DP", group=(4, 3))
SHAPES = [("tools", TOOLS), ("members", MEMBERS), ("passes", PASSES)]


@pytest.mark.parametrize(
    ("typed", "read"),
    [
        ("qtl-0000 013", "QTL0000013"),
        ("\uff31\uff34\uff2c\uff10\uff11", "QTL01"),  # full-width forms (NFKC)
        ("QTL\u00a00000\u2011013", "QTL0000013"),  # NBSP and a non-breaking hyphen
        ("Q\u200bT\u200dL\ufeff0\u200e0\u202e1", "QTL001"),  # zero-width and bidi marks
        ("\u0661\u0662\u0663", "123"),  # Arabic-Indic digits
        ("\u0967\u0968", "12"),  # Devanagari digits
        ("\u0421\u041c", "CM"),  # Cyrillic capitals drawn like Latin C and M
        ("\u2460", "1"),  # a circled digit (NFKC)
    ],
)
def test_compatibility_forms_read_as_ascii(typed: str, read: str) -> None:
    assert typed_form(typed) == read


@pytest.mark.parametrize(
    ("typed", "says"),
    [
        ("QTL\x000013", "U+0000"),
        ("QTL\udcff13", "undecodable byte"),
        ("QTL\ue00013", "private-use"),
        ("QTL\u0436", "CYRILLIC SMALL LETTER ZHE"),
        ("QTL\U0001f600", "GRINNING FACE"),
        ("7" * (MAX_TYPED + 1), "too long"),
    ],
)
def test_unreadable_characters_are_refused_in_one_line(typed: str, says: str) -> None:
    with pytest.raises(InvalidFormat) as caught:
        typed_form(typed)
    assert says in caught.value.message
    assert "\n" not in caught.value.message
    read = read_code(SHAPES, typed)
    assert not read.readings and read.problem and "\n" not in read.problem


def test_confusable_letters_fold_in_a_digit_series() -> None:
    code = TOOLS.code_for_base(13)  # QTL00000130 style
    typed = code.replace("0", "O").replace("1", "l")
    assert TOOLS.parse(typed).canonical == code
    assert TOOLS.parse(code.replace("1", "I")).canonical == code


def test_crockford_folding_is_the_alphabets_own() -> None:
    code = PASSES.code_for_base(1)
    assert PASSES.parse(code.lower().replace("0", "o")).canonical == code


def test_a_left_off_prefix_is_supplied_when_one_series_fits() -> None:
    code = TOOLS.code_for_base(13)
    read = read_code(SHAPES, code[3:])
    assert [(r.series, r.canonical, r.completed) for r in read.readings] == [("tools", code, True)]
    assert read.one().display == TOOLS.display(code)


def test_a_code_of_another_series_is_named_where_one_series_was_expected() -> None:
    card = MEMBERS.code_for_base(123_456_789)
    read = read_code(SHAPES, card, series="tools")
    assert read.other_series == "members"
    assert read.problem == f"{MEMBERS.display(card)} belongs to series members, not tools"


def test_iso7064_alternative_pair_reads_as_the_computed_pair() -> None:
    shape = CodeFormat(get_scheme("iso7064-97-10"), length=7, prefix="C")
    body = next(f"{n:07d}" for n in range(10_000) if shape.scheme.compute(f"{n:07d}") == "02")
    computed = "C" + body + "02"
    alternative = "C" + body + "99"  # source: ISO/IEC 7064, pure system: 99 is congruent to 02 mod 97
    assert shape.scheme.is_valid(body + "99")  # the standard accepts it...
    assert shape.parse(alternative).canonical == computed  # ...and it reads as the same code
    assert read_code([("c", shape)], alternative).one().canonical == computed


def test_shown_keeps_a_message_on_one_printable_line() -> None:
    assert shown("a\nb\x00c\u200b") == "'a\\nb\\x00c\\u200b'"
    assert shown("7" * 100).endswith("\u2026'")


# -- the property: any allowed variation of an issued code reads back as that code --------

SEPARATOR_CHARS = [" ", "-", ".", "/", "_", ":", "\u00a0", "\u2013", "\u200b", "\u200e"]


@st.composite
def variations(draw: st.DrawFn) -> tuple[str, str, str]:
    key, shape = draw(st.sampled_from(SHAPES))
    code = shape.code_for_base(draw(st.integers(0, shape.capacity - 1)))
    text = code
    if draw(st.booleans()):
        text = text[len(shape.prefix):]  # prefix dropped
    out = []
    digit_series = shape.scheme.alphabet.symbols.isdigit()
    for ch in text:
        if digit_series or shape is PASSES:
            # confusables the alphabet lacks: O for 0, I or L for 1
            ch = draw(st.sampled_from({"0": ["0", "O", "o"], "1": ["1", "I", "l", "L", "i"]}.get(ch, [ch])))
        if draw(st.booleans()):
            ch = ch.lower()
        out.append(ch)
        if draw(st.integers(0, 4)) == 0:
            out.append(draw(st.sampled_from(SEPARATOR_CHARS)))
    if draw(st.booleans()):
        out = [draw(st.sampled_from(SEPARATOR_CHARS)), *out, " "]
    if draw(st.booleans()):  # full-width forms
        out = [chr(ord(ch) + 0xFEE0) if "!" <= ch <= "~" else ch for ch in out]
    return key, code, "".join(out)


@settings(max_examples=300, deadline=None)
@given(variations())
def test_any_allowed_variation_of_a_code_reads_back_as_that_code(case: tuple[str, str, str]) -> None:
    key, code, typed = case
    read = read_code(SHAPES, typed)
    assert read.one().canonical == code, (typed, read)
    assert read.one().series == key
