"""One generic test over the registry: names, natural alphabets, refusals, and compute /
verify / bulk agreeing for every scheme on every alphabet it serves."""

from __future__ import annotations

import doctest
import importlib
import random

import numpy as np
import pytest

from issuer.checking.alphabets import ALPHABETS, Alphabet, get_alphabet
from issuer.checking.schemes import SCHEMES, Scheme, get_scheme
from issuer.errors import InvalidLength, UnknownName, UnsupportedAlphabet

NAMES = [
    "luhn", "verhoeff", "damm", "dihedral", "gs1", "mod11", "crockford37",
    "iso7064-11-2", "iso7064-11-10", "iso7064-27-26", "iso7064-37-2", "iso7064-37-36",
    "iso7064-97-10", "iso7064-661-26", "iso7064-1271-36", "none",
]  # fmt: skip

NATURAL = {
    "luhn": "digits", "verhoeff": "digits", "damm": "digits", "dihedral": "letters",
    "gs1": "digits", "mod11": "digits", "crockford37": "crockford32",
    "iso7064-11-2": "digits", "iso7064-11-10": "digits", "iso7064-27-26": "letters",
    "iso7064-37-2": "alnum", "iso7064-37-36": "alnum", "iso7064-97-10": "digits",
    "iso7064-661-26": "letters", "iso7064-1271-36": "alnum", "none": "digits",
}  # fmt: skip

TWO_CHECKS = {"iso7064-97-10", "iso7064-661-26", "iso7064-1271-36"}

# custom alphabets of telling sizes: 6 = D3 and no Damm; 7 odd; 12 = 4·3; 14 = D7; 20 = 4·5
CUSTOM = {
    6: "custom:ACEHKM",
    7: "custom:ACEHKMP",
    12: "custom:ACDEFHJKMNPR",
    14: "custom:ACDEFHJKMNPRTW",
    20: "custom:ACDEFHJKMNPRTWXY3479",
}

# which named alphabets each scheme serves, written out independently of the code
SERVES = {
    "luhn": set(ALPHABETS),
    "verhoeff": {"digits"},
    "damm": {"digits", "alnum", "crockford32", "hex"},
    "dihedral": {"digits", "letters"},
    "gs1": {"digits"},
    "mod11": {"digits"},
    "crockford37": {"crockford32"},
    "iso7064-11-2": {"digits"},
    "iso7064-11-10": {"digits"},
    "iso7064-27-26": {"letters"},
    "iso7064-37-2": {"alnum"},
    "iso7064-37-36": {"alnum"},
    "iso7064-97-10": {"digits"},
    "iso7064-661-26": {"letters"},
    "iso7064-1271-36": {"alnum"},
    "none": set(ALPHABETS),
}
SERVES_CUSTOM = {
    "luhn": set(CUSTOM),
    "none": set(CUSTOM),
    "damm": {7, 12, 20},
    "dihedral": {6, 14},
}


def served_pairs() -> list[tuple[str, str]]:
    pairs = [(name, alphabet) for name in NAMES for alphabet in sorted(SERVES[name])]
    pairs += [(name, CUSTOM[size]) for name, sizes in SERVES_CUSTOM.items() for size in sizes]
    return pairs


def test_names_are_exactly_the_published_list() -> None:
    assert list(SCHEMES) == NAMES


@pytest.mark.parametrize("name", NAMES)
def test_natural_alphabet_and_check_length(name: str) -> None:
    scheme = get_scheme(name)
    assert scheme.alphabet.name == NATURAL[name]
    assert scheme.check_length == (0 if name == "none" else 2 if name in TWO_CHECKS else 1)


@pytest.mark.parametrize(
    ("name", "extra"),
    [("iso7064-11-2", "X"), ("mod11", "X"), ("iso7064-37-2", "*"), ("crockford37", "*~$=U")],
)
def test_larger_check_alphabets(name: str, extra: str) -> None:
    scheme = get_scheme(name)
    assert scheme.check_alphabet.symbols == scheme.alphabet.symbols + extra


def test_crockford_check_folds_lower_case_u_and_confusables() -> None:
    scheme = get_scheme("crockford37")
    assert scheme.check_alphabet.canonical("u") == "U"
    assert scheme.check_alphabet.canonical("o") == "0"
    assert scheme.check_alphabet.canonical("l") == "1"


@pytest.mark.parametrize("name", NAMES)
def test_docstring_names_its_source_and_shows_the_normal_case(name: str) -> None:
    cls = SCHEMES[name]
    module = importlib.import_module(cls.__module__)
    assert cls.source and module.__doc__ and ">>>" in module.__doc__
    failures, tried = doctest.testmod(module)
    assert tried and not failures


