"""A batch's request id is unique where given and indexed only there (migration
partial_request_id): a register holding batches with and without request ids upgrades on
SQLite and PostgreSQL, and a retry under an old id still returns the codes it issued.

On SQLite the upgrade copies the batch table (its UNIQUE constraint lives in its CREATE
TABLE) while codes and log entries point at its rows: the register is built at the
previous revision by its own migrations, filled by this release's acts, then opened."""

from __future__ import annotations

import pytest
from sqlalchemy import text

from issuer.errors import Conflict, DuplicateRow
from issuer.register.anchors import verify_log
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code
from issuer.register.store import SCHEMA_HEAD, Register, open_register
from tests.register.consistency import assert_consistent
from tests.register.upgrades import to_revision
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

PREVIOUS = "sealed_keys"


def _add_later_columns(register: Register) -> list[tuple[str, str]]:
    """The columns later migrations add (this release's acts read whole rows), added for
    the fill at the previous revision: (table, column) for :func:`_drop_columns`."""
    from sqlalchemy import inspect

    from issuer.register.models import Base

    added = []
    with register.engine.begin() as connection:
        for table in Base.metadata.sorted_tables:
            held = {column["name"] for column in inspect(connection).get_columns(table.name)}
            for column in table.columns:
                if column.name not in held:
                    kind = column.type.compile(dialect=connection.dialect)
                    connection.execute(text(f"ALTER TABLE {table.name} ADD COLUMN {column.name} {kind}"))
                    added.append((table.name, column.name))
    return added


def _drop_columns(register: Register, columns: list[tuple[str, str]]) -> None:
    """Back to the schema exactly as the previous release made it, before the upgrade."""
    with register.engine.begin() as connection:
        for table, column in columns:
            connection.execute(text(f"ALTER TABLE {table} DROP COLUMN {column}"))


def _fill(register: Register) -> dict[str, list[str]]:
    """Batches with and without request ids, and a replacement (a batch of its own)."""
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="QTL"))
    issued = {
        "front-desk-0001": [c.code for c in issue_codes(register, "tools", 1, request_id="front-desk-0001").codes],
        "front-desk-0002": [c.code for c in issue_codes(register, "tools", 3, request_id="front-desk-0002").codes],
    }
    issued[""] = [c.code for c in issue_codes(register, "tools", 2).codes]
    replace_code(register, issued[""][0], reason="tag snapped")
    return issued


def _batches(register: Register) -> list[tuple[object, ...]]:
    with register.engine.connect() as connection:
        rows = connection.execute(text(
            "SELECT b.id, b.series_id, b.kind, b.request_id, b.count, b.created_at, b.actor, b.code_id_from, "
            "b.code_id_to, (SELECT count(*) FROM issued_code c WHERE c.batch_id = b.id), "
            "(SELECT count(*) FROM log_entry e WHERE e.batch_id = b.id) FROM batch b ORDER BY b.id"
        )).all()  # fmt: skip
        connection.rollback()
    return [tuple(row) for row in rows]


def _request_id_rule(register: Register) -> list[str]:
    """How the batch table's request ids are kept unique, as the database states it."""
    with register.engine.connect() as connection:
        if register.backend == "postgresql":
            constraints = connection.execute(text(
                "SELECT conname FROM pg_constraint WHERE conrelid = 'batch'::regclass AND contype = 'u'"
            )).scalars().all()  # fmt: skip
            indexes = connection.execute(text(
                "SELECT indexdef FROM pg_indexes WHERE tablename = 'batch' AND schemaname = current_schema() "
                "AND indexdef LIKE '%request_id%'"
            )).scalars().all()  # fmt: skip
            return [f"constraint {name}" for name in constraints] or list(indexes)  # (not its own index too)
        rows = connection.execute(text(
            "SELECT name, coalesce(sql, '(inside the table)') FROM sqlite_master "
            "WHERE type = 'index' AND tbl_name = 'batch' AND name <> 'ix_batch_series_id'"
        )).all()  # fmt: skip
        return [f"{name}: {sql}" for name, sql in rows]


