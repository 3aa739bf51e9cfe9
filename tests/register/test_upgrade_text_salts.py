"""A register whose codes got their holders and notes before salts existed upgrades to
the head on SQLite and PostgreSQL and stays healthy: its codes keep their texts and no
salt, and the replay, finding no digest of them in the log, says nothing of them. An act
that gives such a code text again salts it and logs its digest, and from then on an edit
of it is named. On PostgreSQL with roles applied, a clerk may still set a holder.

The populated register is made with this release's acts while the texts' digests are
kept out of their entries (as the previous release wrote them: no ``texts``, no
``text_before``/``text_after``), then taken down to the previous revision by the
migrations themselves (the salt column goes)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import text

from issuer.readers.scanfile import read_table
from issuer.register import holders
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.doctor import run_doctor
from issuer.register.driver import begin_immediate
from issuer.register.holders import erase_holder, set_holder
from issuer.register.importing import IMPORT_ROLES, import_codes
from issuer.register.issuing import issue_codes
from issuer.register.logverify import verify_chain
from issuer.register.migrate import alembic_config
from issuer.register.series import code_format, get_series
from issuer.register.standing import BatchTexts, search_key
from issuer.register.store import SCHEMA_HEAD, Register, open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.sidestep import sql_behind_the_back
from tests.register.test_replay import replay_details
from tests.register.test_roles import Guarded, as_role, groups, guarded  # noqa: F401


def _before() -> str:
    from alembic.script import ScriptDirectory

    script = ScriptDirectory.from_config(alembic_config()).get_revision("text_salts")
    assert script is not None and isinstance(script.down_revision, str)
    return script.down_revision


def _downgrade(register: Register) -> None:
    from alembic import command

    config = alembic_config()
    with register.engine.connect() as connection:
        begin_immediate(connection)
        config.attributes["connection"] = connection
        command.downgrade(config, _before())
        connection.commit()
    assert register.schema_revision() == _before()
    with register.engine.connect() as connection:
        columns = [row[0] for row in connection.execute(text("SELECT * FROM issued_code")).cursor.description]
        assert "text_salt" not in columns
        connection.rollback()


def without_text_digests(patch: pytest.MonkeyPatch) -> None:
    """Entries as a release before text salts wrote them: no digest of any text (for a test
    that makes a register with this release's acts and takes it down to an older revision)."""
    patch.setattr(BatchTexts, "detail", lambda self: None)  # an entry's "texts" null: not known
    patch.setattr(holders, "_text_before", lambda row: {})
    patch.setattr(holders, "_text_after", lambda row: {})


def _problems(register: Register) -> list[Any]:
    return [f for f in run_doctor(register).findings if f.status == "problem"]


def test_codes_given_text_before_salts_stay_healthy_and_are_judged_once_touched(
    register_url: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch  # noqa: F811
) -> None:
    register = open_register(register_url, actor="membership desk")
    with monkeypatch.context() as patch:
        without_text_digests(patch)
        add_series(register, SeriesSpec(key="members", scheme="luhn", length=7, prefix="M", mode="scattered"))
        old = [i.code for i in issue_codes(register, "members", 70, holder="Ada Quill", note="family plan").codes]
        set_holder(register, old[1], "Bea Loom")
        erase_holder(register, old[2], reason="member left the co-op")
        with register.reading() as session:
            shape = code_format(get_series(session, "members"))
        imported = shape.code_for_base(100_001)
        legacy = tmp_path / "paper-members.csv"
        legacy.write_text(f"code,holder,note\n{imported},Cal Thimble,paid cash\n")
        import_codes(register, "members", read_table(legacy, roles=IMPORT_ROLES))
    _downgrade(register)
    register.close()

    upgraded = open_register(register_url, actor="membership desk")  # opening upgrades
    try:
        assert upgraded.schema_revision() == SCHEMA_HEAD
        with upgraded.reading() as session:
            assert verify_chain(session).intact
            unsalted = session.execute(text(
                "SELECT count(*) FROM issued_code WHERE holder IS NOT NULL AND text_salt IS NULL"
            )).scalar_one()  # fmt: skip
        assert unsalted == 70  # 69 of the batch (one erased) and the imported code
        assert _problems(upgraded) == []
        # an act on an old code: salted from now on; a new batch with text is salted from the start
        set_holder(upgraded, old[0], "Ada Quill-Bobbin")
        erase_holder(upgraded, imported, reason="paper record withdrawn")
        issue_codes(upgraded, "members", 2, holder="Dot Spindle")
        assert _problems(upgraded) == []
    finally:
        upgraded.close()
    sql_behind_the_back(register_url, "UPDATE issued_code SET holder = :h, holder_key = :k WHERE code = :c",
                        h="Eve Forger", k=search_key("Eve Forger"), c=old[0])  # fmt: skip
    healthy, details = replay_details(register_url)
    assert not healthy and any(line.startswith(old[0]) for line in details), details


def test_a_clerk_sets_a_holder_after_the_upgrade(guarded: Guarded) -> None:  # noqa: F811
    owner = as_role(guarded.owner, "owner")
    try:
        _downgrade(owner)
    finally:
        owner.close()
    as_role(guarded.owner, "owner").close()  # opening upgrades; the roles keep their rights
    clerk = as_role(guarded.clerk, "clerk-ann")
    try:
        assert set_holder(clerk, guarded.codes[0], "Wren Halloway", note="evening volunteer").holder == "Wren Halloway"
        assert issue_codes(clerk, "tools", 2, holder="workshop shelf B").codes
    finally:
        clerk.close()
    owner = as_role(guarded.owner, "owner")
    try:
        assert _problems(owner) == []
    finally:
        owner.close()
