"""``issuer reconcile`` through the command line: the summary, --json, --out, --record
and the history it leaves, exit codes, and bad files refused in one line with nothing
written."""

from __future__ import annotations

import csv
import json
import os
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
from stdnum import luhn

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import void_code
from issuer.register.store import Register

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", group=(4, 4), start=4_200_000)


def tool(base: int) -> str:
    # source: python-stdnum's stdnum.luhn.calc_check_digit (ISO/IEC 7812-1 Annex B)
    return "QTL" + f"{base:07d}" + luhn.calc_check_digit(f"{base:07d}")


@pytest.fixture
def tags(register: Register) -> list[str]:
    add_series(register, TOOLS)
    codes = [info.code for info in issue_codes(register, "tools", 8).codes]
    assert codes == [tool(4_200_000 + k) for k in range(8)]
    void_code(register, codes[7], reason="snapped in half")
    return codes


def scan_file(tmp_path: Path, rows: list[tuple[str, str, str]]) -> Path:
    path = tmp_path / "scan.csv"
    with path.open("w", newline="") as stream:
        writer = csv.writer(stream, delimiter=";")
        writer.writerow(["Scan time", "Tag", "Shelf"])
        writer.writerows(rows)
    return path


def one_error_line(result: Any) -> str:
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("issuer: "), result.stderr
    assert "Traceback" not in result.output
    return str(lines[0])


def test_summary_report_and_record(cli: Any, tags: list[str], tmp_path: Path) -> None:
    typo = tags[5][:4] + "7" + tags[5][5:]  # 4200005 read as 4700005: a single substitution
    rows = [
        ("2026-03-14 09:00:00", tags[0], "Bench 1"),
        ("2026-03-14 09:01:00", tags[1].lower(), "Bench 1"),
        ("2026-03-14 09:02:00", tags[1], "Bench 2"),
        ("2026-03-14 09:03:00", tags[7], "Bin"),
        ("2026-03-14 09:04:00", typo, "Bench 2"),
        ("2026-03-14 09:05:00", "QTL-42", "Bench 2"),
    ]
    path = scan_file(tmp_path, rows)
    report = tmp_path / "report.csv"
    result = cli("reconcile", "tools", str(path), "--column", "tag", "--time-column", "scan time",
                 "--where-column", "SHELF", "--out", str(report), "--record")
    assert result.exit_code == 1, result.output
    out = result.stdout
    for label, count in (("issued", 2), ("voided", 1), ("bad check", 1), ("not issued", 0), ("malformed", 1),
                         ("duplicates", 1), ("missing", 5)):
        assert any(line.split("│")[1:3] and line.split("│")[1].strip() == label and line.split("│")[2].strip() == str(count)
                   for line in out.splitlines()), (label, out)
    assert "Recorded 3 sightings" in out
    with report.open(newline="") as stream:
        lines = list(csv.DictReader(stream))
    assert [(line["line"], line["status"]) for line in lines] == [
        ("2", "issued"), ("3", "issued"), ("4", "issued"), ("5", "voided"), ("6", "bad_check"), ("7", "malformed"),
        ("", "missing"), ("", "missing"), ("", "missing"), ("", "missing"), ("", "missing"),
    ]
    assert lines[4]["likely_code"] == tags[5]
    assert [line["code"] for line in lines[6:]] == tags[2:7]
    assert lines[9]["detail"] == "issued, not scanned; perhaps scanned with a typo on line 6"
    assert lines[0]["Shelf"] == "Bench 1" and lines[0]["Scan time"] == "2026-03-14 09:00:00"
    history = json.loads(cli("history", tags[1], "--json").stdout)
    assert history["code"]["last_seen_where"] == "Bench 2"
    seen = [event for event in history["events"] if event["action"] == "seen"]
    assert seen and seen[0]["detail"]["seen_at"].startswith("2026-03-14T09:02:00")
    shown = cli("history", tags[1])
    assert "last seen 2026-03-14 09:02 UTC Bench 2" in shown.stdout


