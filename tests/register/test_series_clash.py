"""Eight desks define a series of the same shape at the same instant: exactly one is
accepted, on SQLite and on PostgreSQL (regression: PostgreSQL used to accept several
series whose codes are the same text, and the second one's first issue failed)."""

from __future__ import annotations

from sqlalchemy import func, select

from issuer.register.issuing import issue_codes
from issuer.register.models import Series
from issuer.register.store import open_register
from tests.register.desks import run_desks
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

DESKS = 8
SHAPE = {"scheme": "luhn", "length": 6, "prefix": "Q"}


def _race(url: str, keys: list[str]) -> list[list[dict[str, object]]]:
    register = open_register(url, actor="setup")  # migrated before the desks start
    register.close()
    jobs = [
        {"mode": "define", "db": url, "series": key, "spec": SHAPE, "actor": f"desk-{desk}"}
        for desk, key in enumerate(keys)
    ]
    return run_desks(jobs, timeout=300)


def _accepted(reports: list[list[dict[str, object]]]) -> list[object]:
    outcomes = [record for desk in reports for record in desk]
    assert len(outcomes) == DESKS, outcomes
    refused = [r for r in outcomes if r["op"] == "refused"]
    assert all("coincide" in str(r["why"]) or "exists already" in str(r["why"]) for r in refused)
    return [r["series"] for r in outcomes if r["op"] == "defined"]


def test_eight_desks_defining_clashing_series_accept_one(register_url: str) -> None:  # noqa: F811
    accepted = _accepted(_race(register_url, [f"tools-{desk}" for desk in range(DESKS)]))
    assert len(accepted) == 1, accepted
    register = open_register(register_url, actor="check")
    try:
        with register.reading() as session:
            assert session.scalar(select(func.count()).select_from(Series)) == 1
        # the one accepted series issues normally
        assert issue_codes(register, str(accepted[0]), 2).count == 2
    finally:
        register.close()


def test_eight_desks_defining_the_same_key_accept_one(register_url: str) -> None:  # noqa: F811
    accepted = _accepted(_race(register_url, ["tools"] * DESKS))
    assert accepted == ["tools"]
