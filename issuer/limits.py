"""Every field's limit, in one place, checked before the database sees the value.

PostgreSQL refuses a ``VARCHAR(200)`` holder of 201 characters with an error; SQLite
stores it. So the register never relies on the database for a limit: every face and
every file reader hands its values to :func:`text`, :func:`number`, :func:`moment` or
:func:`file_name` first, and a value out of bounds is refused with one line naming the
field and the limit (:class:`~issuer.errors.OutOfLimits`), the same on every backend.

Text is counted in characters (code points), as PostgreSQL counts ``VARCHAR(n)``. No
text field takes NUL, an unpaired surrogate or a control character (escape sequences
would repaint a clerk's terminal and make SVG labels invalid XML); a note or reason may
hold line breaks and tabs.
"""

from __future__ import annotations

import os
import unicodedata
from dataclasses import dataclass
from datetime import UTC, datetime, tzinfo

from issuer.errors import OutOfLimits


@dataclass(frozen=True)
class TextLimit:
    """How long a text field may be, and whether it may span lines."""

    name: str
    max_chars: int
    multiline: bool = False
    #: whether the empty string is a value (a title may be empty, an actor not)
    empty_ok: bool = True


@dataclass(frozen=True)
class NumberLimit:
    """The inclusive range of a whole-number field."""

    name: str
    low: int
    high: int


#: the largest value of a 32-bit column (PostgreSQL INTEGER; ids, counts)
INT32_MAX = 2**31 - 1
#: the largest value of a 64-bit column (base numbers, counters)
INT64_MAX = 2**63 - 1

TEXT_LIMITS: dict[str, TextLimit] = {
    limit.name: limit
    for limit in (
        TextLimit("title", 200),
        TextLimit("holder", 200),
        TextLimit("note", 2000, multiline=True),
        TextLimit("actor", 120, empty_ok=False),
        TextLimit("request id", 200, empty_ok=False),
        TextLimit("reason", 500, multiline=True),
        TextLimit("prefix", 32),
        TextLimit("suffix", 32),
        TextLimit("separator", 4),
        TextLimit("location", 200),
        TextLimit("column", 200, empty_ok=False),
        TextLimit("series key", 64, empty_ok=False),
        TextLimit("role", 63, empty_ok=False),
        TextLimit("alphabet", 200, empty_ok=False),
        TextLimit("layout", 100, empty_ok=False),
        TextLimit("code", 100, empty_ok=False),
        TextLimit("count name", 64, empty_ok=False),
        TextLimit("scanner", 200),
    )
}

NUMBER_LIMITS: dict[str, NumberLimit] = {
    limit.name: limit
    for limit in (
        # codes in one batch: a batch commits whole, so it must fit one transaction
        NumberLimit("count", 1, 10_000_000),
        NumberLimit("batch", 1, INT32_MAX),
        NumberLimit("entries", 1, 1_000_000_000),
        NumberLimit("length", 1, 60),
        NumberLimit("start", 0, INT64_MAX),
        NumberLimit("end", 0, INT64_MAX),
        NumberLimit("group size", 1, 60),
        NumberLimit("copies", 1, 1000),
        NumberLimit("position", 1, 10_000),
        NumberLimit("seed", 0, 2**32 - 1),
        NumberLimit("print count", 0, INT32_MAX),
    )
}

#: a canonical code (prefix, body, check, suffix) fits the register's code column
MAX_CODE_CHARS = TEXT_LIMITS["code"].max_chars

#: the earliest and latest moments the register stores (UTC); the margins keep every
#: local-time rendering of a stored moment inside Python's calendar (years 1-9999)
EARLIEST = datetime(1900, 1, 1, tzinfo=UTC)
LATEST = datetime(9999, 12, 30, tzinfo=UTC)

#: a file name's part between slashes, in bytes (common file systems' limit); a whole path
MAX_NAME_BYTES = 255
MAX_PATH_BYTES = 4096

