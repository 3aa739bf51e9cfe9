"""Validity, suspension and fill levels through the Python API on SQLite and PostgreSQL:
expired and suspended answers in check, reconcile, history, export and doctor; an
expired code is never reissued; a suspended code is not printed; voided stays final."""

from __future__ import annotations

import csv
import io
from datetime import timedelta
from pathlib import Path
from typing import Any

import pytest

from issuer.errors import Conflict, InvalidFormat
from issuer.register.defining import SeriesSpec, add_series, change_series
from issuer.register.desk import check_codes
from issuer.register.doctor import run_doctor
from issuer.register.fill import after_batch
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import code_history, replace_code, restore_code, void_code
from issuer.register.logverify import verify_chain
from issuer.register.printing import select_for_printing
from issuer.register.series import get_series, series_state
from issuer.register.suspension import reinstate_code, suspend_code
from issuer.register.transfer import EXPORT_COLUMNS, export_codes
from issuer.register.validity import renew_code
from issuer.stocktake.reconcile import read_scans, reconcile
from issuer.stocktake.report import as_json
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.test_holders import MEMBERS, TOOLS, Clock, clock, reg  # noqa: F401

PASSES = SeriesSpec(key="passes", scheme="damm", alphabet="crockford32", length=5, prefix="DP",
                    valid_for_days=1, title="Day passes")  # fmt: skip


def test_a_day_pass_expires_and_is_renewed(reg: Any, clock: Clock) -> None:  # noqa: F811
    add_series(reg, PASSES)
    issued = issue_codes(reg, "passes", 2).codes
    pass_code, other = issued[0].code, issued[1].code
    with reg.reading() as session:
        (answer,) = check_codes(session, [pass_code], clock.now)
        assert answer.status == "issued" and answer.valid_until == clock.now + timedelta(days=1)
    clock.advance(days=1, seconds=1)
    with reg.reading() as session:
        (answer,) = check_codes(session, [pass_code], clock.now)
        data = answer.as_dict()
        assert data["status"] == "expired" and "valid until" in data["reason"]
        assert data["valid_until"] == clock.now - timedelta(seconds=1)
        record, _ = code_history(session, pass_code, clock.now)
        assert record.standing == "expired" and record.status == "issued"
    # never reissued: the next pass is a new number
    fresh = issue_codes(reg, "passes", 1).codes[0].code
    assert fresh not in (pass_code, other)
    renewal = renew_code(reg, pass_code, days=30)
    assert renewal.valid_until == clock.now + timedelta(days=30)
    with reg.reading() as session:
        (answer,) = check_codes(session, [pass_code], clock.now)
        assert answer.status == "issued"
        _, events = code_history(session, pass_code, clock.now)
        assert events[-1].action == "renew" and events[-1].as_dict()["detail"]["days"] == 30
        assert verify_chain(session).intact
    # renewing early adds to the current end, nothing is lost
    again = renew_code(reg, pass_code, days=10)
    assert again.valid_until == renewal.valid_until + timedelta(days=10)
    with pytest.raises(InvalidFormat, match="passed"):
        renew_code(reg, pass_code, until=clock.now - timedelta(days=1))
    with pytest.raises(InvalidFormat, match="exactly one"):
        renew_code(reg, pass_code)
    void_code(reg, other, reason="pass returned")
    with pytest.raises(Conflict, match="voided"):
        renew_code(reg, other, days=1)


def test_explicit_validity_at_issue_and_series_default_changes(reg: Any, clock: Clock) -> None:  # noqa: F811
    until = clock.now + timedelta(days=365)
    card = issue_codes(reg, "members", 1, valid_until=until).codes[0].code
    bulk = issue_codes(reg, "tools", 80, valid_until=until).codes
    change_series(reg, "tools", valid_for_days=30)
    later = issue_codes(reg, "tools", 1).codes[0].code
    with reg.reading() as session:
        answers = check_codes(session, [card, bulk[-1].code, later], clock.now)
        assert [a.valid_until for a in answers] == [until, until, clock.now + timedelta(days=30)]
        state = series_state(session, get_series(session, "tools"), clock.now)
        assert state.valid_for == "30d" and state.expired == 0
    clock.advance(days=31)
    with reg.reading() as session:
        assert series_state(session, get_series(session, "tools"), clock.now).expired == 1


