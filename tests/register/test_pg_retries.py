"""PostgreSQL: what the retry loop does when the server drops a connection or refuses a
transaction it cannot serialise.

* No ping on checkout: a pooled connection the server has closed between two acts is found
  dead by the act's first statement; nothing was committed, so the act runs again on a
  fresh connection and is applied once.
* A connection lost while the COMMIT is under way leaves the outcome unknown: one line says so.
* SQLSTATE 40001 (serialization_failure) and 40P01 (deadlock_detected) are retried: a real
  serialisation failure is forced with two REPEATABLE READ transactions on the same series
  row, and the act is applied exactly once.
"""

from __future__ import annotations

import threading
from collections.abc import Iterator
from typing import Any

import pytest
from sqlalchemy import event, text

from issuer.errors import ConnectionLost
from issuer.register import store
from issuer.register.anchors import verify_log
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.series import get_series
from issuer.register.store import Register, open_register
from tests.register.consistency import assert_consistent
from tests.register.pg import admin_sql, pg_database, pg_url  # noqa: F401

SHELF = SeriesSpec(key="shelf", scheme="luhn", length=6, prefix="QS")


@pytest.fixture
def register(pg_url: str) -> Iterator[Register]:  # noqa: F811
    opened = open_register(pg_url, actor="front-desk")
    add_series(opened, SHELF)
    yield opened
    opened.close()


def _terminate_others(database: str) -> int:
    """End every session on ``database`` but the caller's (as the server's administrator)."""
    import psycopg

    from tests.register.pg import ADMIN_URL

    with psycopg.connect(ADMIN_URL, autocommit=True) as admin:
        rows = admin.execute(
            "SELECT pg_terminate_backend(pid) FROM pg_stat_activity "
            "WHERE datname = %s AND pid <> pg_backend_pid()",
            (database,),
        ).fetchall()
        # wait until the server has really let them go
        for _ in range(200):
            left = admin.execute(
                "SELECT count(*) FROM pg_stat_activity WHERE datname = %s AND pid <> pg_backend_pid()",
                (database,),
            ).fetchone()
            if left is not None and left[0] == 0:
                break
            threading.Event().wait(0.01)
    return len(rows)


def _codes(register: Register) -> list[str]:
    with register.engine.connect() as connection:
        return [row[0] for row in connection.execute(text("SELECT code FROM issued_code ORDER BY id"))]


def _next_counter(register: Register) -> int:
    with register.reading() as session:
        return get_series(session, "shelf").next_counter


def _assert_log_intact(register: Register) -> None:
    report, _ = verify_log(register)
    assert report.intact, report.problem


@pytest.mark.parametrize("with_request_id", [False, True], ids=["plain", "request-id"])
def test_a_connection_closed_between_acts_is_replaced_and_the_act_applied_once(
    register: Register, pg_database: str, pg_url: str, with_request_id: bool  # noqa: F811
) -> None:
    first = issue_codes(register, "shelf", 1).codes[0].code
    assert _terminate_others(pg_database) >= 1  # the register's pooled connection, at least
    # the first statement of the next act meets the dead connection (no ping spent on finding it)
    second = issue_codes(register, "shelf", 1, request_id="desk-2-0001" if with_request_id else None)
    assert not second.replayed
    assert _codes(register) == [first, second.codes[0].code]
    assert _next_counter(register) == 2
    _assert_log_intact(register)
    assert_consistent(pg_url)


