"""Where a code stands: the fields that say who holds it, until when, and whether it
is held back — and the small rules every issuing path shares about them.

Nothing here reads the clock: callers pass ``now`` (the register's clock).
"""

from __future__ import annotations

import re
import unicodedata
from datetime import UTC, date, datetime, time, timedelta

from issuer import limits
from issuer.errors import InvalidFormat
from issuer.register.log import timestamp_text
from issuer.register.models import EXPIRED, ISSUED, SUSPENDED, VOIDED

#: the widest holder, note and reason texts: the one table of field limits says
HOLDER_WIDTH = limits.TEXT_LIMITS["holder"].max_chars
NOTE_WIDTH = limits.TEXT_LIMITS["note"].max_chars
REASON_WIDTH = limits.TEXT_LIMITS["reason"].max_chars
#: the search key keeps this many characters of the folded text (its column's width)
KEY_WIDTH = 200

_PERIOD = re.compile(r"^\s*(\d{1,5})\s*([dw])\s*$", re.IGNORECASE)
#: the longest validity a series or renewal may give at once (about 100 years)
MAX_DAYS = 36_600


def search_key(text: str | None) -> str | None:
    """The folded form ``find`` compares: NFKC, case-folded, spaces collapsed."""
    if text is None:
        return None
    folded = " ".join(unicodedata.normalize("NFKC", text).casefold().split())[:KEY_WIDTH]
    return folded or None


def prefix_range(prefix: str) -> tuple[str, str | None]:
    """The key range ``[low, high)`` holding every key that starts with ``prefix``
    (code-point order, which is byte order for UTF-8 and the "C" collation)."""
    last = prefix[-1]
    if ord(last) >= 0x10FFFF:
        return prefix, None
    return prefix, prefix[:-1] + chr(ord(last) + 1)


def clean_text(value: str | None, *, what: str) -> str | None:
    """A holder, note or reason (``what``) as stored: exactly as given (an export must
    give it back), None when blank, refused by :mod:`issuer.limits` when too long or
    carrying characters it does not allow."""
    if value is None or not value.strip():
        return None
    return limits.text(what, value)


def parse_period(text: str) -> int:
    """``1d``, ``30d``, ``365d`` or ``2w`` as a number of days."""
    found = _PERIOD.match(text or "")
    if not found:
        raise InvalidFormat(f"{text!r} is not a period: give days or weeks, like 30d or 2w")
    days = int(found.group(1)) * (7 if found.group(2).lower() == "w" else 1)
    if not 1 <= days <= MAX_DAYS:
        raise InvalidFormat(f"a period runs from 1 day to {MAX_DAYS} days, not {days}")
    return days


def period_text(days: int | None) -> str | None:
    return None if days is None else f"{days}d"


def parse_instant(text: str, *, end_of_day: bool) -> datetime:
    """A date (``2027-06-30``) or an ISO time with zone, as UTC. A bare date means its
    last instant with ``end_of_day`` (valid *through* that day), else its first."""
    value = (text or "").strip()
    try:
        day = date.fromisoformat(value)
    except ValueError:
        pass
    else:
        moment = datetime.combine(day, time(23, 59, 59) if end_of_day else time(0, 0), tzinfo=UTC)
        return limits.moment("date", moment)
    if "T" in value and not value.endswith("Z") and "+" not in value[10:] and "-" not in value[10:]:
        raise InvalidFormat(f"{text!r} has no time zone: add one (e.g. Z) or give a bare date")
    return limits.moment("date", value)


def validity_for(valid_for_days: int | None, at: datetime, explicit: datetime | None) -> datetime | None:
    """Until when a code issued at ``at`` is valid: the explicit end, else the series'
    default period from the moment of issue, else no end."""
    if explicit is not None:
        return explicit
    if valid_for_days:
        return at + timedelta(days=valid_for_days)
    return None


def validity_detail(valid_until: datetime | None) -> str | None:
    """How a log entry records the end of validity an act gave its codes (None: no end):
    the replay holds every code never renewed since to it."""
    return None if valid_until is None else timestamp_text(valid_until)


def standing(status: str, valid_until: datetime | None, now: datetime | None) -> str:
    """What a code answers at ``now``: voided and suspended as stored; an issued code past
    its validity is expired (it stays its holder's and is never issued again)."""
    if status in (VOIDED, SUSPENDED):
        return status
    if status == ISSUED and valid_until is not None and now is not None and now > valid_until:
        return EXPIRED
    return status


__all__ = [
    "HOLDER_WIDTH",
    "NOTE_WIDTH",
    "REASON_WIDTH",
    "clean_text",
    "parse_instant",
    "parse_period",
    "period_text",
    "prefix_range",
    "search_key",
    "standing",
    "validity_detail",
    "validity_for",
]