def _holds_after_upgrade(register: Register, issued: dict[str, list[str]]) -> None:
    assert register.schema_revision() == SCHEMA_HEAD
    rule = _request_id_rule(register)
    assert len(rule) == 1 and "UNIQUE INDEX ix_batch_request_id" in rule[0], rule
    assert "WHERE" in rule[0] and "request_id IS NOT NULL" in rule[0], rule
    for request_id in ("front-desk-0001", "front-desk-0002"):
        again = issue_codes(register, "tools", len(issued[request_id]), request_id=request_id)
        assert again.replayed and [c.code for c in again.codes] == issued[request_id]
    with pytest.raises(Conflict):
        issue_codes(register, "tools", 2, request_id="front-desk-0001")
    fresh = issue_codes(register, "tools", 1, request_id="front-desk-0003")
    assert not fresh.replayed
    assert issue_codes(register, "tools", 1, request_id="front-desk-0003").replayed
    issue_codes(register, "tools", 1)  # and batches without one, as many as wanted
    issue_codes(register, "tools", 1)
    with register.engine.connect() as connection:  # the rule itself, behind the tool's back
        with pytest.raises(Exception, match="(?i)unique|duplicate"):
            connection.execute(text(
                "INSERT INTO batch (series_id, kind, request_id, count, created_at, actor) "
                "SELECT series_id, kind, request_id, count, created_at, actor FROM batch WHERE request_id = 'front-desk-0003'"
            ))  # fmt: skip
        connection.rollback()
    report, _ = verify_log(register)
    assert report.intact, report.problem
    if register.backend == "sqlite":
        with register.engine.connect() as connection:  # the upgrade gave its connection back enforcing links
            assert connection.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
            assert connection.exec_driver_sql("PRAGMA foreign_key_check").fetchall() == []
            connection.rollback()


def test_a_register_made_at_the_previous_revision_upgrades(register_url: str) -> None:  # noqa: F811
    made = open_register(register_url, actor="desk-ann")
    to_revision(made, "base", down=True)
    to_revision(made, PREVIOUS, down=False)  # the schema exactly as the previous release made it
    at_previous = Register(engine=made.engine, actor="desk-ann")  # (open_register would upgrade)
    assert at_previous.schema_revision() == PREVIOUS
    later = _add_later_columns(at_previous)
    issued = _fill(at_previous)
    _drop_columns(at_previous, later)
    before = _request_id_rule(at_previous)
    if made.backend == "sqlite":
        assert before == ["sqlite_autoindex_batch_1: (inside the table)"]
    else:
        assert before[0] == "constraint uq_batch_request_id"
    batches = _batches(at_previous)
    made.close()

    upgraded = open_register(register_url, actor="desk-ann")  # opening upgrades
    try:
        assert _batches(upgraded) == batches  # the copy kept every batch as it was
        _holds_after_upgrade(upgraded, issued)
        assert_consistent(register_url)
    finally:
        upgraded.close()


def test_down_to_the_previous_revision_and_up_again(register_url: str) -> None:  # noqa: F811
    register = open_register(register_url, actor="desk-ann")
    issued = _fill(register)
    to_revision(register, PREVIOUS, down=True)  # with codes pointing at the batches
    assert register.schema_revision() == PREVIOUS
    rule = _request_id_rule(register)
    assert "WHERE" not in " ".join(rule) and len(rule) == 1, rule
    with register.engine.connect() as connection:  # still one batch per request id
        with pytest.raises(Exception, match="(?i)unique|duplicate"):
            connection.execute(text(
                "INSERT INTO batch (series_id, kind, request_id, count, created_at, actor) "
                "SELECT series_id, kind, request_id, count, created_at, actor FROM batch WHERE request_id IS NOT NULL LIMIT 1"
            ))  # fmt: skip
        connection.rollback()
    register.close()
    upgraded = open_register(register_url, actor="desk-ann")
    try:
        _holds_after_upgrade(upgraded, issued)
        assert_consistent(register_url)
    finally:
        upgraded.close()


def test_two_desks_sending_one_request_id_still_meet_the_rule(register_url: str) -> None:  # noqa: F811
    """The index refuses the second batch under an id as the constraint did (DuplicateRow,
    which issue_codes turns into a replay): shown here by a batch written behind the tool."""
    register = open_register(register_url, actor="desk-ann")
    try:
        _fill(register)
        with register.engine.connect() as connection:
            series_id = connection.execute(text("SELECT id FROM series")).scalar()
            connection.execute(text(
                "INSERT INTO batch (series_id, kind, request_id, count, created_at, actor) "
                "VALUES (:s, 'issue', 'front-desk-0009', 1, CURRENT_TIMESTAMP, 'desk-bo')"
            ), {"s": series_id})  # fmt: skip
            connection.commit()
        with pytest.raises(DuplicateRow):
            register.write(lambda session: session.execute(text(
                "INSERT INTO batch (series_id, kind, request_id, count, created_at, actor) "
                "VALUES (:s, 'issue', 'front-desk-0009', 1, CURRENT_TIMESTAMP, 'desk-ann')"
            ), {"s": series_id}))  # fmt: skip
    finally:
        register.close()
