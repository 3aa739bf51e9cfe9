"""Scattered base numbers: a keyed permutation of a series' range.

A scattered series hands out the base number ``P(k)`` for its ``k``-th issue, where
``P`` is a bijection of ``[0, n)`` onto ``[start, end]`` (``n = end - start + 1``):

* ``k`` is written as a string of ``digits`` numerals in the series' radix, the
  fewest with ``radix**digits >= n`` that FF1 accepts (``radix**digits >= 100``);
* FF1 (NIST SP 800-38G) encrypts it under the series' key;
* cycle walking (Black and Rogaway, "Ciphers with Arbitrary Finite Domains", 2002)
  maps the result into ``[0, n)``: encrypt again while the value is ``n`` or more;
* ``start`` is added.

Because ``P`` is a permutation, numbers never collide and need no retries however full
the series is; the cost of ``P(k)`` depends on ``k`` and the key, never on how many
numbers were issued before. Exhaustion is exact: counter ``n`` does not exist.

The order is scattered, not secret: anyone holding the key recovers it, and below the
one-million domain of NIST SP 800-38G Rev. 1 (:attr:`ScatterPermutation.is_protected`)
the order is only shuffled, not protected.

numpy and cryptography are imported only when a permutation is first used.
"""

from __future__ import annotations

import operator
import secrets
from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any

from issuer.errors import Exhausted, InvalidFormat
from issuer.scattering.ff1 import (
    FF1,
    MIN_DOMAIN,
    check_key,
    check_radix,
    check_tweak,
    ff1_decrypt,
    ff1_decrypt_batch,
    ff1_encrypt,
    ff1_encrypt_batch,
)

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

#: The minimum FF1 domain size (radix**minlen) of NIST SP 800-38G Rev. 1.
PROTECTED_DOMAIN = 1_000_000
#: Base numbers are stored as signed 64-bit integers.
MAX_BASE = (1 << 63) - 1
KEY_BYTES = 32

__all__ = [
    "MAX_BASE",
    "PROTECTED_DOMAIN",
    "ScatterPermutation",
    "ff1_decrypt",
    "ff1_decrypt_batch",
    "ff1_encrypt",
    "ff1_encrypt_batch",
    "new_key",
]


def domain_digits(radix: int, capacity: int) -> int:
    """Numerals per FF1 string for a range of ``capacity`` numbers: the fewest with
    radix**digits >= capacity and >= 100."""
    digits = 2
    while radix**digits < max(capacity, MIN_DOMAIN):
        digits += 1
    return digits


def range_is_protected(radix: int, start: int, end: int) -> bool:
    """Whether a scattered range's FF1 domain reaches NIST SP 800-38G Rev. 1's one million
    (what :attr:`ScatterPermutation.is_protected` says, known without the key)."""
    return int(radix ** domain_digits(radix, end - start + 1)) >= PROTECTED_DOMAIN


def new_key() -> bytes:
    """A fresh AES-256 key for a scattered series, from the operating system's CSPRNG."""
    return secrets.token_bytes(KEY_BYTES)


def _whole(value: object) -> int | None:
    """``value`` as a Python int if it is a whole number (numpy integers too), else None."""
    if isinstance(value, bool):
        return None
    try:
        return operator.index(value)  # type: ignore[arg-type]
    except TypeError:
        return None


