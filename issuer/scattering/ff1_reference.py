"""FF1 format-preserving encryption as NIST SP 800-38G (March 2016) writes it, over AES.

FF1 (SP 800-38G, Algorithm 7) is a ten-round Feistel network on strings of numerals
in a radix. Each round's function is the PRF of Algorithm 6 -- a CBC-MAC built from the
AES forward cipher on single blocks -- applied to ``P || Q``, where ``P`` holds the
parameters and ``Q`` the tweak, the round number and one half of the string.

This module holds the standard's parameters and checks, its building blocks (PRF,
NUM_radix, STR_radix, the block ``P``) and :func:`ff1_encrypt` / :func:`ff1_decrypt`,
which follow Algorithm 7 step by step, one block at a time: the reference that the fast
keyed engine in :mod:`issuer.scattering.ff1` is tested against.

cryptography is imported inside functions: a one-code command must not pay for it at
start-up.
"""

from __future__ import annotations

import operator
from collections.abc import Sequence
from typing import Any

from issuer.errors import InvalidComponent, InvalidLength

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


