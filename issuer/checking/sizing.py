"""How long should a series' numbers be? Fill, and the chance the first suggestion is right.

A series expects to issue ``expect`` codes over its life. For a body length L its range
holds ``capacity = N^L`` valid codes (one per body) and is filled to
``fill = expect / capacity``. When a clerk mistypes an issued code, the desk check
(:mod:`issuer.checking.neighbours`, filtered to issued codes) lists the issued codes one error
away. The suggestion is unambiguous when that list holds exactly one code: the original.

Reasoning, per error instance (issued code x, error e, typed text t = e(x)), for the
two commonest classes, single substitution and adjacent transposition:

* if t is itself valid the check passes it (undetected): no correction at all;
* otherwise let k be the number of valid codes other than x one error of these two
  kinds away from t. x is always one of them, since both kinds undo themselves. Each
  of the k others is issued with probability ``fill`` when issued codes are spread
  uniformly over the range (as scattered issuance spreads them), independently to a
  good approximation, so the list holds x alone with probability ``(1 - fill)^k``.

``unique_correction`` is the mean of that quantity over error instances, per class,
then weighted by Verhoeff's frequencies of the two classes (J. Verhoeff, *Error
Detecting Decimal Codes*, Mathematical Centre Tract 29, 1969: 79.05 % and 10.21 %).
k is counted from the scheme itself, not estimated by a rule of thumb: exhaustively
over every code and every error when the shape is small, else over uniformly drawn
error instances (each with its exact k).

In-order issuance packs codes at the bottom of the range, so its neighbourhoods are
fuller than this model assumes; the figure is for scattered series.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from issuer.checking.assess import DEFAULT_SEED
from issuer.checking.errorspace import SymbolSpace, compares_with_computed
from issuer.checking.neighbours import ERROR_WEIGHTS
from issuer.checking.schemes.base import Scheme
from issuer.errors import InvalidLength, IssuerError

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

    IntArray = npt.NDArray[np.int64]
    FloatArray = npt.NDArray[np.float64]

#: The classes sizing considers, and their weights renormalised between them.
SIZING_CLASSES = ("single", "adjacent")
SIZING_WEIGHTS = {
    key: ERROR_WEIGHTS[key] / sum(ERROR_WEIGHTS[k] for k in SIZING_CLASSES)
    for key in SIZING_CLASSES
}
#: Error instances counted exhaustively up to this many per class, else sampled.
SIZING_EXHAUSTIVE_LIMIT = 60_000
DEFAULT_SIZING_SAMPLES = 5_000
LONGER = 3
_Z = 1.959963984540054


@dataclass(frozen=True)
class SizingRow:
    """One candidate body length. ``unique_correction`` is ``None`` when the expected
    codes do not fit; ``margin`` is its 95 % half-width when sampled (else 0);
    ``undetected`` is the weighted share of the errors the check passes."""

    length: int
    capacity: int
    fill: float
    fits: bool
    exhaustive: bool
    instances: int
    undetected: float
    unique: dict[str, float | None]
    unique_correction: float | None
    margin: float

    def to_dict(self) -> dict[str, Any]:
        return {
            "length": self.length,
            "capacity": self.capacity,
            "fill": self.fill,
            "fits": self.fits,
            "unique_correction": self.unique_correction,
            "unique_by_class": self.unique,
            "undetected": self.undetected,
            "exhaustive": self.exhaustive,
            "instances": self.instances,
            "margin": self.margin,
        }


def _neighbour_counts(space: SymbolSpace, typed: IntArray) -> IntArray:
    """For each row, how many valid codes lie one single substitution or one adjacent
    transposition away.

    Each position's substitutions go to the scheme in one stack. For a scheme that
    verifies by comparing with the computed check, a body substitution is valid when
    the new body's check equals the typed one, and a substitution in the check
    characters only when it writes the body's own check; a scheme with its own
    condition verifies every candidate.
    """
    import numpy as np

    scheme, length = space.scheme, space.length
    compares = compares_with_computed(scheme)
    values = space.values(typed)
    n = typed.shape[0]
    body_ok = values[:, :length] >= 0
    bodies = np.where(body_ok, values[:, :length], 0)
    checks = values[:, length:]
    count = np.zeros(n, dtype=np.int64)
    last = length if compares else space.width
    for p in range(last):
        allowed = space.allowed[p]
        changed = typed[:, p, None] != allowed[None, :]
        if compares:
            rest_ok = np.asarray(np.delete(body_ok, p, axis=1).all(axis=1))
            candidates = np.repeat(bodies, allowed.size, axis=0)
            candidates[:, p] = np.tile(space.value_of[p][allowed], n)
            computed = scheme.compute_bulk(candidates).reshape(n, allowed.size, -1)
            still = (computed == checks[:, None, :]).all(axis=2) & rest_ok[:, None]
        else:
            candidates = np.repeat(values, allowed.size, axis=0)
            candidates[:, p] = np.tile(space.value_of[p][allowed], n)
            still = scheme.verify_bulk(candidates).reshape(n, allowed.size)
        count += (still & changed).sum(axis=1)
    if compares and space.check_length:
        own = scheme.compute_bulk(bodies)
        matches = own == checks
        for j in range(space.check_length):
            others = np.delete(matches, j, axis=1).all(axis=1)
            count += body_ok.all(axis=1) & others & ~matches[:, j]
    swaps = []
    for p in range(space.width - 1):
        candidate = values.copy()
        candidate[:, p] = space.value_of[p][typed[:, p + 1]]
        candidate[:, p + 1] = space.value_of[p + 1][typed[:, p]]
        swaps.append(candidate)
    if swaps:
        still = scheme.verify_bulk(np.concatenate(swaps)).reshape(len(swaps), n)
        changed = np.stack([typed[:, p] != typed[:, p + 1] for p in range(len(swaps))])
        count += (still & changed).sum(axis=0)
    return count


def _all_instances(space: SymbolSpace, error: str) -> IntArray:
    """Every typed text an error of the class makes from every code."""
    import numpy as np

    codes = space.codes(space.all_bodies())
    out = []
    for p, q in space.sites(error):
        if error == "single":
            for u in space.allowed[p]:
                typed = codes[codes[:, p] != u]
                typed[:, p] = u
                out.append(typed)
        else:
            typed = codes[codes[:, p] != codes[:, q]]
            typed[:, [p, q]] = typed[:, [q, p]]
            out.append(typed)
    return np.concatenate(out) if out else np.empty((0, space.width), dtype=np.int64)


def _instances_per_code(space: SymbolSpace, error: str) -> int:
    """An upper bound of the class's instances per code, to choose exhaustive counting."""
    if error == "single":
        return sum(len(a) - 1 for a in space.allowed)
    return space.width - 1


