"""Weakly totally anti-symmetric quasigroups with zero diagonal, built for Damm's method.

Source: H. M. Damm, *Total anti-symmetrische Quasigruppen*, dissertation, Philipps-
Universität Marburg, 2004, and H. M. Damm, "Totally anti-symmetric quasigroups for
all orders n ≠ 2, 6", Discrete Mathematics 307 (2007) 715-729. Over a finite field
GF(q), q >= 3, the operation ``x * y = a·(x - y)`` with ``a ∉ {0, 1}`` is a quasigroup
(both maps y -> a(x - y) and x -> a(x - y) are bijections) with zero diagonal, and it is
weakly totally anti-symmetric: ``(c*x)*y = (c*y)*x`` gives ``(a - 1)(x - y) = 0``, so
``x = y``. The direct product of two such quasigroups, taken component-wise, keeps all
three properties. Together they give every order that is odd (>= 3) or divisible by 4;
orders with exactly one factor 2 (2, 6, 14, 18, 22, 26, ...) are not built here (Damm
2007 shows tables exist for those above 6, but by a construction not done here; order
10 is served by Damm's published table in :mod:`issuer.checking.schemes.damm`).

The factor ``a`` is the first field element, in the order of the encoding below, that
also satisfies ``a ≠ -1`` (then twin errors aa->bb are caught), ``a² ≠ 1`` (jump
transpositions abc->cba) and ``a² ≠ -1`` (jump twins aca->bcb), as far as the field
allows; in characteristic 2 every ``a ∉ {0, 1}`` does all three.

Field elements are encoded as integers whose base-p digits are the coefficients of the
polynomial representative (least significant digit = constant term), so in GF(2^k) the
element ``x`` is 2 and addition is XOR. Direct-product elements are encoded in mixed
radix, the first factor most significant.

>>> table = damm_quasigroup(16)
>>> table.description
'GF(16) = GF(2)[x]/(x^4 + x + 1), x*y = a(x - y) with a = x'
>>> [table.rows[5][5], table.rows[3][7]]
[0, 8]
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache
from itertools import product

#: Monic irreducible polynomials used for the extension fields, coefficients from the
#: constant term up. Each is the first irreducible one in that order; the tests prove
#: irreducibility by exhaustive search.
NAMED_IRREDUCIBLE: dict[tuple[int, int], tuple[int, ...]] = {
    (2, 2): (1, 1, 1),  # GF(4):  x^2 + x + 1
    (2, 3): (1, 1, 0, 1),  # GF(8):  x^3 + x + 1
    (2, 4): (1, 1, 0, 0, 1),  # GF(16): x^4 + x + 1
    (2, 5): (1, 0, 1, 0, 0, 1),  # GF(32): x^5 + x^2 + 1
    (2, 6): (1, 1, 0, 0, 0, 0, 1),  # GF(64): x^6 + x + 1
    (3, 2): (1, 0, 1),  # GF(9):  x^2 + 1 (-1 is not a square mod 3)
    (3, 3): (1, 2, 0, 1),  # GF(27): x^3 + 2x + 1
    (5, 2): (2, 0, 1),  # GF(25): x^2 + 2 (-2 = 3 is not a square mod 5)
    (7, 2): (1, 0, 1),  # GF(49): x^2 + 1 (-1 is not a square mod 7)
}


def prime_power(q: int) -> tuple[int, int] | None:
    """``(p, k)`` with ``p**k == q`` for a prime ``p``, or ``None``."""
    if q < 2:
        return None
    p = next(d for d in range(2, q + 1) if q % d == 0)
    k = 0
    while q % p == 0:
        q //= p
        k += 1
    return (p, k) if q == 1 else None


def factor_prime_powers(n: int) -> list[int]:
    """``n`` as its prime-power factors, ascending: 36 -> [4, 9]."""
    out = []
    d = 2
    while n > 1:
        if n % d == 0:
            part = 1
            while n % d == 0:
                n //= d
                part *= d
            out.append(part)
        d += 1
    return out


def poly_text(coefficients: tuple[int, ...]) -> str:
    """``(1, 1, 0, 0, 1)`` -> ``'x^4 + x + 1'``."""
    terms = []
    for degree in range(len(coefficients) - 1, -1, -1):
        c = coefficients[degree]
        if not c:
            continue
        factor = "" if c == 1 and degree else str(c)
        power = "" if degree == 0 else ("x" if degree == 1 else f"x^{degree}")
        terms.append(factor + power)
    return " + ".join(terms)


def _poly_mod(value: list[int], modulus: tuple[int, ...], p: int) -> list[int]:
    """Remainder of a polynomial by a monic one, coefficients mod p."""
    value = [c % p for c in value]
    k = len(modulus) - 1
    for degree in range(len(value) - 1, k - 1, -1):
        lead = value[degree]
        if lead:
            for i in range(k + 1):
                value[degree - k + i] = (value[degree - k + i] - lead * modulus[i]) % p
    return (value + [0] * k)[:k]


def is_irreducible(coefficients: tuple[int, ...], p: int) -> bool:
    """Whether a monic polynomial over GF(p) has no monic factor of degree 1..k/2."""
    k = len(coefficients) - 1
    for degree in range(1, k // 2 + 1):
        for lower in product(range(p), repeat=degree):
            divisor = (*lower, 1)
            if not any(_poly_mod(list(coefficients), divisor, p)):
                return False
    return True


def first_irreducible(p: int, k: int) -> tuple[int, ...]:
    """The first monic irreducible polynomial of degree k over GF(p), in encoding order."""
    for code in range(p**k):
        lower = tuple((code // p**i) % p for i in range(k))
        candidate = (*lower, 1)
        if is_irreducible(candidate, p):
            return candidate
    raise AssertionError(f"no irreducible polynomial of degree {k} over GF({p})")  # unreachable


@dataclass(frozen=True)
class GaloisField:
    """GF(p^k) with full addition and multiplication tables."""

    p: int
    k: int
    modulus: tuple[int, ...]
    add: tuple[tuple[int, ...], ...]
    mul: tuple[tuple[int, ...], ...]

    @property
    def order(self) -> int:
        return int(self.p**self.k)

    def neg(self, x: int) -> int:
        return self.add[x].index(0)

    def sub(self, x: int, y: int) -> int:
        return self.add[x][self.neg(y)]

    def name(self) -> str:
        if self.k == 1:
            return f"GF({self.p})"
        return f"GF({self.order}) = GF({self.p})[x]/({poly_text(self.modulus)})"

    def element_text(self, x: int) -> str:
        if self.k == 1:
            return str(x)
        digits = tuple((x // self.p**i) % self.p for i in range(self.k))
        return poly_text(digits) or "0"


@cache
def galois_field(q: int) -> GaloisField:
    """The field of order ``q`` (a prime power)."""
    pk = prime_power(q)
    if pk is None:
        raise ValueError(f"{q} is not a prime power")
    p, k = pk
    modulus = NAMED_IRREDUCIBLE.get((p, k)) or (first_irreducible(p, k) if k > 1 else (0, 1))

    def digits(x: int) -> list[int]:
        return [(x // p**i) % p for i in range(k)]

    def number(coefficients: list[int]) -> int:
        return sum(c * p**i for i, c in enumerate(coefficients))

    add = tuple(
        tuple(number([(a + b) % p for a, b in zip(digits(x), digits(y))]) for y in range(q))
        for x in range(q)
    )

    def times(x: int, y: int) -> int:
        if k == 1:
            return (x * y) % p
        dx, dy = digits(x), digits(y)
        full = [0] * (2 * k - 1)
        for i, a in enumerate(dx):
            for j, b in enumerate(dy):
                full[i + j] += a * b
        return number(_poly_mod(full, modulus, p))

    mul = tuple(tuple(times(x, y) for y in range(q)) for x in range(q))
    return GaloisField(p, k, modulus, add, mul)


@dataclass(frozen=True)
class Quasigroup:
    """An operation table ``rows[x][y] = x * y`` on ``0..order-1``, with its provenance."""

    order: int
    rows: tuple[tuple[int, ...], ...]
    description: str


def choose_factor(field: GaloisField) -> int:
    """The factor ``a`` of ``x * y = a(x - y)``: not 0 or 1, and the first that best
    avoids a = -1, a^2 = 1 and a^2 = -1 (see the module docstring)."""
    one = 1
    minus_one = field.neg(one)

    def score(a: int) -> int:
        square = field.mul[a][a]
        return (a != minus_one) + (square != one) + (square != minus_one)

    candidates = range(2, field.order)
    return max(candidates, key=lambda a: (score(a), -a))


@cache
def field_quasigroup(q: int) -> Quasigroup:
    """``x * y = a(x - y)`` over GF(q), q >= 3."""
    if q < 3:
        raise ValueError("GF(2) has no factor a outside {0, 1}")
    field = galois_field(q)
    a = choose_factor(field)
    rows = tuple(tuple(field.mul[a][field.sub(x, y)] for y in range(q)) for x in range(q))
    text = f"{field.name()}, x*y = a(x - y) with a = {field.element_text(a)}"
    return Quasigroup(q, rows, text)


def direct_product(first: Quasigroup, second: Quasigroup) -> Quasigroup:
    """Component-wise product; element ``(u, v)`` is encoded ``u * second.order + v``."""
    m = second.order
    n = first.order * m
    rows = tuple(
        tuple(first.rows[x // m][y // m] * m + second.rows[x % m][y % m] for y in range(n))
        for x in range(n)
    )
    return Quasigroup(n, rows, f"({first.description}) × ({second.description})")


def refusal(order: int) -> str | None:
    """Why no table of ``order`` is built here, or ``None`` when one is."""
    if order == 2 or order == 6:
        return f"no totally anti-symmetric quasigroup of order {order} exists (Damm 2007)"
    if order % 4 == 2:
        return (
            f"no Damm table of order {order} is built here "
            "(orders with exactly one factor 2 are not constructed, except the published 10)"
        )
    return None


@cache
def damm_quasigroup(order: int) -> Quasigroup:
    """The generated table of ``order``: one field when ``order`` is a prime power, else
    the direct product over its prime-power factors (36 = GF(4) × GF(9))."""
    reason = refusal(order)
    if reason:
        raise ValueError(reason)
    parts = [field_quasigroup(q) for q in factor_prime_powers(order)]
    table = parts[0]
    for part in parts[1:]:
        table = direct_product(table, part)
    return table
