"""FF1 format-preserving encryption, NIST SP 800-38G (March 2016), over AES.

FF1 (SP 800-38G, Algorithm 7) is a ten-round Feistel network on strings of numerals
in a radix. Each round's function is the PRF of Algorithm 6 -- a CBC-MAC built from the
AES forward cipher on single blocks -- applied to ``P || Q``, where ``P`` holds the
parameters and ``Q`` the tweak, the round number and one half of the string.

Two implementations live here:

* :func:`ff1_encrypt` / :func:`ff1_decrypt` follow Algorithm 7 step by step, one block
  at a time. They are the reference the fast paths are tested against.
* :class:`FF1` keeps one AES key schedule and, per string length, the CBC-MAC state over
  every block of ``P || Q`` that does not depend on the string: only the last block of
  ``Q`` carries the numerals, so each round costs one AES call per string. For a batch
  (:meth:`FF1.encrypt_batch`) that call is a single AES-ECB pass over all rows, and the
  number conversions and reductions modulo ``radix**m`` run in numpy on 64-bit words.

numpy and cryptography are imported inside functions: a one-code command must not pay
for them at start-up.
"""

from __future__ import annotations

import operator
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from issuer.errors import InvalidComponent, InvalidLength

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

ROUNDS = 10
BLOCK = 16
MIN_RADIX = 2
#: SP 800-38G, FF1 prerequisites: radix in [2 .. 2**16].
MAX_RADIX = 1 << 16
#: SP 800-38G, FF1 prerequisites: radix**minlen >= 100, with minlen >= 2.
MIN_DOMAIN = 100
MIN_LENGTH = 2
#: SP 800-38G, FF1 prerequisites: maxlen <= 2**32.
MAX_LENGTH = 1 << 32
MAX_TWEAK = (1 << 32) - 1
#: The batch path keeps every half below 2**56, so that a remainder shifted left by a
#: byte or more still fits an unsigned 64-bit word.
_VECTOR_BITS = 56


# --- checks -----------------------------------------------------------------------------


def check_key(key: bytes) -> bytes:
    if not isinstance(key, bytes | bytearray) or len(key) not in (16, 24, 32):
        raise ValueError("an FF1 key is an AES-128, AES-192 or AES-256 key: 16, 24 or 32 bytes")
    return bytes(key)


def check_radix(radix: int) -> int:
    if isinstance(radix, bool) or not isinstance(radix, int):
        raise TypeError("the radix must be an integer")
    if not MIN_RADIX <= radix <= MAX_RADIX:
        raise ValueError(f"FF1 needs a radix from {MIN_RADIX} to {MAX_RADIX}, not {radix}")
    return radix


def check_tweak(tweak: bytes) -> bytes:
    if not isinstance(tweak, bytes | bytearray) or len(tweak) > MAX_TWEAK:
        raise ValueError("the FF1 tweak must be a byte string shorter than 2**32 bytes")
    return bytes(tweak)


def check_length(radix: int, length: int) -> None:
    if length < MIN_LENGTH or radix**length < MIN_DOMAIN or length > MAX_LENGTH:
        raise InvalidLength(
            f"FF1 in radix {radix} needs at least {min_length(radix)} numerals "
            f"(radix**length >= {MIN_DOMAIN}), not {length}"
        )


def min_length(radix: int) -> int:
    """The shortest string FF1 accepts in ``radix`` (SP 800-38G, FF1 prerequisites)."""
    length = MIN_LENGTH
    while radix**length < MIN_DOMAIN:
        length += 1
    return length


def _check_numerals(radix: int, numerals: Sequence[int]) -> list[int]:
    values = []
    for value in numerals:
        try:  # numpy integers are welcome; floats and booleans are not numerals
            numeral = -1 if isinstance(value, bool) else operator.index(value)
        except TypeError:
            numeral = -1
        if not 0 <= numeral < radix:
            raise InvalidComponent(f"{value!r} is not a numeral of radix {radix}")
        values.append(numeral)
    check_length(radix, len(values))
    return values


# --- the algorithm as written -------------------------------------------------------------


def _aes_ecb(key: bytes) -> Any:
    """An AES forward-cipher context; ECB on whole blocks is CIPH_K of SP 800-38G."""
    from cryptography.hazmat.primitives.ciphers import Cipher, algorithms, modes

    return Cipher(algorithms.AES(key), modes.ECB()).encryptor()


