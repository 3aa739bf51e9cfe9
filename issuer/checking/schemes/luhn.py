"""Luhn, and Luhn mod N over any alphabet.

Source: ISO/IEC 7812-1, Annex B (the Luhn formula for computing modulus-10 "double-
add-double" check digits); the mod N generalisation replaces 10 by the alphabet size
and sums the base-N digits of each doubled value.

>>> from issuer.checking.alphabets import DIGITS
>>> LuhnScheme(DIGITS).append("7992739871")
'79927398713'
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

from issuer.checking.schemes.base import Scheme

if TYPE_CHECKING:
    from issuer.checking.schemes.base import IntMatrix, ValueMatrix


class LuhnScheme(Scheme):
    name = "luhn"
    title = "Luhn (mod 10), Luhn mod N on other alphabets"
    source = "ISO/IEC 7812-1 Annex B; Luhn mod N generalisation"
    natural_alphabet = "digits"

    def guarantees(self) -> frozenset[str]:
        # doubling with base-N digit sums permutes the values only when N is even
        return frozenset({"single"}) if self.alphabet.size % 2 == 0 else frozenset()

    def compute_values(self, body: Sequence[int]) -> tuple[int, ...]:
        n = self.alphabet.size
        total = 0
        # the rightmost body symbol is doubled, then every second one leftwards
        for position, value in enumerate(reversed(body)):
            if position % 2 == 0:
                doubled = value * 2
                total += doubled // n + doubled % n
            else:
                total += value
        return ((n - total % n) % n,)

    def compute_bulk(self, bodies: ValueMatrix) -> IntMatrix:
        import numpy as np

        n = self.alphabet.size
        # the doubled value's base-N digit sum, looked up instead of computed per code
        doubled_sum = np.asarray([(2 * v) // n + (2 * v) % n for v in range(n)], dtype=np.int64)
        total = np.zeros(bodies.shape[0], dtype=np.int64)
        length = bodies.shape[1]
        for position in range(length):  # from the right: 0 is the rightmost body symbol
            column = bodies[:, length - 1 - position]
            total += doubled_sum.take(column) if position % 2 == 0 else column
        checks: IntMatrix = ((n - total % n) % n).reshape(-1, 1)
        return checks