def test_suspend_reinstate_replace_and_void_stays_final(reg: Any, clock: Clock) -> None:  # noqa: F811
    cards = [info.code for info in issue_codes(reg, "members", 3).codes]
    suspended = suspend_code(reg, cards[0], reason="reported lost at the workshop")
    assert suspended.status == "suspended"
    with reg.reading() as session:
        (answer,) = check_codes(session, [cards[0]], clock.now)
        assert answer.as_dict()["status"] == "suspended"
        assert answer.reason == "reported lost at the workshop" and answer.since == clock.now
    with pytest.raises(Conflict, match="suspended"):
        select_for_printing(reg, codes=[cards[0]])
    assert select_for_printing(reg, series="members", void="omit").omitted_void
    with pytest.raises(Conflict, match="already"):
        suspend_code(reg, cards[0], reason="again")
    clock.advance(hours=3)
    back = reinstate_code(reg, cards[0], reason="found in the car park")
    assert back.status == "issued" and back.suspended_at is None
    # a lost card that stays lost: replaced from suspended
    suspend_code(reg, cards[1], reason="reported lost")
    new = replace_code(reg, cards[1], reason="not found after a week")
    with reg.reading() as session:
        answers = check_codes(session, [cards[1], new.code], clock.now)
        assert [a.status for a in answers] == ["voided", "issued"]
        _, events = code_history(session, cards[1], clock.now)
        assert [e.action for e in events] == ["issue", "suspend", "void"]
    with pytest.raises(Conflict, match="not suspended"):
        reinstate_code(reg, cards[1])
    void_code(reg, cards[2], reason="membership ended")
    with pytest.raises(Conflict, match="stays voided"):
        suspend_code(reg, cards[2], reason="lost")
    # a suspended replacement still blocks restoring the code it replaced
    suspend_code(reg, new.code, reason="reported lost too")
    with pytest.raises(Conflict, match="void that first"):
        restore_code(reg, cards[1], reason="found")
    with reg.reading() as session:
        assert verify_chain(session).intact


def test_fill_levels_warn_once_per_level(reg: Any) -> None:  # noqa: F811
    add_series(reg, SeriesSpec(key="lockers", scheme="luhn", length=2, prefix="L", start=1, end=20,
                               fill_levels=(50, 90)))  # fmt: skip
    issue_codes(reg, "lockers", 9)
    with reg.reading() as session:
        assert after_batch(session, "lockers", 9) == (0.45, None)
    issue_codes(reg, "lockers", 2)
    with reg.reading() as session:
        fill, warning = after_batch(session, "lockers", 2)
        assert warning is not None and warning.level == 50 and not warning.last_level
        assert "55.0% full" in warning.message() and fill == 0.55
        state = series_state(session, get_series(session, "lockers"))
        assert state.fill_level == 50 and state.fill_levels == (50, 90)
    issue_codes(reg, "lockers", 7)
    with reg.reading() as session:
        _, warning = after_batch(session, "lockers", 7)
        assert warning is not None and warning.level == 90 and warning.last_level
    fill = next(f for f in run_doctor(reg).findings if f.check == "fill")
    assert fill.status == "warn" and fill.details[0].startswith("lockers: 90.0% full")


def test_states_in_reconcile_export_and_doctor(reg: Any, clock: Clock, tmp_path: Path) -> None:  # noqa: F811
    codes = [info.code for info in issue_codes(reg, "tools", 4).codes]
    renew_code(reg, codes[0], until=clock.now + timedelta(days=2))
    suspend_code(reg, codes[1], reason="tag reported missing")
    clock.advance(days=3)
    scan = tmp_path / "scan.csv"
    scan.write_text("code,shelf\n" + "".join(f"{code},B-{n}\n" for n, code in enumerate(codes[:3])))
    recon = reconcile(reg, "tools", read_scans(scan))
    report = as_json(recon)
    assert report["counts"]["expired"] == 1 and report["counts"]["suspended"] == 1
    assert report["counts"]["issued"] == 1 and report["counts"]["missing"] == 1
    assert report["expired"][0]["code"] == codes[0] and report["expired"][0]["valid_until"].startswith("2026-03-04")
    assert report["suspended"][0]["reason"] == "tag reported missing"
    stream = io.StringIO()
    export_codes(reg, "tools", stream)
    rows = list(csv.DictReader(io.StringIO(stream.getvalue())))
    assert list(rows[0]) == list(EXPORT_COLUMNS)
    assert [row["status"] for row in rows] == ["expired", "suspended", "issued", "issued"]
    assert rows[1]["suspend_reason"] == "tag reported missing" and rows[0]["valid_until"]
    states = next(f for f in run_doctor(reg).findings if f.check == "states")
    assert states.status == "ok" and "1 suspended, 1 expired" in states.summary
