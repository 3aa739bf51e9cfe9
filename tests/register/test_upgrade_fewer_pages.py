"""Indexes another key serves are dropped or narrowed (migration fewer_pages): a register
made at the previous revision, holding series, issues, a replacement, an import, holders
and a print, upgrades on SQLite and PostgreSQL; its log still verifies, doctor finds it
whole, every entry is kept as it was (SQLite copies ``log_entry`` to drop the hash's
UNIQUE), the hash's index is gone and the series' indexes are narrowed; a series' log
entries are still all of those naming it. Down to the previous revision and up again.
On PostgreSQL with roles applied, the rights triggers' functions are replaced by the
upgrade and still refuse a series or code changed without its entry.

The register is built at the previous revision by its own migrations (down to base, up
to the previous revision), filled by this release's acts (the tables are the same), then
opened (opening upgrades)."""

from __future__ import annotations

from pathlib import Path

import pytest
from sqlalchemy import text

from issuer.errors import PermissionDenied
from issuer.readers.scanfile import read_table
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.doctor import run_doctor
from issuer.register.holders import set_holder
from issuer.register.importing import IMPORT_ROLES, import_codes
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import log_entries, replace_code
from issuer.register.logverify import verify_chain
from issuer.register.printing import record_prints
from issuer.register.series import code_format, get_series
from issuer.register.store import SCHEMA_HEAD, Register, open_register
from tests.register.consistency import assert_consistent
from tests.register.upgrades import to_revision
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.test_roles import Guarded, as_role, groups, guarded  # noqa: F401

PREVIOUS = "text_salts"


def _fill(register: Register, folder: Path) -> None:
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="QTL"))
    add_series(register, SeriesSpec(key="members", scheme="luhn", length=7, prefix="M", mode="scattered"))
    tools = [c.code for c in issue_codes(register, "tools", 4).codes]
    for _ in range(3):
        issue_codes(register, "tools", 1)
        issue_codes(register, "members", 1, holder="Ada Quill")
    replace_code(register, tools[0], reason="tag snapped")
    set_holder(register, tools[1], "workshop shelf B")
    record_prints(register, [tools[2]])
    with register.reading() as session:
        shape = code_format(get_series(session, "tools"))
    paper = folder / "paper-tools.csv"
    paper.write_text(f"code,holder\n{shape.code_for_base(900)},bench drill\n{shape.code_for_base(901)},\n")
    import_codes(register, "tools", read_table(paper, roles=IMPORT_ROLES))


def _entries(register: Register) -> list[tuple[object, ...]]:
    with register.engine.connect() as connection:
        rows = connection.execute(text("SELECT * FROM log_entry ORDER BY id")).all()
        connection.rollback()
    return [tuple(row) for row in rows]


def _indexes(register: Register) -> dict[str, str]:
    """The indexes of log_entry and batch by name, as the database states them (the
    hash's UNIQUE as ``uq_log_entry_hash``, wherever it lives)."""
    with register.engine.connect() as connection:
        if register.backend == "postgresql":
            found = {str(name): str(sql) for name, sql in connection.execute(text(
                "SELECT indexname, indexdef FROM pg_indexes WHERE schemaname = current_schema() "
                "AND tablename IN ('log_entry', 'batch')"
            ))}  # fmt: skip
        else:
            found = {str(name): str(sql) for name, sql in connection.execute(text(
                "SELECT name, coalesce(sql, '(inside the table)') FROM sqlite_master "
                "WHERE type = 'index' AND tbl_name IN ('log_entry', 'batch')"
            ))}  # fmt: skip
            inline = [n for n in found if n.startswith("sqlite_autoindex_log_entry")]
            for name in inline:  # the table's UNIQUE (hash): the only inline one of log_entry
                found["uq_log_entry_hash"] = found.pop(name)
        connection.rollback()
    return found


def _series_entries(register: Register, key: str) -> list[int]:
    """The ids of the entries naming series ``key``, by the definition (plain SQL)."""
    with register.engine.connect() as connection:
        ids = connection.execute(text(
            "SELECT e.id FROM log_entry e JOIN series s ON s.id = e.series_id WHERE s.key = :k ORDER BY e.id"
        ), {"k": key}).scalars().all()  # fmt: skip
        connection.rollback()
    return [int(i) for i in ids]


def _holds_at_head(register: Register, entries: list[tuple[object, ...]]) -> None:
    assert register.schema_revision() == SCHEMA_HEAD
    assert _entries(register) == entries  # every entry kept exactly (SQLite copied the table)
    indexes = _indexes(register)
    assert "uq_log_entry_hash" not in indexes, indexes
    assert "WHERE" in indexes["ix_log_entry_series_id_id"] and "chain = 0" in indexes["ix_log_entry_series_id_id"]
    assert "WHERE" in indexes["ix_batch_series_id"] and "'import'" in indexes["ix_batch_series_id"]
    with register.reading() as session:
        report = verify_chain(session)
        assert report.intact, report.problem
        for key in ("tools", "members"):  # a series' entries: its chain and its adding (chain 0)
            wanted = _series_entries(register, key)
            assert [e.id for e in log_entries(session, series=key)] == wanted
            assert [e.id for e in log_entries(session, series=key, limit=3)] == wanted[-3:]
            assert [e.id for e in log_entries(session, series=key, limit=100)] == wanted
            assert any(e.action == "series.add" for e in log_entries(session, series=key))
    assert [f for f in run_doctor(register).findings if f.status == "problem"] == []
    # issuing past the imported numbers (a bulk batch finds the imports by the narrowed index)
    issue_codes(register, "tools", 3)
    with register.reading() as session:
        assert verify_chain(session).intact
    assert [f for f in run_doctor(register).findings if f.status == "problem"] == []
    if register.backend == "sqlite":
        with register.engine.connect() as connection:  # the upgrade gave its connection back enforcing links
            assert connection.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
            assert connection.exec_driver_sql("PRAGMA foreign_key_check").fetchall() == []
            connection.rollback()


