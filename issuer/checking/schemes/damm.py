"""Damm's check-digit method over a weakly totally anti-symmetric quasigroup.

Source: H. M. Damm, *Total anti-symmetrische Quasigruppen*, dissertation, Philipps-
Universität Marburg, 2004 (order-10 operation table as widely reproduced). The method:
start with interim 0; for each body symbol ``interim = T[interim][symbol]``; the check
is the symbol ``c`` with ``T[interim][c] = 0``, which the zero diagonal makes
``c = interim``. A code is valid when running the same fold over body and check ends
at 0. Weak total anti-symmetry makes every single substitution and every adjacent
transposition (the check character included) change the result.

For 10 symbols the published table is used; for other sizes the generated tables of
:mod:`issuer.checking.schemes.quasigroups` (GF(q), and direct products such as 36 = 4 · 9).

>>> from issuer.checking.alphabets import DIGITS
>>> DammScheme(DIGITS).append("572")
'5724'
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

from issuer.checking.alphabets import Alphabet
from issuer.checking.schemes.base import Scheme

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

    from issuer.checking.schemes.base import IntMatrix, ValueMatrix

#: Damm 2004, order 10; row = interim digit, column = next digit.
PUBLISHED_TABLE: tuple[tuple[int, ...], ...] = (
    (0, 3, 1, 7, 5, 9, 8, 6, 4, 2),
    (7, 0, 9, 2, 1, 5, 4, 8, 6, 3),
    (4, 2, 0, 6, 8, 7, 1, 3, 5, 9),
    (1, 7, 5, 0, 9, 8, 3, 4, 2, 6),
    (6, 1, 2, 3, 0, 4, 5, 9, 7, 8),
    (3, 6, 7, 4, 2, 0, 9, 5, 8, 1),
    (5, 8, 6, 9, 7, 2, 0, 1, 3, 4),
    (8, 9, 4, 5, 3, 6, 2, 0, 1, 7),
    (9, 4, 3, 8, 6, 1, 7, 2, 0, 5),
    (2, 5, 8, 1, 4, 3, 6, 7, 9, 0),
)


def table_for(order: int) -> tuple[tuple[tuple[int, ...], ...], str]:
    """The operation table used for ``order`` symbols, and where it comes from."""
    if order == 10:
        return PUBLISHED_TABLE, "Damm 2004, published order-10 table"
    from issuer.checking.schemes.quasigroups import damm_quasigroup  # built only when asked for

    quasigroup = damm_quasigroup(order)
    return quasigroup.rows, quasigroup.description


class DammScheme(Scheme):
    name = "damm"
    title = "Damm (quasigroup), published table for digits, generated tables for 16, 32, 36..."
    source = "H. M. Damm, Total anti-symmetrische Quasigruppen, dissertation, Marburg 2004"
    natural_alphabet = "digits"
    guaranteed = frozenset({"single", "adjacent"})

    def __init__(self, alphabet: Alphabet) -> None:
        super().__init__(alphabet)
        self.table, self.table_source = table_for(alphabet.size)
        # the column holding 0 in each row: the check for that interim
        self.check_of = tuple(row.index(0) for row in self.table)
        self._flat: npt.NDArray[np.int64] | None = None

    @classmethod
    def unsupported_reason(cls, alphabet: Alphabet) -> str | None:
        if alphabet.size == 10:
            return None
        from issuer.checking.schemes.quasigroups import refusal

        return refusal(alphabet.size)

    def interim(self, values: Sequence[int]) -> int:
        state = 0
        for value in values:
            state = self.table[state][value]
        return state

    def compute_values(self, body: Sequence[int]) -> tuple[int, ...]:
        return (self.check_of[self.interim(body)],)

    def verify_values(self, body: Sequence[int], check: Sequence[int]) -> bool:
        return len(check) == 1 and self.interim([*body, *check]) == 0

    def compute_bulk(self, bodies: ValueMatrix) -> IntMatrix:
        import numpy as np

        from issuer.checking.schemes.tables import fold_columns

        if self._flat is None:
            self._flat = np.asarray(self.table, dtype=np.int64).reshape(1, -1)
        n = self.alphabet.size
        state = fold_columns(bodies, self._flat, n, [(c, 0) for c in range(bodies.shape[1])])
        return np.asarray(self.check_of, dtype=np.int64)[state].reshape(-1, 1)
