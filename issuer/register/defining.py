"""Defining and reshaping series: what a person asks for, its checks (limits, range, no
clash with another series' codes) and the acts that write a series row and its log entry."""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import TYPE_CHECKING

from sqlalchemy import select, text
from sqlalchemy.orm import Session

from issuer import limits
from issuer.checking.codes import CodeFormat, normalise_affix
from issuer.checking.schemes import get_scheme
from issuer.errors import Conflict, InvalidFormat, OutOfLimits
from issuer.register.fill import levels_text, series_levels
from issuer.register.log import NewEntry, append_entry
from issuer.register.models import SCATTERED, SEQUENTIAL, Series
from issuer.register.sealing import fingerprint, keyring_of
from issuer.register.series import SERIES_SETTINGS, code_format, get_series, stored_shape

if TYPE_CHECKING:
    from issuer.register.store import Register

KEY_PATTERN = re.compile(r"^[a-z0-9][a-z0-9_-]{0,63}$")
#: the largest base number a register stores (a signed 64-bit integer)
MAX_BASE = 2**63 - 1
MODES = (SEQUENTIAL, SCATTERED)


@dataclass(frozen=True)
class SeriesSpec:
    """What a person asks for when defining a series."""

    key: str
    scheme: str
    length: int
    alphabet: str | None = None
    prefix: str = ""
    suffix: str = ""
    mode: str = SEQUENTIAL
    start: int | None = None
    end: int | None = None
    group: tuple[int, ...] = ()
    sep: str = "-"
    title: str = ""
    #: holders are people (personal data); None: yes for a scattered series, no otherwise
    holds_people: bool | None = None
    #: how long each new code stays valid, in days (0 or None: no end)
    valid_for_days: int | None = None
    #: percentages of the capacity at which issuing warns
    fill_levels: tuple[int, ...] = (80, 95)

def _position_sets(shape: CodeFormat) -> list[frozenset[str]]:
    """For each character position of a canonical code, the characters it may hold."""
    body = frozenset(shape.scheme.alphabet.symbols)
    check = frozenset(shape.scheme.check_alphabet.symbols)
    return (
        [frozenset(ch) for ch in shape.prefix]
        + [body] * shape.length
        + [check] * shape.scheme.check_length
        + [frozenset(ch) for ch in shape.suffix]
    )


def could_coincide(one: CodeFormat, other: CodeFormat) -> bool:
    """Whether some text could be a code of both shapes."""
    first, second = _position_sets(one), _position_sets(other)
    return len(first) == len(second) and all(a & b for a, b in zip(first, second))


def check_spec_limits(spec: SeriesSpec) -> None:
    """Every field of a series within its limit (:mod:`issuer.limits`)."""
    limits.text("title", spec.title)
    limits.text("prefix", spec.prefix)
    limits.text("suffix", spec.suffix)
    limits.text("separator", spec.sep)
    limits.text("alphabet", spec.alphabet)
    limits.number("length", spec.length)
    limits.number("start", spec.start)
    limits.number("end", spec.end)
    for size in spec.group:
        limits.number("group size", size)


def build_format(spec: SeriesSpec) -> tuple[CodeFormat, int, int]:
    """Validate a spec; return its shape and inclusive base range."""
    if not isinstance(spec.key, str) or not KEY_PATTERN.fullmatch(spec.key):
        raise InvalidFormat(
            f"series key {spec.key[:70]!r} must be 1-64 lower-case letters, digits, - or _"
        )
    if spec.mode not in MODES:
        raise InvalidFormat(f"mode must be one of {', '.join(MODES)}, not {spec.mode!r}")
    check_spec_limits(spec)
    scheme = get_scheme(spec.scheme, spec.alphabet)
    max_length = getattr(scheme, "max_body_length", None)
    if max_length is not None and spec.length > max_length:
        raise InvalidFormat(
            f"scheme {scheme.name} protects at most {max_length} body characters, not {spec.length}"
        )
    shape = CodeFormat(
        scheme,
        spec.length,
        normalise_affix(spec.prefix),
        normalise_affix(spec.suffix),
        spec.group,
        spec.sep,
    )
    if shape.total_width > limits.MAX_CODE_CHARS:
        raise OutOfLimits(
            f"a code of this shape has {shape.total_width} characters (prefix, body, check, suffix); "
            f"the limit is {limits.MAX_CODE_CHARS}"
        )
    top = shape.capacity - 1
    start = 1 if spec.start is None else spec.start
    end = min(top, MAX_BASE) if spec.end is None else spec.end
    if start < 0 or end < start:
        raise InvalidFormat(f"the range {start}..{end} is empty or negative")
    if end > top:
        raise InvalidFormat(
            f"--end {end} does not fit in {spec.length} {scheme.alphabet.name} symbols (largest {top})"
        )
    if end > MAX_BASE:
        raise InvalidFormat(f"the range must end at or below {MAX_BASE}")
    return shape, start, end


