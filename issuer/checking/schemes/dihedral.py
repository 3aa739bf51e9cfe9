"""Check characters over the dihedral group D_n with position-wise powers of an
anti-symmetric mapping: Gumm's method for alphabets of 2n symbols, n odd.

Source: H. P. Gumm, "A new class of check-digit methods for arbitrary number systems",
IEEE Transactions on Information Theory 31 (1985): for number systems of base
2n with n odd, one check character over D_n detects every single error and every
adjacent transposition, using the dihedral group "together with appropriate
transformations"; it generalises Verhoeff's decimal method (D_5, 1969).

The check equation is Verhoeff's, with positions counted from the right and the check
in position 0: ``σ^0(a_0) · σ^1(a_1) · σ^2(a_2) ⋯ = e``. It catches every adjacent
transposition exactly when ``x · σ(y) ≠ y · σ(x)`` for all ``x ≠ y`` (σ is
*anti-symmetric*); the tests prove that over all pairs, and the group axioms, for every
n served.

Group encoding (Verhoeff's, extended to D_n): values 0..n-1 are the rotations r^i,
values n..2n-1 the reflections r^i·s, with r^i·r^j = r^(i+j), r^i·(r^j s) = r^(i+j) s,
(r^i s)·r^j = r^(i-j) s, (r^i s)·(r^j s) = r^(i-j).

The mapping: σ(r^i) = r^(n-1-i), σ(r^i s) = r^i s. Gumm's paper itself could not be
consulted while this module was written; the mapping is recalled from secondary
accounts of his method (# from memory) and is anti-symmetric for every odd n:
two rotations give r^(i-j-1) against r^(j-i-1), equal only if 2(i - j) ≡ 0 (mod n);
two reflections give r^(i-j) against r^(j-i), likewise; a rotation and a reflection
give r^(i+j) s against r^(i+j+1) s, never equal. The tests check it exhaustively.

>>> from issuer.checking.alphabets import LETTERS
>>> DihedralScheme(LETTERS).append("QUILL")
'QUILLG'
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

Table = tuple[tuple[int, ...], ...]


def dihedral_table(n: int) -> Table:
    """The operation table of D_n (order 2n) in the encoding above."""
    size = 2 * n
    rows = []
    for x in range(size):
        row = []
        for y in range(size):
            if x < n and y < n:
                row.append((x + y) % n)
            elif x < n:
                row.append(n + (x + y - n) % n)
            elif y < n:
                row.append(n + (x - n - y) % n)
            else:
                row.append((x - y) % n)
        rows.append(tuple(row))
    return tuple(rows)


def gumm_mapping(n: int) -> tuple[int, ...]:
    """σ on D_n: r^i -> r^(n-1-i), reflections fixed."""
    return tuple((n - 1 - i) % n for i in range(n)) + tuple(range(n, 2 * n))


def permutation_powers(sigma: Sequence[int]) -> tuple[tuple[int, ...], ...]:
    """σ^0, σ^1, ... up to (not including) the first power that is the identity again."""
    identity = tuple(range(len(sigma)))
    powers = [identity]
    while True:
        following = tuple(sigma[v] for v in powers[-1])
        if following == identity:
            return tuple(powers)
        powers.append(following)


class GroupPowerScheme(Scheme):
    """Verhoeff's construction: a group table, its inverses and powers of a permutation.

    Subclasses set ``group``, ``inverse`` and ``powers`` (the group identity is 0).
    """

    group: Table
    inverse: tuple[int, ...]
    powers: tuple[tuple[int, ...], ...]
    _flat: npt.NDArray[np.int64] | None = None

    def product(self, values: Sequence[int], first_position: int) -> int:
        """σ^p(a_p) · σ^(p+1)(a_(p+1)) ⋯ with ``values`` read from the right."""
        state = 0
        cycle = len(self.powers)
        for position, value in enumerate(reversed(values), start=first_position):
            state = self.group[state][self.powers[position % cycle][value]]
        return state

    def compute_values(self, body: Sequence[int]) -> tuple[int, ...]:
        return (self.inverse[self.product(body, 1)],)

    def verify_values(self, body: Sequence[int], check: Sequence[int]) -> bool:
        return len(check) == 1 and self.product([*body, *check], 0) == 0

    def compute_bulk(self, bodies: ValueMatrix) -> IntMatrix:
        import numpy as np

        from issuer.checking.schemes.tables import fold_columns

        size = len(self.group)
        cycle = len(self.powers)
        if self._flat is None:
            # one table per power: state, symbol -> state · σ^t(symbol)
            stacked = [
                [[row[power[v]] for v in range(size)] for row in self.group]
                for power in self.powers
            ]
            self._flat = np.asarray(stacked, dtype=np.int64).reshape(cycle, -1)
        length = bodies.shape[1]
        schedule = [(column, (length - column) % cycle) for column in range(length - 1, -1, -1)]
        state = fold_columns(bodies, self._flat, size, schedule)
        return np.asarray(self.inverse, dtype=np.int64)[state].reshape(-1, 1)


class DihedralScheme(GroupPowerScheme):
    name = "dihedral"
    title = "Gumm's dihedral method, for 2n symbols with n odd (26 letters: D13)"
    source = "H. P. Gumm, IEEE Trans. Inf. Theory 31 (1985)"
    natural_alphabet = "letters"
    guaranteed = frozenset({"single", "adjacent"})

    def __init__(self, alphabet: Alphabet) -> None:
        super().__init__(alphabet)
        n = alphabet.size // 2
        self.group = dihedral_table(n)
        self.inverse = tuple(row.index(0) for row in self.group)
        self.powers = permutation_powers(gumm_mapping(n))

    @classmethod
    def unsupported_reason(cls, alphabet: Alphabet) -> str | None:
        size = alphabet.size
        if size % 2 or (size // 2) % 2 == 0:
            return f"the method needs 2n symbols with n odd, and {size} is not of that form"
        if size == 2:
            return "D_1 has no anti-symmetric mapping, so 2 symbols cannot be served"
        return None
