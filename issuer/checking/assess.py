"""Measured error detection of a check-character scheme on one series shape.

Which mistakes does a scheme catch on *this* series? Claims about a method are made for
its own alphabet and usual length; a series owner needs the figure for their alphabet
and length. :func:`assess` measures it: it applies every error of each class to every
code (or to a seeded random sample of error instances when the shape has more than
about 10^6 bodies) and counts how many of the altered codes fail verification.

Error classes (J. Verhoeff, *Error Detecting Decimal Codes*, Mathematical Centre Tract
29, Mathematisch Centrum, Amsterdam, 1969): single substitution (a->b), adjacent
transposition (ab->ba), jump transposition (abc->cba), twin (aa->bb), jump twin
(aca->bcb) and, for decimal alphabets only, phonetic (a0<->1a, a = 2..9, "fifty" heard
for "fifteen"). Errors reach the check characters as well as the body. A rate is
detected / errors that change the code; an error that puts a symbol where the series'
alphabet does not allow it counts as detected, because verification rejects it.
Omission and insertion change the length, which a fixed-length series rejects before
any check character is consulted.

The weighted figure is the expected share of human errors that pass undetected:
Verhoeff's frequencies (:data:`~issuer.checking.neighbours.ERROR_WEIGHTS`) renormalised over
the classes measured.

Exhaustive runs (:class:`~issuer.checking.errorspace.ExhaustiveCounts`) verify through one
table of every body's check (one bulk call of the scheme), so each error variant costs
a few array operations; sampled runs draw error instances uniformly (rejection
sampling) and verify them with the scheme's bulk form, giving a Wilson score interval
per class.

>>> from issuer.checking.schemes import get_scheme
>>> result = assess(get_scheme("luhn"), 3)
>>> result.rates["single"], result.rates["jump"] < 1
(1.0, True)
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

from issuer.checking.errorspace import ExhaustiveCounts, SymbolSpace, compares_with_computed
from issuer.checking.neighbours import ERROR_CLASSES, ERROR_WEIGHTS
from issuer.checking.schemes.base import Scheme
from issuer.errors import InvalidLength

#: Shapes with at most this many bodies are measured over every body.
EXHAUSTIVE_LIMIT = 1_100_000
#: bodies measured exhaustively when every altered code must go to the scheme's own
#: verification (no table shortcut); bigger shapes are sampled unless asked otherwise
VERIFIED_EXHAUSTIVE_LIMIT = 50_000
DEFAULT_SAMPLES = 50_000
DEFAULT_SEED = 1969
CONFIDENCE = 0.95
_Z = 1.959963984540054  # two-sided 95 % normal quantile
STRUCTURAL_NOTE = (
    "omission and insertion are caught structurally: they change the length, which a "
    "fixed-length series rejects before the check character is consulted"
)

Progress = Callable[[float], None]


def wilson_interval(successes: int, trials: int, z: float = _Z) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion (E. B. Wilson, JASA 22, 1927)."""
    if trials == 0:
        return (0.0, 1.0)
    p = successes / trials
    denominator = 1 + z * z / trials
    centre = (p + z * z / (2 * trials)) / denominator
    half = z * math.sqrt(p * (1 - p) / trials + z * z / (4 * trials * trials)) / denominator
    low = 0.0 if successes == 0 else max(0.0, centre - half)
    high = 1.0 if successes == trials else min(1.0, centre + half)
    return (low, high)


@dataclass(frozen=True)
class ClassResult:
    """Counts for one error class; ``low``/``high`` bound the rate when sampled."""

    error: str
    errors: int
    detected: int
    low: float | None = None
    high: float | None = None

    @property
    def rate(self) -> float | None:
        return self.detected / self.errors if self.errors else None


@dataclass(frozen=True)
class Assessment:
    """Detection rates of one scheme on one shape (alphabet, body length)."""

    scheme: str
    title: str
    alphabet: str
    alphabet_size: int
    check_alphabet_size: int
    check_length: int
    length: int
    exhaustive: bool
    capacity: int
    samples: int | None
    seed: int | None
    results: Mapping[str, ClassResult | None] = field(default_factory=dict)

    @property
    def rates(self) -> dict[str, float | None]:
        return {key: (r.rate if r else None) for key, r in self.results.items()}

    @property
    def weights_used(self) -> dict[str, float]:
        """Verhoeff's shares renormalised over the classes that were measured."""
        measured = [key for key, rate in self.rates.items() if rate is not None]
        total = sum(ERROR_WEIGHTS[key] for key in measured)
        return {key: ERROR_WEIGHTS[key] / total for key in measured} if total else {}

    @property
    def undetected_weighted(self) -> float | None:
        """Expected share of human errors (of the measured classes) passing undetected."""
        weights = self.weights_used
        if not weights:
            return None
        return sum(w * (1 - (self.rates[key] or 0.0)) for key, w in weights.items())

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "scheme": self.scheme,
            "title": self.title,
            "alphabet": self.alphabet,
            "alphabet_size": self.alphabet_size,
            "check_alphabet_size": self.check_alphabet_size,
            "check_length": self.check_length,
            "length": self.length,
            "exhaustive": self.exhaustive,
            "capacity": self.capacity,
            "rates": self.rates,
            "undetected_weighted": self.undetected_weighted,
            "weights_used": self.weights_used,
            "errors": {k: (r.errors if r else None) for k, r in self.results.items()},
            "detected": {k: (r.detected if r else None) for k, r in self.results.items()},
            "omission_insertion": STRUCTURAL_NOTE,
        }
        if not self.exhaustive:
            out["samples_per_class"] = self.samples
            out["seed"] = self.seed
            out["confidence"] = CONFIDENCE
            out["intervals"] = {
                k: ([r.low, r.high] if r and r.errors else None) for k, r in self.results.items()
            }
        return out