#: the PostgreSQL advisory lock that serialises series definitions, one per schema
_DEFINE_LOCK = text("SELECT pg_advisory_xact_lock(hashtext('issuer.define:' || current_schema()))")


def lock_definitions(session: Session) -> None:
    """Take the register-wide lock for defining or reshaping series, held until commit.

    The clash check reads every series; without one lock two desks could each find no
    clash and both insert. SQLite's ``BEGIN IMMEDIATE`` already makes writers take turns;
    PostgreSQL takes a transaction-scoped advisory lock (no table privilege needed).
    """
    if session.get_bind().dialect.name == "postgresql":
        session.execute(_DEFINE_LOCK)


def add_series(register: Register, spec: SeriesSpec) -> Series:
    """Define a new series; refuse one whose codes could coincide with another's."""
    shape, start, end = build_format(spec)
    key_bytes: bytes | None = None
    if spec.mode == SCATTERED:
        from issuer.scattering.scatter import new_key

        key_bytes = new_key()

    def work(session: Session) -> Series:
        lock_definitions(session)
        at = register.clock()  # the series and its log entry carry the same moment
        if session.scalar(select(Series.id).where(Series.key == spec.key)) is not None:
            raise Conflict(f"a series {spec.key} exists already")
        for other in session.scalars(select(Series)):
            if could_coincide(shape, code_format(other)):
                raise Conflict(
                    f"codes of {spec.key} could coincide with codes of series {other.key} "
                    f"(same length and overlapping characters at every position); "
                    "give one of them a distinct prefix, suffix or length"
                )
        series = Series(
            key=spec.key,
            title=spec.title,
            scheme=shape.scheme.name,
            alphabet=shape.scheme.alphabet.name,
            length=spec.length,
            prefix=shape.prefix,
            suffix=shape.suffix,
            grouping=",".join(map(str, spec.group)),
            separator=spec.sep,
            mode=spec.mode,
            range_start=start,
            range_end=end,
            next_counter=0,
            code_count=0,
            imported_count=0,
            scatter_key=None if key_bytes is None else register.keyring.seal(spec.key, key_bytes),
            created_at=at,
            created_by=register.actor,
            holds_people=spec.mode == SCATTERED if spec.holds_people is None else spec.holds_people,
            valid_for_days=spec.valid_for_days or None,
            fill_levels=levels_text(spec.fill_levels),
        )
        session.add(series)
        session.flush()
        append_entry(
            session,
            NewEntry(
                action="series.add",
                series_id=series.id,
                detail={
                    "key": series.key,
                    "grouping": series.grouping,
                    "separator": series.separator,
                    "scheme": series.scheme,
                    "alphabet": series.alphabet,
                    "length": series.length,
                    "prefix": series.prefix,
                    "suffix": series.suffix,
                    "mode": series.mode,
                    "start": start,
                    "end": end,
                    "title": series.title,
                    "holds_people": series.holds_people,
                    "valid_for_days": series.valid_for_days,
                    "fill_levels": series.fill_levels,
                    # the key's fingerprint (never the key): the replay sees a changed key
                    **({"scatter_key_sha256": fingerprint(key_bytes)} if key_bytes is not None else {}),
                },
            ),
            actor=register.actor,
            at=at,
        )
        return series

    return register.write(work)


