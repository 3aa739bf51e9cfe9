"""A PostgreSQL register whose roles were applied (``issuer db roles --apply``) at an older
head upgrades through the log-chains, leaner-rows and sealed-keys migrations with those roles
in force: the clerk still issues (in order and scattered, one code and a print run) and
reprints, the owner's doctor finds the register whole, and applying the roles again (as the
upgrade notes ask, for the sealing function) converges.

The older head is reached with the migrations themselves: the register is made at head with
only register-chain entries (two series and a token), its roles applied, and taken down to
revision ``log_rights``; what the roles gave to objects that revision lacks goes with them.
"""

from __future__ import annotations

import json
import secrets
from datetime import UTC, datetime

import pytest
from sqlalchemy import create_engine, text

from issuer.errors import PermissionDenied
from issuer.register.admin import apply_statements, roles_script
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.doctor import run_doctor
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import void_code
from issuer.register.printing import record_prints
from issuer.register.store import SCHEMA_HEAD, open_register
from issuer.register.store import database_url as engine_url
from issuer.register.tokens import add_token
from tests.register.pg import admin_sql, database_url, new_login_role, pg_database  # noqa: F401
from tests.register.test_roles import Groups, groups  # noqa: F401
from tests.register.test_sealed_keys import stored_key
from tests.register.upgrades import to_revision

OLDER_HEAD = "log_rights"


def _tables_and_triggers(url: str) -> tuple[set[str], set[str]]:
    """Of the log's head tables, those present; of two rights triggers, those present."""
    engine = create_engine(engine_url(url))
    try:
        with engine.connect() as connection:
            tables = {str(name) for (name,) in connection.execute(text(
                "SELECT table_name FROM information_schema.tables WHERE table_schema = current_schema() "
                "AND table_name IN ('log_head', 'log_chain', 'log_leaf', 'log_tree')"))}  # fmt: skip
            triggers = {str(name) for (name,) in connection.execute(text(
                "SELECT t.tgname FROM pg_trigger t JOIN pg_class c ON c.oid = t.tgrelid "
                "WHERE c.relnamespace = current_schema()::regnamespace "
                "AND t.tgname IN ('issuer_code_change_logged', 'issuer_batch_logged')"))}  # fmt: skip
    finally:
        engine.dispose()
    return tables, triggers


def _old_acts(url: str) -> None:
    """A token made as the older release made it (its entry names no lookup), logged through
    that revision's append function."""
    engine = create_engine(engine_url(url))
    try:
        with engine.begin() as connection:
            payload = [{"action": "token-add", "series": None, "code": None, "batch": None,
                        "detail": json.dumps({"role": "clerk", "token": "side-desk"}, sort_keys=True)}]  # fmt: skip
            at = datetime(2026, 4, 7, 9, 0, tzinfo=UTC)
            connection.execute(text(
                "INSERT INTO access_token (name, lookup, role, salt, digest, created_at, created_by) "
                "VALUES ('side-desk', '00112233aabbccdd', 'clerk', :s, :d, :at, 'owner')"
            ), {"s": b"\x01" * 16, "d": b"\x02" * 32, "at": at})  # fmt: skip
            connection.execute(text("SELECT issuer_log_append(:at, 'owner', :e)"), {"at": at, "e": json.dumps(payload)})
    finally:
        engine.dispose()


def test_roles_applied_at_an_older_head_hold_through_the_upgrade(pg_database: str, groups: Groups) -> None:  # noqa: F811
    schema = f"t_{secrets.token_hex(5)}"
    admin_sql(f'CREATE SCHEMA "{schema}"', pg_database)
    owner_url = database_url(pg_database, schema=schema)
    register = open_register(owner_url, actor="owner")
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
    add_series(register, SeriesSpec(key="members", scheme="luhn", length=7, prefix="QM", mode="scattered"))
    add_token(register, "front-desk", "clerk")
    apply_statements(register, roles_script(register, clerk=groups.clerk, admin=groups.admin))
    sealed = stored_key(owner_url)
    to_revision(register, OLDER_HEAD, down=True)
    assert register.schema_revision() == OLDER_HEAD
    assert stored_key(owner_url) != sealed  # the key in clear again, as that revision kept it
    register.close()
    assert _tables_and_triggers(owner_url) == ({"log_head"}, {"issuer_code_change_logged", "issuer_batch_logged"})
    _old_acts(owner_url)

    upgraded = open_register(owner_url, actor="owner")  # opening upgrades, the roles in force
    try:
        assert upgraded.schema_revision() == SCHEMA_HEAD
        assert _tables_and_triggers(owner_url)[0] == {"log_chain", "log_leaf", "log_tree"}
        assert upgraded.keyring.open("members", stored_key(owner_url))  # sealed again
    finally:
        upgraded.close()

    clerk_login = new_login_role(pg_database, groups.clerk)
    groups.logins.append(clerk_login)
    clerk = open_register(database_url(pg_database, user=clerk_login, schema=schema), actor="clerk-ann")
    try:
        one = issue_codes(clerk, "tools", 1).codes[0].code
        assert issue_codes(clerk, "tools", 300).count == 300  # the print-run path too
        assert issue_codes(clerk, "members", 3).count == 3  # scattered: the sealed key opens
        assert record_prints(clerk, [one], reprint=True, reason="label smudged") == 1
        with pytest.raises(PermissionDenied):  # the roles are still in force
            void_code(clerk, one, reason="lost")
    finally:
        clerk.close()

    owner = open_register(owner_url, actor="owner")
    try:
        report = run_doctor(owner)
        assert report.healthy, [(f.check, f.details) for f in report.findings if f.status == "problem"]
        # applying the roles again after the upgrade (the sealing function's grant) converges
        apply_statements(owner, roles_script(owner, clerk=groups.clerk, admin=groups.admin))
        report = run_doctor(owner)
        assert report.healthy, [(f.check, f.details) for f in report.findings if f.status == "problem"]
        access = next(f for f in report.findings if f.check == "access")
        assert access.status == "ok", access
    finally:
        owner.close()