def test_a_connection_lost_during_commit_says_the_outcome_is_unknown(
    register: Register, pg_database: str, monkeypatch: pytest.MonkeyPatch  # noqa: F811
) -> None:
    issue_codes(register, "shelf", 1)
    fired: list[bool] = []

    def drop_before_commit(connection: Any) -> None:
        # the act's statements have all gone out; the server ends the session as COMMIT goes out
        if not fired:
            fired.append(True)
            _terminate_others(pg_database)

    # an issue sends its COMMIT in the pipeline of its last writes (driver.commit_pipeline);
    # an act without one commits through SQLAlchemy (its "commit" event): both are covered
    pipelined = store.commit_pipeline

    def commit_pipeline(session: Any) -> None:
        drop_before_commit(None)
        pipelined(session)

    monkeypatch.setattr(store, "commit_pipeline", commit_pipeline)  # where writing finds it
    event.listen(register.engine, "commit", drop_before_commit)
    try:
        with pytest.raises(ConnectionLost) as raised:
            issue_codes(register, "shelf", 1)
    finally:
        event.remove(register.engine, "commit", drop_before_commit)
        monkeypatch.undo()
    assert fired
    line = str(raised.value)
    assert "\n" not in line and "outcome is unknown" in line
    # here the server had not committed (it ended the session first): the register is whole
    after = issue_codes(register, "shelf", 1)
    assert len(_codes(register)) == 2 and after.codes[0].code in _codes(register)
    _assert_log_intact(register)


def test_a_serialisation_failure_is_retried_and_the_act_applied_once(
    register: Register, pg_url: str, monkeypatch: pytest.MonkeyPatch  # noqa: F811
) -> None:
    """Two REPEATABLE READ transactions on the same series row: the act takes its snapshot,
    another desk moves the series' counter and commits, the act's counter move is refused
    with SQLSTATE 40001; the retry loop runs it again and it is applied once."""
    strict = Register(
        engine=register.engine.execution_options(isolation_level="REPEATABLE READ"),
        actor="front-desk",
        clock=register.clock,
    )
    other = open_register(pg_url, actor="back-desk")
    refused: list[str] = []
    attempts: list[str] = []

    def after_execute(connection: Any, cursor: Any, statement: str, *_: Any) -> None:
        # the act's first statement (the request-id look-up) has taken its snapshot
        if "FROM batch" in statement and "request_id" in statement:
            attempts.append(statement)
            if len(attempts) == 1:
                issue_codes(other, "shelf", 1)  # another connection moves the same row, commits

    judged = store._is_retryable

    def seen(exc: Any) -> bool:
        refused.append(str(getattr(exc.orig, "sqlstate", None)))
        return judged(exc)

    monkeypatch.setattr(store, "_is_retryable", seen)
    event.listen(strict.engine, "after_cursor_execute", after_execute)
    try:
        result = issue_codes(strict, "shelf", 1, request_id="desk-1-0001")
    finally:
        event.remove(strict.engine, "after_cursor_execute", after_execute)
        other.close()
    assert refused == ["40001"], refused  # serialization_failure, from the server itself
    assert len(attempts) == 2, "the act ran once, was refused, and ran again"
    codes = _codes(register)
    assert len(codes) == 2 and codes[-1] == result.codes[0].code  # the other desk's, then the act's
    with register.engine.connect() as connection:
        batches = connection.execute(
            text("SELECT count(*) FROM batch WHERE request_id = 'desk-1-0001'")
        ).scalar_one()
    assert batches == 1
    assert _next_counter(register) == 2
    _assert_log_intact(register)
    assert_consistent(pg_url)


def test_the_serialisation_failure_is_sqlstate_40001(register: Register, pg_url: str) -> None:  # noqa: F811
    """The refusal the retry loop gets past is the server's own: the same two transactions by
    hand, at the driver, show SQLSTATE 40001 (so the test above exercises a real one)."""
    import psycopg

    url = pg_url.replace("postgresql+psycopg://", "postgresql://")
    with psycopg.connect(url) as first, psycopg.connect(url, autocommit=True) as second:
        first.execute("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ")
        first.execute("SELECT next_counter FROM series WHERE key = 'shelf'")
        second.execute("UPDATE series SET title = 'moved' WHERE key = 'shelf'")
        with pytest.raises(psycopg.errors.SerializationFailure) as raised:
            first.execute("UPDATE series SET next_counter = next_counter WHERE key = 'shelf'")
        assert raised.value.sqlstate == "40001"


