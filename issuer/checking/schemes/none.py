"""No check character at all, for series that must match an existing numbering.

There is no publication to follow: the code is the body. Nothing is detected; the
assessment shows that plainly.

>>> from issuer.checking.alphabets import DIGITS
>>> NoCheckScheme(DIGITS).append("0042")
'0042'
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

from issuer.checking.schemes.base import Scheme

if TYPE_CHECKING:
    from issuer.checking.schemes.base import IntMatrix, ValueMatrix


class NoCheckScheme(Scheme):
    name = "none"
    title = "No check character"
    source = "none (the code is the body)"
    natural_alphabet = "digits"
    check_length = 0

    def compute_values(self, body: Sequence[int]) -> tuple[int, ...]:
        return ()

    def compute_bulk(self, bodies: ValueMatrix) -> IntMatrix:
        import numpy as np

        return np.zeros((bodies.shape[0], 0), dtype=np.int64)