def _spec_of(series: Series) -> SeriesSpec:
    return SeriesSpec(
        key=series.key, scheme=series.scheme, length=series.length, alphabet=series.alphabet,
        prefix=series.prefix, suffix=series.suffix, mode=series.mode, start=series.range_start,
        end=series.range_end, group=tuple(int(g) for g in series.grouping.split(",") if g),
        sep=series.separator, title=series.title, holds_people=series.holds_people,
        valid_for_days=series.valid_for_days, fill_levels=series_levels(series),
    )  # fmt: skip


#: what may change after a series' first code: nothing on a printed label or in a code
#: what may change after the first code: none of these alters a code already issued
_ANY_TIME = frozenset(("title", "holds_people", "valid_for_days", "fill_levels"))


def change_series(register: Register, key: str, **changes: object) -> Series:
    """Change a series' title or whether it holds people, or its shape while it holds no
    code yet.

    ``changes`` takes the fields of :class:`SeriesSpec` (``key`` excepted); ``None``
    means unchanged. Once a series holds a code its shape is frozen: only the title
    may change, since every issued code and label depends on the shape.
    """
    import dataclasses

    wanted = {name: value for name, value in changes.items() if value is not None}
    unknown = set(wanted) - {f.name for f in dataclasses.fields(SeriesSpec)} | ({"key"} & set(wanted))
    if unknown:
        raise InvalidFormat(f"cannot change {', '.join(sorted(unknown))} of a series")
    if not wanted:
        raise InvalidFormat("nothing to change: name at least one field")
    limits.text("title", wanted.get("title"))  # type: ignore[arg-type]

    def work(session: Session) -> Series:
        lock_definitions(session)
        series = get_series(session, key, lock=True)
        before = stored_shape(series)
        new_fingerprint: str | None | bool = False  # False: the key did not change
        current = _spec_of(series)
        spec = dataclasses.replace(current, **wanted)  # type: ignore[arg-type]
        shape_changes = {
            name
            for name in wanted
            if name not in _ANY_TIME and getattr(spec, name) != getattr(current, name)
        }
        if shape_changes and series.code_count > 0:
            raise Conflict(
                f"the shape of series {key} is frozen: it holds {series.code_count:,} code(s); "
                "only its title and whether it holds people can change (define a new series for a new shape)"
            )
        if shape_changes:
            shape, start, end = build_format(spec)
            for other in session.scalars(select(Series).where(Series.id != series.id)):
                if could_coincide(shape, code_format(other)):
                    raise Conflict(f"codes of {key} could coincide with codes of series {other.key}")
            series.scheme, series.alphabet = shape.scheme.name, shape.scheme.alphabet.name
            series.length, series.prefix, series.suffix = spec.length, shape.prefix, shape.suffix
            series.grouping, series.separator = ",".join(map(str, spec.group)), spec.sep
            series.range_start, series.range_end = start, end
            if spec.mode != series.mode:
                from issuer.scattering.scatter import new_key

                series.mode = spec.mode
                raw = new_key() if spec.mode == SCATTERED else None
                series.scatter_key = None if raw is None else keyring_of(session).seal(series.key, raw)
                new_fingerprint = None if raw is None else fingerprint(raw)
        series.title = spec.title
        series.holds_people = bool(spec.holds_people)
        series.valid_for_days = spec.valid_for_days or None
        series.fill_levels = levels_text(spec.fill_levels)
        session.flush()
        append_entry(
            session,
            NewEntry(
                action="series.change",
                series_id=series.id,
                detail={**{name: str(getattr(spec, name)) for name in sorted(wanted)},
                        # the columns as stored after the change, only those that moved
                        "stored": {**{k: v for k, v in stored_shape(series).items() if before.get(k) != v},
                                   **({} if new_fingerprint is False else {"scatter_key_sha256": new_fingerprint}),
                                   # the settings the change names, as stored (the replay checks them)
                                   **{k: getattr(series, k) for k in SERIES_SETTINGS if k in wanted}}},
            ),
            actor=register.actor,
            at=register.clock(),
        )
        return series

    return register.write(work)
