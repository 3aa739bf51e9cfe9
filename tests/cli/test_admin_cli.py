"""``issuer backup``, ``issuer doctor`` and ``issuer db`` through the command line: the
files they write, the problems they find, one line and an exit code when they refuse."""

from __future__ import annotations

import json
import os
import shutil
import sqlite3
import stat
import subprocess
import time
from pathlib import Path
from typing import Any

import pytest

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code, void_code
from issuer.register.store import open_register
from tests.register.consistency import assert_consistent
from tests.register.desks import DeskRoom
from tests.register.pg import pg_database, pg_url, register_url, temporary_database  # noqa: F401
from tests.register.sidestep import sql_behind_the_back


def fill(url: str) -> list[str]:
    register = open_register(url, actor="quartermaster")
    try:
        add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
        add_series(register, SeriesSpec(key="members", scheme="luhn", length=7, prefix="M", mode="scattered"))
        codes = [info.code for info in issue_codes(register, "tools", 120).codes]
        issue_codes(register, "members", 80)
        void_code(register, codes[0], reason="lost in the car park")
        replace_code(register, codes[1], reason="label peeled off")
        return codes
    finally:
        register.close()


def sql(url: str, statement: str, **params: Any) -> None:
    sql_behind_the_back(url, statement, **params)  # the triggers side-stepped, as an owner could


def findings(result: Any) -> dict[str, dict[str, Any]]:
    return {finding["check"]: finding for finding in json.loads(result.stdout)["findings"]}


# --- backup ---------------------------------------------------------------------------


def test_backup_is_owner_only_checked_and_complete(cli: Any, db_path: Path, tmp_path: Path) -> None:
    fill(str(db_path))
    target = tmp_path / "copies" / "register-backup.sqlite"
    target.parent.mkdir()
    old_umask = os.umask(0)  # even a careless umask gets an owner-only backup
    try:
        result = cli("backup", str(target), "--json")
    finally:
        os.umask(old_umask)
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert data["destination"] == str(target) and data["size"] == target.stat().st_size
    assert stat.S_IMODE(target.stat().st_mode) == 0o600
    # one self-contained file: no journal or WAL beside it, nothing half-written left over;
    # the register's key file is copied beside it, owner-only, so the copy issues when restored
    assert sorted(p.name for p in target.parent.iterdir()) == [target.name, target.name + ".key"]
    assert data["key_file"] == str(target) + ".key"
    assert Path(data["key_file"]).read_bytes() == db_path.with_name(db_path.name + ".key").read_bytes()
    assert stat.S_IMODE(Path(data["key_file"]).stat().st_mode) == 0o600
    with sqlite3.connect(target) as copy:
        assert copy.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        assert copy.execute("PRAGMA journal_mode").fetchone() == ("delete",)
    facts = assert_consistent(str(target))
    assert len(facts.codes) == 201  # 120 + 80 + the replacement
    log = cli("log", "verify", "--db", str(target), "--json")
    assert json.loads(log.stdout)["head"]["hash"] == data["head_hash"]


def test_backup_refuses_to_overwrite_without_force(cli: Any, db_path: Path, tmp_path: Path) -> None:
    fill(str(db_path))
    target = tmp_path / "backup.sqlite"
    target.write_text("an older backup")
    refused = cli("backup", str(target))
    assert refused.exit_code == 2
    assert refused.stderr.count("\n") == 1 and "--force" in refused.stderr
    assert target.read_text() == "an older backup"
    forced = cli("backup", str(target), "--force")
    assert forced.exit_code == 0, forced.output
    assert stat.S_IMODE(target.stat().st_mode) == 0o600
    assert assert_consistent(str(target)).series_next == {"tools": 121, "members": 80}


def test_backup_refuses_the_register_itself_and_makes_a_missing_folder_private(
    cli: Any, db_path: Path, tmp_path: Path
) -> None:
    fill(str(db_path))
    itself = cli("backup", str(db_path), "--force")
    assert itself.exit_code == 2 and "register itself" in itself.stderr
    journal = cli("backup", f"{db_path}-wal", "--force")
    assert journal.exit_code == 2 and "journal" in journal.stderr
    made = cli("backup", str(tmp_path / "no" / "such" / "folder" / "b.sqlite"))
    assert made.exit_code == 0, made.output
    for folder in (tmp_path / "no", tmp_path / "no" / "such", tmp_path / "no" / "such" / "folder"):
        assert stat.S_IMODE(folder.stat().st_mode) == 0o700