def test_a_register_made_at_the_previous_revision_upgrades(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    made = open_register(register_url, actor="desk-ann")
    to_revision(made, "base", down=True)
    to_revision(made, PREVIOUS, down=False)  # the schema exactly as the previous release made it
    at_previous = Register(engine=made.engine, actor="desk-ann")  # (open_register would upgrade)
    assert at_previous.schema_revision() == PREVIOUS
    _fill(at_previous, tmp_path)
    before = _indexes(at_previous)
    assert "uq_log_entry_hash" in before and "WHERE" not in before["ix_log_entry_series_id_id"]
    assert "WHERE" not in before["ix_batch_series_id"]
    entries = _entries(at_previous)
    made.close()

    upgraded = open_register(register_url, actor="desk-ann")  # opening upgrades
    try:
        _holds_at_head(upgraded, entries)
        assert_consistent(register_url)
    finally:
        upgraded.close()


def test_down_to_the_previous_revision_and_up_again(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    register = open_register(register_url, actor="desk-ann")
    _fill(register, tmp_path)
    entries = _entries(register)
    to_revision(register, PREVIOUS, down=True)
    assert register.schema_revision() == PREVIOUS
    indexes = _indexes(register)
    assert "uq_log_entry_hash" in indexes and "WHERE" not in indexes["ix_log_entry_series_id_id"]
    with register.engine.connect() as connection:  # the hash is unique again
        with pytest.raises(Exception, match="(?i)unique|duplicate"):
            connection.execute(text(
                "INSERT INTO log_entry (id, at, actor, action, detail, prev_hash, hash, chain) "
                "SELECT id + 1000, at, actor, action, detail, prev_hash, hash, chain FROM log_entry WHERE id = 1"
            ))  # fmt: skip
        connection.rollback()
    register.close()
    upgraded = open_register(register_url, actor="desk-ann")
    try:
        _holds_at_head(upgraded, entries)
        assert_consistent(register_url)
    finally:
        upgraded.close()


def _function_source(url: str, name: str) -> str:
    """A function's body, read without opening the register (opening upgrades)."""
    from sqlalchemy import create_engine

    from issuer.register.store import database_url

    engine = create_engine(database_url(url))
    try:
        with engine.connect() as connection:
            return str(connection.execute(text(
                "SELECT prosrc FROM pg_proc WHERE proname = :n AND pronamespace = current_schema()::regnamespace"
            ), {"n": name}).scalar_one())  # fmt: skip
    finally:
        engine.dispose()


def test_roles_applied_before_keep_their_rules_through_the_upgrade(guarded: Guarded) -> None:  # noqa: F811
    owner = as_role(guarded.owner, "owner")
    try:
        to_revision(owner, PREVIOUS, down=True)  # the functions go back to asking by series
    finally:
        owner.close()
    assert "WHERE e.series_id = NEW.id AND" in _function_source(guarded.owner, "issuer_series_change_logged")
    assert "e.series_id = NEW.series_id" in _function_source(guarded.owner, "issuer_code_change_logged")
    as_role(guarded.owner, "owner").close()  # opening upgrades
    series_rule = _function_source(guarded.owner, "issuer_series_change_logged")
    code_rule = _function_source(guarded.owner, "issuer_code_change_logged")
    assert "e.chain = NEW.id" in series_rule and "WHERE e.series_id = NEW.id AND" not in series_rule, series_rule
    assert "b.kind = 'import'" in code_rule and "e.series_id = NEW.series_id" not in code_rule, code_rule
    clerk = as_role(guarded.clerk, "clerk-ann")
    try:
        assert issue_codes(clerk, "tools", 1).codes
        assert issue_codes(clerk, "members", 2).codes
        set_holder(clerk, guarded.codes[0], "workshop shelf C")
        with clerk.engine.connect() as connection:  # a series or a code moved with no entry: refused
            for statement in ("UPDATE series SET next_counter = next_counter + 1 WHERE key = 'tools'",
                              f"UPDATE issued_code SET holder = 'nobody' WHERE code = '{guarded.codes[1]}'"):
                with pytest.raises(Exception, match="without a log entry"):
                    connection.execute(text(statement))
                    connection.commit()
                connection.rollback()
    finally:
        clerk.close()
    owner = as_role(guarded.owner, "owner")
    try:
        assert [f for f in run_doctor(owner).findings if f.status == "problem"] == []
    finally:
        owner.close()


def test_a_clerk_cannot_hide_a_change_behind_an_entry_of_another_series(guarded: Guarded) -> None:  # noqa: F811
    """The series trigger reads the newest entry of the series' own chain: an entry this
    transaction logged for another series does not cover a change to this one."""
    clerk = as_role(guarded.clerk, "clerk-ann")
    try:
        def work(session: object) -> None:
            from issuer.register.log import NewEntry, append_entry

            members = session.execute(text("SELECT id FROM series WHERE key = 'members'")).scalar_one()  # type: ignore[attr-defined]
            append_entry(session, NewEntry("note", members, None, None, {}), actor="clerk-ann",  # type: ignore[arg-type]
                         at=clerk.clock())
            session.execute(text("UPDATE series SET next_counter = next_counter + 1 WHERE key = 'tools'"))  # type: ignore[attr-defined]

        with pytest.raises(PermissionDenied, match="without a log entry"):
            clerk.write(work)
    finally:
        clerk.close()
