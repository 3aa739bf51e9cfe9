"""Symbol sets and the canonical form of typed input.

An :class:`Alphabet` is an ordered set of symbols; a symbol's value is its position.
Canonicalisation turns what a person typed or a scanner sent into the form the
register stores: Unicode compatibility folding (full-width digits become ASCII),
separators and spaces removed, case folded where the alphabet ignores case, and the
alphabet's own published folding rules applied (Crockford Base32: O->0, I/L->1).

numpy is imported only inside the bulk helpers, so that a one-code command never
pays for it.
"""

from __future__ import annotations

import unicodedata
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import TYPE_CHECKING

from issuer.errors import InvalidComponent, UnknownName

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

#: Characters people and scanners put between groups; never part of a code.
SEPARATORS = frozenset(" \t-_./:\u00a0\u2010\u2011\u2012\u2013\u2014")

_EMPTY: Mapping[str, str] = MappingProxyType({})


@dataclass(frozen=True)
class Alphabet:
    """An ordered symbol set. ``symbols[v]`` is the symbol of value ``v``."""

    name: str
    symbols: str
    case_insensitive: bool = True
    folding: Mapping[str, str] = field(default_factory=dict, hash=False, compare=False)
    title: str = ""

    def __post_init__(self) -> None:
        if len(set(self.symbols)) != len(self.symbols):
            raise InvalidComponent(f"alphabet {self.name!r} repeats a symbol")
        if len(self.symbols) < 2:
            raise InvalidComponent(f"alphabet {self.name!r} needs at least two symbols")
        if any(ch in SEPARATORS for ch in self.symbols):
            raise InvalidComponent(f"alphabet {self.name!r} uses a separator character")
        if self.case_insensitive and self.symbols.upper() != self.symbols:
            raise InvalidComponent(
                f"alphabet {self.name!r} ignores case, so its symbols must be upper case"
            )

    @property
    def size(self) -> int:
        return len(self.symbols)

    @property
    def is_decimal(self) -> bool:
        return self.symbols == "0123456789"

    def fold_char(self, ch: str) -> str:
        """One typed character in canonical form (it may still be outside the alphabet)."""
        if self.case_insensitive:
            ch = ch.upper()
        return self.folding.get(ch, ch)

    def clean(self, text: str) -> str:
        """Fold and strip separators, without checking membership."""
        text = unicodedata.normalize("NFKC", text)
        return "".join(self.fold_char(ch) for ch in text if ch not in SEPARATORS)

    def canonical(self, text: str, *, extra: str = "") -> str:
        """Canonical form of ``text``; every symbol must be in the alphabet (or ``extra``).

        >>> ALPHABETS["crockford32"].canonical("1o-il")
        '1011'
        """
        cleaned = self.clean(text)
        allowed = self.symbols + extra
        for position, ch in enumerate(cleaned, start=1):
            if ch not in allowed:
                raise InvalidComponent(
                    f"character {ch!r} at position {position} is not in the "
                    f"{self.name} alphabet"
                )
        return cleaned

    def value(self, ch: str) -> int:
        index = self.symbols.find(ch)
        if index < 0:
            raise InvalidComponent(f"character {ch!r} is not in the {self.name} alphabet")
        return index

    def values(self, text: str) -> list[int]:
        return [self.value(ch) for ch in text]

    def text(self, values: Sequence[int]) -> str:
        return "".join(self.symbols[v] for v in values)

    # -- numbers ---------------------------------------------------------------
    def encode_number(self, number: int, length: int) -> str:
        """``number`` written in this alphabet's radix, zero-padded to ``length``."""
        if number < 0:
            raise InvalidComponent("a base number cannot be negative")
        radix = self.size
        out = []
        for _ in range(length):
            number, digit = divmod(number, radix)
            out.append(self.symbols[digit])
        if number:
            raise InvalidComponent(f"the number does not fit in {length} symbols")
        return "".join(reversed(out))

    def decode_number(self, text: str) -> int:
        number = 0
        for ch in text:
            number = number * self.size + self.value(ch)
        return number

    # -- bulk (numpy) ----------------------------------------------------------
    def lookup_table(self) -> npt.NDArray[np.int16]:
        """A 256-entry table from an ASCII byte to its value, -1 where not a symbol."""
        import numpy as np

        table = np.full(256, -1, dtype=np.int16)
        for byte in range(256):
            ch = chr(byte)
            folded = self.fold_char(ch)
            index = self.symbols.find(folded) if len(folded) == 1 else -1
            if index >= 0:
                table[byte] = index
        return table

    def to_matrix(self, texts: Sequence[str] | npt.NDArray[np.bytes_], width: int) -> npt.NDArray[np.int16]:
        """Values of equal-width canonical texts as an ``(n, width)`` int16 matrix.

        Symbols outside the alphabet become -1; callers mask those rows.
        """
        import numpy as np

        raw = np.asarray(texts, dtype=f"S{width}")
        matrix = raw.view(np.uint8).reshape(len(raw), width)
        return self.lookup_table()[matrix]

    def from_matrix(self, values: npt.NDArray[np.integer]) -> npt.NDArray[np.bytes_]:
        """Inverse of :meth:`to_matrix`: an ``(n, width)`` value matrix to byte strings."""
        import numpy as np

        symbols = np.frombuffer(self.symbols.encode("ascii"), dtype=np.uint8)
        width = values.shape[1]
        return np.ascontiguousarray(symbols[values]).view(f"S{width}").ravel()


