"""A register holding data at the migration before holders upgrades to the head
on SQLite and PostgreSQL: its codes, holders and log stay as they were, the log still
verifies, and what the new schema adds (search keys, fill levels) is filled in.

The populated register is made with this release's acts (issue, void, print, the log),
then taken down to that revision by the migrations themselves: the columns it has hold
the same values a register of the previous release would."""

from __future__ import annotations

import pytest
from sqlalchemy import select, text

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.doctor import run_doctor
from issuer.register.driver import begin_immediate
from issuer.register.holders import find_holders
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import void_code
from issuer.register.log import head
from issuer.register.logverify import verify_chain
from issuer.register.migrate import alembic_config
from issuer.register.models import Series
from issuer.register.printing import record_prints
from issuer.register.store import SCHEMA_HEAD, open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.test_upgrade_text_salts import without_text_digests


def _before_holders() -> str:
    """The revision this schema change builds on: the previous release's head."""
    from alembic.script import ScriptDirectory

    script = ScriptDirectory.from_config(alembic_config()).get_revision("0005_holders")
    assert script is not None and isinstance(script.down_revision, str)
    return script.down_revision


BEFORE_HOLDERS = _before_holders()


def test_a_populated_register_upgrades_with_its_log_intact(
    register_url: str, monkeypatch: pytest.MonkeyPatch  # noqa: F811
) -> None:
    from alembic import command

    without_text_digests(monkeypatch)  # the entries that release wrote
    register = open_register(register_url, actor="desk-ann")
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="QTL"))
    add_series(register, SeriesSpec(key="members", scheme="luhn", length=7, prefix="M", mode="scattered"))
    tools = [info.code for info in issue_codes(register, "tools", 70, note="Spring intake").codes]
    members = [issue_codes(register, "members", 1, holder=name).codes[0].code
               for name in ("Wren Halloway", "Ottoline Bracken")]  # fmt: skip
    void_code(register, tools[3], reason="tag snapped")
    record_prints(register, tools[:5], layout="tag-small", void_labels=[tools[3]])
    with register.reading() as session:
        anchor = head(session)
    config = alembic_config()
    with register.engine.connect() as connection:
        begin_immediate(connection)
        config.attributes["connection"] = connection
        command.downgrade(config, BEFORE_HOLDERS)
        connection.commit()
    assert register.schema_revision() == BEFORE_HOLDERS
    with register.engine.connect() as connection:
        columns = [row[0] for row in connection.execute(text("SELECT * FROM issued_code")).cursor.description]
        assert "holder_key" not in columns and "holder" in columns
        connection.rollback()
    register.close()
    monkeypatch.undo()

    upgraded = open_register(register_url, actor="desk-ann")  # opening upgrades
    try:
        assert upgraded.schema_revision() == SCHEMA_HEAD
        with upgraded.reading() as session:
            report = verify_chain(session)
            assert report.intact and (report.head_id, report.head_hash) == anchor
            assert [f.code for f in find_holders(session, "wren")] == [members[0]]
            assert len(find_holders(session, "spring", limit=100)) == 70
            assert set(session.scalars(select(Series.fill_levels))) == {"80,95"}
        findings = {f.check: f for f in run_doctor(upgraded).findings}
        assert findings["log chain"].status == "ok" and findings["states"].status == "ok"
        assert all(f.status != "problem" for f in findings.values()), findings
        # the new acts work on the upgraded register
        void_code(upgraded, tools[4], reason="tag snapped too")
        with upgraded.reading() as session:
            assert verify_chain(session).intact
    finally:
        upgraded.close()
