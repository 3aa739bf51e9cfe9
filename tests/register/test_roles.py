"""Roles the database enforces (PostgreSQL): connect as a clerk and as an admin and show
what each may and may not do; the log stays append-only even for the table's owner.
Every refusal reaches the user as one clear line from the tool (PermissionDenied), and
nothing half-done is left behind.

Roles are cluster-wide, so this module makes its own group and login roles with unique
names and drops them afterwards.
"""

from __future__ import annotations

import secrets
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import pytest
from sqlalchemy import text
from typer.testing import CliRunner

from issuer.cli.app import app
from issuer.errors import PermissionDenied
from issuer.register.admin import apply_statements, open_existing, roles_script
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.desk import check_codes
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code, restore_code, void_code
from issuer.register.printing import record_prints
from issuer.register.store import open_register
from issuer.register.tokens import add_token, list_tokens
from tests.register.consistency import assert_consistent
from tests.register.pg import (
    admin_sql,
    database_url,
    drop_roles,
    new_login_role,
    pg_database,  # noqa: F401
)


@dataclass
class Groups:
    clerk: str
    admin: str
    logins: list[str] = field(default_factory=list)


@pytest.fixture(scope="module")
def groups(pg_database: str) -> Iterator[Groups]:  # noqa: F811
    tag = secrets.token_hex(3)
    made = Groups(f"issuer_clerk_{tag}", f"issuer_admin_{tag}")
    yield made
    drop_roles(pg_database, *made.logins, made.clerk, made.admin)


@dataclass
class Guarded:
    owner: str
    clerk: str
    admin: str
    codes: list[str]


@pytest.fixture
def guarded(pg_database: str, groups: Groups) -> Guarded:  # noqa: F811
    """A register in its own schema with the roles applied, and a login of each role."""
    schema = f"t_{secrets.token_hex(5)}"
    admin_sql(f'CREATE SCHEMA "{schema}"', pg_database)
    owner = database_url(pg_database, schema=schema)
    register = open_register(owner, actor="owner")
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
    add_series(register, SeriesSpec(key="members", scheme="luhn", length=7, prefix="M", mode="scattered"))
    codes = [info.code for info in issue_codes(register, "tools", 5).codes]
    add_token(register, "front-desk", "clerk")  # the service's token, held by the owner
    apply_statements(register, roles_script(register, clerk=groups.clerk, admin=groups.admin))
    register.close()
    clerk = new_login_role(pg_database, groups.clerk)
    admin = new_login_role(pg_database, groups.admin)
    groups.logins += [clerk, admin]
    return Guarded(
        owner=owner,
        clerk=database_url(pg_database, user=clerk, schema=schema),
        admin=database_url(pg_database, user=admin, schema=schema),
        codes=codes,
    )


def as_role(url: str, actor: str) -> Any:
    return open_register(url, actor=actor)


def refused(act: Any) -> str:
    with pytest.raises(PermissionDenied) as caught:
        act()
    message = str(caught.value)
    assert "\n" not in message and "refused" in message
    return message


def raw(register: Any, statement: str, **params: Any) -> Any:
    """Hand-written SQL through the tool's own write path."""
    return register.write(lambda session: session.execute(text(statement), params).rowcount)


def test_a_clerk_issues_checks_reprints_and_reconciles(guarded: Guarded) -> None:
    clerk = as_role(guarded.clerk, "clerk-ann")
    try:
        single = issue_codes(clerk, "tools", 1)
        assert issue_codes(clerk, "tools", 200).count == 200  # the bulk path too
        assert issue_codes(clerk, "members", 3).count == 3  # scattered: reads the key
        with clerk.reading() as session:
            answers = check_codes(session, [single.codes[0].code, guarded.codes[0]])
        assert [answer.status for answer in answers] == ["issued", "issued"]
        # a reprint moves the print count, logged by the same act
        assert record_prints(clerk, [guarded.codes[1]], reprint=True, reason="label smudged") == 1
        # the same column moved by hand, with no log entry, is refused at commit
        refused(lambda: raw(clerk, "UPDATE issued_code SET last_seen_at = now(), last_seen_where = 'shelf B' "
                            "WHERE code = :c", c=guarded.codes[2]))  # fmt: skip
    finally:
        clerk.close()
    assert_consistent(guarded.owner)


