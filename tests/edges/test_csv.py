"""Defects 6 and 8: every CSV the tool writes is safe to open in a spreadsheet, reads back
exactly (formula-like cells, quoted line breaks), and a holder too long for one backend
is too long for both."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest

from tests.edges.helpers import fingerprint, ok, refused, run, tool, tools_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

# common practice: spreadsheet programs read a cell starting with = + - @ (or a tab or
# carriage return before one) as a formula
FORMULAS = ['=HYPERLINK("http://x","y")', "+1", "-1", "@SUM(1)"]
NOTES = ["\t=1+2", "\r=1+2", "line one\nline two", "'already quoted"]


def _cells(text: str) -> list[str]:
    return [cell for row in csv.reader(io.StringIO(text)) for cell in row]


def test_formula_holders_and_notes_are_neutralised_and_read_back(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    tools_register(register_url, issued=0)
    for holder, note in zip(FORMULAS, NOTES):
        ok(run(register_url, "issue", "tools", "--holder", holder, "--note", note))
    exported = ok(run(register_url, "export", "tools")).stdout
    for cell in _cells(exported):
        assert not cell.startswith(("=", "+", "-", "@", "\t", "\r")), cell
    assert "'=HYPERLINK" in exported and "'+1" in exported and "'\t=1+2" in exported
    # the round trip: into a fresh register, every holder and note exactly as issued
    out = tmp_path / "tools.csv"
    ok(run(register_url, "export", "tools", "--out", str(out)))
    other = str(tmp_path / "other.sqlite")
    tools_register(other, issued=0)
    ok(run(other, "import", "tools", str(out)))
    rows = json.loads(ok(run(other, "export", "tools", "--format", "json")).stdout)
    assert [(row["holder"], row["note"]) for row in rows] == list(zip(FORMULAS, NOTES))


def test_a_two_line_note_survives_csv_export_and_import(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    tools_register(register_url, issued=0)
    note = "left bench, top shelf\nask the desk for the key"
    ok(run(register_url, "issue", "tools", "-n", "2", "--note", note))
    out = tmp_path / "tools.csv"
    ok(run(register_url, "export", "tools", "--out", str(out)))
    other = str(tmp_path / "other.sqlite")
    tools_register(other, issued=0)
    ok(run(other, "import", "tools", str(out)))
    rows = json.loads(ok(run(other, "export", "tools", "--format", "json")).stdout)
    assert [row["note"] for row in rows] == [note, note]


def test_reconcile_reports_and_rejects_are_neutralised(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    tools_register(register_url, issued=2)
    scan = tmp_path / "scan.csv"
    scan.write_text(f"code,location\n{tool(1)},=cmd|' /C calc'!A0\n@SUM(1),+shelf\n")
    report = tmp_path / "report.csv"
    run(register_url, "reconcile", "tools", str(scan), "--out", str(report))
    bad = tmp_path / "bad.csv"
    bad.write_text(f"code,holder\n-{tool(9)}=1,x\n{tool(10)},@me\n")
    rejects = tmp_path / "rejects.csv"
    ok(run(register_url, "import", "tools", str(bad), "--skip-bad", "--rejects", str(rejects)))
    for written in (report, rejects):
        for cell in _cells(written.read_text()):
            assert not cell.startswith(("=", "+", "-", "@", "\t", "\r")), (written.name, cell)


@pytest.mark.parametrize(("field", "limit"), [("--holder", 200), ("--note", 2000), ("--request-id", 200)])
def test_the_same_length_limit_on_both_backends(register_url: str, field: str, limit: int) -> None:  # noqa: F811
    tools_register(register_url, issued=1)
    before = fingerprint(register_url)
    line = refused(run(register_url, "issue", "tools", field, "x" * (limit + 1)), str(limit))
    assert "characters" in line and fingerprint(register_url) == before
    ok(run(register_url, "issue", "tools", field, "x" * limit))


def test_an_import_with_a_holder_too_long_is_refused_on_both_backends(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    tools_register(register_url, issued=0)
    data = tmp_path / "holders.csv"
    data.write_text(f"code,holder\n{tool(20)},{'h' * 300}\n")
    before = fingerprint(register_url)
    refused(run(register_url, "import", "tools", str(data)), "holder", "200")
    assert fingerprint(register_url) == before