def _xor(x: bytes, y: bytes) -> bytes:
    return (int.from_bytes(x, "big") ^ int.from_bytes(y, "big")).to_bytes(len(x), "big")


def _prf(ciph: Any, x: bytes) -> bytes:
    """SP 800-38G Algorithm 6, PRF(X): CBC-MAC with a zero IV over 16-byte blocks."""
    y = bytes(BLOCK)
    for j in range(0, len(x), BLOCK):
        y = ciph.update(_xor(y, x[j : j + BLOCK]))
    return bytes(y)


def num_radix(numerals: Sequence[int], radix: int) -> int:
    """NUM_radix(X): the number the numeral string represents, most significant first."""
    value = 0
    for numeral in numerals:
        value = value * radix + numeral
    return value


def str_radix(value: int, radix: int, m: int) -> list[int]:
    """STR^m_radix(x): the m numerals of x in base radix, most significant first."""
    out = [0] * m
    for j in range(m - 1, -1, -1):
        value, out[j] = divmod(value, radix)
    return out


def byte_length(radix: int, v: int) -> int:
    """b = ceil(ceil(v * log2(radix)) / 8), computed exactly on integers."""
    # ceil(log2(R)) == (R - 1).bit_length() for every integer R >= 1.
    return ((int(radix**v) - 1).bit_length() + 7) // 8


def _p_block(radix: int, u: int, n: int, t: int) -> bytes:
    """Step 5: P = [1]^1 || [2]^1 || [1]^1 || [radix]^3 || [10]^1 || [u mod 256]^1 || [n]^4 || [t]^4."""
    return (
        bytes([1, 2, 1])
        + radix.to_bytes(3, "big")
        + bytes([ROUNDS, u % 256])
        + n.to_bytes(4, "big")
        + t.to_bytes(4, "big")
    )


def _ff1(ciph: Any, tweak: bytes, radix: int, x: list[int], decrypt: bool) -> list[int]:
    """SP 800-38G Algorithm 7 (FF1.Encrypt) and Algorithm 8 (FF1.Decrypt), step by step."""
    n, t = len(x), len(tweak)
    u = n // 2
    v = n - u
    a, b_half = x[:u], x[u:]
    b = byte_length(radix, v)
    d = 4 * -(-b // 4) + 4
    p = _p_block(radix, u, n, t)
    pad = bytes((-t - b - 1) % BLOCK)
    for i in reversed(range(ROUNDS)) if decrypt else range(ROUNDS):
        feed = a if decrypt else b_half
        q = tweak + pad + bytes([i]) + num_radix(feed, radix).to_bytes(b, "big")
        r = _prf(ciph, p + q)
        s = r + b"".join(
            bytes(ciph.update(_xor(r, j.to_bytes(BLOCK, "big")))) for j in range(1, -(-d // BLOCK))
        )
        y = int.from_bytes(s[:d], "big")
        m = u if i % 2 == 0 else v
        if decrypt:
            c = (num_radix(b_half, radix) - y) % radix**m
            a, b_half = str_radix(c, radix, m), a
        else:
            c = (num_radix(a, radix) + y) % radix**m
            a, b_half = b_half, str_radix(c, radix, m)
    return a + b_half


def ff1_encrypt(key: bytes, tweak: bytes, radix: int, numerals: Sequence[int]) -> list[int]:
    """FF1.Encrypt(K, T, X) of NIST SP 800-38G; numerals are 0 .. radix - 1."""
    key, tweak, radix = check_key(key), check_tweak(tweak), check_radix(radix)
    return _ff1(_aes_ecb(key), tweak, radix, _check_numerals(radix, numerals), False)


def ff1_decrypt(key: bytes, tweak: bytes, radix: int, numerals: Sequence[int]) -> list[int]:
    """FF1.Decrypt(K, T, Y) of NIST SP 800-38G; the inverse of :func:`ff1_encrypt`."""
    key, tweak, radix = check_key(key), check_tweak(tweak), check_radix(radix)
    return _ff1(_aes_ecb(key), tweak, radix, _check_numerals(radix, numerals), True)


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