def test_a_clerk_may_not_void_replace_restore_or_define(guarded: Guarded) -> None:
    clerk = as_role(guarded.clerk, "clerk-ann")
    try:
        message = refused(lambda: void_code(clerk, guarded.codes[0], reason="lost"))
        assert "issued_code" in message or "act void" in message
        refused(lambda: replace_code(clerk, guarded.codes[0], reason="damaged"))
        refused(lambda: add_series(clerk, SeriesSpec(key="passes", scheme="luhn", length=5, prefix="D")))
        refused(lambda: raw(clerk, "UPDATE issued_code SET status = 'voided' WHERE code = :c", c=guarded.codes[0]))
        refused(lambda: raw(clerk, "UPDATE issued_code SET code = 'T9999999' WHERE code = :c", c=guarded.codes[0]))
        refused(lambda: raw(clerk, "DELETE FROM issued_code WHERE code = :c", c=guarded.codes[0]))
        refused(lambda: raw(clerk, "UPDATE series SET range_end = 10"))
    finally:
        clerk.close()
    # nothing was half-done: the code is still issued and the register agrees with itself
    facts = assert_consistent(guarded.owner)
    assert facts.codes[guarded.codes[0]][0] == "issued"
    assert "passes" not in facts.series_next


def test_an_admin_voids_replaces_restores_and_defines(guarded: Guarded) -> None:
    admin = as_role(guarded.admin, "admin-bo")
    try:
        void_code(admin, guarded.codes[0], reason="lost at the workshop")
        restore_code(admin, guarded.codes[0], reason="found on the shelf")
        new = replace_code(admin, guarded.codes[1], reason="label peeled off")
        assert new.replaces == guarded.codes[1]
        add_series(admin, SeriesSpec(key="passes", scheme="luhn", length=5, prefix="D"))
        issue_codes(admin, "passes", 2)
        refused(lambda: raw(admin, "DELETE FROM issued_code WHERE code = :c", c=guarded.codes[2]))
        refused(lambda: raw(admin, "UPDATE issued_code SET code = 'T9999999' WHERE code = :c", c=guarded.codes[2]))
    finally:
        admin.close()
    assert_consistent(guarded.owner)


@pytest.mark.parametrize("who", ["clerk", "admin", "owner"])
def test_the_log_is_append_only_for_everyone(guarded: Guarded, who: str) -> None:
    register = as_role(getattr(guarded, who), who)
    try:
        message = refused(lambda: raw(register, "UPDATE log_entry SET detail = '{}' WHERE id = 2"))
        assert "log" in message
        refused(lambda: raw(register, "DELETE FROM log_entry WHERE id = 2"))
        refused(lambda: raw(register, "DELETE FROM log_entry"))
        # the sealed leaves refer to entries: a TRUNCATE must take them too, and the trigger refuses it
        refused(lambda: raw(register, "TRUNCATE log_entry, log_leaf"))
        refused(lambda: raw(register, "TRUNCATE log_entry CASCADE"))
    finally:
        register.close()
    checked = open_existing(guarded.owner)
    try:
        from issuer.register.anchors import verify_log

        report, _ = verify_log(checked)
        assert report.intact and report.entries == 4  # two series defined, one batch, one token
    finally:
        checked.close()


@pytest.mark.parametrize("who", ["clerk", "admin"])
def test_neither_role_reads_the_service_tokens(guarded: Guarded, who: str) -> None:
    register = as_role(getattr(guarded, who), who)
    try:
        message = refused(lambda: raw(register, "SELECT salt, digest FROM access_token"))
        assert "access_token" in message
        refused(lambda: raw(register, "SELECT count(*) FROM access_token"))
        # the read path refuses in one line too, naming the table
        assert "permission denied for table access_token" in refused(lambda: list_tokens(register))
        refused(lambda: add_token(register, "side-door", "admin"))
        refused(lambda: raw(register, "DELETE FROM access_token"))
    finally:
        register.close()
    # the owner (the account the service runs as) still reads its one token
    owner = as_role(guarded.owner, "owner")
    try:
        assert [token.name for token in list_tokens(owner)] == ["front-desk"]
    finally:
        owner.close()


