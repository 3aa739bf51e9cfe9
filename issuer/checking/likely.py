"""Which issued code was meant: candidates ranked by the likelihood of the slip.

A typed text that is not an issued code was, most likely, an issued code ``c`` that
suffered one slip. The likelihood of candidate ``c`` is the probability of the specific
slip that turns ``c`` into the text:

    share of the slip's class (:data:`~issuer.checking.neighbours.ERROR_WEIGHTS`, Verhoeff's
    frequencies) / the number of slips of that class that ``c`` admits.

So a single substitution in an 8-character digit code is one of 72 possible
substitutions (79.05 % / 72 = 1.1 %), and the one adjacent transposition of a code
whose neighbours all differ is one of 7 (10.21 % / 7 = 1.5 %): a swap is not ranked
below every substitution just because substitutions are commoner as a class.

In a series whose alphabet holds letters, scanners and eyes confuse some shapes far
more than others (:data:`SHAPE_CONFUSIONS`, 0/O/D/Q, 1/I/L/7, 2/Z, 5/S, 6/G, 8/B, U/V);
a substitution between such a pair is taken as :data:`CONFUSION_FACTOR` times as likely
as any other substitution at that position. Omission and insertion (a text one
character short or long) take :data:`LENGTH_SLIP_WEIGHT`, spread the same way.

Every issued candidate whose likelihood is at least :data:`THRESHOLD` is shown, likeliest
first (no fixed number); when the second is at least :data:`CLOSE_RATIO` as likely as the
first, :func:`advice` says so in words.

>>> from issuer.checking.codes import CodeFormat
>>> from issuer.checking.schemes import get_scheme
>>> shape = CodeFormat(get_scheme("luhn"), length=7, prefix="L")
>>> meant = shape.code_for_base(12534)
>>> typed = meant[:-3] + meant[-2] + meant[-3] + meant[-1]
>>> [r.code for r in suggest(shape, typed, lambda codes: set(codes) & {meant})]
['L00125347']
"""

from __future__ import annotations

from collections.abc import Callable, Container, Iterable, Mapping
from dataclasses import dataclass
from types import MappingProxyType

from issuer.checking.codes import CodeFormat
from issuer.checking.neighbours import (
    ERROR_WEIGHTS,
    PHONETIC_DIGITS,
    Neighbour,
    neighbours,
    omission_insertion_candidates,
)

#: the share of slips that drop or add a character (N. R. Wagner, The Laws of
#: Cryptography, 2002: 10-20 % where lengths are not fixed); the low end
LENGTH_SLIP_WEIGHT = 0.10

#: pairs that people and scanners confuse by shape, in alphabets that hold both
SHAPE_CONFUSIONS: tuple[str, ...] = ("0O", "0D", "0Q", "OQ", "1I", "1L", "IL", "17", "2Z", "5S", "6G", "8B", "UV")
#: a substitution between such a pair, against any other substitution at that position
CONFUSION_FACTOR = 20.0

#: a candidate is shown when its slip has at least this probability: every one-slip
#: candidate of the classes above in codes of up to 64 characters clears it
THRESHOLD = 1e-6
#: the second candidate counts as close when at least this share as likely as the first
CLOSE_RATIO = 0.5

_CONFUSED = frozenset(pair for both in SHAPE_CONFUSIONS for pair in (both, both[::-1]))
_NUMBERS = ("no", "one", "two", "three", "four", "five", "six", "seven", "eight", "nine", "ten")


@dataclass(frozen=True)
class Ranked:
    """An issued candidate and the probability of the slip that would turn it into the text."""

    code: str
    error: str
    description: str
    likelihood: float


def _middle(fmt: CodeFormat, code: str) -> str:
    return code[len(fmt.prefix): len(code) - len(fmt.suffix)]


def _sizes(fmt: CodeFormat) -> list[str]:
    scheme = fmt.scheme
    return [scheme.alphabet.symbols] * fmt.length + [scheme.check_alphabet.symbols] * scheme.check_length


def _substitution_mass(symbols: str, was: str) -> float:
    """How many substitutions of ``was`` a position admits, a shape confusion counting
    :data:`CONFUSION_FACTOR` times."""
    return sum(CONFUSION_FACTOR if was + other in _CONFUSED else 1.0 for other in symbols if other != was)


