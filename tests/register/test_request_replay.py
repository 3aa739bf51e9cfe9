"""A retry under a request id must be the same request: series, count, holder and note
are compared, and any difference is refused with a line naming it; nothing is issued."""

from __future__ import annotations

from typing import Any

import pytest
from sqlalchemy import func, select

from issuer.errors import Conflict
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes, request_differences
from issuer.register.models import IssuedCode

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", title="Tool tags")
CARDS = SeriesSpec(key="cards", scheme="damm", length=8, prefix="QM", title="Member cards")


def _held(register: Any) -> int:
    with register.reading() as session:
        return int(session.scalar(select(func.count()).select_from(IssuedCode)) or 0)


def test_request_differences_names_each_field() -> None:
    was = ("tools", 1, "Ada Finch", None)
    assert request_differences(was, ("tools", 1, "Ada Finch", None)) == []
    assert request_differences(was, ("tools", 1, "Ada Finch", "")) == []  # empty is not given
    assert request_differences(was, ("cards", 2, "Bo Wren", "spare")) == [
        "series was 'tools', now 'cards'",
        "count was 1, now 2",
        "holder was 'Ada Finch', now 'Bo Wren'",
        "note was not given, now 'spare'",
    ]


@pytest.mark.parametrize(
    ("retry", "named"),
    [
        ({"key": "cards"}, "series was 'tools', now 'cards'"),
        ({"count": 3}, "count was 2, now 3"),
        ({"holder": "Bo Wren"}, "holder was 'Ada Finch', now 'Bo Wren'"),
        ({"holder": None}, "holder was 'Ada Finch', now not given"),
        ({"note": "loan desk"}, "note was 'spring intake', now 'loan desk'"),
    ],
)
def test_a_different_retry_is_refused_naming_the_difference(register: Any, retry: dict[str, Any], named: str) -> None:
    add_series(register, TOOLS)
    add_series(register, CARDS)
    asked: dict[str, Any] = {"key": "tools", "count": 2, "holder": "Ada Finch", "note": "spring intake"}
    first = issue_codes(register, request_id="desk2-0007", **asked)
    same = issue_codes(register, request_id="desk2-0007", **asked)
    assert same.replayed and [c.code for c in same.codes] == [c.code for c in first.codes]
    with pytest.raises(Conflict) as caught:
        issue_codes(register, request_id="desk2-0007", **{**asked, **retry})
    assert named in caught.value.message and "nothing was issued" in caught.value.message
    assert _held(register) == 2


def test_a_bulk_retry_with_another_holder_is_refused(register: Any) -> None:
    from issuer.register.issuing import BULK_FROM

    add_series(register, TOOLS)
    issue_codes(register, "tools", BULK_FROM, holder="Workshop", request_id="intake-9", collect=False)
    with pytest.raises(Conflict, match="holder was 'Workshop', now 'Stores'"):
        issue_codes(register, "tools", BULK_FROM, holder="Stores", request_id="intake-9", collect=False)
    assert _held(register) == BULK_FROM
