"""What ``issuer doctor``'s checks answer: a finding per check, and the report."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

OK, WARN, PROBLEM, SKIPPED = "ok", "warn", "problem", "skipped"
#: at most this many particulars listed per check
MAX_DETAILS = 10


@dataclass
class Finding:
    check: str
    status: str
    summary: str
    details: list[str] = field(default_factory=list)

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass
class DoctorReport:
    database: str
    backend: str
    findings: list[Finding]

    @property
    def healthy(self) -> bool:
        return all(finding.status != PROBLEM for finding in self.findings)

    def as_dict(self) -> dict[str, Any]:
        return {
            "database": self.database,
            "backend": self.backend,
            "healthy": self.healthy,
            "findings": [finding.as_dict() for finding in self.findings],
        }


def _finding(check: str, problems: list[str], ok_summary: str, bad_summary: str) -> Finding:
    if not problems:
        return Finding(check, OK, ok_summary)
    more = len(problems) - MAX_DETAILS
    details = problems[:MAX_DETAILS] + ([f"... and {more} more"] if more > 0 else [])
    return Finding(check, PROBLEM, bad_summary.format(n=len(problems)), details)


__all__ = ["MAX_DETAILS", "OK", "PROBLEM", "SKIPPED", "WARN", "DoctorReport", "Finding", "_finding"]