#: characters a single-line field refuses besides Unicode controls: line and paragraph
#: separators, and the bidirectional overrides that make text read differently than stored
_LAYOUT_TRICKS = frozenset("\u2028\u2029\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069")
_MULTILINE_ALLOWED = frozenset("\n\r\t")


def _shown(ch: str) -> str:
    return f"U+{ord(ch):04X}"


def bad_character(value: str, *, multiline: bool = False) -> tuple[int, str] | None:
    """The first character a text field refuses (1-based position, what it is), or None."""
    for position, ch in enumerate(value, start=1):
        if multiline and ch in _MULTILINE_ALLOWED:
            continue
        category = unicodedata.category(ch)
        if ch == "\0":
            return position, "a NUL character"
        if category == "Cs":
            return position, f"an unpaired surrogate ({_shown(ch)})"
        if category == "Cc":
            return position, f"a control character ({_shown(ch)})"
        if ch in _LAYOUT_TRICKS:
            return position, f"a layout control character ({_shown(ch)})"
    return None


def text(field: str, value: str | None, *, label: str | None = None) -> str | None:
    """``value`` if it fits field ``field`` (a key of :data:`TEXT_LIMITS`); else refuse.

    ``None`` passes (the field is not given).

    >>> text("holder", "Quillmere Makers' Co-op")
    "Quillmere Makers' Co-op"
    """
    if value is None:
        return None
    limit = TEXT_LIMITS[field]
    field = label or field
    if not isinstance(value, str):
        raise OutOfLimits(f"{field} must be text, not {type(value).__name__}")
    if len(value) > limit.max_chars:
        raise OutOfLimits(f"{field} has {len(value):,} characters; the limit is {limit.max_chars}")
    if not value and not limit.empty_ok:
        raise OutOfLimits(f"{field} cannot be empty")
    bad = bad_character(value, multiline=limit.multiline)
    if bad is not None:
        position, what = bad
        lines = "" if limit.multiline else " or line break"
        raise OutOfLimits(f"{field} holds {what} at position {position}; no control character{lines} is allowed")
    return value


def number(field: str, value: int | None, *, label: str | None = None) -> int | None:
    """``value`` if it lies in field ``field``'s range (see :data:`NUMBER_LIMITS`); else refuse."""
    if value is None:
        return None
    limit = NUMBER_LIMITS[field]
    field = label or field
    if isinstance(value, bool) or not isinstance(value, int):
        raise OutOfLimits(f"{field} must be a whole number, not {type(value).__name__}")
    if not limit.low <= value <= limit.high:
        raise OutOfLimits(f"{field} must be from {limit.low:,} to {limit.high:,}, not {_short(str(value))}")
    return value


def moment(field: str, value: str | datetime, *, zone: tzinfo = UTC) -> datetime:
    """An ISO 8601 date or date and time as an aware UTC moment within
    :data:`EARLIEST`..:data:`LATEST`; a time without a zone is read in ``zone`` (UTC).

    >>> moment("since", "2026-03-14T09:30:00+01:00").isoformat()
    '2026-03-14T08:30:00+00:00'
    """
    if isinstance(value, datetime):
        parsed = value
    else:
        if not isinstance(value, str):
            raise OutOfLimits(f"{field} must be a date, not {type(value).__name__}")
        cleaned = value.strip()
        if len(cleaned) > 64 or bad_character(cleaned):
            raise OutOfLimits(f"{field} {_short(cleaned)!r} is not a date like 2026-03-14 or 2026-03-14T09:30:00Z")
        try:
            parsed = datetime.fromisoformat(cleaned)
        except ValueError:
            raise OutOfLimits(
                f"{field} {cleaned!r} is not a date like 2026-03-14 or 2026-03-14T09:30:00Z"
            ) from None
    span = f"{field} must lie between {EARLIEST:%Y-%m-%d} and {LATEST:%Y-%m-%d} (UTC)"
    try:
        utc = (parsed.replace(tzinfo=zone) if parsed.tzinfo is None else parsed).astimezone(UTC)
    except (OverflowError, ValueError):
        raise OutOfLimits(span) from None
    if not EARLIEST <= utc <= LATEST:
        raise OutOfLimits(span)
    return utc


