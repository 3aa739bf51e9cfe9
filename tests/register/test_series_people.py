"""A series says whether its holders are people: the personal-data caution follows it.
Scattered (member-like) series hold people by default, in-order (tool) series do not;
migration 0004 sets existing series the same way; the setting may change any time."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import text

from issuer.cli.common import PERSONAL_DATA_CAUTION
from issuer.errors import Conflict
from issuer.register.defining import SeriesSpec, add_series, change_series
from issuer.register.issuing import issue_codes
from issuer.register.migrate import alembic_config
from issuer.register.series import get_series
from issuer.register.store import SCHEMA_HEAD, open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

TOOLS = SeriesSpec("tools", "luhn", 7, prefix="QTL", group=(4, 4), title="Tool tags")
MEMBERS = SeriesSpec("members", "luhn", 9, prefix="QMC", mode="scattered", title="Members")


def _people(register: Any, key: str) -> bool:
    with register.reading() as session:
        return bool(get_series(session, key).holds_people)


def test_default_follows_the_mode_and_can_change_after_the_first_code(register: Any) -> None:
    add_series(register, TOOLS)
    add_series(register, MEMBERS)
    add_series(register, SeriesSpec("passes", "luhn", 6, prefix="QDP", holds_people=True))
    assert (_people(register, "tools"), _people(register, "members")) == (False, True)
    assert _people(register, "passes") is True
    issue_codes(register, "tools", 2)
    change_series(register, "tools", holds_people=True)
    assert _people(register, "tools") is True
    # the shape stays frozen
    with pytest.raises(Conflict, match="frozen"):
        change_series(register, "tools", prefix="QTX")


def test_migration_sets_existing_series_by_mode(register_url: str) -> None:  # noqa: F811
    from alembic import command

    path = register_url  # each backend in turn
    register = open_register(path, actor="test")
    add_series(register, TOOLS)
    add_series(register, MEMBERS)
    config = alembic_config()
    with register.engine.connect() as connection:
        config.attributes["connection"] = connection
        command.downgrade(config, "access_tokens")
        connection.commit()
    register.close()
    reopened = open_register(path, actor="test")
    assert reopened.schema_revision() == SCHEMA_HEAD
    with reopened.engine.connect() as connection:
        rows = dict(connection.execute(text("SELECT key, holds_people FROM series")).all())
    assert {key: bool(value) for key, value in rows.items()} == {"tools": False, "members": True}
    reopened.close()


def test_the_caution_shows_for_people_only(cli: Any, tmp_path: Path) -> None:
    def ok(*args: str) -> Any:
        result = cli(*args)
        assert result.exit_code == 0, result.output
        return result

    ok("series", "add", "tools", "--scheme", "luhn", "--length", "7", "--prefix", "QTL")
    ok("series", "add", "members", "--scheme", "luhn", "--length", "9", "--prefix", "QMC",
       "--mode", "scattered")  # fmt: skip
    caution = " ".join(PERSONAL_DATA_CAUTION.split()[:6])
    shelf = ok("issue", "tools", "--holder", "Workshop shelf B")
    assert caution not in " ".join(shelf.stdout.split())
    member = ok("issue", "members", "--holder", "Ştefan Ionescu-Vlad")
    assert caution in " ".join(member.stdout.split())
    for key, shown in (("tools", False), ("members", True)):
        out = tmp_path / f"{key}.pdf"
        printed = ok("labels", "--series", key, "--lines", "holder", "--out", str(out))
        assert (caution in " ".join(printed.stdout.split())) is shown
    # a tool series whose holders are people after all
    changed = json.loads(ok("series", "change", "tools", "--people", "--json").stdout)
    assert changed["holds_people"] is True
    again = ok("issue", "tools", "--holder", "Dvořák, on loan")
    assert caution in " ".join(again.stdout.split())
