"""What a stocktake found, kept column-wise: every scanned line's class, the codes not
scanned, and the likely intended code of each typo (see :mod:`issuer.stocktake.reconcile`)."""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from issuer.checking.codes import CodeFormat
from issuer.checking.likely import advice
from issuer.readers.scanfile import Table
from issuer.register.codeset import CodeSet
from issuer.register.models import ISSUED
from issuer.register.places import OtherSeries
from issuer.register.stocktake import LastSeen, StandingDetail, VoidDetail

#: the classes of a scanned line, in report order
LINE_CLASSES = (
    "issued", "elsewhere", "out_of_scope", "expired", "suspended", "voided", "other_series", "bad_check",
    "not_issued", "malformed",
)  # fmt: skip
#: the keys of ``counts`` that say something is to be looked at (all but ``issued``)
COUNT_KEYS = (
    "issued", "elsewhere", "out_of_scope", "expired", "suspended", "voided", "other_series", "bad_check",
    "not_issued", "malformed", "duplicates", "missing",
)  # fmt: skip
#: lines that are not scans, counted alike in every file format
NOTE_KEYS = ("blank_lines", "comment_lines")
#: what each class means, for people
MEANINGS = {
    "issued": "in use, and found where expected",
    "elsewhere": "found, but not at its expected place",
    "out_of_scope": "issued in this series, but outside this count",
    "expired": "past its validity: collect or renew",
    "suspended": "suspended (reported lost?), found again",
    "voided": "voided: should have been pulled",
    "other_series": "a code of another series",
    "bad_check": "check character wrong: misread or mistyped",
    "not_issued": "a valid code this register never issued",
    "malformed": "not a code of this series",
    "duplicates": "codes scanned more than once",
    "missing": "expected, but not scanned",
}


def close_advice(likely: Sequence[Likely]) -> str | None:
    """Words for the clerk when two or more likely codes (among the missing ones, if any
    is missing) are about equally likely (:func:`issuer.checking.likely.advice`)."""
    first = [item for item in likely if item.missing] or list(likely)
    return advice([item.likelihood for item in first])


class Tally:
    """How many times each code was scanned, from a numpy array of the scanned codes:
    a million scans cost two arrays, not a dictionary of a million strings."""

    def __init__(self, scanned: Any, like: CodeSet) -> None:
        import numpy as np

        keys, _ = like._keys(scanned)
        keys = np.sort(keys)
        starts = np.flatnonzero(np.concatenate(([True], keys[1:] != keys[:-1]))) if keys.size else np.zeros(0, int)
        self.counts = np.diff(np.append(starts, keys.size))
        self.codes = like.with_keys(keys[starts])

    def _at(self, code: str) -> int | None:
        return self.codes.index_of(code)

    def __getitem__(self, code: str) -> int:
        at = self._at(code)
        return 0 if at is None else int(self.counts[at])

    def __contains__(self, code: object) -> bool:
        return isinstance(code, str) and code in self.codes

    def __len__(self) -> int:
        return len(self.codes)

    def repeated(self) -> list[tuple[str, int]]:
        """(code, times) for every code scanned more than once, in code order."""
        more = self.counts > 1
        return list(zip(self.codes.codes(more), self.counts[more].tolist()))


@dataclass(frozen=True)
class Likely:
    """An issued code one common error away from what was scanned."""

    code: str
    display: str
    error: str
    description: str
    missing: bool
    #: the probability of the slip that turns this code into the scan (issuer.checking.likely)
    likelihood: float = 0.0

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass(frozen=True)
class ScanLine:
    """One scanned line, classified."""

    line: int
    scanned: str
    code: str | None
    display: str | None
    status: str
    times: int
    detail: str
    likely: tuple[Likely, ...]
    extra: dict[str, str]


