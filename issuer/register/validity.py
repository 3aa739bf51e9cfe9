"""How long a code stays valid, and renewing it.

A code past its validity answers *expired*: it is still its holder's, it is never
issued again, and renewing it makes it valid again. The register's clock decides.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

from sqlalchemy.orm import Session

from issuer.errors import Conflict, InvalidFormat
from issuer.register.lifecycle import find_code, shown_code
from issuer.register.log import NewEntry, append_entry, timestamp_text
from issuer.register.models import VOIDED, Series
from issuer.register.series import code_format
from issuer.register.store import Register


@dataclass(frozen=True)
class Renewal:
    code: str
    display: str
    series: str
    valid_until: datetime
    previous: datetime | None

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


def renew_code(
    register: Register, text: str, *, until: datetime | None = None, days: int | None = None
) -> Renewal:
    """Make a code valid until ``until``, or for ``days`` more: counted from its current
    end while it is still valid (nothing is lost by renewing early), else from now."""
    if (until is None) == (days is None):
        raise InvalidFormat("give exactly one of --until and --for")

    def work(session: Session) -> Renewal:
        row = find_code(session, text, lock=True)
        if row.status == VOIDED:
            raise Conflict(f"{shown_code(session, row)} is voided: a voided code is not renewed")
        now = register.clock()
        previous = row.valid_until
        if until is not None:
            new = until
        else:
            assert days is not None
            start = previous if previous is not None and previous > now else now
            new = start + timedelta(days=days)
        if new <= now:
            raise InvalidFormat(f"{timestamp_text(new)} has passed already: renew to a later date")
        row.valid_until = new
        detail: dict[str, Any] = {"valid_until": timestamp_text(new),
                                  "previous": timestamp_text(previous) if previous else None}  # fmt: skip
        if days is not None:
            detail["days"] = days
        append_entry(session, NewEntry("renew", row.series_id, row.code, None, detail),
                     actor=register.actor, at=now)  # fmt: skip
        session.flush()
        series = session.get(Series, row.series_id)
        assert series is not None
        return Renewal(row.code, code_format(series).display(row.code), series.key, new, previous)

    return register.write(work)


__all__ = ["Renewal", "renew_code"]
