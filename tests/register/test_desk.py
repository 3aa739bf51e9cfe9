"""Desk verification: a typo of each kind on an issued code is caught (or at least
not taken for an issued code) and the issued code is the first suggestion."""

from __future__ import annotations

from typing import Any

import pytest

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.desk import check_codes
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code, void_code

# body 1130232 holds a twin (11), a phonetic pair (30 -> "thirteen"), a jump twin (232)
BODY_BASE = 1130232


def _swap(text: str, i: int, j: int) -> str:
    chars = list(text)
    chars[i], chars[j] = chars[j], chars[i]
    return "".join(chars)


def _put(text: str, i: int, new: str) -> str:
    return text[:i] + new + text[i + len(new):]


@pytest.fixture
def tools(register: Any) -> str:
    add_series(register, SeriesSpec(key="tools", scheme="damm", length=7, prefix="QTL",
                                    group=(4, 4), start=BODY_BASE))
    code = issue_codes(register, "tools").codes[0].code
    assert code[3:10] == "1130232"
    return code


def _typos(code: str) -> dict[str, str]:
    # positions in the canonical code "QTL" + body "1130232" + check
    return {
        "single": _put(code, 7, "9" if code[7] != "9" else "8"),  # one digit wrong
        "adjacent": _swap(code, 5, 6),  # 3 and 0 swapped
        "jump": _swap(code, 6, 8),  # 0 and 3 across the 2
        "twin": _put(code, 3, "55"),  # 11 typed as 55
        "jump_twin": _put(code, 7, "535"),  # 232 typed as 535
        "phonetic": _put(code, 5, "13"),  # 30 heard as 13
    }


@pytest.mark.parametrize("error", ["single", "adjacent", "jump", "twin", "jump_twin", "phonetic"])
def test_a_typo_of_each_kind_points_back_to_the_issued_code(register: Any, tools: str, error: str) -> None:
    typed = _typos(tools)[error]
    assert typed != tools
    with register.reading() as session:
        (answer,) = check_codes(session, [typed])
    assert answer.status in ("bad_check", "not_issued")
    assert answer.series == "tools"
    assert answer.suggestions, f"no suggestion for a {error} error"
    assert answer.suggestions[0].code == tools
    assert answer.suggestions[0].error == error
    # Damm's method catches every single substitution and adjacent transposition
    # source: H. M. Damm, Total anti-symmetrische Quasigruppen, 2004
    if error in ("single", "adjacent"):
        assert answer.status == "bad_check"


def test_issued_voided_and_replaced_codes(register: Any, tools: str) -> None:
    other = issue_codes(register, "tools", 2).codes
    void_code(register, other[0].code, reason="lost")
    new = replace_code(register, other[1].code, reason="cracked tag")
    with register.reading() as session:
        answers = check_codes(session, [tools.lower(), other[0].display, other[1].code, new.display])
    assert [a.status for a in answers] == ["issued", "voided", "voided", "issued"]
    assert answers[0].code == tools and answers[0].input == tools.lower()
    assert answers[1].reason == "lost" and answers[1].replacement is None
    assert answers[2].reason == "cracked tag" and answers[2].replacement == new.display


def test_malformed_inputs_say_what_is_wrong(register: Any, tools: str) -> None:
    with register.reading() as session:
        answers = check_codes(session, ["", "QTL-12-34", "ABC-0000-0000", "QTL-11X0-2321"])
    assert [a.status for a in answers] == ["malformed"] * 4
    assert answers[0].reason == "empty input"
    assert "expected 8" in (answers[1].reason or "")
    assert "prefix QTL" in (answers[2].reason or "")
    assert "'X'" in (answers[3].reason or "")


def test_a_character_left_out_is_suggested(register: Any, tools: str) -> None:
    short = tools[:6] + tools[7:]
    with register.reading() as session:
        (answer,) = check_codes(session, [short])
    assert answer.status == "malformed"
    assert [s.code for s in answer.suggestions][:1] == [tools]


def test_a_valid_code_never_issued_is_not_issued(register: Any, tools: str) -> None:
    from issuer.checking.schemes import get_scheme

    stranger = "QTL" + get_scheme("damm").append("9000001")
    with register.reading() as session:
        (answer,) = check_codes(session, [stranger])
    assert answer.status == "not_issued"
    assert answer.suggestions == []


def test_an_empty_register_answers_malformed(register: Any) -> None:
    with register.reading() as session:
        (answer,) = check_codes(session, ["QTL-0000-0000"])
    assert answer.status == "malformed" and "no series" in (answer.reason or "")


def test_answers_with_records_read_each_held_code_once(register: Any, tools: str) -> None:
    """The counter's call: the same answers as check_codes, and for every code the
    register holds its record (the replacement linked both ways), none for the rest."""
    from issuer.register.desk import check_with_records
    from issuer.register.lifecycle import code_history

    replacement = replace_code(register, tools, reason="tag snapped").code
    typed = [tools, replacement, _typos(tools)["adjacent"], "drill bit 3"]
    with register.reading() as session:
        plain = check_codes(session, typed)
        paired = check_with_records(session, typed)
        expected = code_history(session, tools)[0]
    assert [answer.as_dict() for answer, _ in paired] == [answer.as_dict() for answer in plain]
    assert [answer.status for answer, _ in paired] == ["voided", "issued", "bad_check", "malformed"]
    old, new = paired[0][1], paired[1][1]
    assert old == expected and old.replaced_by == replacement and old.void_reason == "tag snapped"
    assert new.code == replacement and new.replaces == tools and new.replaces_display == old.display
    assert paired[2][1] is None and paired[3][1] is None