def _unique_shares(space: SymbolSpace, typed: IntArray, fill: float) -> tuple[FloatArray, int]:
    """Per instance, the probability the desk list holds the original alone; and how
    many instances pass the check undetected."""
    import numpy as np

    valid = space.valid(typed)
    others = _neighbour_counts(space, typed) - 1  # the original is always among them
    share = np.where(valid, 0.0, np.power(1.0 - fill, np.maximum(others, 0)))
    return share, int(np.count_nonzero(valid))


def size_length(
    scheme: Scheme,
    length: int,
    expect: int,
    *,
    samples: int = DEFAULT_SIZING_SAMPLES,
    seed: int = DEFAULT_SEED,
    exhaustive: bool | None = None,
) -> SizingRow:
    """The sizing figures for one body length (see the module docstring)."""
    import numpy as np

    if expect < 1:
        raise InvalidLength("the expected number of codes must be at least 1")
    space = SymbolSpace(scheme, length)
    capacity = space.bodies
    fill = expect / capacity
    if expect > capacity:  # the series does not fit: nothing to correct
        return SizingRow(
            length=length,
            capacity=capacity,
            fill=fill,
            fits=False,
            exhaustive=True,
            instances=0,
            undetected=0.0,
            unique={k: None for k in SIZING_CLASSES},
            unique_correction=None,
            margin=0.0,
        )
    rng = np.random.default_rng(seed)
    unique: dict[str, float | None] = {}
    passed: dict[str, float] = {}
    margins: dict[str, float] = {}
    instances = 0
    all_exhaustive = True
    for key in SIZING_CLASSES:
        if exhaustive is None:
            small = capacity * _instances_per_code(space, key) <= SIZING_EXHAUSTIVE_LIMIT
        else:
            small = exhaustive
        if small:
            typed = _all_instances(space, key)
        else:
            all_exhaustive = False
            typed = _draw(space, key, samples, rng)
        if typed.shape[0] == 0:
            unique[key] = None
            continue
        share, undetected = _unique_shares(space, typed, min(fill, 1.0))
        unique[key] = float(share.mean())
        passed[key] = undetected / typed.shape[0]
        instances += typed.shape[0]
        if not small and typed.shape[0] > 1:
            margins[key] = _Z * float(share.std(ddof=1)) / math.sqrt(typed.shape[0])
    weights = {k: SIZING_WEIGHTS[k] for k, v in unique.items() if v is not None}
    total = sum(weights.values())

    def combine(figures: dict[str, float]) -> float:
        return sum(weights[k] * figures[k] for k in weights) / total if total else 0.0

    measured = {k: v for k, v in unique.items() if v is not None}
    return SizingRow(
        length=length,
        capacity=capacity,
        fill=fill,
        fits=True,
        exhaustive=all_exhaustive,
        instances=instances,
        undetected=combine(passed),
        unique=unique,
        unique_correction=combine(measured) if total else None,
        margin=math.sqrt(sum((weights[k] * m / total) ** 2 for k, m in margins.items())),
    )


def _draw(space: SymbolSpace, error: str, samples: int, rng: Any) -> IntArray:
    import numpy as np

    parts, drawn = [], 0
    while drawn < samples:
        _codes, typed = space.propose(error, rng, max(1024, 2 * (samples - drawn)))
        parts.append(typed[: samples - drawn])
        drawn += parts[-1].shape[0]
    return np.concatenate(parts)


def size_series(
    scheme: Scheme,
    length: int,
    expect: int,
    *,
    longer: int = LONGER,
    samples: int = DEFAULT_SIZING_SAMPLES,
    seed: int = DEFAULT_SEED,
    progress: Callable[[float], None] | None = None,
) -> list[SizingRow]:
    """Sizing rows for ``length`` and the ``longer`` next lengths.

    A length the scheme cannot serve ends the list (a scheme whose weights run out).
    """
    rows: list[SizingRow] = []
    for step in range(longer + 1):
        try:
            rows.append(size_length(scheme, length + step, expect, samples=samples, seed=seed))
        except IssuerError:
            if not rows:
                raise
            break
        if progress:
            progress((step + 1) / (longer + 1))
    return rows


__all__ = [
    "DEFAULT_SIZING_SAMPLES",
    "SIZING_CLASSES",
    "SIZING_WEIGHTS",
    "SizingRow",
    "size_length",
    "size_series",
]
