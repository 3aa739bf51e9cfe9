"""Defects 7 and 9: inputs that ended in a traceback now end in one line and change
nothing, on both backends; stored control characters never reach a terminal or an SVG
raw; new folders are owner-only and doctor says so when one is not."""

from __future__ import annotations

import json
import os
import stat
from pathlib import Path

import pytest

from tests.edges.helpers import execute, fingerprint, ok, refused, run, tool, tools_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

EDGE_DATES = ["0001-01-01T00:00:00+05:00", "9999-12-31T23:59:59-01:00"]


def _file(tmp_path: Path, name: str, content: str | bytes) -> str:
    path = tmp_path / name
    path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
    return str(path)


def _inputs(tmp_path: Path) -> dict[str, tuple[list[str], dict[str, str]]]:
    """The inputs that used to end in a traceback: arguments and environment."""
    code = tool(1)
    cases: dict[str, tuple[list[str], dict[str, str]]] = {
        "log --last huge": (["log", "--last", "99999999999999999999"], {}),
        "labels --batch huge": (["labels", "--batch", "99999999999999999999", "--out", str(tmp_path / "l.pdf")], {}),
        "holder too long": (["issue", "tools", "--holder", "h" * 201], {}),
        "actor too long": (["issue", "tools"], {"ISSUER_ACTOR": "a" * 121}),
        "request id too long": (["issue", "tools", "--request-id", "r" * 201], {}),
        "title too long": (["series", "change", "tools", "--title", "t" * 201], {}),
        "custom alphabet non-ASCII": (
            ["series", "add", "passes", "--scheme", "luhn", "--length", "6", "--prefix", "DP",
             "--alphabet", "custom:ÄÖÜ0123456789"], {}),
        "config invalid UTF-8": (["log"], {"ISSUER_CONFIG": _file(tmp_path, "bad.toml", b"[register]\nactor = \"\xff\"\n")}),
        "config wrong type": (["issue", "tools"], {"ISSUER_CONFIG": _file(tmp_path, "t.toml", "[register]\nbusy_timeout_ms = 'x'\n")}),
        "backup name 300": (["backup", str(tmp_path / ("b" * 300))], {}),
        "holder with NUL": (["issue", "tools", "--holder", "a\x00b"], {}),
        "series key NUL": (["issue", "\x00"], {}),  # the long fuzz run found it (PostgreSQL)
        "series key NUL in a bulk": (["issue", "to\x00ls", "--count", "5000"], {}),
        "JSON lone surrogate": (["import", "tools", _file(tmp_path, "s.jsonl", '{"code": "' + tool(90) + '", "holder": "\\ud800"}\n')], {}),
        "JSON NUL": (["import", "tools", _file(tmp_path, "n.jsonl", '{"code": "' + tool(91) + '", "note": "\\u0000"}\n')], {}),
        "JSON deep nesting": (["import", "tools", _file(tmp_path, "d.jsonl", "[" * 20000 + "]" * 20000 + "\n")], {}),
    }  # fmt: skip
    for number, date in enumerate(EDGE_DATES):
        cases[f"log --since {date}"] = (["log", "--since", date], {})
        cases[f"import date {date}"] = (
            ["import", "tools", _file(tmp_path, f"i{number}.csv", f"code,issued_at\n{tool(80 + number)},{date}\n")], {})
        cases[f"scan time {date}"] = (
            ["reconcile", "tools", "--record", _file(tmp_path, f"s{number}.csv", f"code,scanned_at\n{code},{date}\n")], {})
    return cases


def test_every_former_traceback_is_one_line_and_changes_nothing(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    tools_register(register_url, issued=3)
    cases = _inputs(tmp_path)
    assert len(cases) >= 14
    for name, (args, env) in cases.items():
        if name == "backup name 300" and "://" in register_url:
            continue  # a PostgreSQL register is backed up with pg_dump: nothing is written
        before = fingerprint(register_url)
        result = run(register_url, *args, env=env)
        refused(result)
        assert fingerprint(register_url) == before, name


@pytest.fixture
def stored_escape(register_url: str) -> str:  # noqa: F811
    """A register whose holder, note and title hold terminal escapes (set by SQL behind the
    tool's back, or by an older version that let them in)."""
    tools_register(register_url, issued=1)
    execute(register_url, "UPDATE issued_code SET holder = :h, note = :n", h="\x1b[31mRED\x1b]0;pwn\x07", n="a\x9bb")
    execute(register_url, "UPDATE series SET title = :t", t="Tools\x1b[2J")
    return register_url


def test_stored_escapes_are_shown_escaped_in_the_terminal(stored_escape: str) -> None:
    for args in (["history", tool(1)], ["check", tool(1)], ["series", "list"], ["export", "tools", "--format", "json"]):
        result = run(stored_escape, *args)
        assert result.exit_code in (0, 1), (args, result.output)
        assert "\x1b" not in result.output and "\x9b" not in result.output and "\x07" not in result.output, args
    shown = run(stored_escape, "history", tool(1)).output
    assert "\\x1b[31mRED" in shown
    data = json.loads(run(stored_escape, "export", "tools", "--format", "json").stdout)
    assert data[0]["holder"] == "\x1b[31mRED\x1b]0;pwn\x07"  # JSON escapes carry it exactly


def test_markup_in_a_holder_is_text_not_a_crash(register_url: str) -> None:  # noqa: F811
    tools_register(register_url, issued=0)
    result = ok(run(register_url, "issue", "tools", "--holder", "[/bold] [red]Quillmere"))
    assert "[/bold] [red]Quillmere" in result.stdout


def test_an_svg_label_of_such_a_holder_is_well_formed_xml(stored_escape: str, tmp_path: Path) -> None:
    from xml.etree import ElementTree

    out = tmp_path / "tag.svg"
    ok(run(stored_escape, "labels", tool(1), "--out", str(out), "--lines", "title,holder,note"))
    root = ElementTree.parse(out).getroot()  # raises on any control character
    text = "".join(root.itertext())
    assert "\\x1b[31mRED" in text


def test_new_register_and_output_folders_are_owner_only_whatever_the_umask(tmp_path: Path) -> None:
    old = os.umask(0)
    try:
        url = str(tmp_path / "office" / "registers" / "r.sqlite")
        tools_register(url, issued=1)
        ok(run(url, "export", "tools", "--out", str(tmp_path / "exports" / "march" / "tools.csv")))
        ok(run(url, "labels", tool(1), "--out", str(tmp_path / "labels" / "tag.pdf")))
    finally:
        os.umask(old)
    for folder in ("office", "office/registers", "exports", "exports/march", "labels"):
        assert stat.S_IMODE((tmp_path / folder).stat().st_mode) == 0o700, folder


@pytest.mark.parametrize(("mode", "status"), [(0o700, "ok"), (0o755, "warn"), (0o777, "problem")])
def test_doctor_reports_a_register_folder_others_can_enter(tmp_path: Path, mode: int, status: str) -> None:
    folder = tmp_path / "registers"
    url = str(folder / "r.sqlite")
    tools_register(url, issued=1)
    folder.chmod(mode)
    result = run(url, "doctor", "--json")
    found = {f["check"]: f for f in json.loads(result.stdout)["findings"]}
    assert found["folder"]["status"] == status, found["folder"]
    assert result.exit_code == (1 if status == "problem" else 0)
