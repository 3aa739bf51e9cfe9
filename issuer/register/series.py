"""A stored series: its code shape, its permutation, finding it, and its state.

Defining and reshaping a series (the spec, its checks, the acts) is
:mod:`issuer.register.defining`.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass
from datetime import datetime
from functools import lru_cache
from typing import TYPE_CHECKING

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from issuer import limits
from issuer.checking.codes import CodeFormat
from issuer.checking.schemes import get_scheme
from issuer.errors import NotFound, RegisterError, did_you_mean
from issuer.register.fill import level_reached, series_levels
from issuer.register.models import (
    ISSUED,
    SCATTERED,
    SEQUENTIAL,
    SUSPENDED,
    VOIDED,
    IssuedCode,
    Series,
)
from issuer.register.sealing import keyring_of
from issuer.register.standing import period_text

if TYPE_CHECKING:
    from issuer.scattering.scatter import ScatterPermutation


@lru_cache(maxsize=256)
def _format(
    scheme: str, alphabet: str, length: int, prefix: str, suffix: str, grouping: str, sep: str
) -> CodeFormat:
    group = tuple(int(part) for part in grouping.split(",")) if grouping else ()
    return CodeFormat(get_scheme(scheme, alphabet), length, prefix, suffix, group, sep)


def code_format(series: Series) -> CodeFormat:
    """The shape of a stored series' codes."""
    return _format(
        series.scheme,
        series.alphabet,
        series.length,
        series.prefix,
        series.suffix,
        series.grouping,
        series.separator,
    )


_permutations = threading.local()


def permutation(series: Series) -> ScatterPermutation:
    """The keyed permutation of a scattered series' range.

    Built once per thread and series (setting up FF1 costs a few AES chains, and a
    permutation keeps scratch buffers, so threads never share one).
    """
    from issuer.scattering.scatter import ScatterPermutation

    radix = code_format(series).alphabet_size
    ident = (open_key(series), radix, series.range_start, series.range_end, series.key)
    cache: dict[tuple[object, ...], ScatterPermutation] | None = getattr(_permutations, "cache", None)
    if cache is None:
        cache = _permutations.cache = {}
    found = cache.get(ident)
    if found is None:
        if len(cache) >= 64:
            cache.clear()
        found = cache[ident] = ScatterPermutation(
            key=ident[0],
            radix=radix,
            start=series.range_start,
            end=series.range_end,
            tweak=series.key.encode("utf-8"),
        )
    return found


def scatter_protected(series: Series) -> bool:
    """Whether a scattered series' range has FF1's full strength (needs no key)."""
    from issuer.scattering.scatter import range_is_protected

    return range_is_protected(code_format(series).alphabet_size, series.range_start, series.range_end)


def open_key(series: Series) -> bytes:
    """A scattered series' raw FF1 key: opened with its register's key file (a series read
    through a session of the register), or the one its claim already opened."""
    from sqlalchemy.orm import object_session

    opened = getattr(series, "opened_key", None)
    if opened is not None:
        return bytes(opened)
    assert series.scatter_key is not None
    session = object_session(series)
    if session is None:
        raise RegisterError(f"series {series.key}: its scatter key can be opened only inside a register session")
    return keyring_of(session).open(series.key, bytes(series.scatter_key))


def capacity(series: Series) -> int:
    return series.range_end - series.range_start + 1


#: the series columns the log records at definition and change (the doctor replays them)
SHAPE_COLUMNS = (
    "key", "title", "scheme", "alphabet", "length", "prefix", "suffix", "grouping", "separator",
    "mode", "range_start", "range_end",
)  # fmt: skip


#: the settings that may change any time; logged at definition and, as stored, at change
SERIES_SETTINGS = ("holds_people", "valid_for_days", "fill_levels")


