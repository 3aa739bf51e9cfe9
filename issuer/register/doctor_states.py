"""Doctor's checks of the states between issued and voided, and of how full series are:

* series past their last fill warning level (``warn``: time to plan a new series);
* suspended codes with their suspension logged and dated; erased codes holding no text;
* the search keys agreeing with the holder and note they come from (``find`` relies on it).

The counts of suspended and expired codes appear in the summary.
"""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import func, select, text
from sqlalchemy.orm import Session

from issuer.register.fill import level_reached, series_levels
from issuer.register.findings import MAX_DETAILS, OK, PROBLEM, WARN, Finding, _finding
from issuer.register.models import ISSUED, SUSPENDED, IssuedCode, Series


def check_fill(session: Session) -> Finding:
    """Series past their last warning level."""
    full = []
    for series in session.scalars(select(Series).order_by(Series.key)):
        levels = series_levels(series)
        capacity = series.range_end - series.range_start + 1
        if levels and level_reached(levels, capacity, series.code_count) == levels[-1]:
            full.append(
                f"{series.key}: {series.code_count / capacity:.1%} full (last level {levels[-1]}%), "
                f"{capacity - series.code_count:,} left"
            )
    if not full:
        return Finding("fill", OK, "no series is past its last warning level")
    return Finding("fill", WARN, f"{len(full)} series past the last warning level", full[:MAX_DETAILS])


def check_states(session: Session, now: datetime) -> Finding:
    """Suspensions logged and dated, erasures complete, search keys in step."""
    problems = [
        f"{row[0]} is suspended but no suspension of it is logged"
        for row in session.execute(text(
            "SELECT c.code FROM issued_code c WHERE c.status = 'suspended' AND NOT EXISTS "
            "(SELECT 1 FROM log_entry e WHERE e.code = c.code AND e.action = 'suspend')"
        ))
    ]  # fmt: skip
    problems += [
        f"{row[0]} is suspended without a date or reason"
        for row in session.execute(text(
            "SELECT code FROM issued_code WHERE status = 'suspended' "
            "AND (suspended_at IS NULL OR suspend_reason IS NULL)"
        ))
    ]  # fmt: skip
    problems += [
        f"{row[0]}: the search key of its holder or note is out of step (find would miss it)"
        for row in session.execute(text(
            "SELECT code FROM issued_code WHERE (holder IS NULL) <> (holder_key IS NULL) "
            "OR (note IS NULL) <> (note_key IS NULL)"
        ))
    ]  # fmt: skip
    suspended = session.scalar(select(func.count()).where(IssuedCode.status == SUSPENDED)) or 0
    expired = session.scalar(
        select(func.count()).where(IssuedCode.status == ISSUED, IssuedCode.valid_until < now)
    ) or 0
    erased = session.scalar(select(func.count()).where(IssuedCode.erased_at.is_not(None))) or 0
    finding = _finding(
        "states", problems,
        f"{suspended:,} suspended, {expired:,} expired, {erased:,} with holder erased; all consistent",
        "{n} code(s) whose state disagrees with the log or itself",
    )
    if finding.status == PROBLEM:
        finding.summary += f" ({suspended:,} suspended, {expired:,} expired)"
    return finding


__all__ = ["check_fill", "check_states"]
