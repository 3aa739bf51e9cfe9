"""Verhoeff's decimal check digit over the dihedral group D5.

Source: J. Verhoeff, *Error Detecting Decimal Codes*, Mathematical Centre Tract 29,
Mathematisch Centrum, Amsterdam, 1969. The digits are the ten elements of D5 (0-4
rotations, 5-9 reflections). Counting positions from the right with the check digit in
position 0, the code is valid when ``p^0(a_0) · p^1(a_1) · p^2(a_2) ⋯ = 0``, where
``p`` is Verhoeff's permutation (1 5 7 6 2 8 3 0 9 4) — 0->1, 1->5, 2->7, ... — applied
position-wise as powers (p has order 8). The check digit is the inverse of the
product over the body. Detects every single substitution and adjacent transposition.

>>> from issuer.checking.alphabets import DIGITS
>>> VerhoeffScheme(DIGITS).append("236")
'2363'
"""

from __future__ import annotations

from issuer.checking.alphabets import Alphabet
from issuer.checking.schemes.dihedral import GroupPowerScheme, permutation_powers

#: Verhoeff's multiplication table of D5.
D5_TABLE: tuple[tuple[int, ...], ...] = (
    (0, 1, 2, 3, 4, 5, 6, 7, 8, 9),
    (1, 2, 3, 4, 0, 6, 7, 8, 9, 5),
    (2, 3, 4, 0, 1, 7, 8, 9, 5, 6),
    (3, 4, 0, 1, 2, 8, 9, 5, 6, 7),
    (4, 0, 1, 2, 3, 9, 5, 6, 7, 8),
    (5, 9, 8, 7, 6, 0, 4, 3, 2, 1),
    (6, 5, 9, 8, 7, 1, 0, 4, 3, 2),
    (7, 6, 5, 9, 8, 2, 1, 0, 4, 3),
    (8, 7, 6, 5, 9, 3, 2, 1, 0, 4),
    (9, 8, 7, 6, 5, 4, 3, 2, 1, 0),
)
#: Verhoeff's permutation: digit d goes to PERMUTATION[d].
PERMUTATION: tuple[int, ...] = (1, 5, 7, 6, 2, 8, 3, 0, 9, 4)
#: the inverse of each element of D5.
INVERSE: tuple[int, ...] = (0, 4, 3, 2, 1, 5, 6, 7, 8, 9)


class VerhoeffScheme(GroupPowerScheme):
    name = "verhoeff"
    title = "Verhoeff (dihedral group D5), 10 symbols"
    source = "J. Verhoeff, Error Detecting Decimal Codes, Mathematical Centre Tract 29, 1969"
    natural_alphabet = "digits"
    guaranteed = frozenset({"single", "adjacent"})

    def __init__(self, alphabet: Alphabet) -> None:
        super().__init__(alphabet)
        self.group = D5_TABLE
        self.inverse = INVERSE
        self.powers = permutation_powers(PERMUTATION)

    @classmethod
    def unsupported_reason(cls, alphabet: Alphabet) -> str | None:
        if alphabet.size != 10:
            return "Verhoeff's method works over the 10 elements of D5"
        return None
