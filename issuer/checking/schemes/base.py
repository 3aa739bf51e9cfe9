"""The one interface every check-character method offers.

A :class:`Scheme` is bound to the alphabet of the body it protects. The check
character(s) come from :attr:`Scheme.check_alphabet`, which is the body alphabet or,
where the method says so, a larger set (ISO/IEC 7064 MOD 11-2's ``X``).

Values, not text, are the common currency: ``compute_values`` is the method itself;
the text forms and the numpy bulk forms are derived here once.

A scheme may append no check character at all (``none``: ``check_length`` 0), and a
method that protects only a limited number of positions (ISBN-10-style weights mod
11) says so in :attr:`Scheme.max_body_length`; longer bodies are refused with
:class:`~issuer.errors.InvalidLength` rather than silently left unprotected.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any, ClassVar

from issuer.checking.alphabets import Alphabet
from issuer.errors import InvalidCheck, InvalidLength, UnsupportedAlphabet

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

    #: what the bulk methods return: check values as int64
    IntMatrix = npt.NDArray[np.int64]
    #: what they take: symbol values in any signed integer type (code_matrix gives int8)
    ValueMatrix = npt.NDArray[np.signedinteger[Any]]


class Scheme(ABC):
    """A check-character method bound to a body alphabet."""

    #: the name scripts use (``--scheme``)
    name: ClassVar[str]
    #: one line for people
    title: ClassVar[str]
    #: the publication that defines the method
    source: ClassVar[str]
    #: the alphabet used when none is named
    natural_alphabet: ClassVar[str]
    #: how many check characters the method appends (0 for ``none``)
    check_length: ClassVar[int] = 1
    #: the longest body the method protects in every position; ``None``: no limit
    max_body_length: ClassVar[int | None] = None
    #: why :attr:`max_body_length` exists, for the refusal message
    max_body_reason: ClassVar[str] = ""
    #: error classes the method detects in every case (names as in ``issuer.checking.assess``:
    #: single, adjacent, jump, twin, jump_twin, phonetic); a promise the tests hold it to
    guaranteed: ClassVar[frozenset[str]] = frozenset()
    #: whether the published condition accepts more than one check for a body (ISO/IEC
    #: 7064 pure systems with two check characters); such codes are read in one form
    has_alternative_checks: ClassVar[bool] = False

    def __init__(self, alphabet: Alphabet) -> None:
        reason = self.unsupported_reason(alphabet)
        if reason:
            raise UnsupportedAlphabet(
                f"scheme {self.name} cannot serve alphabet {alphabet.name} "
                f"({alphabet.size} symbols): {reason}"
            )
        self.alphabet = alphabet
        self.check_alphabet = self.make_check_alphabet(alphabet)

    # -- what a concrete scheme provides ---------------------------------------
    @classmethod
    def unsupported_reason(cls, alphabet: Alphabet) -> str | None:
        """Why this scheme cannot serve ``alphabet`` (a short clause), or ``None``."""
        return None

    def guarantees(self) -> frozenset[str]:
        """The error classes this bound scheme always detects (see :attr:`guaranteed`)."""
        return self.guaranteed

    def require_body_length(self, length: int) -> None:
        """Refuse a body longer than the method protects."""
        limit = self.max_body_length
        if limit is not None and length > limit:
            raise InvalidLength(
                f"scheme {self.name} protects at most {limit} body characters "
                f"({self.max_body_reason}), not {length}"
            )

    def verify_values(self, body: Sequence[int], check: Sequence[int]) -> bool:
        """Whether ``check`` (check-alphabet values) is a valid check for ``body``.

        The default compares with the computed check; a method whose published
        condition admits more than one check (ISO/IEC 7064 pure systems with two check
        characters) overrides this with its own congruence.
        """
        return tuple(check) == self.compute_values(body)

    def canonical_check(self, body: str, check: str) -> str:
        """``check`` for canonical ``body``, with a congruent alternative the method also
        accepts replaced by the check it computes (one code per number)."""
        if not self.has_alternative_checks or len(check) != self.check_length:
            return check
        body_values = self.alphabet.values(body)
        if not all(ch in self.check_alphabet.symbols for ch in check):
            return check
        if self.verify_values(body_values, self.check_alphabet.values(check)):
            return self.check_alphabet.text(self.compute_values(body_values))
        return check

    def make_check_alphabet(self, alphabet: Alphabet) -> Alphabet:
        """The set the check character(s) come from; the body alphabet by default."""
        return alphabet

    @abstractmethod
    def compute_values(self, body: Sequence[int]) -> tuple[int, ...]:
        """Check values (positions in :attr:`check_alphabet`) for a body's values."""

    # -- derived text forms ------------------------------------------------------
    def compute(self, body: str) -> str:
        """The check character(s) for a canonical body."""
        self.require_body_length(len(body))
        return self.check_alphabet.text(self.compute_values(self.alphabet.values(body)))

    def append(self, body: str) -> str:
        """The body followed by its check character(s)."""
        return body + self.compute(body)

    def split(self, code: str) -> tuple[str, str]:
        """A canonical code split into (body, check)."""
        if len(code) <= self.check_length:
            if self.check_length == 0:
                raise InvalidLength("the code is empty")
            raise InvalidLength(f"a code needs more than {self.check_length} character(s)")
        cut = len(code) - self.check_length
        return code[:cut], code[cut:]

    def validate(self, code: str) -> str:
        """Return ``code`` in canonical form when its check character(s) match; raise
        otherwise. Case and the alphabets' folding rules apply (``u`` reads as ``U``)."""
        body, check = self.split(code)
        body = self.alphabet.canonical(body)
        check = self.check_alphabet.canonical(check)
        self.require_body_length(len(body))
        if not self.verify_values(self.alphabet.values(body), self.check_alphabet.values(check)):
            raise InvalidCheck(f"the check character of {code} does not match")
        return body + check

    def is_valid(self, code: str) -> bool:
        try:
            self.validate(code)
        except ValueError:
            return False
        return True

    # -- bulk (numpy) ----------------------------------------------------------
    def compute_bulk(self, bodies: ValueMatrix) -> IntMatrix:
        """Check values for an ``(n, length)`` matrix of body values: ``(n, check_length)``.

        The default calls :meth:`compute_values` per row; fast schemes override it with
        column-wise arithmetic.
        """
        import numpy as np

        self.require_body_length(bodies.shape[1])
        out = np.empty((bodies.shape[0], self.check_length), dtype=np.int64)
        for i, row in enumerate(bodies.tolist()):
            out[i] = self.compute_values(row)
        return out

    def verify_bulk(self, codes: ValueMatrix) -> npt.NDArray[np.bool_]:
        """For an ``(n, length + check_length)`` matrix of values, which rows are valid.

        Body columns hold body-alphabet values and check columns check-alphabet values;
        a negative value (a symbol outside the alphabet) makes its row invalid.
        """
        import numpy as np

        cut = codes.shape[1] - self.check_length
        self.require_body_length(cut)
        ok = codes.min(axis=1) >= 0
        bodies = codes[:, :cut]
        if not ok.all():
            bodies = np.where(bodies < 0, 0, bodies)
        checks = self.compute_bulk(bodies)
        if self.check_length == 1:
            valid: npt.NDArray[np.bool_] = ok & (checks[:, 0] == codes[:, cut])
        else:
            valid = ok & (checks == codes[:, cut:]).all(axis=1)
        return valid

    def code_matrix(
        self, codes: Sequence[str] | npt.NDArray[np.bytes_], width: int
    ) -> npt.NDArray[np.int8]:
        """Canonical code texts as an ``(n, width)`` matrix of symbol values, body and
        check columns each in their own alphabet; -1 marks a symbol outside it, and every
        position of a code whose length is not ``width``.

        The matrix is int8 and column-major, so that the column-at-a-time bulk methods
        read each column as one contiguous run.
        """
        import numpy as np

        raw = _byte_matrix(codes, width)
        body_table = self.alphabet.lookup_table().astype(np.int8)
        out = np.empty(raw.shape, dtype=np.int8, order="F")
        if self.check_alphabet.symbols == self.alphabet.symbols:
            out[:] = body_table.take(raw)
            return out
        cut = width - self.check_length
        out[:, :cut] = body_table.take(raw[:, :cut])
        out[:, cut:] = self.check_alphabet.lookup_table().astype(np.int8).take(raw[:, cut:])
        return out

    def __repr__(self) -> str:
        return f"<scheme {self.name} over {self.alphabet.name}>"