def likelihood(fmt: CodeFormat, meant: str, typed: str, error: str) -> float:
    """The probability of the one slip of class ``error`` that turns code ``meant`` into
    ``typed`` (both canonical, same series)."""
    code, text = _middle(fmt, meant), _middle(fmt, typed)
    symbols = _sizes(fmt)
    if error == "single":
        at = next(i for i, (a, b) in enumerate(zip(code, text)) if a != b)
        if fmt.scheme.alphabet.symbols.isdigit():  # shape confusions matter where letters are
            return ERROR_WEIGHTS["single"] / sum(len(s) - 1 for s in symbols)
        factor = CONFUSION_FACTOR if code[at] + text[at] in _CONFUSED else 1.0
        mass = sum(_substitution_mass(symbols[i], ch) for i, ch in enumerate(code))
        return ERROR_WEIGHTS["single"] * factor / mass
    if error in ("adjacent", "jump"):
        gap = 1 if error == "adjacent" else 2
        count = sum(1 for i in range(len(code) - gap) if code[i] != code[i + gap])
        return ERROR_WEIGHTS[error] / max(count, 1)
    if error in ("twin", "jump_twin"):
        gap = 1 if error == "twin" else 2
        count = sum(len(symbols[i]) - 1 for i in range(len(code) - gap) if code[i] == code[i + gap])
        return ERROR_WEIGHTS[error] / max(count, 1)
    if error == "phonetic":
        count = sum(
            1 for i in range(len(code) - 1)
            if (code[i] in PHONETIC_DIGITS and code[i + 1] == "0")
            or (code[i] == "1" and code[i + 1] in PHONETIC_DIGITS)
        )  # fmt: skip
        return ERROR_WEIGHTS["phonetic"] / max(count, 1)
    if error == "omission":
        return LENGTH_SLIP_WEIGHT / 2 / len(code)
    if error == "insertion":
        return LENGTH_SLIP_WEIGHT / 2 / ((len(code) + 1) * max(len(s) for s in symbols))
    raise ValueError(f"unknown error class {error!r}")


def rank(fmt: CodeFormat, typed: str, candidates: Iterable[Neighbour], issued: Container[str]) -> list[Ranked]:
    """The issued ones among ``candidates`` (each one slip from ``typed``), likeliest
    first, those under :data:`THRESHOLD` left out. Ties keep the candidates' order."""
    ranked = [
        Ranked(c.code, c.error, c.description, likelihood(fmt, c.code, typed, c.error))
        for c in candidates if c.code in issued
    ]  # fmt: skip
    ranked = [r for r in ranked if r.likelihood >= THRESHOLD]
    ranked.sort(key=lambda r: -r.likelihood)
    return ranked


def suggest(fmt: CodeFormat, typed: str, issued: Callable[[list[str]], set[str]]) -> list[Ranked]:
    """Ranked issued candidates for ``typed``: one slip away when it has the series'
    width (a canonical text), one character left out or added when it is one short or long.
    ``issued`` answers which of a list of codes are issued (one query)."""
    if len(typed) == fmt.total_width:
        candidates = neighbours(fmt, typed)
    else:
        candidates = omission_insertion_candidates(fmt, typed)
    if not candidates:
        return []
    return rank(fmt, typed, candidates, issued([c.code for c in candidates]))


def advice(ranked: list[Ranked] | list[float]) -> str | None:
    """Words for the clerk when the likeliest candidates are close, else ``None``."""
    scores = sorted((r if isinstance(r, float) else r.likelihood for r in ranked), reverse=True)
    if len(scores) < 2 or scores[1] < CLOSE_RATIO * scores[0]:
        return None
    close = sum(1 for s in scores if s >= CLOSE_RATIO * scores[0])
    count = _NUMBERS[close] if close < len(_NUMBERS) else str(close)
    return f"{count} issued codes are one slip away: ask the person to read it again"


def shares(ranked: list[Ranked]) -> Mapping[str, float]:
    """Each candidate's share of the shown candidates' likelihood (a uniform prior over
    issued codes): how sure the first suggestion is."""
    total = sum(r.likelihood for r in ranked)
    return MappingProxyType({r.code: r.likelihood / total for r in ranked} if total else {})


__all__ = [
    "CLOSE_RATIO",
    "CONFUSION_FACTOR",
    "LENGTH_SLIP_WEIGHT",
    "SHAPE_CONFUSIONS",
    "THRESHOLD",
    "Ranked",
    "advice",
    "likelihood",
    "rank",
    "shares",
    "suggest",
]
