"""Where a code stands: the fields that say who holds it, until when, and whether it
is held back — and the small rules every issuing path shares about them.

Nothing here reads the clock: callers pass ``now`` (the register's clock).
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import unicodedata
from collections.abc import Iterator
from datetime import UTC, date, datetime, time, timedelta
from typing import Any

from issuer import limits
from issuer.errors import InvalidFormat
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


# --- the texts' digests: what the log keeps of a holder and note ------------------------

#: bytes of a code's text salt (128 bits: never guessed, never repeated)
SALT_BYTES = 16
_PAIR = json.JSONEncoder(ensure_ascii=False, separators=(",", ":")).encode


def text_payload(holder: str | None, note: str | None) -> bytes | None:
    """A code's holder and note as one unambiguous byte string (a JSON pair: a text holding
    the separator, or none against an empty one, cannot pass for another); None: no text."""
    if holder is None and note is None:
        return None
    return _PAIR([holder, note]).encode("utf-8")


def text_digest(salt: bytes | None, holder: str | None, note: str | None) -> str | None:
    """SHA-256 of a code's salt and texts, in hex: what the log records of them (the full
    64 characters: whoever edits a row may also pick its salt, so only a second preimage of
    the whole digest would let an edit pass). None: no text. A code with text and no salt
    (given it before salts existed) has no digest: :class:`ValueError`."""
    return payload_digest(salt, text_payload(holder, note))


def payload_digest(salt: bytes | None, payload: bytes | None) -> str | None:
    """:func:`text_digest` of a :func:`text_payload` (for readers that meet the same texts often)."""
    if payload is None:
        return None
    if salt is None:
        raise ValueError("text without a salt")
    return hashlib.sha256(bytes(salt) + payload).hexdigest()


def new_salts(count: int) -> Iterator[bytes]:
    """``count`` fresh salts, from one read of the system's random source."""
    pool = os.urandom(SALT_BYTES * count)
    return iter([pool[at: at + SALT_BYTES] for at in range(0, len(pool), SALT_BYTES)])


class BatchTexts:
    """What an act that gives many codes text at once logs: how many codes got text, and
    SHA-256 over their digests (32 bytes each) in the order of their ids. The replay
    recomputes it from each code's digest at the time (the ``text_before`` of its first
    later act, else its row as it is)."""

    def __init__(self) -> None:
        self.count = 0
        self.hash = hashlib.sha256()

    def salted(self, count: int, holder: str | None, note: str | None) -> list[bytes] | None:
        """Salts for ``count`` codes given these texts, each code's digest taken into the
        batch's (None, and no work, when there is no text)."""
        payload = text_payload(holder, note)
        if payload is None:
            return None
        salts = list(new_salts(count))
        sha256 = hashlib.sha256
        self.hash.update(b"".join([sha256(salt + payload).digest() for salt in salts]))
        self.count += count
        return salts

    def add(self, digest: str | None) -> None:
        if digest is not None:
            self.hash.update(bytes.fromhex(digest))
            self.count += 1

    def detail(self) -> dict[str, Any]:
        return {"count": self.count, "sha256": self.hash.hexdigest()}


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
    "SALT_BYTES",
    "BatchTexts",
    "clean_text",
    "new_salts",
    "parse_instant",
    "parse_period",
    "payload_digest",
    "period_text",
    "prefix_range",
    "search_key",
    "standing",
    "text_digest",
    "text_payload",
    "validity_for",
]
