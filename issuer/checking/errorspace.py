"""Error classes acting on one code shape: where each acts, drawing instances of it,
and counting it over every code.

A :class:`SymbolSpace` describes the shape (body length, body and check alphabets) in
one joint numbering of symbols, so that an error can move a symbol between body and
check positions. :class:`ExhaustiveCounts` counts every instance of a class over every
code, verifying through a table of each body's check (one bulk call of the scheme)
where the scheme's verification is a comparison with the computed check; otherwise it
hands every altered code to the scheme's own bulk verification.

Error classes as defined by J. Verhoeff, *Error Detecting Decimal Codes*, Mathematical
Centre Tract 29, Mathematisch Centrum, Amsterdam, 1969; see :mod:`issuer.checking.assess`.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import TYPE_CHECKING, Any

from issuer.checking.schemes.base import Scheme
from issuer.errors import InvalidLength

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

    IntArray = npt.NDArray[np.int64]
    BoolArray = npt.NDArray[np.bool_]

MAX_LENGTH = 64


class SymbolSpace:
    """Positions of a code and the symbols each allows, in one joint numbering.

    The joint numbering ("union index") lists the body alphabet first, then check
    symbols the body lacks (MOD 11-2's ``X``). Errors move symbols between positions
    in union indices; ``value_of[p]`` turns them into the values position ``p``
    verifies, -1 where the symbol is not allowed there.
    """

    def __init__(self, scheme: Scheme, length: int) -> None:
        import numpy as np

        if not 1 <= length <= MAX_LENGTH:
            raise InvalidLength(f"the body length must be between 1 and {MAX_LENGTH}")
        scheme.require_body_length(length)
        body = scheme.alphabet.symbols
        check = scheme.check_alphabet.symbols
        union = body + "".join(ch for ch in check if ch not in body)
        self.scheme = scheme
        self.length = length
        self.check_length = scheme.check_length
        self.width = length + self.check_length
        self.body_size = len(body)
        self.check_size = len(check)
        self.union = union
        self.decimal = scheme.alphabet.is_decimal
        body_value = np.array([body.find(ch) for ch in union], dtype=np.int64)
        check_value = np.array([check.find(ch) for ch in union], dtype=np.int64)
        self.check_union = np.array([union.index(ch) for ch in check], dtype=np.int64)
        self.value_of = [body_value] * length + [check_value] * self.check_length
        self.allowed = [np.flatnonzero(v >= 0) for v in self.value_of]
        # weight of each body column in the body's base-N index, of each check column
        # in the combined check number
        self.body_weight = [self.body_size ** (length - 1 - p) for p in range(length)]
        self.check_weight = [
            self.check_size ** (self.check_length - 1 - j) for j in range(self.check_length)
        ]

    @property
    def bodies(self) -> int:
        return int(self.body_size**self.length)

    def sites(self, error: str) -> list[tuple[int, int]]:
        """Position pairs an error class acts on (a single substitution: ``(p, p)``)."""
        w = self.width
        if error == "single":
            return [(p, p) for p in range(w)]
        if error in ("adjacent", "twin"):
            return [(p, p + 1) for p in range(w - 1)]
        if error in ("jump", "jump_twin"):
            return [(p, p + 2) for p in range(w - 2)]
        if error == "phonetic":
            return [(p, p + 1) for p in range(w - 1)] if self.decimal else []
        raise ValueError(f"unknown error class {error!r}")

    def codes(self, bodies: IntArray) -> IntArray:
        """Union-index matrix of the valid codes of an ``(n, length)`` body matrix."""
        import numpy as np

        checks = self.scheme.compute_bulk(bodies)
        return np.concatenate([bodies, self.check_union[checks]], axis=1)

    def values(self, texts: IntArray) -> IntArray:
        """A union-index matrix as the values each position verifies (-1: not allowed)."""
        import numpy as np

        values = np.empty(texts.shape, dtype=np.int64)
        for p in range(self.width):
            values[:, p] = self.value_of[p][texts[:, p]]
        return values

    def valid(self, texts: IntArray) -> BoolArray:
        """Which rows of a union-index matrix are valid codes (the scheme's bulk form)."""
        return self.scheme.verify_bulk(self.values(texts))

    def all_bodies(self) -> IntArray:
        import numpy as np

        index = np.arange(self.bodies, dtype=np.int64)
        return np.stack([(index // w) % self.body_size for w in self.body_weight], axis=1).astype(
            np.int64
        )

    def propose(self, error: str, rng: Any, count: int) -> tuple[IntArray, IntArray]:
        """Up to ``count`` error instances drawn uniformly from the class: (codes, typed).

        Proposals draw a body, a site and a replacement symbol uniformly and keep those
        where the error applies and changes the code, so every instance of the class
        is equally likely.
        """
        import numpy as np

        sites = self.sites(error)
        bodies = rng.integers(0, self.body_size, size=(count, self.length), dtype=np.int64)
        codes = self.codes(bodies)
        pick = np.array(sites, dtype=np.int64)[rng.integers(0, len(sites), size=count)]
        p, q = pick[:, 0], pick[:, 1]
        rows = np.arange(count)
        a, b = codes[rows, p], codes[rows, q]
        typed = codes.copy()
        if error in ("single", "twin", "jump_twin"):
            u = rng.integers(0, len(self.union), size=count, dtype=np.int64)
            ok = (u != a) & self._allowed_matrix()[p, u] & self._allowed_matrix()[q, u]
            if error != "single":
                ok &= a == b
            typed[rows, p] = u
            typed[rows, q] = u
        elif error in ("adjacent", "jump"):
            ok = a != b
            typed[rows, p], typed[rows, q] = b, a
        else:  # phonetic: a0 <-> 1a with a = 2..9 (union index = digit value here)
            forward = (a >= 2) & (a <= 9) & (b == 0)
            backward = (a == 1) & (b >= 2) & (b <= 9)
            ok = forward | backward
            typed[rows, p] = np.where(forward, 1, b)
            typed[rows, q] = np.where(forward, a, 0)
        return codes[ok], typed[ok]

    def _allowed_matrix(self) -> npt.NDArray[np.bool_]:
        import numpy as np

        cached: npt.NDArray[np.bool_] | None = getattr(self, "_allowed_cache", None)
        if cached is None:
            cached = np.stack([v >= 0 for v in self.value_of])
            self._allowed_cache = cached
        return cached


def compares_with_computed(scheme: Scheme) -> bool:
    """Whether the scheme's bulk verification is the base one: compare with the computed
    check. A scheme with its own bulk condition may accept more than one check per body
    (ISO/IEC 7064 pure systems accept both 00 and 97 under MOD 97-10)."""
    return type(scheme).verify_bulk is Scheme.verify_bulk


#: (body, check) pairs the exact uniqueness probe may verify
PROBE_BUDGET = 40_000_000


def _table_serves(space: SymbolSpace, table: Any, matrix: IntArray) -> bool:
    """Whether validity is exactly "the check equals the table's": true for base
    verification; for a scheme with its own condition and one check character,
    proved by verifying every body with every check value."""
    import numpy as np

    scheme = space.scheme
    if compares_with_computed(scheme) or space.check_length == 0:
        return True
    if space.check_length != 1 or space.bodies * space.check_size > PROBE_BUDGET:
        return False
    probe = matrix.copy()
    for value in range(space.check_size):
        probe[:, -1] = value
        if not np.array_equal(scheme.verify_bulk(probe), table == value):
            return False
    return True


class ExhaustiveCounts:
    """Every code of the shape, and verification by lookup in the table of checks.

    Row ``i`` holds the body whose base-N number is ``i``, so an error that changes body
    symbols moves the row to ``i + sum((new - old) * weight)``, and the altered code
    stays valid exactly when the table's check there equals the (altered) check.
    """

    def __init__(self, space: SymbolSpace) -> None:
        import numpy as np

        self.space = space
        n_sym, length = space.body_size, space.length
        self.n = space.bodies
        symbols = np.arange(n_sym, dtype=np.int32)
        body_columns = [
            np.repeat(np.tile(symbols, n_sym**p), n_sym ** (length - 1 - p)) for p in range(length)
        ]
        checks = space.scheme.compute_bulk(np.stack(body_columns, axis=1).astype(np.int64))
        self.index = np.arange(self.n, dtype=np.int32)
        # combined check number of the body of each row
        table = np.zeros(self.n, dtype=np.int64)
        for j, w in enumerate(space.check_weight):
            table += checks[:, j] * w
        self.table = table.astype(np.int32)
        check_columns = [checks[:, j].astype(np.int32) for j in range(space.check_length)]
        self.values = body_columns + check_columns
        self.columns = body_columns + [space.check_union[c].astype(np.int32) for c in check_columns]
        self._matrix: IntArray = np.stack(self.values, axis=1).astype(np.int64)
        #: whether the computed check is the only one that verifies: then validity is
        #: a lookup in the table; else every altered code goes to the scheme's verify
        self.unique = _table_serves(space, self.table, self._matrix)

    def verified(self, changes: Mapping[int, Any], rows: Any = None) -> BoolArray:
        """Rows still valid after ``changes``, by the scheme's own bulk verification
        (for methods whose condition admits more than one check per body)."""
        altered = (self._matrix if rows is None else self._matrix[rows]).copy()
        for p, new in changes.items():
            altered[:, p] = self.space.value_of[p][new]
        return self.space.scheme.verify_bulk(altered)

    def body_undetected(self, delta: Any, rows: Any = None) -> BoolArray:
        """Rows (all, or ``rows``) still valid after their body number moves by ``delta``
        with the check characters untouched."""
        if rows is None:
            result: BoolArray = self.table[self.index + delta] == self.table
        else:
            result = self.table[rows + delta] == self.table[rows]
        return result

    def undetected(self, changes: Mapping[int, Any], rows: Any = None) -> BoolArray:
        """Rows still valid after ``changes`` ({position: new union index}); the general
        path, for errors that reach the check characters."""
        import numpy as np

        if not self.unique:
            return self.verified(changes, rows)
        space = self.space
        index = self.index if rows is None else rows
        number = index.astype(np.int64)
        check = self.table[index].astype(np.int64)
        ok = np.ones(index.shape[0], dtype=np.bool_)
        for p, new in changes.items():
            value = space.value_of[p][new]
            ok &= value >= 0
            old = self.values[p] if rows is None else self.values[p][rows]
            if p < space.length:
                number += (value - old) * space.body_weight[p]
            else:
                check += (value - old) * space.check_weight[p - space.length]
        number = np.where(ok, number, 0)
        result: BoolArray = ok & (self.table[number] == check)
        return result

    def single_body(self, p: int) -> int:
        """Undetected single substitutions at body position ``p``, without any gather.

        Reshaped as (before, symbol at p, after), a substitution to symbol ``s`` stays
        valid exactly where the table equals the table at ``s`` in the same fibre; each
        row also matches itself once, which is no error.
        """
        n_sym = self.space.body_size
        after = self.space.body_weight[p]
        table = self.table.reshape(self.n // (n_sym * after), n_sym, after)
        same = sum(int((table == table[:, s : s + 1, :]).sum()) for s in range(n_sym))
        return same - self.n

    def count(self, error: str, tick: Callable[[], None]) -> tuple[int, int]:
        """(errors that change the code, detected) for one class over every code."""
        import numpy as np

        space = self.space
        length = space.length
        weight = space.body_weight + [0] * space.check_length
        errors = undetected = 0
        for p, q in space.sites(error):
            cp, cq = self.columns[p], self.columns[q]
            in_body = q < length and self.unique  # the table's shortcuts apply
            if error == "single" and in_body:
                errors += self.n * (space.body_size - 1)
                undetected += self.single_body(p)
            elif error == "single" and p >= length and self.unique:
                # only a check character changes, and the one check is a function of
                # the body: never valid
                errors += self.n * (len(space.allowed[p]) - 1)
            elif error == "single":
                for u in space.allowed[p]:
                    changed = cp != u
                    errors += int(np.count_nonzero(changed))
                    undetected += int(np.count_nonzero(self.undetected({p: u}) & changed))
            elif error in ("adjacent", "jump"):
                changed = cp != cq
                errors += int(np.count_nonzero(changed))
                if in_body:
                    still = self.body_undetected((cq - cp) * (weight[p] - weight[q]))
                else:
                    still = self.undetected({p: cq, q: cp})
                undetected += int(np.count_nonzero(still & changed))
            elif error in ("twin", "jump_twin"):
                rows = np.flatnonzero(cp == cq).astype(np.int32)
                old = cp[rows]
                for u in np.intersect1d(space.allowed[p], space.allowed[q]):
                    changed = old != u
                    errors += int(np.count_nonzero(changed))
                    if in_body:
                        still = self.body_undetected((u - old) * (weight[p] + weight[q]), rows)
                    else:
                        still = self.undetected({p: u, q: u}, rows)
                    undetected += int(np.count_nonzero(still & changed))
            else:  # phonetic: "1a" heard as "a0" and back (union index = digit value)
                forward = np.flatnonzero((cp >= 2) & (cp <= 9) & (cq == 0)).astype(np.int32)
                backward = np.flatnonzero((cp == 1) & (cq >= 2) & (cq <= 9)).astype(np.int32)
                errors += forward.size + backward.size
                a, b = cp[forward], cq[backward]
                if in_body:
                    moved = [
                        self.body_undetected((1 - a) * weight[p] + a * weight[q], forward),
                        self.body_undetected((b - 1) * weight[p] - b * weight[q], backward),
                    ]
                else:
                    moved = [
                        self.undetected({p: 1, q: a}, forward),
                        self.undetected({p: b, q: 0}, backward),
                    ]
                undetected += sum(int(np.count_nonzero(m)) for m in moved)
            tick()
        return errors, errors - undetected


__all__ = ["MAX_LENGTH", "ExhaustiveCounts", "SymbolSpace", "compares_with_computed"]
