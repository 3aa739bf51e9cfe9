"""The register through its Python API: issuance, lifecycle, request ids, exhaustion,
clashes, and the rule that a voided code never comes back."""

from __future__ import annotations

from typing import Any

import pytest
from sqlalchemy import func, select

from issuer.checking.schemes import get_scheme
from issuer.errors import Conflict, Exhausted, InvalidCheck, InvalidFormat, NotFound
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import (
    code_history,
    log_entries,
    replace_code,
    restore_code,
    void_code,
)
from issuer.register.logverify import verify_chain
from issuer.register.models import IssuedCode, Series
from issuer.register.series import get_series, open_key, series_state

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", group=(4, 4), title="Tool tags")


def test_in_order_issue_assigns_consecutive_bases_with_valid_checks(register: Any) -> None:
    add_series(register, TOOLS)
    result = issue_codes(register, "tools", 5)
    assert [info.base for info in result.codes] == [1, 2, 3, 4, 5]
    luhn = get_scheme("luhn")
    for info in result.codes:
        assert info.code.startswith("QTL")
        assert luhn.is_valid(info.code[3:])
        assert info.display == f"QTL-{info.code[3:7]}-{info.code[7:]}"
    again = issue_codes(register, "tools", 2)
    assert [info.base for info in again.codes] == [6, 7]
    assert again.batch != result.batch


def test_whole_lifecycle_is_logged_and_linked(register: Any) -> None:
    add_series(register, TOOLS)
    first, second, third = issue_codes(register, "tools", 3).codes
    voided = void_code(register, first.display, reason="lost at the workshop")
    assert voided.status == "voided" and voided.void_reason == "lost at the workshop"
    replacement = replace_code(register, second.code.lower(), reason="label damaged")
    assert replacement.replaces == second.code
    restored = restore_code(register, first.code, reason="found on the shelf")
    assert restored.status == "issued"
    with register.reading() as session:
        record, events = code_history(session, second.code)
        assert record.status == "voided" and record.replaced_by == replacement.code
        assert [event.action for event in events] == ["issue", "void"]
        new_record, new_events = code_history(session, replacement.code)
        assert new_record.replaces == second.code
        assert [event.action for event in new_events] == ["replace"]
        _, first_events = code_history(session, first.code)
        assert [event.action for event in first_events] == ["issue", "void", "restore"]
        actions = [event.action for event in log_entries(session, series="tools")]
        assert actions == ["series.add", "issue", "void", "void", "replace", "restore"]
        assert verify_chain(session).intact
        state = series_state(session, get_series(session, "tools"))
        assert (state.issued, state.voided, state.held) == (3, 1, 4)


def test_voided_codes_are_never_issued_again(register: Any) -> None:
    add_series(register, SeriesSpec(key="tiny", scheme="luhn", length=2, start=0, end=9))
    first = issue_codes(register, "tiny", 4).codes
    for info in first[:2]:
        void_code(register, info.code, reason="test")
    rest = issue_codes(register, "tiny", 6).codes
    all_codes = [info.code for info in first + rest]
    assert len(set(all_codes)) == 10
    assert not {info.code for info in first[:2]} & {info.code for info in rest}


@pytest.mark.parametrize("mode", ["sequential", "scattered"])
def test_exhaustion_of_a_range_of_ten_is_exact(register: Any, mode: str) -> None:
    add_series(register, SeriesSpec(key="ten", scheme="luhn", length=3, start=100, end=109, mode=mode))
    bases = [info.base for info in issue_codes(register, "ten", 7).codes]
    with pytest.raises(Exhausted, match="3 numbers left"):
        issue_codes(register, "ten", 4)
    bases += [info.base for info in issue_codes(register, "ten", 3).codes]
    assert sorted(bases) == list(range(100, 110))
    with pytest.raises(Exhausted):
        issue_codes(register, "ten", 1)
    with pytest.raises(Exhausted):
        replace_code(register, _code_of(register, "ten"), reason="no room")
    with register.reading() as session:
        assert session.scalar(select(func.count()).select_from(IssuedCode)) == 10
        assert get_series(session, "ten").code_count == 10


def _code_of(register: Any, key: str) -> str:
    with register.reading() as session:
        series = get_series(session, key)
        return session.scalars(select(IssuedCode.code).where(IssuedCode.series_id == series.id)).first()


def test_a_refused_replace_changes_nothing(register: Any) -> None:
    add_series(register, SeriesSpec(key="ten", scheme="luhn", length=3, start=0, end=9))
    codes = issue_codes(register, "ten", 10).codes
    with pytest.raises(Exhausted):
        replace_code(register, codes[0].code, reason="broken")
    with register.reading() as session:
        row = session.scalar(select(IssuedCode).where(IssuedCode.code == codes[0].code))
        assert row.status == "issued"


def test_request_id_replays_the_same_codes(register: Any) -> None:
    add_series(register, TOOLS)
    first = issue_codes(register, "tools", 3, request_id="desk2-0001")
    again = issue_codes(register, "tools", 3, request_id="desk2-0001")
    assert again.replayed and not first.replayed
    assert [c.code for c in again.codes] == [c.code for c in first.codes]
    assert again.batch == first.batch
    with pytest.raises(Conflict, match="request id"):
        issue_codes(register, "tools", 5, request_id="desk2-0001")
    with register.reading() as session:
        assert session.scalar(select(func.count()).select_from(IssuedCode)) == 3


