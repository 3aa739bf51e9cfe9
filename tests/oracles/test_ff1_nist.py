"""FF1 against the sample values NIST published for SP 800-38G, and two cross-checks
against vectors from another implementation's test suite."""

from __future__ import annotations

import numpy as np
import pytest

from issuer.scattering.ff1 import (
    FF1,
    ff1_decrypt,
    ff1_decrypt_batch,
    ff1_encrypt,
    ff1_encrypt_batch,
    num_radix,
)

BASE36 = "0123456789abcdefghijklmnopqrstuvwxyz"

# source: NIST SP 800-38G, FF1 samples (FF1samples.pdf), samples 1-3 (AES-128 key)
KEY_128 = "2B7E151628AED2A6ABF7158809CF4F3C"
# source: NIST SP 800-38G, FF1 samples, samples 4-6 (AES-192 key) and 7-9 (AES-256 key),
# values as reproduced in the test suite of ubiqsecurity/ubiq-fpe-java
# (lib/src/test/java/ubiqsecurity/fpe/FF1Test.java, nist4 .. nist9); several other public
# FF1 test suites list the same values.
KEY_192 = "2B7E151628AED2A6ABF7158809CF4F3CEF4359D8D580AA4F"
KEY_256 = "2B7E151628AED2A6ABF7158809CF4F3CEF4359D8D580AA4F7F036D6F04FC6A94"
TWEAK_NONE = ""
TWEAK_DIGITS = "39383736353433323130"
TWEAK_MIXED = "3737373770717273373737"

SAMPLES = [
    # (sample, key, radix, tweak, plaintext, ciphertext)
    # source: NIST SP 800-38G, FF1 samples, sample 1 (AES-128)
    (1, KEY_128, 10, TWEAK_NONE, "0123456789", "2433477484"),
    # source: NIST SP 800-38G, FF1 samples, sample 2 (AES-128)
    (2, KEY_128, 10, TWEAK_DIGITS, "0123456789", "6124200773"),
    # source: NIST SP 800-38G, FF1 samples, sample 3 (AES-128)
    (3, KEY_128, 36, TWEAK_MIXED, "0123456789abcdefghi", "a9tv40mll9kdu509eum"),
    # source: NIST SP 800-38G, FF1 samples, sample 4 (AES-192), via ubiq-fpe-java FF1Test
    (4, KEY_192, 10, TWEAK_NONE, "0123456789", "2830668132"),
    # source: NIST SP 800-38G, FF1 samples, sample 5 (AES-192), via ubiq-fpe-java FF1Test
    (5, KEY_192, 10, TWEAK_DIGITS, "0123456789", "2496655549"),
    # source: NIST SP 800-38G, FF1 samples, sample 6 (AES-192), via ubiq-fpe-java FF1Test
    (6, KEY_192, 36, TWEAK_MIXED, "0123456789abcdefghi", "xbj3kv35jrawxv32ysr"),
    # source: NIST SP 800-38G, FF1 samples, sample 7 (AES-256), via ubiq-fpe-java FF1Test
    (7, KEY_256, 10, TWEAK_NONE, "0123456789", "6657667009"),
    # source: NIST SP 800-38G, FF1 samples, sample 8 (AES-256), via ubiq-fpe-java FF1Test
    (8, KEY_256, 10, TWEAK_DIGITS, "0123456789", "1001623463"),
    # source: NIST SP 800-38G, FF1 samples, sample 9 (AES-256), via ubiq-fpe-java FF1Test
    (9, KEY_256, 36, TWEAK_MIXED, "0123456789abcdefghi", "xs8a0azh2avyalyzuwd"),
]

CROSS_CHECKS = [
    # Not NIST samples: another implementation's published outputs. They reach parts
    # of Algorithm 7 the samples do not: b > 8 bytes and d > 16 (S spans two AES blocks),
    # a 32-byte tweak, radix 2.
    # source: ubiqsecurity/ubiq-fpe-python, ff1_test.py, test_nist3_prime
    (
        "radix 36, 42 numerals",
        KEY_128,
        36,
        TWEAK_MIXED,
        "0123456789abcdefghijklmnopqrstuvwxyz012345",
        "l4zpm8zauhw2zkke9o0i7oi17iojfqog7dmjze3her",
    ),
    # source: ubiqsecurity/ubiq-fpe-java, lib/src/test/java/ubiqsecurity/fpe/FF1Test.java, base2
    (
        "radix 2, 47 numerals",
        "F4A116D6EE406A53A56CBE0F4AA7B1001CDC0A55CAC963CF5ACE390488B3477A",
        2,
        "FD7F4B9945A3C535ADB4720027116CA0F4987D7F3FDBA9BBC40E75375FEAA63C",
        "00000101011011011101001001010011100111100011001",
        "10110101001110101101110000011000000011111100111",
    ),
]


def numerals(text: str) -> list[int]:
    return [BASE36.index(ch) for ch in text]


def text(values: list[int]) -> str:
    return "".join(BASE36[v] for v in values)


ALL = [pytest.param(*s[1:], id=f"sample {s[0]}") for s in SAMPLES] + [
    pytest.param(*c[1:], id=c[0]) for c in CROSS_CHECKS
]


@pytest.mark.parametrize(("key", "radix", "tweak", "plain", "cipher"), ALL)
def test_encrypt_and_decrypt_as_written(
    key: str, radix: int, tweak: str, plain: str, cipher: str
) -> None:
    k, t = bytes.fromhex(key), bytes.fromhex(tweak)
    assert len(plain) == len(cipher)
    assert text(ff1_encrypt(k, t, radix, numerals(plain))) == cipher
    assert text(ff1_decrypt(k, t, radix, numerals(cipher))) == plain


@pytest.mark.parametrize(("key", "radix", "tweak", "plain", "cipher"), ALL)
def test_engine_value_path(key: str, radix: int, tweak: str, plain: str, cipher: str) -> None:
    ff1 = FF1(bytes.fromhex(key), radix, bytes.fromhex(tweak))
    x, y = num_radix(numerals(plain), radix), num_radix(numerals(cipher), radix)
    assert ff1.encrypt_int(len(plain), x) == y
    assert ff1.decrypt_int(len(plain), y) == x
    assert text(ff1.encrypt(numerals(plain))) == cipher


@pytest.mark.parametrize(("key", "radix", "tweak", "plain", "cipher"), ALL)
def test_batch_path(key: str, radix: int, tweak: str, plain: str, cipher: str) -> None:
    k, t = bytes.fromhex(key), bytes.fromhex(tweak)
    rows = np.array([numerals(plain)] * 3)
    out = ff1_encrypt_batch(k, t, radix, rows)
    assert [text(row) for row in out.tolist()] == [cipher] * 3
    back = ff1_decrypt_batch(k, t, radix, out)
    assert [text(row) for row in back.tolist()] == [plain] * 3


def test_the_samples_use_the_vectorised_path() -> None:
    # The batch path must be the numpy one for the samples, or test_batch_path would only
    # test the per-row fallback.
    ff1 = FF1(bytes.fromhex(KEY_128), 36, bytes.fromhex(TWEAK_MIXED))
    assert ff1.shape(19).vector
    assert ff1.shape(10).vector
    assert not ff1.shape(42).vector
