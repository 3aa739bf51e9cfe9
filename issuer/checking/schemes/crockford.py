"""Crockford's Base32 check symbol: the body's value modulo 37.

Source: Douglas Crockford, *Base32* encoding specification ("Check symbol"). The body
is read as a base-32 number in Crockford's alphabet; the check symbol is that number
modulo 37, written with the 32 encoding symbols followed by ``* ~ $ = U`` for the
values 32 to 36. Decoding folds O to 0, I and L to 1, and ignores case (so ``u`` reads
as ``U``). Because 37 is prime and exceeds 32, every single substitution and every
adjacent transposition changes the remainder.

>>> from issuer.checking.alphabets import CROCKFORD32
>>> Crockford37Scheme(CROCKFORD32).append("16J")
'16JD'
"""

from __future__ import annotations

from collections.abc import Sequence
from types import MappingProxyType
from typing import TYPE_CHECKING

from issuer.checking.alphabets import CROCKFORD32, Alphabet
from issuer.checking.schemes.base import Scheme

if TYPE_CHECKING:
    from issuer.checking.schemes.base import IntMatrix, ValueMatrix

CHECK_SYMBOLS = CROCKFORD32.symbols + "*~$=U"
CROCKFORD37 = Alphabet(
    name="crockford37",
    symbols=CHECK_SYMBOLS,
    title="Crockford Base32 check symbols (0-9A-Z without I L O U, then *~$=U)",
    folding=MappingProxyType(dict(CROCKFORD32.folding)),
)


class Crockford37Scheme(Scheme):
    name = "crockford37"
    title = "Crockford Base32 check symbol (value mod 37)"
    source = "Douglas Crockford, Base32 encoding specification, check symbol"
    natural_alphabet = "crockford32"
    guaranteed = frozenset({"single", "adjacent"})

    @classmethod
    def unsupported_reason(cls, alphabet: Alphabet) -> str | None:
        if alphabet.symbols != CROCKFORD32.symbols:
            return "the check symbol is defined on Crockford's Base32 alphabet only"
        return None

    def make_check_alphabet(self, alphabet: Alphabet) -> Alphabet:
        return CROCKFORD37

    def compute_values(self, body: Sequence[int]) -> tuple[int, ...]:
        remainder = 0
        for value in body:
            remainder = (remainder * 32 + value) % 37
        return (remainder,)

    def compute_bulk(self, bodies: ValueMatrix) -> IntMatrix:
        import numpy as np

        remainder = np.zeros(bodies.shape[0], dtype=np.int64)
        for column in range(bodies.shape[1]):
            remainder *= 32
            remainder += bodies[:, column]
            remainder %= 37
        return remainder.reshape(-1, 1)
