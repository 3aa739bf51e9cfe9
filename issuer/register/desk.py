"""Desk verification: is a typed or scanned number real, voided, or a typo — and which
issued number was probably meant?"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from issuer.checking.codes import CodeFormat, normalise_text
from issuer.errors import InvalidFormat
from issuer.register.models import ISSUED, VOIDED, IssuedCode, Series
from issuer.register.series import all_series, code_format

#: statuses a desk check answers with
STATUSES = ("issued", "voided", "not_issued", "bad_check", "malformed")
#: at most this many suggestions per input
MAX_SUGGESTIONS = 5


@dataclass(frozen=True)
class Suggestion:
    code: str
    display: str
    error: str
    description: str

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass
class DeskAnswer:
    input: str
    status: str
    code: str | None = None
    display: str | None = None
    series: str | None = None
    reason: str | None = None
    holder: str | None = None
    #: the replacement's display form, for a voided code that was replaced
    replacement: str | None = None
    suggestions: list[Suggestion] = field(default_factory=list)

    def as_dict(self) -> dict[str, Any]:
        data = dict(self.__dict__)
        data["suggestions"] = [s.as_dict() for s in self.suggestions]
        return data


@dataclass(frozen=True)
class _Reading:
    """One way of reading an input: as a code of ``series``."""

    series: Series
    shape: CodeFormat
    canonical: str
    valid: bool


def _stored(session: Session, codes: Iterable[str]) -> dict[str, IssuedCode]:
    wanted = list(dict.fromkeys(codes))
    found: dict[str, IssuedCode] = {}
    for at in range(0, len(wanted), 500):
        chunk = wanted[at: at + 500]
        for row in session.scalars(select(IssuedCode).where(IssuedCode.code.in_(chunk))):
            found[row.code] = row
    return found


def _readings(shapes: Sequence[tuple[Series, CodeFormat]], text: str) -> tuple[list[_Reading], list[str]]:
    """Every series the text fits, and otherwise what is wrong: only the problems of
    series whose prefix and suffix it carries, when there are any."""
    readings: list[_Reading] = []
    problems: list[tuple[bool, str]] = []
    cleaned = normalise_text(text)
    for series, shape in shapes:
        try:
            parsed = shape.parse(text)
        except InvalidFormat as exc:
            affixes_fit = cleaned.startswith(shape.prefix) and cleaned.endswith(shape.suffix)
            problems.append((affixes_fit, f"{series.key}: {exc.message}" if len(shapes) > 1 else exc.message))
            continue
        valid = shape.check_matches(parsed)
        readings.append(_Reading(series, shape, parsed.canonical, valid))
    closest = [message for fits, message in problems if fits] or [message for _, message in problems]
    return readings, closest


def _suggest(session: Session, reading: _Reading) -> list[Suggestion]:
    from issuer.checking.neighbours import neighbours

    candidates = neighbours(reading.shape, reading.canonical)
    stored = _stored(session, (c.code for c in candidates))
    out = []
    for candidate in candidates:
        row = stored.get(candidate.code)
        if row is not None and row.status == ISSUED:
            out.append(
                Suggestion(candidate.code, reading.shape.display(candidate.code),
                           candidate.error, candidate.description)
            )
        if len(out) == MAX_SUGGESTIONS:
            break
    return out


def _suggest_length(session: Session, shapes: Sequence[tuple[Series, CodeFormat]], text: str) -> list[Suggestion]:
    """For a text one character short or long: issued codes with one left out or added."""
    from issuer.checking.neighbours import omission_insertion_candidates

    cleaned = normalise_text(text)
    found: list[Suggestion] = []
    for _series, shape in shapes:
        if abs(len(cleaned) - shape.total_width) != 1:
            continue
        candidates = omission_insertion_candidates(shape, cleaned)
        stored = _stored(session, (c.code for c in candidates))
        for candidate in candidates:
            row = stored.get(candidate.code)
            if row is not None and row.status == ISSUED:
                found.append(Suggestion(candidate.code, shape.display(candidate.code),
                                        candidate.error, candidate.description))
    return found[:MAX_SUGGESTIONS]


def check_codes(session: Session, inputs: Sequence[str]) -> list[DeskAnswer]:
    """Answer each input, in input order."""
    shapes = [(series, code_format(series)) for series in all_series(session)]
    per_input = [_readings(shapes, text) for text in inputs]
    stored = _stored(
        session, (r.canonical for readings, _ in per_input for r in readings if r.valid)
    )
    replacements: dict[int, str] = {}
    replaced_ids = [row.replaced_by_id for row in stored.values() if row.replaced_by_id]
    if replaced_ids:
        shape_of = {series.id: shape for series, shape in shapes}
        replacements = {
            row_id: shape_of[series_id].display(code)
            for row_id, code, series_id in session.execute(
                select(IssuedCode.id, IssuedCode.code, IssuedCode.series_id).where(
                    IssuedCode.id.in_(replaced_ids)
                )
            )
        }
    answers = []
    for text, (readings, problems) in zip(inputs, per_input):
        answers.append(_answer(session, shapes, text, readings, problems, stored, replacements))
    return answers


def _answer(
    session: Session,
    shapes: Sequence[tuple[Series, CodeFormat]],
    text: str,
    readings: list[_Reading],
    problems: list[str],
    stored: dict[str, IssuedCode],
    replacements: dict[int, str],
) -> DeskAnswer:
    if not shapes:
        return DeskAnswer(text, "malformed", reason="the register has no series yet")
    if not readings:
        if not normalise_text(text):
            reason = "empty input"
        else:
            reason = "; ".join(problems) if problems else "does not fit any series"
        answer = DeskAnswer(text, "malformed", reason=reason)
        answer.suggestions = _suggest_length(session, shapes, text)
        return answer
    for reading in readings:
        row = stored.get(reading.canonical)
        if row is None:
            continue
        answer = DeskAnswer(
            text, row.status, reading.canonical, reading.shape.display(row.code),
            reading.series.key, holder=row.holder,
        )
        if row.status == VOIDED:
            answer.reason = row.void_reason
            if row.replaced_by_id:
                answer.replacement = replacements.get(row.replaced_by_id)
        return answer
    valid = [r for r in readings if r.valid]
    reading = valid[0] if valid else readings[0]
    status = "not_issued" if valid else "bad_check"
    reason = (
        "a valid code that this register never issued"
        if valid
        else "the check character does not match: a typing or reading error"
    )
    answer = DeskAnswer(
        text, status, reading.canonical, reading.shape.display(reading.canonical),
        reading.series.key, reason=reason,
    )
    for candidate_reading in (valid or readings):
        answer.suggestions.extend(_suggest(session, candidate_reading))
    answer.suggestions = answer.suggestions[:MAX_SUGGESTIONS]
    return answer


__all__ = ["STATUSES", "DeskAnswer", "Suggestion", "check_codes"]
