"""ISO/IEC 7064 check character systems: the pure and the hybrid systems.

Source: ISO/IEC 7064:2003, *Information technology — Security techniques — Check
character systems*.

Pure systems MOD M-r (11-2, 37-2, 97-10, 661-26, 1271-36): with the characters
numbered from the right starting at 1 (check characters included), a string is valid
when ``Σ a_i · r^(i-1) ≡ 1 (mod M)``. Computed recursively, ``P = (P · r + a) mod M``
over the body, then once more times r per check character; the check value is the
``c`` with ``P + c ≡ 1`` and, for two check characters, is written as two base-r
digits. MOD 11-2 writes the check value 10 as ``X``; MOD 37-2 writes 36 as ``*``.
Where r² > M a congruent second value also satisfies the condition, and the standard
accepts it; issuer reads such a pair as the computed one (one code per number, see
:mod:`issuer.checking.reading`); for MOD 97-10 the value computed is ``98 - (body · 100 mod 97)``, in
02..98, as the standard's simplified procedure (and IBAN) computes it.

Hybrid systems MOD (M+1, M) (11-10, 27-26, 37-36): ``P = M``; for each character
``S = (P + a) mod M``, ``P = (S or M) · 2 mod (M + 1)``; a string is valid when the
last ``S`` is 1. The check is the character whose value makes it so. One check
character from the body's own alphabet.

>>> from issuer.checking.alphabets import DIGITS
>>> Iso7064Mod11_2(DIGITS).append("079")
'079X'
>>> Iso7064Mod97_10(DIGITS).append("794")
'79444'
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, ClassVar

from issuer.checking.alphabets import ALNUM, DIGITS, LETTERS, Alphabet
from issuer.checking.schemes.base import Scheme

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

    from issuer.checking.schemes.base import IntMatrix, ValueMatrix

DIGITS_X = Alphabet(name="digits+X", symbols="0123456789X", title="digits and X (value 10)")
ALNUM_STAR = Alphabet(
    name="alnum+*", symbols=ALNUM.symbols + "*", title="digits, letters and * (value 36)"
)


class _Iso7064(Scheme):
    """What the ISO/IEC 7064 systems share: a published character set."""

    source = "ISO/IEC 7064:2003, Check character systems"
    #: the body character set the standard defines for this system
    published: ClassVar[Alphabet]

    @classmethod
    def unsupported_reason(cls, alphabet: Alphabet) -> str | None:
        if alphabet.symbols != cls.published.symbols:
            return (
                f"the standard defines {cls.name} for the character set "
                f"{cls.published.symbols} ({cls.published.size} symbols)"
            )
        return None


class PureSystem(_Iso7064):
    """ISO/IEC 7064 pure system MOD M-r."""

    modulus: ClassVar[int]
    radix: ClassVar[int]
    #: symbols after the body alphabet that the check may use (X, *)
    check_extra: ClassVar[str] = ""
    #: when set, the check value is ``offset - P`` instead of ``(1 - P) mod M``
    check_offset: ClassVar[int | None] = None
    guaranteed = frozenset({"single", "adjacent"})

    def make_check_alphabet(self, alphabet: Alphabet) -> Alphabet:
        if self.check_extra == "X":
            return DIGITS_X
        if self.check_extra == "*":
            return ALNUM_STAR
        return alphabet

    def remainder(self, values: Sequence[int]) -> int:
        total = 0
        for value in values:
            total = (total * self.radix + value) % self.modulus
        return total

    def check_value(self, shifted: int) -> int:
        """The check value for a body whose sum, shifted past the check, is ``shifted``."""
        if self.check_offset is not None:
            return self.check_offset - shifted
        return (1 - shifted) % self.modulus

    def split_value(self, value: int) -> tuple[int, ...]:
        """One check character holds the whole value (X, *); two hold it in base r."""
        if self.check_length == 1:
            return (value,)
        digits = []
        for _ in range(self.check_length):
            value, digit = divmod(value, self.radix)
            digits.append(digit)
        return tuple(reversed(digits))

    def compute_values(self, body: Sequence[int]) -> tuple[int, ...]:
        shifted = self.remainder([*body, *([0] * self.check_length)])
        return self.split_value(self.check_value(shifted))

    def verify_values(self, body: Sequence[int], check: Sequence[int]) -> bool:
        return len(check) == self.check_length and self.remainder([*body, *check]) == 1

    def compute_bulk(self, bodies: ValueMatrix) -> IntMatrix:
        import numpy as np

        self.require_body_length(bodies.shape[1])
        total = self._bulk_remainder(bodies)
        total = total * self.radix**self.check_length % self.modulus
        if self.check_offset is not None:
            value = self.check_offset - total
        else:
            value = (1 - total) % self.modulus
        if self.check_length == 1:
            single: IntMatrix = value.reshape(-1, 1)
            return single
        high, low = np.divmod(value, self.radix)
        return np.stack([high, low], axis=1)

    def verify_bulk(self, codes: ValueMatrix) -> npt.NDArray[np.bool_]:
        import numpy as np

        self.require_body_length(codes.shape[1] - self.check_length)
        ok = (codes >= 0).all(axis=1)
        valid: npt.NDArray[np.bool_] = ok & (
            self._bulk_remainder(np.where(codes < 0, 0, codes)) == 1
        )
        return valid

    def _bulk_remainder(self, matrix: ValueMatrix) -> npt.NDArray[np.int64]:
        import numpy as np

        total = np.zeros(matrix.shape[0], dtype=np.int64)
        for column in range(matrix.shape[1]):
            total *= self.radix
            total += matrix[:, column]
            total %= self.modulus
        return total


class HybridSystem(_Iso7064):
    """ISO/IEC 7064 hybrid system MOD (M+1, M), M = the alphabet size."""

    guaranteed = frozenset({"single"})

    def last_s(self, values: Sequence[int]) -> tuple[int, int]:
        """Run the recursion; return (last S, following P)."""
        m = self.alphabet.size
        p = m
        s = 0
        for value in values:
            s = (p + value) % m
            p = ((s or m) * 2) % (m + 1)
        return s, p

    def compute_values(self, body: Sequence[int]) -> tuple[int, ...]:
        return ((1 - self.last_s(body)[1]) % self.alphabet.size,)

    def compute_bulk(self, bodies: ValueMatrix) -> IntMatrix:
        import numpy as np

        m = self.alphabet.size
        p = np.full(bodies.shape[0], m, dtype=np.int64)
        for column in range(bodies.shape[1]):
            s = (p + bodies[:, column]) % m
            s[s == 0] = m
            p = (s * 2) % (m + 1)
        return ((1 - p) % m).reshape(-1, 1)


class Iso7064Mod11_2(PureSystem):
    name = "iso7064-11-2"
    title = "ISO/IEC 7064 MOD 11-2 (pure, digits, check 0-9 or X)"
    natural_alphabet = "digits"
    published = DIGITS
    modulus, radix, check_extra = 11, 2, "X"


class Iso7064Mod37_2(PureSystem):
    name = "iso7064-37-2"
    title = "ISO/IEC 7064 MOD 37-2 (pure, alphanumeric, check 0-9A-Z or *)"
    natural_alphabet = "alnum"
    published = ALNUM
    modulus, radix, check_extra = 37, 2, "*"


class Iso7064Mod97_10(PureSystem):
    name = "iso7064-97-10"
    title = "ISO/IEC 7064 MOD 97-10 (pure, digits, two check digits)"
    natural_alphabet = "digits"
    published = DIGITS
    modulus, radix = 97, 10
    check_length = 2
    has_alternative_checks = True
    # the standard's simplified procedure: 98 - (body followed by 00, mod 97)
    check_offset = 98


class Iso7064Mod661_26(PureSystem):
    name = "iso7064-661-26"
    title = "ISO/IEC 7064 MOD 661-26 (pure, letters, two check letters)"
    natural_alphabet = "letters"
    published = LETTERS
    modulus, radix = 661, 26
    check_length = 2
    has_alternative_checks = True


class Iso7064Mod1271_36(PureSystem):
    name = "iso7064-1271-36"
    title = "ISO/IEC 7064 MOD 1271-36 (pure, alphanumeric, two check characters)"
    natural_alphabet = "alnum"
    published = ALNUM
    modulus, radix = 1271, 36
    check_length = 2
    has_alternative_checks = True


class Iso7064Mod11_10(HybridSystem):
    name = "iso7064-11-10"
    title = "ISO/IEC 7064 MOD 11,10 (hybrid, digits)"
    natural_alphabet = "digits"
    published = DIGITS


class Iso7064Mod27_26(HybridSystem):
    name = "iso7064-27-26"
    title = "ISO/IEC 7064 MOD 27,26 (hybrid, letters)"
    natural_alphabet = "letters"
    published = LETTERS


class Iso7064Mod37_36(HybridSystem):
    name = "iso7064-37-36"
    title = "ISO/IEC 7064 MOD 37,36 (hybrid, alphanumeric)"
    natural_alphabet = "alnum"
    published = ALNUM