@pytest.mark.parametrize(("name", "alphabet"), served_pairs())
def test_compute_verify_and_bulk_agree(name: str, alphabet: str) -> None:
    scheme = get_scheme(name, alphabet)
    rng = random.Random(f"{name}/{alphabet}")
    symbols = scheme.alphabet.symbols
    length = min(8, scheme.max_body_length or 8)
    bodies = ["".join(rng.choice(symbols) for _ in range(length)) for _ in range(300)]
    codes = [scheme.append(body) for body in bodies]
    assert all(scheme.is_valid(code) for code in codes)
    assert all(scheme.validate(code) == code for code in codes)
    matrix = np.asarray([scheme.alphabet.values(body) for body in bodies], dtype=np.int64)
    bulk = scheme.compute_bulk(matrix)
    assert bulk.shape == (len(bodies), scheme.check_length)
    assert [scheme.check_alphabet.text(row) for row in bulk.tolist()] == [
        scheme.compute(body) for body in bodies
    ]
    width = length + scheme.check_length
    assert scheme.verify_bulk(scheme.code_matrix(codes, width)).all()
    # one changed character: the bulk verdict equals the scalar one, code by code
    all_symbols = scheme.alphabet.symbols + scheme.check_alphabet.symbols
    changed = []
    for code in codes:
        at = rng.randrange(len(code))
        changed.append(code[:at] + rng.choice(all_symbols) + code[at + 1 :])
    verdicts = scheme.verify_bulk(scheme.code_matrix(changed, width)).tolist()
    assert verdicts == [scheme.is_valid(code) for code in changed]


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize("alphabet", [*ALPHABETS, *CUSTOM.values()])
def test_unserved_alphabets_are_refused_in_one_line(name: str, alphabet: str) -> None:
    served = alphabet in SERVES[name] or any(
        CUSTOM[size] == alphabet for size in SERVES_CUSTOM.get(name, ())
    )
    if served:
        assert isinstance(get_scheme(name, alphabet), Scheme)
        return
    with pytest.raises(UnsupportedAlphabet) as caught:
        get_scheme(name, alphabet)
    message = str(caught.value)
    assert "\n" not in message and name in message and " use " in message


def test_refusal_names_what_would_serve() -> None:
    with pytest.raises(UnsupportedAlphabet, match="use dihedral") as caught:
        get_scheme("damm", "letters")
    assert "order 26" in str(caught.value)
    with pytest.raises(UnsupportedAlphabet, match="use damm for 16 symbols"):
        get_scheme("dihedral", "hex")


def test_unknown_scheme() -> None:
    with pytest.raises(UnknownName, match="unknown scheme"):
        get_scheme("mod12")


def test_luhn_serves_any_alphabet() -> None:
    alphabet = Alphabet(name="three", symbols="ABC")
    assert get_scheme("luhn", alphabet).append("ABCA") == "ABCA" + get_scheme(
        "luhn", alphabet
    ).compute("ABCA")


def test_mod11_refuses_bodies_it_cannot_protect() -> None:
    scheme = get_scheme("mod11")
    assert scheme.max_body_length == 9
    scheme.compute("123456789")
    with pytest.raises(InvalidLength, match="repeat modulo 11"):
        scheme.compute("1234567890")
    with pytest.raises(InvalidLength):
        scheme.compute_bulk(np.zeros((2, 10), dtype=np.int64))
    with pytest.raises(InvalidLength):
        scheme.verify_bulk(np.zeros((2, 11), dtype=np.int64))
    assert not scheme.is_valid("12345678900")


def test_none_appends_nothing() -> None:
    scheme = get_scheme("none", "alnum")
    assert scheme.append("QTL42") == "QTL42"
    assert scheme.is_valid("QTL42") and not scheme.is_valid("") and not scheme.is_valid("Q-*")
    assert scheme.compute_bulk(np.zeros((3, 5), dtype=np.int64)).shape == (3, 0)
    assert scheme.verify_bulk(scheme.code_matrix(["QTL42", "qtl4?"], 5)).tolist() == [True, False]


def test_bulk_marks_symbols_outside_the_alphabet_invalid() -> None:
    scheme = get_scheme("verhoeff")
    code = scheme.append("12345")
    assert scheme.verify_bulk(scheme.code_matrix([code, "1234A" + code[-1]], 6)).tolist() == [
        True,
        False,
    ]


def test_damm_table_source_is_recorded() -> None:
    assert "published" in get_scheme("damm").table_source  # type: ignore[attr-defined]
    assert "GF(4)" in get_scheme("damm", "alnum").table_source  # type: ignore[attr-defined]
    assert get_alphabet("alnum").size == 36


def test_code_matrix_reads_odd_lengths_and_odd_characters_as_invalid() -> None:
    scheme = get_scheme("damm")
    good = scheme.append("57201")
    texts = [good, good[:-1], good + "0", "５" + good[1:], good.replace("5", "\n"), good]
    matrix = scheme.code_matrix(texts, 6)
    assert matrix.shape == (6, 6) and matrix.dtype == np.int8
    assert scheme.verify_bulk(matrix).tolist() == [True, False, False, False, False, True]
    as_bytes = np.asarray([good.encode(), b"000000"])
    assert scheme.verify_bulk(scheme.code_matrix(as_bytes, 6)).tolist() == [True, True]
    assert scheme.code_matrix([], 6).shape == (0, 6)