def test_series_whose_codes_could_coincide_are_refused(register: Any) -> None:
    add_series(register, TOOLS)
    with pytest.raises(Conflict, match="tools"):
        add_series(register, SeriesSpec(key="kit", scheme="luhn", length=7, prefix="QTL"))
    # a different prefix, or a different width, does not clash
    add_series(register, SeriesSpec(key="kit", scheme="luhn", length=7, prefix="QKT"))
    add_series(register, SeriesSpec(key="wide", scheme="luhn", length=8, prefix="QTL"))
    with pytest.raises(Conflict, match="exists already"):
        add_series(register, TOOLS)


def test_the_shape_is_checked_when_a_series_is_defined(register: Any) -> None:
    with pytest.raises(InvalidFormat, match="grouping"):
        add_series(register, SeriesSpec(key="bad", scheme="luhn", length=7, group=(4, 3)))
    with pytest.raises(InvalidFormat, match="does not fit"):
        add_series(register, SeriesSpec(key="bad", scheme="luhn", length=2, end=100))
    with pytest.raises(InvalidFormat, match="series key"):
        add_series(register, SeriesSpec(key="Bad Key", scheme="luhn", length=4))
    with register.reading() as session:
        assert session.scalar(select(func.count()).select_from(Series)) == 0


def test_unknown_series_and_unknown_codes_are_clear_errors(register: Any) -> None:
    with pytest.raises(NotFound, match="no series 'nope'"):
        issue_codes(register, "nope")
    add_series(register, TOOLS)
    issued = issue_codes(register, "tools").codes[0]
    with pytest.raises(InvalidFormat, match="shape"):
        void_code(register, "ZZ-12", reason="test")
    never = "QTL" + get_scheme("luhn").append("0099999")
    with pytest.raises(NotFound, match="never issued"):
        void_code(register, never, reason="test")
    wrong = issued.code[:-1] + str((int(issued.code[-1]) + 1) % 10)
    with pytest.raises(InvalidCheck):
        void_code(register, wrong, reason="test")
    with pytest.raises(InvalidFormat, match="reason"):
        void_code(register, issued.code, reason="   ")
    with pytest.raises(Conflict, match="not voided"):
        restore_code(register, issued.code, reason="test")


def test_restore_refuses_a_code_whose_replacement_is_in_use(register: Any) -> None:
    add_series(register, TOOLS)
    code = issue_codes(register, "tools").codes[0].code
    new = replace_code(register, code, reason="damaged")
    with pytest.raises(Conflict, match="void that first"):
        restore_code(register, code, reason="oops")
    void_code(register, new.code, reason="mistaken replacement")
    assert restore_code(register, code, reason="oops").status == "issued"


def test_a_failed_batch_leaves_no_gap(register: Any, monkeypatch: pytest.MonkeyPatch) -> None:
    from issuer.register import issuing

    add_series(register, TOOLS)
    issue_codes(register, "tools", 2)

    def broken(*args: Any, **kwargs: Any) -> Any:
        raise RuntimeError("power cut after the codes were written")

    # the log entry is written after the codes: failing there must undo the codes too
    with monkeypatch.context() as patch:
        patch.setattr(issuing, "append_entry", broken)  # big batches
        patch.setattr(issuing, "issue_detail", broken)  # small ones, on every path
        with pytest.raises(RuntimeError):
            issue_codes(register, "tools", 100)
        with pytest.raises(RuntimeError):
            issue_codes(register, "tools", 1)
    after = issue_codes(register, "tools", 1).codes[0]
    assert after.base == 3
    with register.reading() as session:
        assert session.scalar(select(func.count()).select_from(IssuedCode)) == 3
        assert verify_chain(session).intact


def test_scattered_series_spread_numbers_without_collisions(register: Any) -> None:
    add_series(register, SeriesSpec(key="cards", scheme="luhn", length=8, mode="scattered"))
    result = issue_codes(register, "cards", 500)
    bases = [info.base for info in result.codes]
    assert len(set(bases)) == 500
    ordered = sorted(bases)
    # not a run of neighbours: scattered over the range
    assert ordered[-1] - ordered[0] > 1000 * len(bases)
    assert max(b - a for a, b in zip(ordered, ordered[1:])) > 1000
    assert all(1 <= base <= 99_999_999 for base in bases)
    assert result.protected is True
    with register.reading() as session:
        series = get_series(session, "cards")
        # stored sealed (magic, nonce, the 32-byte key encrypted, tag); opened it is AES-256's
        assert series.scatter_key is not None and len(series.scatter_key) == 4 + 12 + 32 + 16
        assert len(open_key(series)) == 32


def test_a_series_shape_can_change_until_it_issues_then_it_is_frozen(register: Any) -> None:
    from issuer.register.defining import change_series

    add_series(register, TOOLS)
    changed = change_series(register, "tools", length=8, group=(4, 5), title="Workshop tags")
    assert (changed.length, changed.grouping, changed.title) == (8, "4,5", "Workshop tags")
    with pytest.raises(Conflict, match="could coincide"):
        add_series(register, SeriesSpec(key="kit", scheme="luhn", length=8, prefix="QTL"))
    issue_codes(register, "tools")
    with pytest.raises(Conflict, match="frozen"):
        change_series(register, "tools", length=9)
    with pytest.raises(Conflict, match="frozen"):
        change_series(register, "tools", prefix="QTX")
    assert change_series(register, "tools", title="Tool tags").title == "Tool tags"
    with register.reading() as session:
        actions = [event.action for event in log_entries(session, series="tools")]
    assert actions.count("series.change") == 2
    with pytest.raises(InvalidFormat, match="nothing to change"):
        change_series(register, "tools")
