"""How full a series is, and the levels at which it warns.

Each series keeps warning levels as percentages of its capacity (80 and 95 unless it
says otherwise): issuing says so when a batch crosses one, ``series list/show`` mark a
series past one, and ``doctor`` reports series past the last.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from issuer.errors import InvalidFormat
from issuer.register.models import DEFAULT_FILL_LEVELS, Series


def parse_levels(text: str) -> tuple[int, ...]:
    """``"80,95"`` -> ``(80, 95)``; ``"none"`` or empty -> no warnings."""
    value = (text or "").strip().lower()
    if value in ("", "none"):
        return ()
    try:
        levels = tuple(sorted({int(part.strip().rstrip("%")) for part in value.split(",")}))
    except ValueError:
        raise InvalidFormat(f"warning levels {text!r} must be percentages separated by commas, e.g. 80,95") from None
    if any(not 1 <= level <= 100 for level in levels) or len(levels) > 5:
        raise InvalidFormat("warning levels are 1 to 5 percentages from 1 to 100")
    return levels


def levels_text(levels: tuple[int, ...]) -> str:
    return ",".join(map(str, levels)) if levels else "none"


def series_levels(series: Series) -> tuple[int, ...]:
    return parse_levels(series.fill_levels if series.fill_levels is not None else DEFAULT_FILL_LEVELS)


def level_reached(levels: tuple[int, ...], capacity: int, held: int) -> int | None:
    """The highest level that ``held`` codes out of ``capacity`` have reached."""
    reached = [level for level in levels if held * 100 >= level * capacity]
    return reached[-1] if reached else None


@dataclass(frozen=True)
class FillWarning:
    """A batch took a series past a warning level."""

    series: str
    level: int
    last_level: bool
    held: int
    capacity: int
    fill: float

    @property
    def remaining(self) -> int:
        return self.capacity - self.held

    def as_dict(self) -> dict[str, Any]:
        return {**self.__dict__, "remaining": self.remaining}

    def message(self) -> str:
        return (
            f"series {self.series} is {self.fill:.1%} full (past its {self.level}% warning level): "
            f"{self.remaining:,} of {self.capacity:,} numbers left"
        )


def after_batch(session: Session, key: str, count: int) -> tuple[float, FillWarning | None]:
    """How full series ``key`` is, and whether the last ``count`` codes issued from it
    took it past a level. Read after the batch; with other desks issuing at once it may
    name a level their batch crossed, which is still worth saying."""
    series = session.scalar(select(Series).where(Series.key == key))
    if series is None:
        return 0.0, None
    capacity = series.range_end - series.range_start + 1
    fill = series.code_count / capacity
    levels = series_levels(series)
    after = level_reached(levels, capacity, series.code_count)
    before = level_reached(levels, capacity, max(series.code_count - count, 0))
    if after is None or after == before:
        return fill, None
    return fill, FillWarning(series.key, after, after == levels[-1], series.code_count, capacity, fill)


__all__ = ["FillWarning", "after_batch", "level_reached", "levels_text", "parse_levels", "series_levels"]
