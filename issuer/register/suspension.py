"""Suspending a code for a while (a card reported lost that may turn up) and taking it
back into use. A suspended code checks as suspended, is not printed, and may be
replaced; a voided code stays voided."""

from __future__ import annotations

from sqlalchemy.orm import Session

from issuer.errors import Conflict
from issuer.register.lifecycle import CodeRecord, code_record, find_code, require_reason, shown_code
from issuer.register.log import NewEntry, append_entry, timestamp_text
from issuer.register.models import ISSUED, SUSPENDED, VOIDED
from issuer.register.standing import clean_text
from issuer.register.store import Register


def suspend_code(register: Register, text: str, *, reason: str) -> CodeRecord:
    """Hold a code back: it answers *suspended* (with the reason and since when) until
    it is reinstated, replaced or voided."""
    why = clean_text(require_reason(reason), what="reason")

    def work(session: Session) -> CodeRecord:
        row = find_code(session, text, lock=True)
        if row.status == VOIDED:
            raise Conflict(f"{shown_code(session, row)} is voided; a voided code stays voided")
        if row.status == SUSPENDED:
            raise Conflict(f"{shown_code(session, row)} is suspended already ({row.suspend_reason})")
        at = register.clock()
        row.status, row.suspended_at, row.suspended_by, row.suspend_reason = SUSPENDED, at, register.actor, why
        append_entry(session, NewEntry("suspend", row.series_id, row.code, None, {"reason": why}),
                     actor=register.actor, at=at)  # fmt: skip
        session.flush()
        return code_record(session, row)

    return register.write(work)


def reinstate_code(register: Register, text: str, *, reason: str | None = None) -> CodeRecord:
    """Take a suspended code back into use (the card turned up)."""
    why = clean_text(reason, what="reason")

    def work(session: Session) -> CodeRecord:
        row = find_code(session, text, lock=True)
        if row.status != SUSPENDED:
            raise Conflict(f"{shown_code(session, row)} is not suspended (it is {row.status})")
        at = register.clock()
        detail = {"suspended_at": timestamp_text(row.suspended_at) if row.suspended_at else None,
                  "suspend_reason": row.suspend_reason}  # fmt: skip
        if why:
            detail["reason"] = why
        row.status, row.suspended_at, row.suspended_by, row.suspend_reason = ISSUED, None, None, None
        append_entry(session, NewEntry("reinstate", row.series_id, row.code, None, detail),
                     actor=register.actor, at=at)  # fmt: skip
        session.flush()
        return code_record(session, row)

    return register.write(work)


__all__ = ["reinstate_code", "suspend_code"]
