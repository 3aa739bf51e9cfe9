"""Time zones of scan times: a scanner that writes ``2026-03-14 09:30`` says nothing of
its zone, so a count takes the zone it is told (``--tz``) or the machine's, and its
report names the zone it used."""

from __future__ import annotations

import os
import re
import time
from datetime import UTC, datetime, timedelta, timezone, tzinfo
from pathlib import Path

from issuer.errors import InvalidFormat

_OFFSET = re.compile(r"^(?:UTC|GMT)?\s*([+-])(\d{1,2})(?::?(\d{2}))?$", re.IGNORECASE)


def zone_named(name: str) -> tzinfo:
    """The zone an IANA name (``Europe/Lisbon``), ``UTC`` or an offset (``+01:00``) names."""
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

    text = name.strip()
    if text.upper() in ("UTC", "Z", "GMT"):
        return UTC
    match = _OFFSET.match(text)
    if match:
        sign, hours, minutes = match.group(1), int(match.group(2)), int(match.group(3) or 0)
        if hours > 14 or minutes > 59:
            raise InvalidFormat(f"{name!r} is not a time zone offset (at most +/-14:00)")
        delta = timedelta(hours=hours, minutes=minutes)
        return timezone(-delta if sign == "-" else delta)
    try:
        return ZoneInfo(text)
    except (ZoneInfoNotFoundError, ValueError):
        raise InvalidFormat(
            f"{name!r} is not a time zone: give a name like Europe/Lisbon, UTC, or an offset like +01:00"
        ) from None


def machine_zone_name() -> str:
    """The name of this machine's zone: ``TZ``, else /etc/localtime's target, else
    /etc/timezone, else the current offset from UTC."""
    candidates = [os.environ.get("TZ", "").lstrip(":")]
    localtime = Path("/etc/localtime")
    if localtime.is_symlink():
        target = str(localtime.resolve())
        if "zoneinfo/" in target:
            candidates.append(target.split("zoneinfo/", 1)[1])
    try:
        candidates.append(Path("/etc/timezone").read_text(encoding="utf-8").strip())
    except OSError:
        pass
    for candidate in candidates:
        if candidate:
            try:
                zone_named(candidate)
            except InvalidFormat:
                continue
            return candidate
    offset = -time.timezone if not time.localtime().tm_isdst else -time.altzone
    sign = "-" if offset < 0 else "+"
    return f"{sign}{abs(offset) // 3600:02d}:{abs(offset) % 3600 // 60:02d}"


def resolve_zone(name: str | None) -> str:
    """The zone name a count uses: the one given (checked), or the machine's."""
    if name is None or not name.strip():
        return machine_zone_name()
    zone_named(name)
    return name.strip()


def parse_scan_time(text: str, line: int, zone: tzinfo = UTC) -> datetime:
    """A scan's time in UTC: ISO 8601 (``2026-03-14T09:30:00+01:00``, ``2026-03-14 09:30``,
    ``2026-03-14``); a time without a zone is read in ``zone``."""
    from issuer import limits
    from issuer.errors import OutOfLimits

    try:
        return limits.moment("scan time", text, zone=zone)
    except OutOfLimits as exc:
        raise InvalidFormat(f"line {line}: {exc.message.removeprefix('scan time ')}") from None


__all__ = ["machine_zone_name", "parse_scan_time", "resolve_zone", "zone_named"]