def stored_shape(series: Series) -> dict[str, object]:
    """The shape as stored. The scatter key's fingerprint (a SHA-256 of the raw key) is
    logged apart, by the acts that make a key: reading it needs the key file."""
    return {column: getattr(series, column) for column in SHAPE_COLUMNS}


def get_series(session: Session, key: str, *, lock: bool = False) -> Series:
    limits.text("series key", key)
    statement = select(Series).where(Series.key == key)
    if lock:
        # FOR NO KEY UPDATE: a plain FOR UPDATE would also block the key-share locks
        # that inserting a log entry (foreign key to series) takes, and a desk holding
        # the log head while another holds the series would deadlock (PostgreSQL)
        statement = statement.with_for_update(key_share=True).execution_options(
            populate_existing=True
        )
    series = session.scalar(statement)
    if series is None:
        raise unknown_series(session, key)
    return series


def unknown_series(session: Session, key: str) -> NotFound:
    """"no series KEY", offering the nearest keys the register holds."""
    keys = list(session.scalars(select(Series.key).order_by(Series.key)))
    if not keys:
        return NotFound(f"no series {key!r}: this register has none yet ('issuer series add' defines one)")
    return NotFound(f"no series {key!r} in this register{did_you_mean(key, keys, 'series')}")


def all_series(session: Session) -> list[Series]:
    return list(session.scalars(select(Series).order_by(Series.key)))


@dataclass(frozen=True)
class SeriesState:
    """A series' shape and fill, for ``series show`` and ``series list``."""

    key: str
    title: str
    scheme: str
    alphabet: str
    length: int
    prefix: str
    suffix: str
    mode: str
    start: int
    end: int
    capacity: int
    issued: int
    voided: int
    held: int
    remaining: int
    fill: float
    next_code: str | None
    example: str
    protected: bool | None
    holds_people: bool = False
    suspended: int = 0
    #: issued codes past their validity at the time asked (None: not counted)
    expired: int | None = None
    valid_for: str | None = None
    fill_levels: tuple[int, ...] = ()
    #: the highest warning level the series has reached, if any
    fill_level: int | None = None

    def as_dict(self) -> dict[str, object]:
        return dict(self.__dict__)


def series_state(session: Session, series: Series, now: datetime | None = None) -> SeriesState:
    shape = code_format(series)
    counts: dict[str, int] = {
        status: int(number)
        for status, number in session.execute(
            select(IssuedCode.status, func.count())
            .where(IssuedCode.series_id == series.id)
            .group_by(IssuedCode.status)
        )
    }
    total = capacity(series)
    remaining = total - series.code_count
    expired = None
    if now is not None:
        expired = int(session.scalar(
            select(func.count()).where(
                IssuedCode.series_id == series.id, IssuedCode.status == ISSUED, IssuedCode.valid_until < now
            )
        ) or 0)  # fmt: skip
    levels = series_levels(series)
    next_code = None
    protected: bool | None = None
    if series.mode == SEQUENTIAL and remaining > 0:
        next_code = shape.display(shape.code_for_base(series.range_start + series.next_counter))
    if series.mode == SCATTERED:
        protected = scatter_protected(series)
    return SeriesState(
        key=series.key,
        title=series.title,
        scheme=series.scheme,
        alphabet=series.alphabet,
        length=series.length,
        prefix=series.prefix,
        suffix=series.suffix,
        mode=series.mode,
        start=series.range_start,
        end=series.range_end,
        capacity=total,
        issued=int(counts.get(ISSUED, 0)),
        voided=int(counts.get(VOIDED, 0)),
        held=series.code_count,
        remaining=remaining,
        fill=series.code_count / total,
        next_code=next_code,
        example=shape.display(shape.code_for_base(series.range_start)),
        protected=protected,
        holds_people=series.holds_people,
        suspended=int(counts.get(SUSPENDED, 0)),
        expired=expired,
        valid_for=period_text(series.valid_for_days),
        fill_levels=levels,
        fill_level=level_reached(levels, total, series.code_count),
    )
