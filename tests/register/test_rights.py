"""Rights the database enforces, one test per forbidden act, as a clerk and as an admin
(PostgreSQL, after ``db roles --apply``). Each act is tried by hand-written SQL through
the tool's own write path, so the refusal comes from the database, not from issuer's
Python; afterwards the register still agrees with itself."""

from __future__ import annotations

import json
from typing import Any

import pytest
from sqlalchemy import text
from sqlalchemy.exc import IntegrityError

from issuer.errors import IssuerError
from issuer.register.lifecycle import void_code
from issuer.register.store import open_register
from tests.register.consistency import assert_consistent
from tests.register.pg import pg_database  # noqa: F401
from tests.register.test_roles import Guarded, as_role, groups, guarded, raw, refused  # noqa: F401

WHO = ["clerk", "admin"]


def logged(action: str, *, code: str | None = None, series: int | None = 1, batch: int | None = None) -> str:
    """SQL that appends one entry through the one append function (allowed to both roles)."""
    entry = {"action": action, "series": series, "code": code, "batch": batch, "detail": "{}"}
    return "SELECT issuer_log_append(now(), 'hand', '" + json.dumps([entry]).replace("'", "''") + "')"


def acts(register: Any, *statements: str, **params: Any) -> None:
    """Several statements in one transaction of the tool's write path."""

    def work(session: Any) -> None:
        for statement in statements:
            session.execute(text(statement), params)

    register.write(work)


@pytest.fixture(params=WHO)
def person(request: pytest.FixtureRequest, guarded: Guarded) -> Any:  # noqa: F811
    register = as_role(getattr(guarded, request.param), f"{request.param}-hand")
    yield register
    register.close()
    assert_consistent(guarded.owner)  # nothing half-done


def test_no_code_is_inserted_voided(person: Any) -> None:
    refused(lambda: acts(
        person,
        "INSERT INTO batch (series_id, kind, count, created_at, actor) VALUES (1, 'issue', 1, now(), 'x')",
        logged("issue", batch=None),
        "INSERT INTO issued_code (series_id, code, base, status, batch_id, print_count) "
        "VALUES (1, 'T0009999', 9999, 'voided', currval('batch_id_seq'), 0)",
    ))  # fmt: skip


def test_no_code_is_inserted_into_a_batch_made_by_another_act(person: Any) -> None:
    refused(lambda: acts(
        person,
        logged("issue", batch=1),
        "INSERT INTO issued_code (series_id, code, base, status, batch_id, print_count) "
        "VALUES (1, 'T0009999', 9999, 'issued', 1, 0)",
    ))  # fmt: skip


def test_no_code_is_inserted_already_printed(person: Any) -> None:
    refused(lambda: acts(
        person,
        "INSERT INTO batch (series_id, kind, count, created_at, actor) VALUES (1, 'issue', 1, now(), 'x')",
        "INSERT INTO issued_code (series_id, code, base, status, batch_id, print_count) "
        "VALUES (1, 'T0009999', 9999, 'issued', currval('batch_id_seq'), 3)",
    ))  # fmt: skip


def test_no_batch_goes_unlogged(person: Any) -> None:
    refused(lambda: acts(
        person, "INSERT INTO batch (series_id, kind, count, created_at, actor) VALUES (1, 'issue', 0, now(), 'x')"
    ))


def checked_out(act: Any) -> str:
    """Refused by a rule every role is held to (a CHECK-like trigger): an integrity error."""
    with pytest.raises((IntegrityError, IssuerError)) as caught:
        act()
    return str(caught.value)


def test_no_counter_moves_backwards(person: Any) -> None:
    # even with a log entry for the series in the same act
    message = checked_out(lambda: acts(
        person, logged("issue"), "UPDATE series SET next_counter = next_counter - 1 WHERE id = 1"
    ))
    assert "never move back" in message


def test_no_series_changes_unlogged(person: Any) -> None:
    refused(lambda: raw(person, "UPDATE series SET next_counter = next_counter + 1 WHERE id = 1"))


def test_no_range_is_moved_under_issued_codes(person: Any) -> None:
    def act() -> None:
        acts(person, logged("series.change"), "UPDATE series SET range_start = 0 WHERE id = 1")

    if "clerk" in person.actor:
        refused(act)  # no column grant, no admin act
    else:
        assert "shape is frozen" in checked_out(act)


def test_no_direct_log_entry(person: Any) -> None:
    message = refused(lambda: raw(
        person,
        "INSERT INTO log_entry (id, at, actor, action, detail, prev_hash, hash) "
        "VALUES (99, now(), 'x', 'void', '{}', :h, :h)", h="0" * 64,
    ))  # fmt: skip
    assert "log_entry" in message


def test_no_log_head_move(person: Any) -> None:
    refused(lambda: raw(person, "UPDATE log_chain SET last_id = 1, last_hash = :h", h="0" * 64))
    refused(lambda: raw(person, "UPDATE log_tree SET size = 0"))
    refused(lambda: raw(person, "DELETE FROM log_leaf"))


def test_no_un_void_without_a_logged_restore(person: Any, guarded: Guarded) -> None:  # noqa: F811
    owner = open_register(guarded.owner, actor="owner")
    void_code(owner, guarded.codes[4], reason="tag melted")
    owner.close()
    refused(lambda: raw(
        person, "UPDATE issued_code SET status = 'issued', void_reason = NULL, voided_at = NULL, "
        "voided_by = NULL WHERE code = :c", c=guarded.codes[4],
    ))  # fmt: skip


def test_no_print_count_changes_unlogged(person: Any, guarded: Guarded) -> None:  # noqa: F811
    refused(lambda: raw(person, "UPDATE issued_code SET print_count = 7 WHERE code = :c", c=guarded.codes[0]))


def test_the_append_function_records_the_login_and_a_clerk_cannot_log_an_admins_act(
    guarded: Guarded,  # noqa: F811
) -> None:
    clerk = as_role(guarded.clerk, "clerk-hand")
    admin = as_role(guarded.admin, "admin-hand")
    try:
        refused(lambda: raw(clerk, logged("void", code=guarded.codes[0])))
        raw(admin, logged("stocktake"))
        with admin.reading() as session:
            login, actor = session.execute(
                text("SELECT login, actor FROM log_entry ORDER BY id DESC LIMIT 1")
            ).one()
            user = session.execute(text("SELECT session_user")).scalar_one()
        assert (login, actor) == (user, "hand")  # the login beside the actor the tool was told
    finally:
        clerk.close()
        admin.close()