@dataclass(frozen=True)
class MissingCode:
    code: str
    display: str
    last_seen_at: datetime | None
    last_seen_where: str | None
    perhaps: str | None  # a scanned line that is probably this code, mistyped

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass
class Reconciliation:
    """A stocktake reconciled against one series, kept column-wise so that a million
    lines cost no more than they must; :meth:`lines` yields them one by one."""

    series: str
    source: str
    shape: CodeFormat = field(repr=False)
    table: Table = field(repr=False)
    canonical: list[str | None] = field(repr=False)
    statuses: list[str] = field(repr=False)
    times: Tally = field(repr=False)
    reasons: dict[int, str] = field(repr=False)
    voids: dict[str, VoidDetail] = field(repr=False)
    likely: dict[str, tuple[Likely, ...]] = field(repr=False)
    likely_by_line: dict[int, tuple[Likely, ...]] = field(repr=False)
    missing: list[str] = field(repr=False)
    seen_before: dict[str, LastSeen] = field(repr=False)
    perhaps: dict[str, int] = field(repr=False)
    counts: dict[str, int] = field(default_factory=dict)
    scans: int = 0
    #: the expected place of each code that has one, and where each line was seen
    places: dict[str, str] = field(default_factory=dict, repr=False)
    seen_where: list[str] | None = field(default=None, repr=False)
    #: scanned lines that are codes of another series, by index
    others: dict[int, OtherSeries] = field(default_factory=dict, repr=False)
    #: the count's scope in words, and the zone of scan times written without one
    scope: str = ""
    zone: str = "UTC"
    #: expected codes (the scope's issued codes) and how many of them were found
    expected: int = 0
    found: int = 0
    #: validity and suspension of the expired and suspended codes found
    standings: dict[str, StandingDetail] = field(default_factory=dict, repr=False)

    @property
    def time_column(self) -> str | None:
        return self.table.roles.get("time")

    @property
    def where_column(self) -> str | None:
        return self.table.roles.get("where")

    @property
    def clean(self) -> bool:
        """Every scan an issued code, each once, and nothing missing."""
        return all(self.counts[key] == 0 for key in COUNT_KEYS if key != "issued")

    def detail(self, index: int, code: str | None, status: str) -> str:
        """What the report says about line ``index`` beside its status."""
        if status == "malformed":
            return self.reasons.get(index, "")
        if status == "voided" and code is not None:
            void = self.voids.get(code)
            if void is None:
                return "voided"
            text = f"voided: {void.reason}" if void.reason else "voided"
            return f"{text}; replaced by {self.shape.display(void.replacement)}" if void.replacement else text
        if status in ("expired", "suspended") and code is not None:
            held = self.standings.get(code)
            if held is None:
                return status
            if status == "expired":
                return f"expired: valid until {held.valid_until:%Y-%m-%d %H:%M} UTC" if held.valid_until else "expired"
            since = f" since {held.suspended_at:%Y-%m-%d %H:%M} UTC" if held.suspended_at else ""
            return f"suspended{since}: {held.suspend_reason}"
        if status == "bad_check":
            return "the check character does not match: a misread or mistyped code"
        if status == "not_issued":
            return "a valid code this register never issued"
        if status == "other_series":
            other = self.others.get(index)
            return f"belongs to series {other.series} ({other.status})" if other else "belongs to another series"
        if status == "elsewhere" and code is not None:
            seen = self.seen_where[index] if self.seen_where is not None else ""
            return f"expected at {self.places.get(code, '?')}, seen at {seen or '?'}"
        if status == "out_of_scope":
            return "issued in this series, outside this count"
        return ""

    def line(self, index: int) -> ScanLine:
        """The ``index``-th scanned line (counting from 0, blank lines left out)."""
        table = self.table
        code, status = self.canonical[index], self.statuses[index]
        if code is not None:
            likely = self.likely.get(code, ())
        else:
            likely = self.likely_by_line.get(index, ())
        return ScanLine(
            line=table.lines[index],
            scanned=table.codes[index],
            code=code,
            display=self.shape.display(code) if code is not None else None,
            status=status,
            times=self.times[code] if code is not None else 1,
            detail=self.detail(index, code, status),
            likely=likely,
            extra={header: values[index] for header, values in table.columns.items()},
        )

    def lines(self, *, skip_issued: bool = False) -> Iterator[ScanLine]:
        """Every scanned line in file order (only those not simply issued, if asked)."""
        if skip_issued:
            for index, status in enumerate(self.statuses):
                if status != ISSUED:
                    yield self.line(index)
            return
        for index in range(len(self.statuses)):
            yield self.line(index)

    def missing_codes(self) -> Iterator[MissingCode]:
        """The issued codes nobody scanned, in code order."""
        for code in self.missing:
            seen = self.seen_before.get(code)
            yield MissingCode(
                code,
                self.shape.display(code),
                seen.at if seen else None,
                seen.where if seen else None,
                f"line {self.perhaps[code]}" if code in self.perhaps else None,
            )

    def duplicates(self) -> list[tuple[str, int, list[int], list[str]]]:
        """(code, times scanned, lines, distinct places) for each code scanned twice or more."""
        repeated = {code for code, _ in self.times.repeated()}
        lines: dict[str, list[int]] = {code: [] for code in repeated}
        places: dict[str, dict[str, None]] = {code: {} for code in repeated}
        where = self.table.role("where")
        for index, (number, code) in enumerate(zip(self.table.lines, self.canonical)):
            if code in repeated:
                lines[code].append(number)
                if where is not None and where[index]:
                    places[code][where[index]] = None
        return [(code, self.times[code], lines[code], list(places[code])) for code in lines]
