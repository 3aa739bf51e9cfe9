"""Scheme-only checking: the bulk path over a file answers exactly as the one-text path,
whatever the lines hold, in chunks and in files of mixed line lengths."""

from __future__ import annotations

import random

import pytest

import issuer.checking.verify
from issuer.checking.schemes import get_scheme
from issuer.checking.verify import MAX_INPUT_LENGTH, check_lines, check_text
from issuer.errors import InvalidLength

# characters people and scanners produce: symbols, lower case, separators, look-alikes
POOL = "0123456789" * 6 + "ABCDEFXYZ*" + "abcxoil" + " -_./" + "\uff11\u00e9\u2013"


def junk_lines(scheme_name: str, count: int, seed: int) -> list[str]:
    scheme = get_scheme(scheme_name)
    rng = random.Random(seed)
    lines = []
    for i in range(count):
        if i % 3 == 0:  # a third are well-formed, half of them valid
            body = "".join(rng.choice(scheme.alphabet.symbols) for _ in range(rng.randint(4, 9)))
            code = scheme.append(body)
            lines.append(code if i % 2 else code[:-1] + rng.choice(scheme.check_alphabet.symbols))
        else:
            lines.append("".join(rng.choice(POOL) for _ in range(rng.randint(0, 14))))
    return lines


@pytest.mark.parametrize(
    ("name", "alphabet"),
    [("luhn", None), ("iso7064-11-2", None), ("crockford37", None), ("damm", "hex"),
     ("iso7064-97-10", None), ("mod11", None), ("iso7064-37-2", None)],
)  # fmt: skip
def test_bulk_answers_like_one_text_at_a_time(
    name: str, alphabet: str | None, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(issuer.checking.verify, "_CHUNK", 97)  # many chunks per length
    scheme = get_scheme(name, alphabet)
    lines = junk_lines(name, 3_000, seed=len(name))
    data = "\r\n".join(lines).encode("utf-8")
    result = check_lines(scheme, data, keep_results=True)
    expected = [check_text(scheme, line) for line in lines if line.strip()]
    assert result.results == expected
    assert result.total == len(expected)
    assert result.valid == sum(answer.valid for answer in expected)
    assert 0 < result.valid < result.total


def test_equal_length_lines_take_the_strided_view(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(issuer.checking.verify, "_CHUNK", 1_000)
    scheme = get_scheme("verhoeff")
    rng = random.Random(4)
    lines = [scheme.append(f"{rng.randrange(10**8):08d}") for _ in range(5_000)]
    lines[17] = lines[17][:-1] + str((int(lines[17][-1]) + 1) % 10)
    result = check_lines(scheme, ("\n".join(lines) + "\n").encode(), keep_results=True)
    assert result.total == 5_000 and result.valid == 4_999
    assert result.results is not None and not result.results[17].valid
    assert [a.code for a in result.results] == lines


def test_overlong_line_is_refused_before_anything() -> None:
    scheme = get_scheme("luhn")
    with pytest.raises(InvalidLength, match="line 2"):
        check_lines(scheme, b"79927398713\n" + b"1" * (MAX_INPUT_LENGTH + 1))
    with pytest.raises(InvalidLength):
        check_text(scheme, "1" * (MAX_INPUT_LENGTH + 1))


def test_reasons() -> None:
    scheme = get_scheme("iso7064-11-2")
    assert check_text(scheme, "079X").valid is (scheme.compute("079") == "X")
    assert check_text(scheme, "X790").kind == "symbols"  # X is a check symbol only
    assert check_text(scheme, "7").kind == "length"
    assert check_text(scheme, " - ").kind == "empty"
