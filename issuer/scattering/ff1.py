"""FF1 (NIST SP 800-38G) fast: one key schedule, state computed once per length, batches in numpy.

:class:`FF1` keeps one AES key schedule and, per string length, the CBC-MAC state over
every block of ``P || Q`` that does not depend on the string: only the last block of
``Q`` carries the numerals, so each round costs one AES call per string. For a batch
(:meth:`FF1.encrypt_batch`) that call is a single AES-ECB pass over all rows, and the
number conversions and reductions modulo ``radix**m`` run in numpy on 64-bit words.
The step-by-step reference it is tested against, and the standard's parameters and
building blocks, are in :mod:`issuer.scattering.ff1_reference` (re-exported here).

numpy and cryptography are imported inside functions: a one-code command must not pay
for them at start-up.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from issuer.errors import InvalidComponent, InvalidLength
from issuer.scattering.ff1_reference import (
    _VECTOR_BITS,
    BLOCK,
    MAX_LENGTH,
    MAX_RADIX,
    MAX_TWEAK,
    MIN_DOMAIN,
    MIN_LENGTH,
    MIN_RADIX,
    ROUNDS,
    _aes_ecb,
    _check_numerals,
    _ff1,
    _p_block,
    _prf,
    _xor,
    byte_length,
    check_key,
    check_length,
    check_radix,
    check_tweak,
    ff1_decrypt,
    ff1_encrypt,
    min_length,
    num_radix,
    str_radix,
)

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt


def ff1_encrypt_batch(
    key: bytes, tweak: bytes, radix: int, numerals: npt.ArrayLike
) -> np.ndarray[Any, np.dtype[np.int64]]:
    """FF1.Encrypt of every row of an ``(rows, length)`` array of numerals."""
    return FF1(key, radix, tweak).encrypt_batch(numerals)


def ff1_decrypt_batch(
    key: bytes, tweak: bytes, radix: int, numerals: npt.ArrayLike
) -> np.ndarray[Any, np.dtype[np.int64]]:
    """FF1.Decrypt of every row of an ``(rows, length)`` array of numerals."""
    return FF1(key, radix, tweak).decrypt_batch(numerals)


# --- the fast engine ------------------------------------------------------------------------

_MASK64 = (1 << 64) - 1


class _Shape:
    """Everything FF1 needs for one string length, computed once per key and tweak.

    ``last[i]`` is the last block of ``P || Q`` for round ``i`` with the numeral bytes
    zero, already XORed with the CBC-MAC state over the blocks before it. Only the last
    ``b`` bytes of ``Q`` depend on the string, so when ``b <= 16`` the PRF of round ``i``
    is ``CIPH(last[i] XOR NUM(half))``: one block per string instead of the whole chain.
    """

    __slots__ = ("b", "d", "domain", "last", "length", "mod_u", "mod_v", "u", "v", "vector")

    length: int
    u: int
    v: int
    b: int
    d: int
    mod_u: int
    mod_v: int
    domain: int
    last: list[int] | None
    vector: bool

    def __init__(self, ciph: Any, tweak: bytes, radix: int, length: int) -> None:
        self.length = length
        self.u = length // 2
        self.v = length - self.u
        self.b = byte_length(radix, self.v)
        self.d = 4 * -(-self.b // 4) + 4
        self.mod_u = int(radix**self.u)
        self.mod_v = int(radix**self.v)
        self.domain = self.mod_u * self.mod_v
        self.last = None
        if self.b <= BLOCK:
            p = _p_block(radix, self.u, length, len(tweak))
            pad = bytes((-len(tweak) - self.b - 1) % BLOCK)
            self.last = []
            for i in range(ROUNDS):
                whole = p + tweak + pad + bytes([i]) + bytes(self.b)
                state = _prf(ciph, whole[:-BLOCK])
                self.last.append(int.from_bytes(_xor(state, whole[-BLOCK:]), "big"))
        # Both halves below 2**56 keep every step of the batch path inside uint64.
        self.vector = self.last is not None and self.mod_v.bit_length() <= _VECTOR_BITS

    def modulus(self, i: int) -> int:
        return self.mod_u if i % 2 == 0 else self.mod_v


class FF1:
    """FF1 (NIST SP 800-38G) for one AES key, radix and tweak.

    The context keeps one AES key schedule and per-length constants, so repeated calls
    cost one AES block per round. Not safe to share between threads.
    """

    def __init__(self, key: bytes, radix: int, tweak: bytes = b"") -> None:
        self.radix = check_radix(radix)
        self.tweak = check_tweak(tweak)
        self._ciph = _aes_ecb(check_key(key))
        self._shapes: dict[int, _Shape] = {}
        self._buffers: tuple[np.ndarray[Any, Any], np.ndarray[Any, Any]] | None = None

    def __repr__(self) -> str:  # the key never appears
        return f"FF1(radix={self.radix}, tweak_bytes={len(self.tweak)})"

    def shape(self, length: int) -> _Shape:
        shape = self._shapes.get(length)
        if shape is None:
            check_length(self.radix, length)
            shape = self._shapes[length] = _Shape(self._ciph, self.tweak, self.radix, length)
        return shape

    # numeral strings, exactly as Algorithm 7 / 8 are written

    def encrypt(self, numerals: Sequence[int]) -> list[int]:
        return _ff1(
            self._ciph, self.tweak, self.radix, _check_numerals(self.radix, numerals), False
        )

    def decrypt(self, numerals: Sequence[int]) -> list[int]:
        return _ff1(self._ciph, self.tweak, self.radix, _check_numerals(self.radix, numerals), True)

    # one value: the string of `length` numerals whose NUM_radix is x

    def _value_shape(self, length: int, x: int) -> _Shape:
        shape = self.shape(length)
        if not 0 <= x < shape.domain:
            raise ValueError(f"{x} has no {length}-numeral string in radix {self.radix}")
        return shape

    def _y(self, shape: _Shape, i: int, feed: int) -> int:
        assert shape.last is not None
        r = bytes(self._ciph.update((shape.last[i] ^ feed).to_bytes(BLOCK, "big")))
        for j in range(1, -(-shape.d // BLOCK)):
            r += bytes(self._ciph.update(_xor(r[:BLOCK], j.to_bytes(BLOCK, "big"))))
        return int.from_bytes(r[: shape.d], "big")

    def encrypt_int(self, length: int, x: int) -> int:
        """NUM_radix(FF1.Encrypt(STR^length_radix(x))), without building the string."""
        shape = self._value_shape(length, x)
        if shape.last is None:
            return num_radix(self.encrypt(str_radix(x, self.radix, length)), self.radix)
        a, b = divmod(x, shape.mod_v)
        for i in range(ROUNDS):
            a, b = b, (a + self._y(shape, i, b)) % shape.modulus(i)
        return a * shape.mod_v + b

    def decrypt_int(self, length: int, x: int) -> int:
        """The inverse of :meth:`encrypt_int`."""
        shape = self._value_shape(length, x)
        if shape.last is None:
            return num_radix(self.decrypt(str_radix(x, self.radix, length)), self.radix)
        a, b = divmod(x, shape.mod_v)
        for i in reversed(range(ROUNDS)):
            a, b = (b - self._y(shape, i, a)) % shape.modulus(i), a
        return a * shape.mod_v + b

    # many values at once: halves a = NUM(A), b = NUM(B) as uint64 arrays

    def crypt_halves(
        self, length: int, a: np.ndarray[Any, Any], b: np.ndarray[Any, Any], decrypt: bool = False
    ) -> tuple[np.ndarray[Any, np.dtype[np.uint64]], np.ndarray[Any, np.dtype[np.uint64]]]:
        """All ten rounds for every row; each round is one AES-ECB call over all rows.

        ``a`` holds the first ``length // 2`` numerals of each string as a number, ``b``
        the rest. Needs :attr:`_Shape.vector` (both halves below 2**56).
        """
        import numpy as np

        shape = self.shape(length)
        if not shape.vector:
            raise ValueError(f"radix {self.radix} at length {length} is beyond the batch path")
        assert shape.last is not None
        a = np.array(a, dtype=np.uint64)
        b = np.array(b, dtype=np.uint64)
        rows = a.shape[0]
        if rows == 0:
            return a, b
        blocks, sink = self._scratch(rows)
        # update_into writes the cipher blocks straight into numpy memory, no copies
        source = memoryview(blocks.view(np.uint8)).cast("B")  # type: ignore[arg-type]
        target = memoryview(sink)  # type: ignore[arg-type]
        r = sink[: rows * BLOCK].view(">u8").reshape(rows, 2)
        high = None
        for i in reversed(range(ROUNDS)) if decrypt else range(ROUNDS):
            last, modulus = shape.last[i], shape.modulus(i)
            # The numerals fill at most 7 bytes, all inside the block's low word; the
            # high word only changes if the tweak puts the round number there.
            if last >> 64 != high:
                high = last >> 64
                blocks[:, 0] = high
            np.bitwise_xor(a if decrypt else b, np.uint64(last & _MASK64), out=blocks[:, 1])
            self._ciph.update_into(source, target)
            y = _reduce(r, shape.d, modulus)
            m = np.uint64(modulus)
            # Both results below lie in [0, 2m); unsigned wrap-around makes the wrong
            # candidate of each pair the larger one, so minimum() picks the residue.
            if decrypt:
                c = np.subtract(b, y, out=y)
                np.minimum(c, c + m, out=c)
                a, b = c, a
            else:
                c = np.add(a, y, out=y)
                np.minimum(c, c - m, out=c)
                a, b = b, c
        return a, b

    def _scratch(self, rows: int) -> tuple[np.ndarray[Any, Any], np.ndarray[Any, Any]]:
        """PRF input blocks and AES output for ``rows`` rows, kept between calls so the
        passes of a cycle walk do not pay for fresh pages each time."""
        import numpy as np

        if self._buffers is None or self._buffers[0].shape[0] < rows:
            self._buffers = (
                np.empty((rows, 2), dtype=">u8"),
                np.empty(rows * BLOCK + BLOCK - 1, dtype=np.uint8),  # update_into's margin
            )
        blocks, sink = self._buffers
        return blocks[:rows], sink[: rows * BLOCK + BLOCK - 1]

    def _batch(self, numerals: npt.ArrayLike, decrypt: bool) -> np.ndarray[Any, np.dtype[np.int64]]:
        import numpy as np

        x = np.asarray(numerals)
        if x.ndim != 2:
            raise InvalidLength("a batch is a two-dimensional array: one string per row")
        rows, length = x.shape
        shape = self.shape(length)
        if x.size and (x.dtype.kind not in "iu" or x.min() < 0 or x.max() >= self.radix):
            raise InvalidComponent(
                f"a batch holds numerals that are not numerals of radix {self.radix}"
            )
        if not shape.vector:  # long strings: one value at a time, still exact
            crypt = self.decrypt_int if decrypt else self.encrypt_int
            out = [
                str_radix(crypt(length, num_radix(row, self.radix)), self.radix, length)
                for row in x.tolist()
            ]
            return np.array(out, dtype=np.int64).reshape(rows, length)
        x = x.astype(np.uint64)
        radix = np.uint64(self.radix)
        a = np.zeros(rows, dtype=np.uint64)
        b = np.zeros(rows, dtype=np.uint64)
        for j in range(shape.u):
            a = a * radix + x[:, j]
        for j in range(shape.u, length):
            b = b * radix + x[:, j]
        a, b = self.crypt_halves(length, a, b, decrypt)
        result = np.empty((rows, length), dtype=np.int64)
        for j in reversed(range(length)):
            half = a if j < shape.u else b
            result[:, j] = half % radix
            half //= radix
        return result

    def encrypt_batch(self, numerals: npt.ArrayLike) -> np.ndarray[Any, np.dtype[np.int64]]:
        """FF1.Encrypt of every row of an ``(rows, length)`` integer array."""
        return self._batch(numerals, False)

    def decrypt_batch(self, numerals: npt.ArrayLike) -> np.ndarray[Any, np.dtype[np.int64]]:
        """FF1.Decrypt of every row of an ``(rows, length)`` integer array."""
        return self._batch(numerals, True)


def _reduce(r: np.ndarray[Any, Any], d: int, modulus: int) -> np.ndarray[Any, np.dtype[np.uint64]]:
    """y = NUM(S) mod radix**m for S = the first d bytes (8 <= d <= 16) of each row of R.

    Horner's rule in 64-bit words: the first 8 bytes at once, then the rest in chunks
    small enough that remainder * 2**chunk stays below 2**64.
    """
    import numpy as np

    m = np.uint64(modulus)
    y = r[:, 0].astype(np.uint64) % m
    tail_bits = 8 * (d - 8)
    if tail_bits:
        tail = r[:, 1].astype(np.uint64) >> np.uint64(64 - tail_bits)
        step = 64 - modulus.bit_length()
        while tail_bits:
            s = min(step, tail_bits)
            tail_bits -= s
            chunk = tail  # the whole tail in one step needs neither shift nor mask
            if s != 8 * (d - 8):
                chunk = (tail >> np.uint64(tail_bits)) & np.uint64((1 << s) - 1)
            y <<= np.uint64(s)
            y |= chunk
            y %= m
    return y


__all__ = [
    "BLOCK", "FF1", "MAX_LENGTH", "MAX_RADIX", "MAX_TWEAK", "MIN_DOMAIN", "MIN_LENGTH", "MIN_RADIX",
    "ROUNDS", "byte_length", "check_key", "check_length", "check_radix", "check_tweak",
    "ff1_decrypt", "ff1_decrypt_batch", "ff1_encrypt", "ff1_encrypt_batch", "min_length",
    "num_radix", "str_radix",
]  # fmt: skip