def file_name(field: str, value: str | os.PathLike[str]) -> str:
    """A path a person named: no NUL or control character, each part within
    :data:`MAX_NAME_BYTES` bytes and the whole within :data:`MAX_PATH_BYTES`."""
    path = os.fspath(value)
    if not path:
        raise OutOfLimits(f"{field} cannot be empty")
    bad = bad_character(path)
    if bad is not None:
        raise OutOfLimits(f"{field} holds {bad[1]} at position {bad[0]}")
    encoded = path.encode("utf-8", "surrogateescape")
    if len(encoded) > MAX_PATH_BYTES:
        raise OutOfLimits(f"{field} is {len(encoded):,} bytes long; the limit is {MAX_PATH_BYTES:,}")
    for part in encoded.split(os.sep.encode()):
        if len(part) > MAX_NAME_BYTES:
            raise OutOfLimits(
                f"{field} has a part of {len(part):,} bytes ({_short(part.decode('utf-8', 'replace'))}); "
                f"a file or folder name has at most {MAX_NAME_BYTES}"
            )
    return path


def _escape(ch: str) -> str:
    code = ord(ch)
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


#: what :func:`printable` and :func:`json_safe` rewrite: controls (but line break and tab),
#: C1 controls, layout tricks and unpaired surrogates
_UNPRINTABLE = {
    code: _escape(chr(code))
    for code in [*range(0x20), *range(0x7F, 0xA0), *map(ord, _LAYOUT_TRICKS)]
    if chr(code) not in "\n\t"
}
_SURROGATES = range(0xD800, 0xE000)


def printable(value: str) -> str:
    r"""``value`` with every control character (but line break and tab), layout control
    and unpaired surrogate written as an escape (``\x1b``), for a terminal or a label:
    stored text never repaints a screen or reorders what a clerk reads.

    >>> printable("Ana\x1b[31m")
    'Ana\\x1b[31m'
    """
    text = value.translate(_UNPRINTABLE)
    if any(0xD800 <= ord(ch) < 0xE000 for ch in text):
        text = "".join(_escape(ch) if 0xD800 <= ord(ch) < 0xE000 else ch for ch in text)
    return text


_JSON_UNSAFE = {code: f"\\u{code:04x}" for code in [*range(0x7F, 0xA0), *map(ord, _LAYOUT_TRICKS), *_SURROGATES]}


def json_safe(document: str) -> str:
    r"""A JSON text (``ensure_ascii=False``) with C1 controls, layout controls and unpaired
    surrogates written as ``\uXXXX`` escapes: the same JSON value, safe on a terminal and
    encodable as UTF-8 (JSON only escapes C0 controls itself)."""
    return document.translate(_JSON_UNSAFE)


def _short(value: str, keep: int = 24) -> str:
    return value if len(value) <= keep else f"{value[:keep]}..."


def describe() -> list[tuple[str, str]]:
    """Every limit as (field, rule) for documentation and ``--help`` text."""
    rows = [
        (limit.name, f"at most {limit.max_chars} characters" + ("; line breaks allowed" if limit.multiline else ""))
        for limit in TEXT_LIMITS.values()
    ]
    rows += [(limit.name, f"{limit.low:,} to {limit.high:,}") for limit in NUMBER_LIMITS.values()]
    rows.append(("dates", f"{EARLIEST:%Y-%m-%d} to {LATEST:%Y-%m-%d} (UTC)"))
    rows.append(("file names", f"{MAX_NAME_BYTES} bytes a part, {MAX_PATH_BYTES:,} bytes in all"))
    return rows


__all__ = [
    "EARLIEST",
    "LATEST",
    "MAX_CODE_CHARS",
    "NUMBER_LIMITS",
    "TEXT_LIMITS",
    "NumberLimit",
    "TextLimit",
    "bad_character",
    "describe",
    "file_name",
    "json_safe",
    "moment",
    "number",
    "printable",
    "text",
]
