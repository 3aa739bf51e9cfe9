"""Desk verification: is a typed or scanned number real, voided, or a typo — and which
issued number was probably meant?"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from typing import TYPE_CHECKING, Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from issuer.checking.codes import CodeFormat, normalise_text
from issuer.checking.reading import echo, read_code
from issuer.register.models import EXPIRED, ISSUED, SUSPENDED, VOIDED, IssuedCode, Series
from issuer.register.series import all_series, code_format
from issuer.register.standing import standing

if TYPE_CHECKING:  # the suggestion machinery loads only when an answer needs suggestions
    from issuer.checking.likely import Ranked

#: statuses a desk check answers with
STATUSES = ("issued", "expired", "suspended", "voided", "not_issued", "bad_check", "malformed")


@dataclass(frozen=True)
class Suggestion:
    code: str
    display: str
    error: str
    description: str
    #: the probability of the slip that turns this code into the input (see issuer.checking.likely)
    likelihood: float = 0.0

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
    #: the end of the code's validity (an expired code's answer says when it ended)
    valid_until: datetime | None = None
    #: since when a suspended code is suspended
    since: datetime | None = None
    suggestions: list[Suggestion] = field(default_factory=list)
    #: words for the clerk when two or more suggestions are about equally likely
    advice: str | None = None

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
    """Every series the text reads as a code of (:func:`issuer.checking.reading.read_code`),
    and otherwise what is wrong."""
    by_key = {series.key: (series, shape) for series, shape in shapes}
    read = read_code([(series.key, shape) for series, shape in shapes], text)
    readings = [
        _Reading(by_key[r.series][0], by_key[r.series][1], r.canonical, r.valid) for r in read.readings
    ]
    return readings, [read.problem] if read.problem else []


def _ranked(session: Session, shape: CodeFormat, typed: str) -> list[Ranked]:
    from issuer.checking.likely import suggest

    def issued(codes: list[str]) -> set[str]:
        # two plain columns, not ORM rows: this runs on every typo
        statement = select(IssuedCode.code).where(IssuedCode.code.in_(codes), IssuedCode.status == ISSUED)
        return set(session.scalars(statement))

    return suggest(shape, typed, issued)


def _advice(suggestions: Sequence[Suggestion]) -> str | None:
    from issuer.checking.likely import advice

    return advice([s.likelihood for s in suggestions])


def _suggestions(shape: CodeFormat, ranked: Sequence[Ranked]) -> list[Suggestion]:
    return [Suggestion(r.code, shape.display(r.code), r.error, r.description, r.likelihood) for r in ranked]


def _suggest_length(session: Session, shapes: Sequence[tuple[Series, CodeFormat]], text: str) -> list[Suggestion]:
    """For a text one character short or long: issued codes with one left out or added."""
    cleaned = normalise_text(text)
    found: list[Suggestion] = []
    for _series, shape in shapes:
        if abs(len(cleaned) - shape.total_width) != 1:
            continue
        found.extend(_suggestions(shape, _ranked(session, shape, cleaned)))
    found.sort(key=lambda s: -s.likelihood)
    return found


def check_codes(
    session: Session, inputs: Sequence[str], now: datetime | None = None, *, series: str | None = None
) -> list[DeskAnswer]:
    """Answer each input, in input order; with ``series``, read them as that series'
    codes only. A code past its validity at ``now`` (the register's clock, passed in)
    answers expired."""
    return _check(session, inputs, now, series)[0]


#: answers that name a code the register holds, whose record can be shown
HELD = ("issued", "expired", "suspended", "voided")


def check_with_records(
    session: Session, inputs: Sequence[str], now: datetime | None = None, *, series: str | None = None
) -> list[tuple[DeskAnswer, Any]]:
    """As :func:`check_codes`, each answer paired with the full record
    (:class:`issuer.register.lifecycle.CodeRecord`: issued when and by whom, prints, last
    seen) of the code it names when the register holds it, else None. The record is
    built from the rows the answer read: the input is read once, the code fetched once."""
    from issuer.register.lifecycle import code_record

    answers, stored = _check(session, inputs, now, series)
    return [
        (answer, code_record(session, stored[answer.code], now)
         if answer.status in HELD and answer.code in stored else None)
        for answer in answers
    ]  # fmt: skip


def _check(
    session: Session, inputs: Sequence[str], now: datetime | None, series: str | None
) -> tuple[list[DeskAnswer], dict[str, IssuedCode]]:
    """The answers, and the stored rows they were read from (by canonical code)."""
    shapes = [(one, code_format(one)) for one in all_series(session) if series is None or one.key == series]
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
        answer = _answer(session, shapes, text, readings, problems, stored, replacements, now)
        answer.input = echo(text)  # what was typed, safe to show and to write as JSON
        answers.append(answer)
    return answers, stored


def _answer(
    session: Session,
    shapes: Sequence[tuple[Series, CodeFormat]],
    text: str,
    readings: list[_Reading],
    problems: list[str],
    stored: dict[str, IssuedCode],
    replacements: dict[int, str],
    now: datetime | None = None,
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
        answer.advice = _advice(answer.suggestions)
        return answer
    for reading in readings:
        row = stored.get(reading.canonical)
        if row is None:
            continue
        answer = DeskAnswer(
            text, standing(row.status, row.valid_until, now), reading.canonical,
            reading.shape.display(row.code), reading.series.key, holder=row.holder,
            valid_until=row.valid_until,
        )
        if row.status == SUSPENDED:
            answer.reason, answer.since = row.suspend_reason, row.suspended_at
        elif answer.status == EXPIRED:
            answer.reason = f"valid until {row.valid_until:%Y-%m-%d %H:%M} UTC"
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
    if problems:  # the text fits several series once its prefix is added
        reason = f"{problems[0]}; {reason}"
    answer = DeskAnswer(
        text, status, reading.canonical, reading.shape.display(reading.canonical),
        reading.series.key, reason=reason,
    )
    for candidate_reading in (valid or readings):
        answer.suggestions.extend(
            _suggestions(candidate_reading.shape, _ranked(session, candidate_reading.shape, candidate_reading.canonical))
        )
    answer.suggestions.sort(key=lambda s: -s.likelihood)
    answer.advice = _advice(answer.suggestions)
    return answer


__all__ = ["HELD", "STATUSES", "DeskAnswer", "Suggestion", "check_codes", "check_with_records"]
