"""The codes one likely error away from what was typed, most likely first.

A clerk types a code that fails its check. Which real code was meant? People make a
few kinds of mistake, at very different rates. J. Verhoeff, *Error Detecting Decimal
Codes*, Mathematical Centre Tract 29, Mathematisch Centrum, Amsterdam, 1969, classified
12,112 errors made on six-digit numbers; as tabulated in secondary sources:

=================================  ===========
error                              share
=================================  ===========
single substitution (a -> b)       79.05 %
adjacent transposition (ab -> ba)  10.21 %
jump transposition (abc -> cba)     0.82 %
twin (aa -> bb)                     0.55 %
phonetic (a0 <-> 1a, a = 2..9)      0.49 %
jump twin (aca -> bcb)              0.29 %
=================================  ===========

Omission and insertion are not in that table; N. R. Wagner, *The Laws of
Cryptography* (2002), puts them at 10-20 % of errors where lengths are not fixed. A
series of fixed length catches them structurally, so they only matter for suggestions,
offered separately by :func:`omission_insertion_candidates`.

:func:`neighbours` lists every code that is valid under the series' scheme and lies
one error of these classes away from a typed text, ranked by how common the error is.
It knows nothing of the register: the desk check keeps the candidates that were
issued. Positions cover the body and the check characters (a check character can be
mistyped too); the description names the error that turns the suggested code into
what was typed, counting characters of the whole code, prefix included.

>>> from issuer.checking.codes import CodeFormat
>>> from issuer.checking.schemes import get_scheme
>>> shape = CodeFormat(get_scheme("luhn"), length=5)
>>> shape.scheme.append("12345")
'123455'
>>> suggestions = neighbours(shape, "123545")
>>> [n.code for n in suggestions if n.error == "adjacent"]
['123455', '123554']
>>> next(n.description for n in suggestions if n.code == "123455")
'4th and 5th characters swapped (45 typed as 54)'
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from functools import partial
from types import MappingProxyType

from issuer.checking.codes import CodeFormat, normalise_text

#: Share of all observed errors per class (Verhoeff 1969, Mathematical Centre Tract 29).
#: The one table used for ranking suggestions and for the weighted undetected figure.
ERROR_WEIGHTS: Mapping[str, float] = MappingProxyType(
    {
        "single": 0.7905,
        "adjacent": 0.1021,
        "jump": 0.0082,
        "twin": 0.0055,
        "phonetic": 0.0049,
        "jump_twin": 0.0029,
    }
)
ERROR_WEIGHTS_SOURCE = (
    "J. Verhoeff, Error Detecting Decimal Codes, Mathematical Centre Tract 29, "
    "Mathematisch Centrum, Amsterdam, 1969 (12,112 errors on six-digit numbers)"
)

#: The error classes in the order reports list them.
ERROR_CLASSES: tuple[str, ...] = ("single", "adjacent", "jump", "twin", "jump_twin", "phonetic")

CLASS_TITLES: Mapping[str, str] = MappingProxyType(
    {
        "single": "single substitution (a\u2192b)",
        "adjacent": "adjacent transposition (ab\u2192ba)",
        "jump": "jump transposition (abc\u2192cba)",
        "twin": "twin (aa\u2192bb)",
        "jump_twin": "jump twin (aca\u2192bcb)",
        "phonetic": "phonetic (a0\u21941a)",
        "omission": "omission",
        "insertion": "insertion",
    }
)

#: The digits a of the phonetic pair a0 <-> 1a ("fifty" heard for "fifteen").
PHONETIC_DIGITS = "23456789"


@dataclass(frozen=True)
class Neighbour:
    """A valid code one error away from the typed text.

    ``error`` is a key of :data:`CLASS_TITLES`; ``description`` says, for people, what
    turned ``code`` into the text that was typed.
    """

    code: str
    error: str
    description: str


def ordinal(n: int) -> str:
    """``1`` -> ``'1st'``, ``12`` -> ``'12th'``, ``23`` -> ``'23rd'``."""
    if 10 <= n % 100 <= 20:
        return f"{n}th"
    return f"{n}{ {1: 'st', 2: 'nd', 3: 'rd'}.get(n % 10, 'th') }"


class _Shape:
    """What the generators need: per-position alphabets and a cached validity test."""

    def __init__(self, fmt: CodeFormat) -> None:
        scheme = fmt.scheme
        self.fmt = fmt
        self.length = fmt.length
        self.offset = len(fmt.prefix)  # so descriptions count the whole code's characters
        body_symbols = scheme.alphabet.symbols
        check_symbols = scheme.check_alphabet.symbols
        self.symbols = [body_symbols] * fmt.length + [check_symbols] * scheme.check_length
        self.decimal = scheme.alphabet.is_decimal
        self._body_value = {ch: v for v, ch in enumerate(body_symbols)}
        self._check_value = {ch: v for v, ch in enumerate(check_symbols)}
        # the scheme's own condition: some admit more than the computed check
        self._verify: Callable[[Sequence[int], Sequence[int]], bool] = scheme.verify_values
        self._seen: dict[str, bool] = {}

    def allowed(self, position: int, ch: str) -> bool:
        return ch in self.symbols[position]

    def valid(self, middle: str) -> bool:
        """Whether body + check (already within their alphabets) is a valid code."""
        known = self._seen.get(middle)
        if known is None:
            body = [self._body_value[ch] for ch in middle[: self.length]]
            check = [self._check_value[ch] for ch in middle[self.length :]]
            known = self._seen[middle] = self._verify(body, check)
        return known

    def place(self, position: int) -> str:
        return ordinal(position + self.offset + 1)


#: a candidate from a generator: the code meant, and how to describe the slip (only
#: called for valid candidates, so that the hundreds of invalid ones cost no words)
_Candidate = tuple[str, Callable[[], str]]


def _singles(shape: _Shape, typed: str) -> Iterator[_Candidate]:
    for i, was_typed in enumerate(typed):
        head, tail = typed[:i], typed[i + 1 :]
        for ch in shape.symbols[i]:
            if ch != was_typed:
                yield head + ch + tail, partial(_single_words, shape, i, ch, was_typed)


def _single_words(shape: _Shape, i: int, ch: str, was_typed: str) -> str:
    return f"{shape.place(i)} character: {ch} typed as {was_typed}"


def _transpositions(shape: _Shape, typed: str, gap: int) -> Iterator[_Candidate]:
    for i in range(len(typed) - gap):
        j = i + gap
        a, b = typed[i], typed[j]
        if a == b or not (shape.allowed(i, b) and shape.allowed(j, a)):
            continue
        meant = typed[:i] + b + typed[i + 1 : j] + a + typed[j + 1 :]
        yield meant, partial(_swap_words, shape, typed, meant, i, j)


def _swap_words(shape: _Shape, typed: str, meant: str, i: int, j: int) -> str:
    return (
        f"{shape.place(i)} and {shape.place(j)} characters swapped "
        f"({meant[i : j + 1]} typed as {typed[i : j + 1]})"
    )


def _twins(shape: _Shape, typed: str, gap: int) -> Iterator[_Candidate]:
    for i in range(len(typed) - gap):
        j = i + gap
        b = typed[i]
        if typed[j] != b:
            continue
        for a in shape.symbols[i]:
            if a != b and shape.allowed(j, a):
                meant = typed[:i] + a + typed[i + 1 : j] + a + typed[j + 1 :]
                yield meant, partial(_twin_words, shape, typed, meant, i, j, gap)


def _twin_words(shape: _Shape, typed: str, meant: str, i: int, j: int, gap: int) -> str:
    label = "twin" if gap == 1 else "jump twin"
    return (
        f"{label} {meant[i : j + 1]} typed as {typed[i : j + 1]} "
        f"at {shape.place(i)}\u2013{shape.place(j)} characters"
    )


def _phonetics(shape: _Shape, typed: str) -> Iterator[_Candidate]:
    if not shape.decimal:
        return
    for i in range(len(typed) - 1):
        x, y = typed[i], typed[i + 1]
        if x in PHONETIC_DIGITS and y == "0":
            meant_pair = "1" + x  # "15" heard as "50"
        elif x == "1" and y in PHONETIC_DIGITS:
            meant_pair = y + "0"  # "50" heard as "15"
        else:
            continue
        if not (shape.allowed(i, meant_pair[0]) and shape.allowed(i + 1, meant_pair[1])):
            continue
        yield typed[:i] + meant_pair + typed[i + 2 :], partial(_phonetic_words, shape, i, meant_pair, x + y)


def _phonetic_words(shape: _Shape, i: int, meant_pair: str, heard: str) -> str:
    return f"phonetic: {meant_pair} heard as {heard} at {shape.place(i)}\u2013{shape.place(i + 1)} characters"


def _generators(shape: _Shape, typed: str) -> dict[str, Iterator[_Candidate]]:
    return {
        "single": _singles(shape, typed),
        "adjacent": _transpositions(shape, typed, 1),
        "jump": _transpositions(shape, typed, 2),
        "twin": _twins(shape, typed, 1),
        "jump_twin": _twins(shape, typed, 2),
        "phonetic": _phonetics(shape, typed),
    }


def neighbours(fmt: CodeFormat, text: str, *, known: Callable[[str], bool] | None = None) -> list[Neighbour]:
    """Valid codes one likely error away from ``text``, most likely error first.

    ``text`` must parse under ``fmt`` (right prefix, suffix, length and alphabet); it
    need not be valid. The result excludes ``text`` itself, lists each code once (under
    its likeliest error) and orders classes by :data:`ERROR_WEIGHTS`, then positions
    left to right. Raises :class:`~issuer.errors.InvalidFormat` when ``text`` does not
    parse. With ``known`` (a test of whole codes, such as membership of a register's
    codes) only codes it accepts are offered, and it is asked before the check is computed.
    """
    parsed = fmt.parse(text)
    shape = _Shape(fmt)
    typed = parsed.body + parsed.check
    found: dict[str, Neighbour] = {}
    generators = _generators(shape, typed)
    for error in sorted(generators, key=lambda key: -ERROR_WEIGHTS[key]):
        for meant, words in generators[error]:
            if meant == typed or meant in found:
                continue
            code = parsed.prefix + meant + parsed.suffix
            if (known is None or known(code)) and shape.valid(meant):
                found[meant] = Neighbour(code, error, words())
    return list(found.values())


def omission_insertion_candidates(
    fmt: CodeFormat, text: str, *, known: Callable[[str], bool] | None = None
) -> list[Neighbour]:
    """Valid codes from which ``text`` lost one character, or gained one.

    For a text one character too short between prefix and suffix, every valid code
    that has one more character there (``omission``); for one character too long,
    every valid code left after deleting one (``insertion``). Any other text gives an
    empty list. Positions run left to right; a code reachable in two ways is listed
    once. ``known`` is as for :func:`neighbours`.
    """
    cleaned = normalise_text(text)
    prefix, suffix = fmt.prefix, fmt.suffix
    if not (cleaned.startswith(prefix) and cleaned.endswith(suffix)):
        return []
    if len(cleaned) < len(prefix) + len(suffix):
        return []
    middle = cleaned[len(prefix) : len(cleaned) - len(suffix)]
    alphabet = fmt.scheme.alphabet
    middle = "".join(alphabet.fold_char(ch) for ch in middle)
    shape = _Shape(fmt)
    width = fmt.width
    found: dict[str, Neighbour] = {}

    def offer(meant: str, error: str, description: str) -> None:
        if meant in found or not all(shape.allowed(i, ch) for i, ch in enumerate(meant)):
            return
        if (known is None or known(prefix + meant + suffix)) and shape.valid(meant):
            found[meant] = Neighbour(prefix + meant + suffix, error, description)

    if len(middle) == width - 1:
        for i in range(width):
            for ch in shape.symbols[i]:
                meant = middle[:i] + ch + middle[i:]
                offer(meant, "omission", f"{shape.place(i)} character {ch} left out")
    elif len(middle) == width + 1:
        for i in range(width + 1):
            meant = middle[:i] + middle[i + 1 :]
            offer(meant, "insertion", f"extra {middle[i]} typed as {shape.place(i)} character")
    return list(found.values())


__all__ = [
    "CLASS_TITLES",
    "ERROR_CLASSES",
    "ERROR_WEIGHTS",
    "ERROR_WEIGHTS_SOURCE",
    "Neighbour",
    "neighbours",
    "omission_insertion_candidates",
    "ordinal",
]