def _sampled_count(
    space: SymbolSpace, error: str, samples: int, rng: Any, tick: Callable[[float], None]
) -> tuple[int, int]:
    """(errors drawn, detected) for ``samples`` uniformly drawn instances of a class."""
    if not space.sites(error):
        return 0, 0
    drawn = detected = proposals = 0
    chunk = max(4096, min(1 << 16, samples))
    # instances of some classes are rare among proposals (a twin needs aa): size each
    # round by the acceptance seen so far; give up on a class none of 10^6 proposals hit
    while drawn < samples and not (drawn == 0 and proposals >= 1_000_000):
        _codes, typed = space.propose(error, rng, chunk)
        proposals += chunk
        typed = typed[: samples - drawn]
        drawn += typed.shape[0]
        detected += int((~space.valid(typed)).sum())
        tick(drawn / samples)
        acceptance = max(drawn, 1) / proposals
        chunk = int(min(1 << 20, max(4096, 1.1 * (samples - drawn) / acceptance)))
    return drawn, detected


def assess(
    scheme: Scheme,
    length: int,
    *,
    classes: Iterable[str] = ERROR_CLASSES,
    samples: int = DEFAULT_SAMPLES,
    seed: int = DEFAULT_SEED,
    exhaustive: bool | None = None,
    progress: Progress | None = None,
) -> Assessment:
    """Measure ``scheme`` on bodies of ``length`` symbols of its alphabet.

    ``exhaustive=None`` measures every body when there are at most
    :data:`EXHAUSTIVE_LIMIT` (:data:`VERIFIED_EXHAUSTIVE_LIMIT` for a scheme whose own
    verification admits several checks per body), else ``samples`` error instances per
    class drawn with ``seed``. ``phonetic`` is ``None`` outside decimal alphabets. ``progress`` receives
    the share of work done, from 0 to 1.
    """
    import numpy as np

    space = SymbolSpace(scheme, length)
    wanted = [key for key in ERROR_CLASSES if key in set(classes)]
    auto = exhaustive is None
    if exhaustive is None:
        exhaustive = space.bodies <= EXHAUSTIVE_LIMIT
    if samples < 1:
        raise InvalidLength("the number of samples must be at least 1")
    report = progress or (lambda share: None)
    results: dict[str, ClassResult | None] = {}
    measured = [key for key in wanted if space.sites(key)]
    if auto and exhaustive and space.bodies > VERIFIED_EXHAUSTIVE_LIMIT:
        # several check characters under the scheme's own condition: no table shortcut
        many = not compares_with_computed(scheme) and space.check_length > 1
        exhaustive = not many
    engine = ExhaustiveCounts(space) if exhaustive else None
    if engine is not None and auto and not engine.unique:
        exhaustive = space.bodies <= VERIFIED_EXHAUSTIVE_LIMIT
    if engine is not None and exhaustive:
        steps = sum(len(space.sites(key)) for key in measured) or 1
        done = [0]

        def tick() -> None:
            done[0] += 1
            report(done[0] / steps)

        for key in measured:
            errors, detected = engine.count(key, tick)
            results[key] = ClassResult(key, errors, detected)
    else:
        rng = np.random.default_rng(seed)
        for i, key in enumerate(measured):

            def tick_class(share: float, done: int = i) -> None:
                report((done + share) / len(measured))

            drawn, detected = _sampled_count(space, key, samples, rng, tick_class)
            low, high = wilson_interval(detected, drawn)
            results[key] = ClassResult(key, drawn, detected, low, high)
    for key in wanted:
        results.setdefault(key, None)
    report(1.0)
    return Assessment(
        scheme=scheme.name,
        title=scheme.title,
        alphabet=scheme.alphabet.name,
        alphabet_size=scheme.alphabet.size,
        check_alphabet_size=scheme.check_alphabet.size,
        check_length=scheme.check_length,
        length=length,
        exhaustive=exhaustive,
        capacity=space.bodies,
        samples=None if exhaustive else samples,
        seed=None if exhaustive else seed,
        results={key: results[key] for key in wanted},
    )


__all__ = [
    "CONFIDENCE",
    "DEFAULT_SAMPLES",
    "DEFAULT_SEED",
    "EXHAUSTIVE_LIMIT",
    "STRUCTURAL_NOTE",
    "Assessment",
    "ClassResult",
    "assess",
    "wilson_interval",
]
