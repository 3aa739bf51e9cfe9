"""Column-wise table lookups shared by the table-driven schemes (Damm, Verhoeff, Gumm).

A body matrix is folded one column at a time: ``state = table[state, symbol]``, every
row of the matrix at once. numpy is imported inside the functions only.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

    from issuer.checking.schemes.base import ValueMatrix


def flat_tables(tables: Sequence[Sequence[Sequence[int]]]) -> npt.NDArray[np.int64]:
    """``k`` tables of shape ``(states, symbols)`` as one ``(k, states * symbols)`` array."""
    import numpy as np

    return np.asarray(tables, dtype=np.int64).reshape(len(tables), -1)


def fold_columns(
    bodies: ValueMatrix,
    flat: npt.NDArray[np.int64],
    symbols: int,
    schedule: Sequence[tuple[int, int]],
    start: int = 0,
) -> npt.NDArray[np.int64]:
    """Run ``state = tables[t][state][bodies[:, column]]`` for ``(column, t)`` in order."""
    import numpy as np

    state = np.full(bodies.shape[0], start, dtype=np.int64)
    for column, which in schedule:
        index = state * symbols
        index += bodies[:, column]
        state = flat[which].take(index)
    return state
