"""The doctor replays the log against the register (regressions of issue 10's defects 4
and 5): an un-void, a changed print count, a removed replacement link or a reshaped series
made behind the tool's back is reported with the code or series; on PostgreSQL a missing
or disabled guard trigger fails the doctor, and an edit made with the triggers side-stepped
shows through the log's own content."""

from __future__ import annotations

from typing import Any

import pytest
from sqlalchemy import create_engine, text
from typer.testing import CliRunner

from issuer.cli.app import app
from issuer.register.defining import SeriesSpec, add_series, change_series
from issuer.register.doctor import run_doctor
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code, void_code
from issuer.register.printing import record_prints
from issuer.register.store import database_url, open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.sidestep import sql_behind_the_back


def _setup(url: str) -> list[str]:
    register = open_register(url, actor="quartermaster")
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
    change_series(register, "tools", prefix="TL")  # reshaped before its first code: logged
    codes = [i.code for i in issue_codes(register, "tools", 5).codes]
    change_series(register, "tools", title="Tool tags")
    void_code(register, codes[0], reason="lost in the car park")
    replace_code(register, codes[1], reason="label peeled off")
    record_prints(register, [codes[2]])
    register.close()
    return codes


def replay_details(url: str) -> tuple[bool, list[str]]:
    register = open_register(url, actor="doctor")
    try:
        report = run_doctor(register)
    finally:
        register.close()
    found = {f.check: f for f in report.findings}
    return report.healthy, found["replay"].details


def test_a_register_as_its_log_says_replays_clean(register_url: str) -> None:  # noqa: F811
    _setup(register_url)
    assert replay_details(register_url) == (True, [])


CASES = {
    "un-void": (("UPDATE issued_code SET status = 'issued', void_reason = NULL, voided_at = NULL, "
                 "voided_by = NULL WHERE code = :c"), 0, "status"),
    "print count": ("UPDATE issued_code SET print_count = 0 WHERE code = :c", 2, "print count"),
    "replacement link": ("UPDATE issued_code SET replaced_by_id = NULL WHERE code = :c", 1, "replaced by"),
    "silent void": ("UPDATE issued_code SET status = 'voided', void_reason = 'x' WHERE code = :c", 3, "status"),
}  # fmt: skip


@pytest.mark.parametrize("case", sorted(CASES))
def test_an_edit_behind_the_logs_back_is_named_with_its_code(register_url: str, case: str) -> None:  # noqa: F811
    codes = _setup(register_url)
    statement, which, word = CASES[case]
    sql_behind_the_back(register_url, statement, c=codes[which])
    healthy, details = replay_details(register_url)
    assert not healthy
    assert any(line.startswith(codes[which]) and word in line for line in details), details


def test_a_reshaped_series_is_named(register_url: str) -> None:  # noqa: F811
    _setup(register_url)
    sql_behind_the_back(register_url, "UPDATE series SET range_start = 0, prefix = 'T' WHERE key = 'tools'")
    healthy, details = replay_details(register_url)
    assert not healthy and any(line.startswith("series tools: prefix") for line in details), details


def _pg(url: str, *statements: str) -> None:
    engine = create_engine(database_url(url))
    try:
        with engine.begin() as connection:
            for statement in statements:
                connection.execute(text(statement))
    finally:
        engine.dispose()


def _doctor_cli(url: str) -> Any:
    return CliRunner().invoke(app, ["doctor", "--db", url, "--json"])


def test_a_disabled_or_dropped_guard_fails_the_doctor(pg_url: str) -> None:  # noqa: F811
    _setup(pg_url)
    assert _doctor_cli(pg_url).exit_code == 0
    _pg(pg_url, "ALTER TABLE log_entry DISABLE TRIGGER issuer_log_append_only")
    disabled = _doctor_cli(pg_url)
    assert disabled.exit_code == 1 and "issuer_log_append_only on log_entry is disabled" in disabled.stdout
    _pg(pg_url, "ALTER TABLE log_entry ENABLE ALWAYS TRIGGER issuer_log_append_only",
        "DROP TRIGGER issuer_series_guard ON series")  # fmt: skip
    dropped = _doctor_cli(pg_url)
    assert dropped.exit_code == 1 and "issuer_series_guard on series is missing" in dropped.stdout


def test_the_replica_role_does_not_side_step_the_append_only_trigger(pg_url: str) -> None:  # noqa: F811
    _setup(pg_url)
    with pytest.raises(Exception, match="append-only"):
        _pg(pg_url, "SET LOCAL session_replication_role = replica", "UPDATE log_entry SET actor = 'x' WHERE id = 3")


def test_a_side_stepped_log_edit_shows_in_the_log_itself(pg_url: str) -> None:  # noqa: F811
    codes = _setup(pg_url)
    # DISABLE TRIGGER ... ENABLE TRIGGER in one transaction: the catalog keeps no trace
    _pg(pg_url, "ALTER TABLE log_entry DISABLE TRIGGER issuer_log_append_only",
        f"UPDATE log_entry SET detail = '{{\"reason\": \"returned\"}}' WHERE code = '{codes[0]}' AND action = 'void'",
        "ALTER TABLE log_entry ENABLE ALWAYS TRIGGER issuer_log_append_only")  # fmt: skip
    result = _doctor_cli(pg_url)
    assert result.exit_code == 1 and "log chain" in result.stdout and "altered" in result.stdout