def _alphabet(name: str, symbols: str, title: str, folding: Mapping[str, str] = _EMPTY) -> Alphabet:
    return Alphabet(name=name, symbols=symbols, title=title, folding=MappingProxyType(dict(folding)))


DIGITS = _alphabet("digits", "0123456789", "decimal digits 0-9")
LETTERS = _alphabet("letters", "ABCDEFGHIJKLMNOPQRSTUVWXYZ", "letters A-Z")
ALNUM = _alphabet("alnum", "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ", "digits and letters 0-9A-Z")
HEX = _alphabet("hex", "0123456789ABCDEF", "hexadecimal 0-9A-F")
#: Crockford's Base32: no I, L, O, U; decoding folds O->0 and I, L->1, ignoring case.
CROCKFORD32 = _alphabet(
    "crockford32",
    "0123456789ABCDEFGHJKMNPQRSTVWXYZ",
    "Crockford Base32 (O->0, I/L->1)",
    {"O": "0", "I": "1", "L": "1"},
)

ALPHABETS: Mapping[str, Alphabet] = MappingProxyType(
    {a.name: a for a in (DIGITS, LETTERS, ALNUM, CROCKFORD32, HEX)}
)

CUSTOM_PREFIX = "custom:"
#: symbols a custom alphabet may use besides A-Z and 0-9: printable ASCII (every barcode
#: and label font carries it) minus separators, quotes, CSV delimiters, the comment mark
#: and JSON brackets, so a code reads back from every file the tool writes or reads
CUSTOM_PUNCTUATION = "!$%&*+<=>?@^~()"
CUSTOM_SYMBOLS = frozenset("ABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789" + CUSTOM_PUNCTUATION)


def get_alphabet(name: str) -> Alphabet:
    """A named alphabet, or a user-defined one written ``custom:SYMBOLS``.

    >>> get_alphabet("custom:ACDEFHJKMNPRTWXY").size
    16
    """
    if name.startswith(CUSTOM_PREFIX):
        symbols = name[len(CUSTOM_PREFIX):]
        for ch in symbols:
            if ch.upper() not in CUSTOM_SYMBOLS:
                shown = repr(ch) if ch.isprintable() else f"U+{ord(ch):04X}"
                raise InvalidComponent(
                    f"custom alphabet symbol {shown} is not allowed: use A-Z, 0-9 and "
                    f"{' '.join(CUSTOM_PUNCTUATION)} (what barcodes, label fonts and code lists carry)"
                )
        return Alphabet(name=name, symbols=symbols.upper(), title="user-defined")
    try:
        return ALPHABETS[name]
    except KeyError:
        known = ", ".join(ALPHABETS)
        raise UnknownName(
            f"unknown alphabet {name!r} (known: {known}, or custom:SYMBOLS)"
        ) from None