def _byte_matrix(
    codes: Sequence[str] | npt.NDArray[np.bytes_], width: int
) -> npt.NDArray[np.uint8]:
    """Codes as an ``(n, width)`` byte matrix; a code of another length becomes all NUL
    (no alphabet holds NUL, so its row reads as invalid), a non-ASCII character ``?``."""
    import numpy as np

    items: list[Any] = codes.tolist() if isinstance(codes, np.ndarray) else list(codes)
    n = len(items)
    if n and isinstance(items[0], bytes):
        joined = b"\n".join(items) + b"\n"
    else:
        joined = ("\n".join(items) + "\n").encode("ascii", "replace")
    if n and len(joined) == n * (width + 1) and joined.count(b"\n") == n:
        # the common case in one pass: n codes of exactly `width` bytes, each followed
        # by a newline
        framed = np.frombuffer(joined, dtype=np.uint8).reshape(n, width + 1)
        if (framed[:, width] == 0x0A).all():
            return framed[:, :width]
    # some code has another length: short ones pad with NUL, long ones are blanked
    texts = [c if isinstance(c, bytes) else str(c).encode("ascii", "replace") for c in items]
    padded = np.asarray(texts, dtype=f"S{width + 1}").view(np.uint8).reshape(n, width + 1)
    raw = padded[:, :width].copy()
    raw[padded[:, width] != 0] = 0
    return raw
