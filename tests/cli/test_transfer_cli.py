"""``issuer import`` and ``issuer export`` through the command line: the round trip,
refusals naming each bad line, --dry-run and --skip-bad/--rejects, streaming to stdout
or to a file written whole, and the personal-data caution in --help."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import func, select
from stdnum import luhn

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import void_code
from issuer.register.models import IssuedCode, LogEntry
from issuer.register.store import Register, open_register

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", group=(4, 4))
MEMBERS = SeriesSpec(key="members", scheme="luhn", length=9, prefix="QM", group=(5, 5), mode="scattered")


def tool(base: int) -> str:
    # source: python-stdnum's stdnum.luhn.calc_check_digit (ISO/IEC 7812-1 Annex B)
    return "QTL" + f"{base:07d}" + luhn.calc_check_digit(f"{base:07d}")


def counts(register: Register) -> tuple[int, int]:
    with register.reading() as session:
        codes = session.scalar(select(func.count()).select_from(IssuedCode))
        entries = session.scalar(select(func.count()).select_from(LogEntry))
    return int(codes or 0), int(entries or 0)


def one_error_line(result: Any) -> str:
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("issuer: "), result.stderr
    return str(lines[0])


def test_export_to_stdout_and_file_then_import_elsewhere(cli: Any, register: Register, tmp_path: Path,
                                                         monkeypatch: pytest.MonkeyPatch) -> None:
    add_series(register, TOOLS)
    add_series(register, MEMBERS)
    issue_codes(register, "tools", 30, note="spring intake")
    issue_codes(register, "members", 5, holder="Demo member (family plan)")
    void_code(register, tool(3), reason="lost")
    shown = cli("export", "tools")
    assert shown.exit_code == 0, shown.output
    rows = list(csv.DictReader(io.StringIO(shown.stdout)))
    assert [row["code"] for row in rows] == [tool(n) for n in range(1, 31)]
    assert rows[2]["status"] == "voided" and rows[2]["void_reason"] == "lost"
    out = tmp_path / "tools.csv"
    assert cli("export", "tools", "--out", str(out)).exit_code == 0
    assert out.read_text() == shown.stdout
    voided = json.loads(cli("export", "tools", "--format", "json", "--status", "voided").stdout)
    assert [row["code"] for row in voided] == [tool(3)]
    members = [json.loads(line) for line in cli("export", "members", "--format", "jsonl").stdout.splitlines()]
    assert {row["holder"] for row in members} == {"Demo member (family plan)"}
    # into a fresh register
    fresh = tmp_path / "fresh.sqlite"
    target = open_register(str(fresh), actor="setup")
    add_series(target, TOOLS)
    monkeypatch.setenv("ISSUER_DB", str(fresh))
    dry = cli("import", "tools", str(out), "--dry-run", "--json")
    assert dry.exit_code == 0, dry.output
    assert json.loads(dry.stdout) | {"source": None} == {
        "series": "tools", "source": None, "rows": 30, "dry_run": True, "imported": 0, "would_import": 30,
        "batch": None, "skipped": [], "ignored_columns": []}
    assert counts(target) == (0, 1)
    done = cli("import", "tools", str(out))
    assert done.exit_code == 0, done.output
    assert "Imported 30 codes into series tools" in done.stdout and "1 of them voided" in done.stdout
    assert cli("export", "tools").stdout == shown.stdout
    target.close()


def test_import_refuses_a_file_naming_each_bad_line(cli: Any, register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    add_series(register, MEMBERS)
    card_issued = issue_codes(register, "members").codes[0]
    card = card_issued.code
    bad_check = tool(7)[:-1] + str((int(tool(7)[-1]) + 1) % 10)
    path = tmp_path / "legacy.csv"
    path.write_text(f"code,holder\n{tool(5)},Workshop\n{tool(6)},\n{tool(5)},\n{bad_check},\n{card},\n")
    before = counts(register)
    message = one_error_line(cli("import", "tools", str(path)))
    assert "3 bad rows" in message and "nothing imported" in message
    # codes named in their display form (QTL-0000-0059), like every line for people
    assert f"line 4: QTL-{tool(5)[3:7]}-{tool(5)[7:]} is a duplicate of line 2" in message
    assert f"line 5: QTL-{bad_check[3:7]}-{bad_check[7:]}: the check character does not match" in message
    assert f"line 6: {card_issued.display} belongs to series members, not tools" in message
    assert counts(register) == before
    assert "--rejects lists skipped rows" in one_error_line(
        cli("import", "tools", str(path), "--rejects", str(tmp_path / "r.csv")))
    rejects = tmp_path / "rejects.csv"
    done = cli("import", "tools", str(path), "--skip-bad", "--rejects", str(rejects))
    assert done.exit_code == 0, done.output
    assert "Imported 2 codes" in done.stdout and "3 rows skipped" in done.stdout
    with rejects.open(newline="") as stream:
        listed = list(csv.reader(stream))
    assert listed[0] == ["line", "reason", "code", "holder"]
    assert [row[0] for row in listed[1:]] == ["4", "5", "6"]
    assert counts(register)[0] == before[0] + 2


@pytest.mark.parametrize(
    ("content", "message"),
    [
        (b"", "is empty"),
        (b"code\n\x00\x00\x00", "looks binary"),
        ("code\nQTL\u00e90000\n".encode("latin-1"), "is not UTF-8 text (line 2)"),
        (b"tag,holder\nQTL00000018,Bench\n", "has no column 'code'"),
    ],
    ids=["empty", "binary", "latin-1", "missing-column"],
)
def test_import_bad_files(cli: Any, register: Register, tmp_path: Path, content: bytes, message: str) -> None:
    add_series(register, TOOLS)
    path = tmp_path / "legacy.csv"
    path.write_bytes(content)
    before = counts(register)
    args = ["import", "tools", str(path)] + (["--column", "code"] if "column" in message else [])
    assert message in one_error_line(cli(*args))
    assert counts(register) == before


def test_export_refusals_and_help(cli: Any, register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    assert "--format must be one of csv, json, jsonl" in one_error_line(cli("export", "tools", "--format", "xml"))
    assert "--status must be one of" in one_error_line(cli("export", "tools", "--status", "lost"))
    assert "no series 'saws'" in one_error_line(cli("export", "saws", "--out", str(tmp_path / "x.csv")))
    assert not (tmp_path / "x.csv").exists()
    for command in ("export", "import"):
        text = " ".join(cli(command, "--help").stdout.split())
        assert "personal data" in text