def test_the_command_line_says_no_in_one_line(guarded: Guarded) -> None:
    runner = CliRunner()
    issued = runner.invoke(app, ["issue", "tools", "--db", guarded.clerk, "--json"])
    assert issued.exit_code == 0, issued.output
    voided = runner.invoke(app, ["void", guarded.codes[3], "--reason", "lost", "--db", guarded.clerk])
    assert voided.exit_code == 2
    line = voided.stderr.strip()
    assert "\n" not in line and line.startswith("issuer: the database refused this act")
    # the clerk can still check the register's health (reading is all it needs)
    health = runner.invoke(app, ["doctor", "--db", guarded.clerk, "--json"])
    assert health.exit_code == 0, health.output
    import json

    # the service's tokens are the owner's alone: the clerk's doctor says it skipped them
    tokens = next(f for f in json.loads(health.stdout)["findings"] if f["check"] == "tokens")
    assert tokens["status"] == "skipped" and "may not read" in tokens["summary"]


def test_db_roles_prints_the_policy(guarded: Guarded, groups: Groups) -> None:
    result = CliRunner().invoke(
        app, ["db", "roles", "--db", guarded.owner, "--clerk", groups.clerk, "--admin", groups.admin]
    )
    assert result.exit_code == 0, result.output
    script = result.stdout
    assert script.startswith("BEGIN;") and script.rstrip().endswith("COMMIT;")
    assert 'GRANT UPDATE ("next_counter", "code_count") ON' in script
    assert f'"series" TO "{groups.clerk}";' in script
    assert "REVOKE INSERT, UPDATE, DELETE, TRUNCATE ON" in script
    assert "GRANT EXECUTE ON FUNCTION" in script and "issuer_log_append" in script
    assert "-- access_token: no access" in script and '"access_token" TO' not in script
    assert "BEFORE UPDATE OR DELETE ON" in script and "BEFORE TRUNCATE ON" in script
    # applying twice converges
    again = CliRunner().invoke(
        app, ["db", "roles", "--apply", "--db", guarded.owner, "--clerk", groups.clerk, "--admin", groups.admin]
    )
    assert again.exit_code == 0, again.output
    doctor = CliRunner().invoke(app, ["doctor", "--db", guarded.owner, "--json"])
    import json

    access = next(f for f in json.loads(doctor.stdout)["findings"] if f["check"] == "access")
    assert access["status"] == "ok"


def test_db_roles_refuses_bad_names_and_sqlite(guarded: Guarded, tmp_path: Any) -> None:
    runner = CliRunner()
    bad = runner.invoke(app, ["db", "roles", "--db", guarded.owner, "--clerk", "Robert'); DROP"])
    assert bad.exit_code == 2 and "role name" in bad.stderr and bad.stderr.count("\n") == 1
    open_register(str(tmp_path / "r.sqlite"), actor="x").close()
    sqlite = runner.invoke(app, ["db", "roles", "--db", str(tmp_path / "r.sqlite")])
    assert sqlite.exit_code == 2 and "PostgreSQL" in sqlite.stderr


def test_a_clerk_may_not_set_up_roles(guarded: Guarded, groups: Groups) -> None:
    result = CliRunner().invoke(
        app, ["db", "roles", "--apply", "--db", guarded.clerk, "--clerk", groups.clerk, "--admin", groups.admin]
    )
    assert result.exit_code == 2
    assert result.stderr.count("\n") == 1 and "may not set up roles" in result.stderr


def test_a_refused_read_is_one_line_at_the_command_line(guarded: Guarded) -> None:
    from tests.edges.helpers import refused as cli_refused
    from tests.edges.helpers import run

    line = cli_refused(run(guarded.clerk, "tokens", "list"), "permission denied for table access_token")
    assert "Traceback" not in line

