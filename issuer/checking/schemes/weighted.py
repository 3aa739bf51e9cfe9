"""Weighted-sum check digits: GS1 mod 10 and the ISBN-10 weights mod 11.

GS1 mod 10 — source: GS1 General Specifications, "Check digit calculation": the body
digits are weighted 3, 1, 3, 1, ... starting from the rightmost body digit; the check
digit brings the weighted sum up to a multiple of 10. It detects every single
substitution, and no transposition of two digits that differ by 5.

Weighted mod 11 — source: ISO 2108 (ISBN), the ten-digit form: the check digit has
weight 1 and the body digits weights 2, 3, ..., 10 from the right; the weighted sum of
the whole code is a multiple of 11, and a check value of 10 is written ``X``. Because
the weights repeat modulo 11 after ten positions (an eleventh would weigh 11 ≡ 0 and go
unprotected), bodies longer than 9 digits are refused.

>>> from issuer.checking.alphabets import DIGITS
>>> Gs1Scheme(DIGITS).append("205170")
'2051703'
>>> Mod11Scheme(DIGITS).append("20517")
'205176'
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

from issuer.checking.alphabets import DIGITS, Alphabet
from issuer.checking.schemes.base import Scheme
from issuer.checking.schemes.iso7064 import DIGITS_X

if TYPE_CHECKING:
    from issuer.checking.schemes.base import IntMatrix, ValueMatrix


def _decimal_only(name: str, alphabet: Alphabet) -> str | None:
    if alphabet.symbols != DIGITS.symbols:
        return f"{name} is published for the decimal digits 0-9 only"
    return None


class Gs1Scheme(Scheme):
    name = "gs1"
    title = "GS1 mod 10 (weights 3,1 from the right), digits"
    source = "GS1 General Specifications, check digit calculation"
    natural_alphabet = "digits"
    guaranteed = frozenset({"single"})

    @classmethod
    def unsupported_reason(cls, alphabet: Alphabet) -> str | None:
        return _decimal_only("GS1 mod 10", alphabet)

    def compute_values(self, body: Sequence[int]) -> tuple[int, ...]:
        total = sum(value * (3 if i % 2 == 0 else 1) for i, value in enumerate(reversed(body)))
        return ((10 - total % 10) % 10,)

    def compute_bulk(self, bodies: ValueMatrix) -> IntMatrix:
        import numpy as np

        length = bodies.shape[1]
        weights = np.where(np.arange(length)[::-1] % 2 == 0, 3, 1).astype(np.int64)
        total = bodies @ weights
        return ((10 - total % 10) % 10).reshape(-1, 1)


class Mod11Scheme(Scheme):
    name = "mod11"
    title = "Weighted mod 11 as in ISBN-10 (check 0-9 or X), bodies up to 9 digits"
    source = "ISO 2108 (ISBN-10 check digit): weights 10..2 on the body, check weight 1"
    natural_alphabet = "digits"
    max_body_length = 9
    max_body_reason = "weights 2..10 repeat modulo 11 after ten positions"
    guaranteed = frozenset({"single", "adjacent", "jump"})

    @classmethod
    def unsupported_reason(cls, alphabet: Alphabet) -> str | None:
        return _decimal_only("weighted mod 11 (ISBN-10)", alphabet)

    def make_check_alphabet(self, alphabet: Alphabet) -> Alphabet:
        return DIGITS_X

    def compute_values(self, body: Sequence[int]) -> tuple[int, ...]:
        self.require_body_length(len(body))
        total = sum(value * weight for weight, value in enumerate(reversed(body), start=2))
        return ((-total) % 11,)

    def compute_bulk(self, bodies: ValueMatrix) -> IntMatrix:
        import numpy as np

        length = bodies.shape[1]
        self.require_body_length(length)
        weights = np.arange(length + 1, 1, -1, dtype=np.int64)
        return ((-(bodies @ weights)) % 11).reshape(-1, 1)
