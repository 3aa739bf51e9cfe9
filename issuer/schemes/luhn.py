"""Luhn, and Luhn mod N over any alphabet.

Source: ISO/IEC 7812-1, Annex B (the Luhn formula for computing modulus-10 "double-
add-double" check digits); the mod N generalisation replaces 10 by the alphabet size
and sums the base-N digits of each doubled value.

>>> from issuer.alphabets import DIGITS
>>> LuhnScheme(DIGITS).append("7992739871")
'79927398713'
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

from issuer.schemes.base import Scheme

if TYPE_CHECKING:
    from issuer.schemes.base import IntMatrix


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

    def compute_bulk(self, bodies: IntMatrix) -> IntMatrix:
        import numpy as np

        n = self.alphabet.size
        length = bodies.shape[1]
        doubled_columns = np.arange(length)[::-1] % 2 == 0
        work = bodies.astype(np.int64)
        doubled = work[:, doubled_columns] * 2
        total = (doubled // n + doubled % n).sum(axis=1) + work[:, ~doubled_columns].sum(axis=1)
        checks: IntMatrix = ((n - total % n) % n).reshape(-1, 1)
        return checks
