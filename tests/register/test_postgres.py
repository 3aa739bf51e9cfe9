"""PostgreSQL as a first-class backend: the same migrations, the same models, the same
behaviour as SQLite — each test here runs on both backends, so a difference shows."""

from __future__ import annotations

import json
from datetime import UTC, datetime, timedelta, timezone
from typing import Any

import pytest
from sqlalchemy import func, select
from typer.testing import CliRunner

from issuer.cli.app import app
from issuer.errors import Conflict, Exhausted, RegisterError
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import code_history, replace_code, restore_code, void_code
from issuer.register.models import Base, Batch, IssuedCode, Series, code_issued_at
from issuer.register.series import get_series
from issuer.register.store import SCHEMA_HEAD, database_url, open_register
from tests.register.consistency import assert_consistent
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401


def test_the_migrations_build_the_models_schema(register_url: str) -> None:  # noqa: F811
    from alembic.autogenerate import compare_metadata
    from alembic.migration import MigrationContext

    register = open_register(register_url, actor="test")
    try:
        assert register.schema_revision() == SCHEMA_HEAD
        with register.engine.connect() as connection:
            context = MigrationContext.configure(connection, opts={"compare_type": True})
            assert compare_metadata(context, Base.metadata) == []
    finally:
        register.close()


def test_an_emptied_schema_is_rebuilt_on_open(register_url: str) -> None:  # noqa: F811
    from alembic import command

    from issuer.register.migrate import alembic_config

    register = open_register(register_url, actor="test")
    config = alembic_config()
    with register.engine.connect() as connection:
        config.attributes["connection"] = connection
        command.downgrade(config, "base")
        connection.commit()
    assert register.schema_revision() is None
    register.close()
    reopened = open_register(register_url, actor="test")
    assert reopened.schema_revision() == SCHEMA_HEAD
    reopened.close()


def test_the_whole_lifecycle_behaves_the_same(register_url: str) -> None:  # noqa: F811
    register = open_register(register_url, actor="front-desk")
    try:
        add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T", end=12))
        add_series(register, SeriesSpec(key="members", scheme="luhn", length=7, prefix="M", mode="scattered"))
        first = issue_codes(register, "tools", 3, holder="workshop", request_id="intake-1")
        assert [info.base for info in first.codes] == [1, 2, 3]
        again = issue_codes(register, "tools", 3, holder="workshop", request_id="intake-1")
        assert again.replayed and [c.code for c in again.codes] == [c.code for c in first.codes]
        with pytest.raises(Conflict):
            issue_codes(register, "tools", 4, request_id="intake-1")

        void_code(register, first.codes[0].code, reason="lost on the bus")
        with pytest.raises(Conflict):
            void_code(register, first.codes[0].code, reason="lost twice")
        new = replace_code(register, first.codes[1].code, reason="label worn")
        assert new.replaces == first.codes[1].code
        restore_code(register, first.codes[0].code, reason="found in the van")
        with register.reading() as session:
            record, events = code_history(session, first.codes[0].code)
        assert record.status == "issued"
        assert [event.action for event in events] == ["issue", "void", "restore"]

        # the rest of the range: 12 numbers, 4 used (3 issued, 1 replacement)
        issue_codes(register, "tools", 8)
        with pytest.raises(Exhausted):
            issue_codes(register, "tools", 1)
        scattered = issue_codes(register, "members", 200)
        assert len({info.base for info in scattered.codes}) == 200
        with register.reading() as session:
            tools = get_series(session, "tools")
            assert (tools.next_counter, tools.code_count) == (12, 12)
            held = session.scalar(select(func.count()).select_from(IssuedCode))
            assert held == 212
    finally:
        register.close()
    assert_consistent(register_url)


def test_times_come_back_in_utc(register_url: str) -> None:  # noqa: F811
    at = datetime(2026, 3, 1, 23, 30, 15, 123456, tzinfo=timezone(timedelta(hours=-5)))
    register = open_register(register_url, actor="test", clock=lambda: at)
    try:
        add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
        issue_codes(register, "tools", 1)
        with register.reading() as session:
            # a code's issue time is its batch's (read as every reader reads it)
            stored = session.scalar(
                select(code_issued_at()).select_from(IssuedCode).join(Batch, Batch.id == IssuedCode.batch_id)
            )
            created = session.scalar(select(Series.created_at))
    finally:
        register.close()
    assert stored == created == at  # same instant ...
    assert stored is not None and stored.tzinfo is not None and stored.utcoffset() == timedelta(0)
    assert stored == datetime(2026, 3, 2, 4, 30, 15, 123456, tzinfo=UTC)  # ... told in UTC


