"""The register through the command line: output, exit codes, and the rows stored,
read back through the Python API."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import func, select

from issuer.register.models import IssuedCode, LogEntry
from issuer.register.store import open_register


def _count(db_path: Path, model: Any) -> int:
    register = open_register(str(db_path), actor="reader")
    with register.reading() as session:
        value = session.scalar(select(func.count()).select_from(model))
    register.close()
    return int(value or 0)


def _define_tools(cli: Any) -> None:
    result = cli("series", "add", "tools", "--scheme", "damm", "--length", "7", "--prefix", "QTL",
                 "--group", "4,4", "--title", "Tool tags")
    assert result.exit_code == 0, result.output


def test_series_issue_void_replace_restore_history(cli: Any, db_path: Path) -> None:
    _define_tools(cli)
    issued = cli("issue", "tools", "--count", "3", "--note", "spring intake", "--json")
    assert issued.exit_code == 0, issued.output
    data = json.loads(issued.stdout)
    assert set(data) >= {"batch", "codes"}
    codes = [entry["code"] for entry in data["codes"]]
    assert [entry["base"] for entry in data["codes"]] == [1, 2, 3]

    shown = json.loads(cli("series", "show", "tools", "--json").stdout)
    assert (shown["issued"], shown["voided"], shown["capacity"]) == (3, 0, 9_999_999)
    # source: python-stdnum's Damm implementation as the reference for the check digit
    from stdnum import damm

    assert shown["next_code"] == "QTL-0000-004" + damm.calc_check_digit("0000004")

    voided = cli("void", codes[0], "--reason", "lost at the workshop")
    assert voided.exit_code == 0 and "Voided" in voided.stdout

    replaced = json.loads(cli("replace", codes[1], "--reason", "label damaged", "--json").stdout)
    assert replaced["replaces"] == codes[1] and replaced["code"] not in codes

    restored = cli("restore", codes[0], "--reason", "found on the shelf")
    assert restored.exit_code == 0

    history = json.loads(cli("history", codes[1], "--json").stdout)
    assert history["code"]["status"] == "voided"
    assert history["code"]["replaced_by"] == replaced["code"]
    assert [event["action"] for event in history["events"]] == ["issue", "void"]

    log = json.loads(cli("log", "--series", "tools", "--json").stdout)
    assert [entry["action"] for entry in log] == ["series.add", "issue", "void", "void", "replace", "restore"]
    assert all(entry["actor"] == "test-clerk" for entry in log)
    assert json.loads(cli("log", "--actor", "nobody", "--json").stdout) == []
    assert len(json.loads(cli("log", "--since", "2000-01-01", "--json").stdout)) == 6

    # the stored rows, read back through the library
    assert _count(db_path, IssuedCode) == 4
    assert _count(db_path, LogEntry) == 6


def test_check_answers_from_the_register(cli: Any) -> None:
    _define_tools(cli)
    codes = [c["code"] for c in json.loads(cli("issue", "tools", "-n", "2", "--json").stdout)["codes"]]
    cli("void", codes[1], "--reason", "lost")
    typo = codes[0][:8] + codes[0][9] + codes[0][8] + codes[0][10:]
    result = cli("check", codes[0], codes[1], typo, "QTL-1", "--json")
    assert result.exit_code == 1
    answers = json.loads(result.stdout)
    assert [a["status"] for a in answers] == ["issued", "voided", "bad_check", "malformed"]
    assert [a["input"] for a in answers] == [codes[0], codes[1], typo, "QTL-1"]
    for answer in answers:
        assert {"input", "code", "series", "status", "suggestions"} <= set(answer)
    assert answers[2]["suggestions"][0]["code"] == codes[0]
    assert answers[2]["suggestions"][0]["error"] == "adjacent"
    ok = cli("check", codes[0])
    assert ok.exit_code == 0 and "in use" in ok.stdout


def test_desk_mode_answers_each_line(cli: Any) -> None:
    _define_tools(cli)
    code = json.loads(cli("issue", "tools", "--json").stdout)["codes"][0]["code"]
    result = cli("desk", input=f"{code}\nQTL-9\n\n")
    assert result.exit_code == 0
    assert "in use" in result.stdout and "not a code" in result.stdout


def test_request_id_on_the_command_line(cli: Any, db_path: Path) -> None:
    _define_tools(cli)
    first = json.loads(cli("issue", "tools", "-n", "2", "--request-id", "r-1", "--json").stdout)
    again = json.loads(cli("issue", "tools", "-n", "2", "--request-id", "r-1", "--json").stdout)
    assert first["codes"] == again["codes"] and again["replayed"] is True
    assert _count(db_path, IssuedCode) == 2


def test_exhausted_series_refuses_and_issues_nothing(cli: Any, db_path: Path) -> None:
    assert cli("series", "add", "ten", "--scheme", "luhn", "--length", "2", "--start", "0",
               "--end", "9").exit_code == 0
    assert cli("issue", "ten", "-n", "8").exit_code == 0
    refused = cli("issue", "ten", "-n", "3")
    assert refused.exit_code == 2
    assert refused.stderr.strip() == "issuer: series ten has 2 numbers left; 3 asked for, nothing issued"
    assert _count(db_path, IssuedCode) == 8


def test_scattered_series_below_the_minimum_domain_says_so(cli: Any) -> None:
    result = cli("series", "add", "small", "--scheme", "luhn", "--length", "3", "--mode", "scattered")
    assert result.exit_code == 0
    said = " ".join(result.output.split())
    assert "only shuffled, not protected" in said
    assert "not secret" in said


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (("issue", "nope"), "no series 'nope'"),
        (("void", "QTL-0000-0001", "--reason", "x"), "check character"),
        (("void", "XYZ", "--reason", "x"), "shape"),
        (("void", "QTL-0000-0013", "--reason", " "), "reason is required"),
        (("series", "add", "Bad Key", "--scheme", "luhn", "--length", "4"), "series key"),
        (("series", "add", "x", "--scheme", "nope", "--length", "4"), "unknown scheme"),
        (("series", "add", "x", "--scheme", "luhn", "--length", "4", "--group", "a,b"), "--group"),
        (("log", "--since", "yesterday"), "--since"),
        (("issue", "tools", "--count", "0"), "count"),
    ],
)
def test_bad_input_is_one_line_and_writes_nothing(cli: Any, db_path: Path, args: tuple[str, ...], message: str) -> None:
    _define_tools(cli)
    before = _count(db_path, LogEntry)
    result = cli(*args)
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("issuer: ")
    assert message in lines[0]
    assert "Traceback" not in result.output
    assert _count(db_path, LogEntry) == before


def _run(*args: str, env: dict[str, str], cwd: Path) -> subprocess.CompletedProcess[str]:
    # run outside the checkout, so that the installed package answers, as for a user
    return subprocess.run([sys.executable, "-m", "issuer", *args], capture_output=True, text=True,
                          env=env, timeout=120, cwd=cwd)


def test_real_processes(tmp_path: Path) -> None:
    env = dict(os.environ, ISSUER_DB=str(tmp_path / "sub.sqlite"), ISSUER_ACTOR="desk-1", COLUMNS="120")
    assert _run("series", "add", "cards", "--scheme", "verhoeff", "--length", "8", "--mode",
                "scattered", env=env, cwd=tmp_path).returncode == 0
    issued = _run("issue", "cards", "--json", env=env, cwd=tmp_path)
    assert issued.returncode == 0, issued.stderr
    code = json.loads(issued.stdout)["codes"][0]["code"]
    checked = _run("check", code, env=env, cwd=tmp_path)
    assert checked.returncode == 0 and "in use" in checked.stdout
    created = _run("db", "init", "--db", str(tmp_path / "new-folder" / "x.sqlite"), env=env, cwd=tmp_path)
    assert created.returncode == 0  # a missing folder is created, owner-only
    assert (tmp_path / "new-folder").stat().st_mode & 0o777 == 0o700
    (tmp_path / "file-not-dir").write_text("")
    blocked = _run("db", "init", "--db", str(tmp_path / "file-not-dir" / "x.sqlite"), env=env, cwd=tmp_path)
    assert blocked.returncode == 2
    assert blocked.stderr.count("\n") == 1 and "cannot create the register" in blocked.stderr


def test_series_change_before_and_after_the_first_code(cli: Any) -> None:
    _define_tools(cli)
    changed = json.loads(cli("series", "change", "tools", "--length", "8", "--group", "4,5", "--json").stdout)
    assert changed["length"] == 8 and changed["example"].count("-") == 2
    assert cli("issue", "tools").exit_code == 0
    frozen = cli("series", "change", "tools", "--length", "9")
    assert frozen.exit_code == 2 and "frozen" in frozen.stderr
    assert cli("series", "change", "tools", "--title", "Workshop tags").exit_code == 0