def _take_next_code_behind_the_back(register: Register) -> str:
    """Put the code the next issue of 'shelf' will draw into the register by plain SQL (as
    an import batch would hold it), so that issue's code row is refused; returns it."""
    from issuer.register.series import code_format

    with register.reading() as session:
        shape = get_series(session, "shelf")
    taken = code_format(shape).code_for_base(shape.range_start + 1)  # the next code to be drawn
    with register.engine.begin() as connection:
        connection.execute(text(
            "INSERT INTO batch (series_id, kind, count, created_at, actor) "
            "SELECT id, 'import', 1, now(), 'test' FROM series WHERE key = 'shelf'"
        ))  # fmt: skip
        connection.execute(text(
            "INSERT INTO issued_code (series_id, code, base, status, batch_id, print_count) "
            "SELECT s.id, :code, :base, 'issued', (SELECT max(id) FROM batch), 0 FROM series s WHERE s.key = 'shelf'"
        ), {"code": taken, "base": shape.range_start + 1})
    return taken


def test_a_refusal_in_the_pipelined_writes_is_one_line_and_leaves_nothing(
    register: Register, pg_url: str  # noqa: F811
) -> None:
    """A small issue sends its code row, the batch's id range, the log entry and COMMIT
    without waiting (pipeline mode): a row the database refuses there still comes back as
    the one-line refusal, and nothing of the act is left behind."""
    from issuer.errors import DuplicateRow

    first = issue_codes(register, "shelf", 1).codes[0].code
    taken = _take_next_code_behind_the_back(register)
    with register.engine.connect() as connection:
        batches = connection.execute(text("SELECT count(*) FROM batch")).scalar_one()
        entries = connection.execute(text("SELECT count(*) FROM log_entry")).scalar_one()
    with pytest.raises(DuplicateRow) as raised:
        issue_codes(register, "shelf", 1)
    assert "\n" not in str(raised.value) and "refused a row" in str(raised.value)
    with register.engine.connect() as connection:
        assert connection.execute(text("SELECT count(*) FROM batch")).scalar_one() == batches
        assert connection.execute(text("SELECT count(*) FROM log_entry")).scalar_one() == entries
    assert _codes(register) == [first, taken] and _next_counter(register) == 1
    # the same act again meets the same refusal, as one line again (the pooled connection
    # came back clean from the aborted pipeline)
    with pytest.raises(DuplicateRow):
        issue_codes(register, "shelf", 1)


def test_a_refusal_whose_answer_is_back_before_the_commit_goes_leaves_the_connection_clean(
    register: Register, pg_url: str, monkeypatch: pytest.MonkeyPatch  # noqa: F811
) -> None:
    """When the refusal of a pipelined write has come back before the COMMIT is sent, the
    driver raises it from the COMMIT's own send; the pipeline is still closed before the
    ROLLBACK (an aborted pipeline refuses it), so the act is the one-line refusal and the
    next act on the same pooled connection works (a timing that a loaded machine gives)."""
    import time

    from issuer.errors import DuplicateRow
    from issuer.register import store

    issue_codes(register, "shelf", 1)
    taken = _take_next_code_behind_the_back(register)
    pipelined = store.commit_pipeline

    def commit_late(session: Any) -> None:
        time.sleep(0.2)  # the server's refusal is in the socket before the COMMIT is sent
        pipelined(session)

    monkeypatch.setattr(store, "commit_pipeline", commit_late)  # where writing finds it
    for _ in range(2):
        with pytest.raises(DuplicateRow) as raised:
            issue_codes(register, "shelf", 1)
        assert "\n" not in str(raised.value) and "refused a row" in str(raised.value)
    assert _codes(register)[-1] == taken and _next_counter(register) == 1