@dataclass(frozen=True)
class ScatterPermutation:
    """The keyed bijection counter -> base number of one scattered series."""

    key: bytes = field(repr=False)
    radix: int
    start: int
    end: int
    tweak: bytes = field(default=b"", repr=False)

    new_key = staticmethod(new_key)

    def __post_init__(self) -> None:
        check_key(self.key)
        check_radix(self.radix)
        check_tweak(self.tweak)
        start, end = _whole(self.start), _whole(self.end)
        if start is None or end is None:
            raise InvalidFormat("the range's start and end must be whole numbers")
        object.__setattr__(self, "start", start)  # plain ints, never numpy scalars
        object.__setattr__(self, "end", end)
        if not 0 <= self.start <= self.end <= MAX_BASE:
            raise InvalidFormat(
                f"a scattered range needs 0 <= start <= end <= {MAX_BASE}, "
                f"not start {self.start} and end {self.end}"
            )

    # --- sizes ----------------------------------------------------------------------------

    @property
    def capacity(self) -> int:
        """How many base numbers the range holds: ``end - start + 1``."""
        return self.end - self.start + 1

    @cached_property
    def digits(self) -> int:
        """Numerals per FF1 string: the fewest with radix**digits >= capacity and >= 100."""
        return domain_digits(self.radix, self.capacity)

    @property
    def domain_size(self) -> int:
        """The FF1 domain, ``radix**digits``; cycle walking costs domain/capacity on average."""
        return int(self.radix**self.digits)

    @property
    def is_protected(self) -> bool:
        """False when the FF1 domain is below NIST SP 800-38G Rev. 1's one million:
        the order is then only shuffled, not protected."""
        return self.domain_size >= PROTECTED_DOMAIN

    @cached_property
    def _ff1(self) -> FF1:
        return FF1(self.key, self.radix, self.tweak)

    @cached_property
    def _split(self) -> tuple[int, int, int]:
        """(radix**v, capacity's high half, capacity's low half) for the batch path."""
        mod_v = self._ff1.shape(self.digits).mod_v
        return (mod_v, *divmod(self.capacity, mod_v))

    # --- one number -----------------------------------------------------------------------

    def _check_counter(self, k: object) -> int:
        counter = _whole(k)
        if counter is None or counter < 0:
            raise InvalidFormat(f"a counter is a whole number from 0, not {k!r}")
        if counter >= self.capacity:
            raise Exhausted(
                f"the range holds {self.capacity} numbers; counter {counter} is beyond it"
            )
        return counter

    def _check_base(self, base: object) -> int:
        value = _whole(base)
        if value is None or not self.start <= value <= self.end:
            raise InvalidFormat(f"{base!r} is outside the range {self.start}..{self.end}")
        return value

    def base_for_counter(self, k: int) -> int:
        """The base number of the ``k``-th issue, ``0 <= k < capacity``."""
        k = self._check_counter(k)
        ff1, n, digits = self._ff1, self.capacity, self.digits
        x = ff1.encrypt_int(digits, k)
        while x >= n:  # cycle walking: the walk ends, FF1 is a permutation of the domain
            x = ff1.encrypt_int(digits, x)
        return self.start + x

    def counter_for_base(self, base: int) -> int:
        """The counter whose issue yields ``base``: walk back with FF1.Decrypt."""
        base = self._check_base(base)
        ff1, n, digits = self._ff1, self.capacity, self.digits
        x = ff1.decrypt_int(digits, base - self.start)
        while x >= n:
            x = ff1.decrypt_int(digits, x)
        return x

    # --- many numbers ---------------------------------------------------------------------

    def bases_for_counters(self, ks: npt.ArrayLike) -> np.ndarray[Any, np.dtype[np.int64]]:
        """:meth:`base_for_counter` for every counter in ``ks``, vectorised.

        Each pass encrypts only the rows whose walk has not yet landed in range.
        """
        return self._walk(ks, decrypt=False)

    def counters_for_bases(self, bases: npt.ArrayLike) -> np.ndarray[Any, np.dtype[np.int64]]:
        """:meth:`counter_for_base` for every base number in ``bases``, vectorised."""
        return self._walk(bases, decrypt=True)

    def _walk(self, values: npt.ArrayLike, decrypt: bool) -> np.ndarray[Any, np.dtype[np.int64]]:
        import numpy as np

        given = np.asarray(values)
        if given.size and given.dtype.kind not in "iu":
            raise InvalidFormat("counters and base numbers must be whole numbers")
        flat = given.reshape(-1).astype(np.int64)
        low, high = (self.start, self.end) if decrypt else (0, self.capacity - 1)
        if flat.size and (flat.min() < low or flat.max() > high):
            bad = flat[(flat < low) | (flat > high)][0]
            if decrypt:
                self._check_base(int(bad))
            self._check_counter(int(bad))
        if not self._ff1.shape(self.digits).vector:  # not reached for int64 ranges
            one = self.counter_for_base if decrypt else self.base_for_counter
            return np.array([one(int(v)) for v in flat], dtype=np.int64).reshape(given.shape)
        mod_v, n_high, n_low = self._split
        x = (flat - low).astype(np.uint64)
        a, b = x // np.uint64(mod_v), x % np.uint64(mod_v)
        result = np.empty(flat.size, dtype=np.int64)
        pending = np.arange(flat.size)
        while pending.size:
            a, b = self._ff1.crypt_halves(self.digits, a, b, decrypt)
            # value = a * radix**v + b may pass 2**64 for wide domains; compare by halves
            inside = (a < n_high) | ((a == n_high) & (b < n_low))
            landed = pending[inside]
            result[landed] = (a[inside] * np.uint64(mod_v) + b[inside]).astype(np.int64)
            outside = ~inside
            pending, a, b = pending[outside], a[outside], b[outside]
        if not decrypt:
            result += self.start
        return result.reshape(given.shape)