def test_backup_while_a_desk_keeps_issuing(db_path: Path, tmp_path: Path) -> None:
    from issuer.register.admin import open_existing
    from issuer.register.backup import backup_sqlite

    fill(str(db_path))
    room = DeskRoom([{"mode": "issue", "db": str(db_path), "series": "tools", "count": 150, "seed": 1}])
    try:
        room.ready()
        room.go()
        register = open_existing(str(db_path))
        copies = []
        for n in range(3):
            time.sleep(0.3)
            copies.append(backup_sqlite(register, tmp_path / f"during-{n}.sqlite"))
        register.close()
        reports, exits = room.finish(600)
    finally:
        room.close()
    assert exits[0]["status"] == 0
    final = assert_consistent(str(db_path))
    moments = []
    for copy in copies:
        facts = assert_consistent(copy.destination)  # each copy is one consistent moment
        assert set(facts.codes) <= set(final.codes)
        moments.append(facts.series_next["tools"])
    assert moments == sorted(moments) and 121 <= moments[0] and moments[-1] <= final.series_next["tools"]
    assert final.series_next["tools"] == 121 + 150
    assert len(reports[0]) == 150


def test_backup_of_a_postgres_register_prints_pg_dump(pg_url: str, tmp_path: Path) -> None:  # noqa: F811
    from typer.testing import CliRunner

    from issuer.cli.app import app

    fill(pg_url)
    dump = tmp_path / "register.dump"
    result = CliRunner().invoke(app, ["backup", str(dump), "--db", pg_url, "--json"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert data["command"][0] == "pg_dump" and f"--file={dump}" in data["command"]
    assert not dump.exists()  # printed, not run
    if shutil.which("pg_dump") is None or shutil.which("pg_restore") is None:
        pytest.skip("pg_dump/pg_restore are not installed here; the command was printed")
    # the printed commands really back up and restore the register
    subprocess.run(data["command"], check=True, capture_output=True)
    from tests.register.pg import database_url as pg_database_url

    schema = pg_url.rsplit("search_path%3D", 1)[1]
    with temporary_database("restore") as restored:
        target = pg_database_url(restored).replace("postgresql+psycopg://", "postgresql://")
        restore = [f"--dbname={target}" if arg.startswith("--dbname=") else arg for arg in data["restore"]]
        subprocess.run(restore, check=True, capture_output=True)
        # a register restored under another name finds its key file where it is told to:
        # here, a copy at the new name's default place
        from issuer.register.sealing import default_key_file

        restored_url = pg_database_url(restored, schema=schema)
        assert data["key_file"] == str(default_key_file(pg_url))
        key = default_key_file(restored_url)
        key.parent.mkdir(parents=True, exist_ok=True)
        shutil.copyfile(data["key_file"], key)
        facts = assert_consistent(restored_url)
        assert facts.series_next == {"tools": 121, "members": 80}


# --- doctor -----------------------------------------------------------------------------


def test_doctor_passes_a_healthy_register(register_url: str) -> None:  # noqa: F811
    from typer.testing import CliRunner

    from issuer.cli.app import app

    fill(register_url)
    result = CliRunner().invoke(app, ["doctor", "--db", register_url, "--json"])
    assert result.exit_code == 0, result.output
    found = findings(result)
    assert {name for name, finding in found.items() if finding["status"] == "problem"} == set()
    assert found["counters"]["status"] == found["batches"]["status"] == "ok"
    table = CliRunner().invoke(app, ["doctor", "--db", register_url], env={"COLUMNS": "200"})
    assert table.exit_code == 0 and "The register is whole" in table.stdout


BREAKAGES = {
    # a batch that lost a code: not whole, counters disagree, the log's count is off
    "half-issued": ("DELETE FROM issued_code WHERE code = :a", {"batches", "counters", "log and codes"}),
    # a counter moved behind the tool's back: a gap in an in-order series
    "counter": ("UPDATE series SET next_counter = next_counter + 1 WHERE key = 'tools'", {"counters"}),
    # a code's text changed: the log's digest of its batch no longer matches
    "code text": ("UPDATE issued_code SET code = 'T9999999' WHERE code = :a", {"log and codes", "replay"}),
    # voided with no void logged
    "silent void": ("UPDATE issued_code SET status = 'voided' WHERE code = :b", {"log and codes", "replay"}),
    # the log edited (and its entry no longer names the batch's author)
    "log edit": ("UPDATE log_entry SET actor = 'nobody' WHERE id = 3", {"log chain", "replay"}),
}


@pytest.mark.parametrize("breakage", sorted(BREAKAGES))
def test_doctor_finds_what_was_broken(register_url: str, breakage: str) -> None:  # noqa: F811
    from typer.testing import CliRunner

    from issuer.cli.app import app

    codes = fill(register_url)
    statement, expected = BREAKAGES[breakage]
    sql(register_url, statement, a=codes[50], b=codes[60])
    result = CliRunner().invoke(app, ["doctor", "--db", register_url, "--json"])
    assert result.exit_code == 1
    found = findings(result)
    assert {name for name, finding in found.items() if finding["status"] == "problem"} == expected
    assert json.loads(result.stdout)["healthy"] is False


def test_doctor_finds_a_damaged_file(cli: Any, db_path: Path) -> None:
    codes = fill(str(db_path))
    with sqlite3.connect(db_path) as connection:
        connection.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    data = bytearray(db_path.read_bytes())
    size = 4096
    # flip one bit of a code's text where an index leaf page (type 0x0a) keeps it
    needle = codes[60].encode("ascii")
    spots = [
        at for at in range(len(data)) if data[at: at + len(needle)] == needle and data[at - at % size] == 0x0A
    ]
    assert spots
    data[spots[0] + 2] ^= 0x01
    db_path.write_bytes(bytes(data))
    result = cli("doctor", "--json")
    assert result.exit_code == 1
    integrity = findings(result)["integrity"]
    assert integrity["status"] == "problem" and integrity["details"]


def test_doctor_reports_an_old_schema_and_loose_permissions(cli: Any, db_path: Path) -> None:
    fill(str(db_path))
    db_path.chmod(0o644)
    loose = findings(cli("doctor", "--json"))
    assert loose["access"]["status"] == "warn"
    db_path.chmod(0o666)
    assert findings(cli("doctor", "--json"))["access"]["status"] == "problem"
    db_path.chmod(0o600)
    sql(str(db_path), "UPDATE alembic_version SET version_num = '0000'")
    result = cli("doctor", "--json")
    assert result.exit_code == 1
    schema = findings(result)["schema"]
    assert schema["status"] == "problem" and "issuer db upgrade" in schema["summary"]


def test_doctor_on_a_missing_register_creates_nothing(cli: Any, tmp_path: Path) -> None:
    missing = tmp_path / "nothing-here.sqlite"
    result = cli("doctor", "--db", str(missing))
    assert result.exit_code == 2 and result.stderr.count("\n") == 1
    assert "no register at" in result.stderr
    assert not missing.exists()


def test_a_register_made_under_a_careless_umask_is_owner_only(tmp_path: Path) -> None:
    path = tmp_path / "shared-folder" / "register.sqlite"
    old_umask = os.umask(0)
    try:
        register = open_register(str(path), actor="quartermaster")
        add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
        issue_codes(register, "tools", 3)
        # while it is open, SQLite's WAL and shared-memory files sit beside it
        companions = [Path(f"{path}-wal"), Path(f"{path}-shm")]
        modes = {p.name: stat.S_IMODE(p.stat().st_mode) for p in [path, *companions] if p.exists()}
        register.close()
    finally:
        os.umask(old_umask)
    assert modes[path.name] == 0o600
    assert len(modes) == 3 and set(modes.values()) == {0o600}
