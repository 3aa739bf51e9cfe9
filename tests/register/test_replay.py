"""The doctor replays the log against the register (regressions of issue 10's defects 4
and 5): an un-void, a changed print count, a removed replacement link or a reshaped series
made behind the tool's back is reported with the code or series; on PostgreSQL a missing
or disabled guard trigger fails the doctor, and an edit made with the triggers side-stepped
shows through the log's own content."""

from __future__ import annotations

import json
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import create_engine, text
from typer.testing import CliRunner

from issuer.cli.app import app
from issuer.readers.scanfile import read_table
from issuer.register.defining import SeriesSpec, add_series, change_series
from issuer.register.doctor import run_doctor
from issuer.register.importing import IMPORT_ROLES, import_codes
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code, void_code
from issuer.register.printing import record_prints
from issuer.register.series import code_format, get_series
from issuer.register.store import database_url, open_register
from issuer.register.validity import renew_code
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.sidestep import sidestep, sql_behind_the_back


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


# --- ends of validity: every act that gives one logs it ------------------------------------


def _validity_setup(url: str, folder: Path) -> dict[str, str]:
    """Passes valid for 30 days from issue; one renewed, one replaced, two imported with
    their own ends."""
    register = open_register(url, actor="quartermaster")
    add_series(register, SeriesSpec(key="passes", scheme="luhn", length=6, prefix="P", valid_for_days=30))
    plain, renewed, replaced = (i.code for i in issue_codes(register, "passes", 3).codes)
    renew_code(register, renewed, days=10)
    replacement = replace_code(register, replaced, reason="pass cracked").code
    with register.reading() as session:
        shape = code_format(get_series(session, "passes"))
    imported = [shape.code_for_base(base) for base in (900_001, 900_002)]
    legacy = folder / "old-passes.csv"
    legacy.write_text(f"code,valid_until\n{imported[0]},2031-01-31\n{imported[1]},2032-06-30\n")
    import_codes(register, "passes", read_table(legacy, roles=IMPORT_ROLES))
    register.close()
    return {"plain": plain, "renewed": renewed, "replacement": replacement, "imported": imported[1]}


def test_ends_of_validity_as_logged_replay_clean(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    _validity_setup(register_url, tmp_path)
    assert replay_details(register_url) == (True, [])


@pytest.mark.parametrize("which", ["plain", "replacement", "imported"])
def test_an_end_of_validity_edited_on_a_code_never_renewed_is_named(
    register_url: str, tmp_path: Path, which: str  # noqa: F811
) -> None:
    codes = _validity_setup(register_url, tmp_path)
    sql_behind_the_back(register_url, "UPDATE issued_code SET valid_until = :v WHERE code = :c",
                        v=datetime(2099, 1, 1, tzinfo=UTC), c=codes[which])  # fmt: skip
    healthy, details = replay_details(register_url)
    assert not healthy
    if which == "imported":  # an import's ends are covered by one digest over its codes
        assert any("ends of validity differ" in line for line in details), details
    else:
        assert any(line.startswith(codes[which]) and "valid until" in line for line in details), details


def test_an_end_edited_before_a_renewal_shows_in_what_the_renewal_found(
    register_url: str, tmp_path: Path  # noqa: F811
) -> None:
    codes = _validity_setup(register_url, tmp_path)
    sql_behind_the_back(register_url, "UPDATE issued_code SET valid_until = :v WHERE code = :c",
                        v=datetime(2099, 1, 1, tzinfo=UTC), c=codes["plain"])  # fmt: skip
    register = open_register(register_url, actor="quartermaster")
    renew_code(register, codes["plain"], days=30)  # counted from the forged end
    register.close()
    healthy, details = replay_details(register_url)
    assert not healthy and any(line.startswith(codes["plain"]) and "first renewal" in line for line in details), details


def test_entries_written_before_ends_were_logged_judge_renewed_codes_only(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    """An entry without the key (an older register's) says nothing about the end."""
    codes = _validity_setup(register_url, tmp_path)
    assert _entry_keys(register_url, "issue") >= {"valid_until"}
    _drop_detail_key(register_url, "valid_until", ("issue", "replace"))
    _drop_detail_key(register_url, "valid_until_sha256", ("import",))
    sql_behind_the_back(register_url, "UPDATE issued_code SET valid_until = NULL WHERE code = :c", c=codes["plain"])
    _healthy, details = replay_details(register_url)
    assert not any("valid" in line for line in details), details


def _entry_keys(url: str, action: str) -> set[str]:
    engine = create_engine(database_url(url))
    try:
        with engine.connect() as connection:
            detail = connection.execute(text("SELECT detail FROM log_entry WHERE action = :a"), {"a": action}).scalar()
    finally:
        engine.dispose()
    return set(json.loads(detail))


def _drop_detail_key(url: str, key: str, actions: tuple[str, ...]) -> None:
    """Rewrite entries as an older issuer wrote them: the chain breaks (log verify says so),
    the replay reads what the entries now say."""
    engine = create_engine(database_url(url))
    try:
        with engine.begin() as connection:
            rows = connection.execute(text("SELECT id, action, detail FROM log_entry")).all()
            for entry_id, action, detail in rows:
                data = json.loads(detail)
                if action in actions and key in data:
                    del data[key]
                    sidestep(connection, "UPDATE log_entry SET detail = :d WHERE id = :i",
                             {"d": json.dumps(data, sort_keys=True), "i": entry_id})  # fmt: skip
    finally:
        engine.dispose()
