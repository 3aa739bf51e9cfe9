"""A series' shape: prefix, body, check character(s), suffix, grouping for display.

The canonical code is what the register stores and compares: prefix, body, check and
suffix run together with no separators, in upper case where the alphabet ignores case.
The display form groups it for people (``QTL-0004-1237``).

>>> from issuer.checking.schemes import get_scheme
>>> shape = CodeFormat(get_scheme("luhn"), length=7, prefix="QTL", group=(4, 4))
>>> shape.code_for_base(12)
'QTL00000125'
>>> shape.display("QTL00000125")
'QTL-0000-0125'
>>> shape.parse("qtl 0000-0125").body
'0000012'
"""

from __future__ import annotations

import unicodedata
from dataclasses import dataclass
from typing import TYPE_CHECKING

from issuer.checking.alphabets import SEPARATORS, Alphabet
from issuer.checking.reading import MAX_TYPED, fold_symbols, split_typed, typed_form
from issuer.checking.schemes.base import Scheme
from issuer.errors import InvalidCheck, InvalidComponent, InvalidFormat, InvalidLength

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt


def normalise_text(text: str) -> str:
    """The typed form of ``text`` (:func:`issuer.checking.reading.typed_form`), or, for text
    that cannot be read, the same cleaning without refusing, so that it can be named."""
    try:
        return typed_form(text)
    except InvalidFormat:
        text = unicodedata.normalize("NFKC", text[:MAX_TYPED])
        return "".join(ch for ch in text if ch not in SEPARATORS and not ch.isspace()).upper()


def normalise_affix(text: str) -> str:
    """A prefix or suffix as stored: ASCII letters and digits, upper case."""
    affix = normalise_text(text)
    if not all(ch.isascii() and ch.isalnum() for ch in affix):
        raise InvalidComponent(f"prefix/suffix {text!r} may hold only ASCII letters and digits")
    return affix


@dataclass(frozen=True)
class ParsedCode:
    """A typed code taken apart. ``canonical`` is the form the register stores."""

    prefix: str
    body: str
    check: str
    suffix: str
    #: the prefix or suffix was left off and supplied by the reading rules
    completed: bool = False
    #: the check as typed, when it was a congruent alternative the method also accepts
    #: (ISO/IEC 7064 two-character methods) and ``check`` is the computed one instead
    typed_check: str | None = None

    @property
    def canonical(self) -> str:
        return self.prefix + self.body + self.check + self.suffix


@dataclass(frozen=True)
class CodeFormat:
    """The fixed shape of every code in a series."""

    scheme: Scheme
    length: int
    prefix: str = ""
    suffix: str = ""
    group: tuple[int, ...] = ()
    sep: str = "-"

    def __post_init__(self) -> None:
        if self.length < 1:
            raise InvalidLength("the body length must be at least 1")
        if self.group and (any(g < 1 for g in self.group) or sum(self.group) != self.width):
            raise InvalidFormat(
                f"grouping {','.join(map(str, self.group))} must add up to {self.width} "
                f"(body {self.length} + check {self.scheme.check_length})"
            )
        if self.sep and any(ch not in SEPARATORS for ch in self.sep):
            raise InvalidFormat(f"separator {self.sep!r} must be made of - _ . / : or space")

    @property
    def alphabet_size(self) -> int:
        return self.scheme.alphabet.size

    @property
    def width(self) -> int:
        """Characters between prefix and suffix: body plus check."""
        return self.length + self.scheme.check_length

    @property
    def total_width(self) -> int:
        return len(self.prefix) + self.width + len(self.suffix)

    @property
    def capacity(self) -> int:
        """How many distinct bodies the shape allows."""
        return int(self.alphabet_size**self.length)

    # -- making codes ----------------------------------------------------------
    def body_for_base(self, base: int) -> str:
        return self.scheme.alphabet.encode_number(base, self.length)

    def code_for_base(self, base: int) -> str:
        return self.prefix + self.scheme.append(self.body_for_base(base)) + self.suffix

    def base_of(self, parsed: ParsedCode) -> int:
        return self.scheme.alphabet.decode_number(parsed.body)

    def display(self, canonical: str) -> str:
        """The grouped form for people and labels."""
        middle = canonical[len(self.prefix): len(canonical) - len(self.suffix)]
        parts = [self.prefix] if self.prefix else []
        if self.group:
            at = 0
            for size in self.group:
                parts.append(middle[at: at + size])
                at += size
        else:
            parts.append(middle)
        if self.suffix:
            parts.append(self.suffix)
        return self.sep.join(parts)

    # -- reading codes ---------------------------------------------------------
    def parse(self, text: str) -> ParsedCode:
        """Take typed text apart by the reading rules (:mod:`issuer.checking.reading`);
        raise :class:`InvalidFormat` saying what is wrong.

        The check character is not verified here (see :meth:`validate`), but a congruent
        alternative check the method also accepts is read as the computed one.
        """
        middle, completed = split_typed(self, typed_form(text))
        scheme = self.scheme
        body = self._symbols(middle[: self.length], scheme.alphabet)
        check = typed = self._symbols(middle[self.length:], scheme.check_alphabet)
        if scheme.has_alternative_checks:
            check = scheme.canonical_check(body, check)
        alternative = typed if typed != check else None
        return ParsedCode(self.prefix, body, check, self.suffix, completed, alternative)

    @staticmethod
    def _symbols(text: str, alphabet: Alphabet) -> str:
        folded = fold_symbols(text, alphabet.symbols, alphabet.folding)
        return alphabet.canonical(folded)

    def validate(self, text: str) -> ParsedCode:
        """Parse and verify the check character(s)."""
        parsed = self.parse(text)
        if not self.check_matches(parsed):
            raise InvalidCheck(f"the check character of {self.display(parsed.canonical)} does not match")
        return parsed

    def check_matches(self, parsed: ParsedCode) -> bool:
        """Whether the check character(s) satisfy the method's published condition."""
        scheme = self.scheme
        return scheme.verify_values(
            scheme.alphabet.values(parsed.body), scheme.check_alphabet.values(parsed.check)
        )

    def matches_check(self, text: str) -> bool:
        """Whether ``text`` parses and its check character(s) match."""
        try:
            return self.check_matches(self.parse(text))
        except InvalidFormat:
            return False

    def matches_shape(self, text: str) -> bool:
        try:
            self.parse(text)
        except InvalidFormat:
            return False
        return True

    # -- bulk ------------------------------------------------------------------
    def bodies_for_bases(self, bases: npt.NDArray[np.int64]) -> npt.NDArray[np.int64]:
        """An ``(n, length)`` matrix of body values for an array of base numbers."""
        import numpy as np

        radix = self.alphabet_size
        work = np.asarray(bases, dtype=np.uint64).copy()
        out = np.empty((work.shape[0], self.length), dtype=np.int64)
        for column in range(self.length - 1, -1, -1):
            out[:, column] = work % radix
            work //= radix
        return out

    def codes_for_bases(self, bases: npt.NDArray[np.int64]) -> list[str]:
        """Canonical codes for many base numbers at once, check characters in bulk."""
        import numpy as np

        scheme = self.scheme
        bodies = self.bodies_for_bases(bases)
        checks = scheme.compute_bulk(bodies)
        body_text = scheme.alphabet.from_matrix(bodies)
        check_text = scheme.check_alphabet.from_matrix(checks)
        joined = np.char.add(np.char.add(self.prefix.encode(), body_text), check_text)
        if self.suffix:
            joined = np.char.add(joined, self.suffix.encode())
        return joined.astype(str).tolist()  # type: ignore[no-any-return]
