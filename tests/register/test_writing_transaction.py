"""The writing transaction on SQLite: the write lock from its first moment, reads deferred,
and the act's ORM session made only when the ORM is used, committed or rolled back whole
with the connection's transaction."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest
from sqlalchemy import select, text

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.models import Series
from issuer.register.store import Register

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL")


def _other_writer_locked_out(db_path: Path) -> bool:
    """Whether another connection is refused the write lock at once."""
    other = sqlite3.connect(db_path, timeout=0, isolation_level=None)
    try:
        # source: SQLite documentation, "BEGIN TRANSACTION": IMMEDIATE takes the write
        # lock at once and fails with SQLITE_BUSY while another connection holds it
        other.execute("BEGIN IMMEDIATE")
    except sqlite3.OperationalError as exc:
        assert "locked" in str(exc) or "busy" in str(exc)
        return True
    else:
        other.execute("ROLLBACK")
        return False
    finally:
        other.close()


def test_a_writing_transaction_holds_the_write_lock_before_its_first_statement(
    register: Register, db_path: Path
) -> None:
    with register.writing():
        assert _other_writer_locked_out(db_path)
    assert not _other_writer_locked_out(db_path)


def test_a_read_leaves_the_write_lock_free(register: Register, db_path: Path) -> None:
    add_series(register, TOOLS)
    with register.reading() as session:
        assert session.scalar(select(Series.key)) == "tools"  # a read transaction is open
        assert not _other_writer_locked_out(db_path)


def test_the_orm_session_is_made_on_first_use_and_commits_with_the_act(register: Register) -> None:
    add_series(register, TOOLS)
    with register.writing() as session:
        session.connection().execute(text("SELECT count(*) FROM series"))
        assert not session.joined  # statements on the connection: no ORM session
        series = session.scalars(select(Series).where(Series.key == "tools")).one()
        assert session.joined
        series.title = "Tools on loan"
    with register.reading() as session:
        assert session.scalar(select(Series.title)) == "Tools on loan"


def test_a_failed_act_leaves_nothing_of_the_orm_or_the_connection(register: Register) -> None:
    add_series(register, TOOLS)
    issue_codes(register, "tools", 1)
    with register.reading() as session:
        before = session.scalar(select(Series.title))
    with pytest.raises(RuntimeError), register.writing() as session:
        session.connection().execute(text("UPDATE series SET title = 'changed on the connection'"))
        series = session.scalars(select(Series)).one()
        series.title = "changed through the ORM"
        session.flush()
        raise RuntimeError("the act fails after both")
    with register.reading() as session:
        assert session.scalar(select(Series.title)) == before
    # the register takes the next act as before
    assert issue_codes(register, "tools", 1).count == 1