def test_a_failed_batch_leaves_no_gap(register_url: str, monkeypatch: pytest.MonkeyPatch) -> None:  # noqa: F811
    from issuer.register import issuing

    register = open_register(register_url, actor="test")
    try:
        add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
        issue_codes(register, "tools", 2)

        def broken(*_args: Any, **_kwargs: Any) -> None:
            raise RuntimeError("the log write failed")

        monkeypatch.setattr(issuing, "append_entry", broken)  # big batches
        monkeypatch.setattr(issuing, "issue_detail", broken)  # small ones, on every path
        with pytest.raises(RuntimeError):
            issue_codes(register, "tools", 5)
        monkeypatch.undo()
        assert [info.base for info in issue_codes(register, "tools", 1).codes] == [3]
    finally:
        register.close()
    assert_consistent(register_url)


def test_postgres_urls_are_accepted_in_their_short_forms() -> None:
    assert database_url("postgresql://clerk@dbhost/issuer").startswith("postgresql+psycopg://")
    assert database_url("postgres://clerk@dbhost/issuer").startswith("postgresql+psycopg://")


def test_an_unreachable_server_is_one_clear_line() -> None:
    # port 9 (discard) on the loopback: nothing listens there
    with pytest.raises(RegisterError) as caught:
        open_register("postgresql://nobody@127.0.0.1:9/nothing?connect_timeout=2", actor="test")
    assert "\n" not in str(caught.value) and "cannot open the register" in str(caught.value)
    result = CliRunner().invoke(app, ["doctor", "--db", "postgresql://nobody@127.0.0.1:9/x?connect_timeout=2"])
    assert result.exit_code == 2 and result.stderr.count("\n") == 1


def test_db_upgrade_and_status_on_both_backends(register_url: str) -> None:  # noqa: F811
    runner = CliRunner()
    # upgrading makes no register: only 'db init' (or series add, demo) creates one
    missing = runner.invoke(app, ["db", "upgrade", "--db", register_url, "--json"])
    assert missing.exit_code == 2 and "no register at" in missing.output
    first = runner.invoke(app, ["db", "init", "--db", register_url, "--json"])
    assert first.exit_code == 0, first.output
    assert json.loads(first.stdout)["created"] is True
    second = runner.invoke(app, ["db", "upgrade", "--db", register_url, "--json"])
    assert json.loads(second.stdout)["changed"] is False
    status = json.loads(runner.invoke(app, ["db", "status", "--db", register_url, "--json"]).stdout)
    assert status["current"] and status["revision"] == SCHEMA_HEAD
    assert status["log_entries"] == 0 and status["head_id"] == 0
    expected = "postgresql" if register_url.startswith("postgresql") else "sqlite"
    assert status["backend"] == expected


@pytest.mark.parametrize("act", ["issue", "bulk issue", "replace", "void"])
def test_a_desk_holding_a_series_does_not_block_log_entries(
    pg_url: str, monkeypatch: pytest.MonkeyPatch, act: str  # noqa: F811
) -> None:
    """A desk that holds a series' counter (or a code) must not block the key-share lock
    another desk's log entry takes through its foreign key to the series: with a plain
    FOR UPDATE, a void holding the log head and an issue holding the series deadlock.
    Pause a desk just before it logs, and try that key-share lock from another session."""
    import threading

    from sqlalchemy import create_engine, text

    from issuer.register import issuing, lifecycle

    register = open_register(pg_url, actor="desk-1")
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
    code = issue_codes(register, "tools", 2).codes[0].code
    paused, go_on = threading.Event(), threading.Event()
    module = lifecycle if act in ("replace", "void") else issuing
    real = module.append_entry

    def pause_before_logging(*args: Any, **kwargs: Any) -> None:
        paused.set()
        go_on.wait(30)
        real(*args, **kwargs)

    monkeypatch.setattr(module, "append_entry", pause_before_logging)
    work = {
        "issue": lambda: issue_codes(register, "tools", 1),
        "bulk issue": lambda: issue_codes(register, "tools", 500),
        "replace": lambda: replace_code(register, code, reason="worn"),
        "void": lambda: void_code(register, code, reason="lost"),
    }[act]
    desk = threading.Thread(target=work)
    desk.start()
    other = create_engine(database_url(pg_url))
    try:
        assert paused.wait(30), "the desk never reached its log entry"
        with other.connect() as connection:
            # NOWAIT: fails at once (lock not available) instead of waiting
            connection.execute(text("SELECT 1 FROM series WHERE key = 'tools' FOR KEY SHARE NOWAIT"))
            connection.execute(text("SELECT 1 FROM issued_code WHERE code = :c FOR KEY SHARE NOWAIT"), {"c": code})
            connection.rollback()
    finally:
        go_on.set()
        desk.join(30)
        other.dispose()
        register.close()
    assert not desk.is_alive()
    assert_consistent(pg_url)
