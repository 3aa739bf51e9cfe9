"""The holder, validity, suspension and fill commands on SQLite and PostgreSQL: one line
on stderr for bad input, JSON alone on stdout with --json, and the acts in history."""

from __future__ import annotations

import csv
import json
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest
from typer.testing import CliRunner

from issuer.cli.app import app
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401


@pytest.fixture
def run(register_url: str, monkeypatch: pytest.MonkeyPatch) -> Any:  # noqa: F811
    monkeypatch.setenv("ISSUER_DB", register_url)
    runner = CliRunner()

    def invoke(*args: str) -> Any:
        return runner.invoke(app, list(args), env={"COLUMNS": "120"})

    return invoke


def as_json(result: Any) -> Any:
    assert result.exit_code == 0, result.output
    return json.loads(result.stdout)


def test_holder_set_find_clear_erase(run: Any) -> None:
    assert run("series", "add", "members", "--scheme", "luhn", "--length", "7", "--prefix", "M").exit_code == 0
    card = as_json(run("issue", "members", "--json"))["codes"][0]["code"]
    set_out = as_json(run("holder", "set", card, "Wren Halloway", "--note", "Evening volunteer", "--json"))
    assert set_out["holder"] == "Wren Halloway"
    found = as_json(run("find", "wren h", "--json"))
    assert [item["code"] for item in found] == [card]
    assert as_json(run("find", "evening", "--series", "members", "--json"))[0]["matched"] == "note"
    table = run("find", "WREN")
    assert table.exit_code == 0 and "Wren Halloway" in table.stdout
    assert as_json(run("holder", "clear", card, "--json"))["holder"] is None
    assert "No holder" in run("find", "wren").stdout
    erased = run("holder", "erase", card, "--reason", "member left")
    assert erased.exit_code == 0 and "backups" in erased.stderr
    history = as_json(run("history", card, "--json"))
    assert [e["action"] for e in history["events"]] == ["issue", "holder.set", "holder.clear", "holder.erase"]
    assert history["code"]["note"] is None and history["code"]["erased_at"]
    assert "Wren" not in json.dumps(history["events"])
    bad = run("holder", "erase", card, "--reason", "   ")
    assert bad.exit_code == 2 and bad.stderr.count("\n") == 1 and "reason" in bad.stderr
    assert run("find", "  ").exit_code == 2


def test_purge_dry_run_and_for_real(run: Any) -> None:
    run("series", "add", "members", "--scheme", "luhn", "--length", "7", "--prefix", "M")
    codes = [c["code"] for c in as_json(run("issue", "members", "-n", "2", "--holder", "Ada Fenwick", "--json"))["codes"]]
    run("void", codes[0], "--reason", "membership ended")
    tomorrow = (datetime.now(UTC) + timedelta(days=1)).date().isoformat()
    dry = as_json(run("holders", "purge", "--voided-before", tomorrow, "--dry-run", "--json"))
    assert dry["count"] == 1 and dry["codes"] == [codes[0]] and dry["dry_run"] is True
    assert as_json(run("find", "ada", "--json"))[0]["holder"] == "Ada Fenwick"
    done = run("holders", "purge", "--voided-before", tomorrow)
    assert done.exit_code == 0 and "Erased the holder and note of 1 code" in done.stdout
    assert [item["code"] for item in as_json(run("find", "ada", "--json"))] == [codes[1]]
    assert run("holders", "purge", "--voided-before", "2999-01-01").exit_code == 2
    assert run("holders", "purge").exit_code == 2
    assert run("holders", "purge", "--voided-before", "not-a-date").exit_code == 2


def test_validity_renew_suspend_reinstate(run: Any, tmp_path: Path) -> None:
    run("series", "add", "passes", "--scheme", "luhn", "--length", "5", "--prefix", "DP", "--valid-for", "30d")
    shown = as_json(run("series", "show", "passes", "--json"))
    assert shown["valid_for"] == "30d" and shown["fill_levels"] == [80, 95] and "fill" in shown
    code = as_json(run("issue", "passes", "--valid-until", "2099-06-30", "--json"))["codes"][0]["code"]
    check = as_json(run("check", code, "--json"))
    assert check[0]["status"] == "issued" and check[0]["valid_until"].startswith("2099-06-30 23:59:59")
    renewed = as_json(run("renew", code, "--until", "2100-01-31", "--json"))
    assert renewed["valid_until"].startswith("2100-01-31")
    assert run("renew", code, "--for", "ten days").exit_code == 2
    assert run("renew", code).exit_code == 2
    suspended = as_json(run("suspend", code, "--reason", "reported lost", "--json"))
    assert suspended["status"] == "suspended"
    check = run("check", code, "--json")
    answer = json.loads(check.stdout)[0]
    assert check.exit_code == 1 and answer["status"] == "suspended" and answer["reason"] == "reported lost"
    assert answer["since"]
    reprint = run("reprint", code, "--reason", "worn", "--out", str(tmp_path / "labels.pdf"))
    assert reprint.exit_code == 2 and "suspended" in reprint.stderr
    history = run("history", code)
    assert history.exit_code == 0 and "suspended" in history.stdout
    assert as_json(run("reinstate", code, "--json"))["status"] == "issued"
    out = tmp_path / "passes.csv"
    assert run("export", "passes", "--out", str(out)).exit_code == 0
    with out.open(newline="") as stream:
        rows = list(csv.DictReader(stream))
    assert rows[0]["valid_until"].startswith("2100-01-31")
    doctor = as_json(run("doctor", "--json"))
    assert {f["check"] for f in doctor["findings"]} >= {"states", "fill"}


def test_fill_warning_on_issue_and_in_series_list(run: Any, tmp_path: Path) -> None:
    run("series", "add", "lockers", "--scheme", "luhn", "--length", "2", "--prefix", "L", "--start", "1",
        "--end", "10", "--warn-at", "50,90")  # fmt: skip
    quiet = run("issue", "lockers", "-n", "4")
    assert quiet.exit_code == 0 and "Warning" not in quiet.stderr
    out = tmp_path / "batch.csv"
    loud = run("issue", "lockers", "-n", "2", "--holder", "Locker bank A", "--out", str(out))
    assert loud.exit_code == 0 and loud.stderr.count("\n") == 1 and "past its 50% warning level" in loud.stderr
    with out.open(newline="") as stream:
        rows = list(csv.DictReader(stream))
    assert [row["holder"] for row in rows] == ["Locker bank A"] * 2
    data = as_json(run("issue", "lockers", "-n", "3", "--json"))
    assert data["fill"] == 0.9 and data["fill_warning"]["level"] == 90
    listed = as_json(run("series", "list", "--json"))
    assert listed[0]["fill_level"] == 90 and listed[0]["fill"] == 0.9
    assert "past 90%" in run("series", "list").stdout
    changed = as_json(run("series", "change", "lockers", "--warn-at", "none", "--json"))
    assert changed["fill_levels"] == [] and changed["fill_level"] is None
    assert run("series", "change", "lockers", "--warn-at", "eighty").exit_code == 2
