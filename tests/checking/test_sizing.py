"""Sizing: the exhaustive figures against a plain brute force written from the model in
issuer.checking.sizing's docstring, sampling against the exact figures, and the longer lengths."""

from __future__ import annotations

from itertools import product

import pytest

from issuer.checking.schemes import get_scheme
from issuer.checking.sizing import size_length, size_series

# source: Verhoeff 1969 (Mathematical Centre Tract 29), as tabulated in secondary sources
SINGLE, ADJACENT = 79.05, 10.21


def brute_force(name: str, alphabet: str | None, length: int, expect: int) -> dict[str, float]:
    scheme = get_scheme(name, alphabet)
    positions = [scheme.alphabet.symbols] * length + [
        scheme.check_alphabet.symbols
    ] * scheme.check_length
    checks = {
        "".join(b): scheme.compute("".join(b))
        for b in product(scheme.alphabet.symbols, repeat=length)
    }
    fill = expect / len(checks)

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

    def one_error(text: str, kind: str) -> list[str]:
        out = []
        if kind == "single":
            for i, allowed in enumerate(positions):
                out += [text[:i] + ch + text[i + 1 :] for ch in allowed if ch != text[i]]
        else:
            for i in range(len(text) - 1):
                if text[i] != text[i + 1]:
                    out.append(text[:i] + text[i + 1] + text[i] + text[i + 2 :])
        return out

    means = {}
    for kind in ("single", "adjacent"):
        shares = []
        for body, check in checks.items():
            for typed in one_error(body + check, kind):
                if valid(typed):
                    shares.append(0.0)
                    continue
                around = one_error(typed, "single") + one_error(typed, "adjacent")
                others = sum(valid(t) for t in around) - 1
                shares.append((1 - fill) ** others)
        means[kind] = sum(shares) / len(shares)
    means["combined"] = (SINGLE * means["single"] + ADJACENT * means["adjacent"]) / (
        SINGLE + ADJACENT
    )
    return means


@pytest.mark.parametrize(("name", "alphabet", "length", "expect"), [
    ("luhn", None, 2, 20),
    ("luhn", None, 3, 150),
    ("iso7064-11-2", None, 2, 30),  # a check symbol (X) the body cannot hold
    ("iso7064-97-10", None, 2, 10),  # two check digits
    ("damm", "hex", 2, 40),
    ("gs1", None, 3, 400),
])  # fmt: skip
def test_exhaustive_sizing_matches_a_brute_force(
    name: str, alphabet: str | None, length: int, expect: int
) -> None:
    expected = brute_force(name, alphabet, length, expect)
    row = size_length(get_scheme(name, alphabet), length, expect, exhaustive=True)
    assert row.exhaustive and row.fits and row.margin == 0
    assert row.fill == pytest.approx(expect / row.capacity)
    assert row.unique["single"] == pytest.approx(expected["single"], abs=1e-12)
    assert row.unique["adjacent"] == pytest.approx(expected["adjacent"], abs=1e-12)
    assert row.unique_correction == pytest.approx(expected["combined"], abs=1e-12)


def test_sampled_sizing_agrees_with_the_exact_figure() -> None:
    scheme = get_scheme("luhn")
    exact = size_length(scheme, 3, 120, exhaustive=True)
    sampled = size_length(scheme, 3, 120, exhaustive=False, samples=6_000, seed=5)
    assert not sampled.exhaustive and sampled.margin > 0
    assert sampled.unique_correction is not None and exact.unique_correction is not None
    assert abs(sampled.unique_correction - exact.unique_correction) < 2 * sampled.margin + 1e-3


def test_longer_lengths_and_a_series_that_does_not_fit() -> None:
    rows = size_series(get_scheme("damm"), 2, 500, longer=3, samples=2_000)
    assert [row.length for row in rows] == [2, 3, 4, 5]
    assert not rows[0].fits and rows[0].unique_correction is None  # 500 codes, 100 bodies
    figures = [row.unique_correction for row in rows[1:]]
    assert all(f is not None for f in figures)
    # a longer body leaves the range emptier: the first suggestion is right more often
    assert figures == sorted(figures)  # type: ignore[type-var]
    assert rows[1].fill == pytest.approx(0.5) and rows[3].fill == pytest.approx(0.005)
    data = rows[1].to_dict()
    assert {"length", "fill", "unique_correction"} <= set(data)