def test_json_output_only_json_and_exit_zero_when_clean(cli: Any, tags: list[str], tmp_path: Path) -> None:
    path = tmp_path / "scan.txt"
    path.write_text("\n".join(tags[:7]) + "\n")
    result = cli("reconcile", "tools", str(path), "--json")
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert data["counts"] == {"issued": 7, "expired": 0, "suspended": 0, "voided": 0, "bad_check": 0, "not_issued": 0, "malformed": 0,
                              "duplicates": 0, "missing": 0, "elsewhere": 0, "out_of_scope": 0,
                              "other_series": 0, "blank_lines": 0, "comment_lines": 0}
    assert [entry["code"] for entry in data["issued"]] == tags[:7]
    assert data["recorded"] is None and data["report"] is None


@pytest.mark.parametrize(
    ("content", "message"),
    [
        (b"", "is empty"),
        (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "looks binary"),
        ("Tag;Shelf\nQTL-caf\u00e9;Bench\n".encode("cp1252"), "is not UTF-8 text (line 2)"),
        (b"Shelf;Time\nBench 1;09:00\n", "which column holds the codes"),
    ],
    ids=["empty", "binary", "cp1252", "no-code-column"],
)
def test_bad_files_one_line_exit_two_nothing_written(cli: Any, tags: list[str], tmp_path: Path,
                                                     content: bytes, message: str) -> None:
    path = tmp_path / "scan.csv"
    path.write_bytes(content)
    report = tmp_path / "report.csv"
    result = cli("reconcile", "tools", str(path), "--out", str(report), "--record")
    assert message in one_error_line(result)
    assert not report.exists() and not list(tmp_path.glob(".issuer-*"))
    history = json.loads(cli("history", tags[0], "--json").stdout)
    assert [event["action"] for event in history["events"]] == ["issue"]


def test_named_column_missing_and_unknown_series(cli: Any, tags: list[str], tmp_path: Path) -> None:
    path = scan_file(tmp_path, [("2026-03-14 09:00:00", tags[0], "Bench 1")])
    assert "has no column 'barcode' (its columns: Scan time, Tag, Shelf)" in one_error_line(
        cli("reconcile", "tools", str(path), "--column", "barcode"))
    assert "no series 'saws'" in one_error_line(cli("reconcile", "saws", str(path)))
    assert "line 2: '14/03/2026' is not a date" in one_error_line(
        cli("reconcile", "tools", str(scan_file(tmp_path, [("14/03/2026", tags[0], "B")])), "--record"))


def test_a_real_process(db_path: Path, tags: list[str], tmp_path: Path) -> None:
    path = tmp_path / "scan.txt"
    path.write_text(tags[0] + "\n" + tags[0] + "\n")
    env = {**os.environ, "ISSUER_DB": str(db_path)}
    command = [str(Path(sys.executable).with_name("issuer")), "reconcile", "tools", str(path), "--json"]
    done = subprocess.run(command, capture_output=True, text=True, env=env, check=False)
    assert done.returncode == 1, done.stderr
    data = json.loads(done.stdout)
    assert data["counts"]["duplicates"] == 1 and data["counts"]["missing"] == 6


def test_an_overlong_line_is_one_clear_line(cli: Any, tags: list[str], tmp_path: Path,
                                             monkeypatch: pytest.MonkeyPatch) -> None:
    from issuer.readers import scanfile

    # a 2 GB line, scaled down: the limit and the block size lowered, the file small
    monkeypatch.setattr(scanfile, "MAX_LINE_BYTES", 1_000)
    monkeypatch.setattr(scanfile, "BLOCK_BYTES", 256)
    path = tmp_path / "scan.txt"
    path.write_bytes(tags[0].encode() + b"\n" + tags[1].encode() + b"\n" + b"QTL" * 2_000 + b"\n")
    assert "line 3 is longer than 1,000 bytes" in one_error_line(cli("reconcile", "tools", str(path)))
