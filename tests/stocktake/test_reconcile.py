"""Stocktake reconciliation through the Python API: a synthetic Quillmere stocktake
with a planted case of every kind, every count and every line of the report checked;
sightings recorded; bad scan files refused; no per-code queries at 10,000 scans.

Whether a planted typo slips past the check digit is decided by python-stdnum's Damm
implementation, not by issuer's own.
"""

from __future__ import annotations

import csv
import io
import json
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import event
from stdnum import damm

from issuer.checking.neighbours import neighbours, omission_insertion_candidates
from issuer.errors import InvalidFormat
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import code_history, replace_code, void_code
from issuer.register.logverify import verify_chain
from issuer.register.series import code_format
from issuer.register.store import Register
from issuer.stocktake.reconcile import read_scans, reconcile, record_seen
from issuer.stocktake.report import REPORT_COLUMNS, as_json, write_report

# bodies 1121300.. start with 11213: a twin (11), a jump twin (121), a phonetic pair (13)
START = 1121300
TOOLS = SeriesSpec(key="tools", scheme="damm", length=7, prefix="QTL", group=(4, 4), start=START,
                   title="Quillmere tool tags")
PASSES = SeriesSpec(key="passes", scheme="damm", alphabet="crockford32", length=6, prefix="DP",
                    group=(4, 3), mode="scattered", title="Quillmere day passes")

# each typo rewrites the body's first five characters "11213"; the rest stays
TYPO_HEADS = {
    "single": "71213",  # 1 -> 7 at the 4th character
    "adjacent": "12113",  # 12 -> 21
    "jump": "11312",  # 2 and 3 swapped across the 1
    "twin": "55213",  # 11 -> 55
    "jump_twin": "15253",  # 121 -> 525
    "phonetic": "11230",  # 13 heard as 30
}


def damm_valid(code: str) -> bool:
    # source: python-stdnum's stdnum.damm (reference implementation of Damm's check digit)
    return bool(damm.is_valid(code[3:]))


def damm_code(body: str) -> str:
    # source: python-stdnum's stdnum.damm.calc_check_digit
    return "QTL" + body + damm.calc_check_digit(body)


@dataclass
class Planted:
    rows: list[tuple[str, str, str]]  # (scanned text, time, location)
    expected: list[dict[str, Any]]  # one per row, the report line's fields
    missing: list[str]
    counts: dict[str, int]


def plant(register: Register) -> Planted:
    add_series(register, TOOLS)
    add_series(register, PASSES)
    issued = [info.code for info in issue_codes(register, "tools", 40).codes]
    pass_code = issue_codes(register, "passes").codes[0].code
    assert all(code == damm_code(str(START + k)) for k, code in enumerate(issued))
    void_code(register, issued[30], reason="lost at the spring fair")
    replacement = replace_code(register, issued[31], reason="label scratched").code
    rows: list[tuple[str, str, str]] = []
    expected: list[dict[str, Any]] = []

    def scan(text: str, status: str, code: str | None, *, where: str = "Shelf A",
             detail: str = "", likely: str = "", error: str = "") -> None:
        minute = len(rows)
        rows.append((text, f"2026-03-14T09:{minute:02d}:00Z", where))
        expected.append({"line": len(rows) + 1, "scanned": text, "code": code or "", "status": status,
                         "detail": detail, "likely_code": likely, "likely_error": error,
                         "timestamp": f"2026-03-14T09:{minute:02d}:00Z", "location": where})

    shape_display = {code: f"{code[:3]}-{code[3:7]}-{code[7:]}" for code in issued}
    # 1. issued tags, scanned as people and scanners write them
    for index in range(20):
        code = issued[index]
        text = shape_display[code] if index % 3 == 0 else code.lower() if index % 3 == 1 else code
        scan(text, "issued", code)
    # 2. one tag scanned three times, in two places
    for where in ("Shelf B", "Shelf C", "Shelf C"):
        scan(issued[20], "issued", issued[20], where=where)
    # 3. voided tags still on the shelf; the replacement too
    scan(issued[30], "voided", issued[30], detail="voided: lost at the spring fair")
    # a code named in a detail is in its display form
    scan(issued[31], "voided", issued[31],
         detail=f"voided: label scratched; replaced by {replacement[:3]}-{replacement[3:7]}-{replacement[7:]}")
    scan(replacement, "issued", replacement)
    # 4. a typo of each class on tags not otherwise scanned
    typo_of: dict[str, str] = {}
    shape = code_format_of(register)
    for offset, (error, head) in enumerate(TYPO_HEADS.items()):
        original = issued[21 + offset]
        typed = "QTL" + head + original[8:]
        typo_of[original] = typed
        status = "not_issued" if damm_valid(typed) else "bad_check"
        detail = ("a valid code this register never issued" if status == "not_issued"
                  else "the check character does not match: a misread or mistyped code")
        meant = next(n for n in neighbours(shape, typed) if n.code == original)
        assert meant.error == error
        scan(typed, status, typed, detail=detail, likely=original, error=meant.description)
    # 5. a valid code never issued, far from every issued one
    stranger = damm_code("9999990")
    scan(stranger, "not_issued", stranger, detail="a valid code this register never issued")
    # 6. not codes of this series at all
    omitted = issued[27][:3] + issued[27][4:]  # the first body character left out
    omission = next(n for n in omission_insertion_candidates(shape, omitted) if n.code == issued[27])
    scan(omitted, "malformed", None, detail="has 7 characters between prefix and suffix, expected 8",
         likely=issued[27], error=omission.description)
    scan("QTL-1121-30A5", "malformed", None,
         detail="character 'A' at position 7 is not in the digits alphabet")
    # a day pass turned up in the tool count: named as the other series' code
    scan(pass_code, "other_series", None, detail="belongs to series passes (issued)")
    scan("QXL11213005", "malformed", None, detail="does not start with the prefix QTL")
    scanned_codes = {row["code"] for row in expected if row["code"]}
    missing = sorted(code for code in [*issued, replacement]
                     if code not in scanned_codes and code not in (issued[30], issued[31]))
    counts = {
        "issued": 20 + 1 + 1,
        "expired": 0,
        "suspended": 0,
        "voided": 2,
        "bad_check": sum(1 for row in expected if row["status"] == "bad_check"),
        "not_issued": sum(1 for row in expected if row["status"] == "not_issued"),
        "malformed": 3,
        "duplicates": 1,
        "missing": len(missing),
        "elsewhere": 0,
        "out_of_scope": 0,
        "other_series": 1,
        "blank_lines": 0,
        "comment_lines": 0,
    }
    assert counts["bad_check"] + counts["not_issued"] == 7
    times: dict[str, int] = {}
    for row in expected:
        if row["code"]:
            times[row["code"]] = times.get(row["code"], 0) + 1
    for row in expected:
        row["times_scanned"] = times[row["code"]] if row["code"] else 1
    # the typo'd originals and the omitted one are missing; the report says where they may be
    for row in expected:
        if row["likely_code"]:
            row.setdefault("perhaps", None)
    return Planted(rows, expected, missing, counts)


def code_format_of(register: Register) -> Any:
    from issuer.register.series import get_series

    with register.reading() as session:
        return code_format(get_series(session, "tools"))


def write_scan(path: Path, rows: list[tuple[str, str, str]]) -> Path:
    with path.open("w", newline="", encoding="utf-8") as stream:
        writer = csv.writer(stream)
        writer.writerow(["timestamp", "barcode", "location"])
        for text, when, where in rows:
            writer.writerow([when, text, where])
    return path


@pytest.fixture
def planted(register: Register) -> Planted:
    return plant(register)


def test_every_count_and_every_line_of_the_report(register: Register, planted: Planted, tmp_path: Path) -> None:
    table = read_scans(write_scan(tmp_path / "stocktake.csv", planted.rows))
    recon = reconcile(register, "tools", table)
    assert recon.counts == planted.counts
    assert not recon.clean
    stream = io.StringIO()
    write_report(recon, stream)
    report = list(csv.DictReader(io.StringIO(stream.getvalue())))
    assert list(report[0]) == [*REPORT_COLUMNS, "timestamp", "location"]
    scanned_lines, missing_lines = report[: len(planted.rows)], report[len(planted.rows):]
    for got, want in zip(scanned_lines, planted.expected, strict=True):
        assert got["line"] == str(want["line"])
        assert got["scanned"] == want["scanned"]
        assert got["code"] == want["code"]
        # the series' display form, grouped 4,4 after the prefix (QTL-0000-0125)
        shown = f"{want['code'][:3]}-{want['code'][3:7]}-{want['code'][7:]}" if want["code"] else ""
        assert got["display"] == shown
        assert got["status"] == want["status"], got
        assert got["times_scanned"] == str(want["times_scanned"])
        assert got["detail"] == want["detail"]
        assert got["likely_code"] == want["likely_code"], got
        likely = want["likely_code"]
        assert got["likely_display"] == (f"{likely[:3]}-{likely[3:7]}-{likely[7:]}" if likely else "")
        assert got["likely_error"] == want["likely_error"]
        assert (got["timestamp"], got["location"]) == (want["timestamp"], want["location"])
    assert [row["code"] for row in missing_lines] == planted.missing
    assert [row["display"] for row in missing_lines] == [f"{c[:3]}-{c[3:7]}-{c[7:]}" for c in planted.missing]
    assert all(row["status"] == "missing" and row["times_scanned"] == "0" for row in missing_lines)
    # a missing tag that a typo probably stands for points at that line
    typo_lines = {row["likely_code"]: row["line"] for row in planted.expected if row["likely_code"]}
    for row in missing_lines:
        if row["code"] in typo_lines:
            assert row["detail"] == f"issued, not scanned; perhaps scanned with a typo on line {typo_lines[row['code']]}"
        else:
            assert row["detail"] == "issued, not scanned"


def test_json_carries_counts_and_the_lists(register: Register, planted: Planted, tmp_path: Path) -> None:
    recon = reconcile(register, "tools", read_scans(write_scan(tmp_path / "scan.csv", planted.rows)))
    data = json.loads(json.dumps(as_json(recon), default=str))
    assert data["counts"] == planted.counts
    assert set(data["counts"]) == {"issued", "expired", "suspended", "voided", "bad_check", "not_issued", "malformed", "duplicates", "missing",
                                   "elsewhere", "out_of_scope", "other_series", "blank_lines", "comment_lines"}
    for key in ("issued", "voided", "bad_check", "not_issued"):
        want = list(dict.fromkeys(row["code"] for row in planted.expected if row["status"] == key))
        assert [entry["code"] for entry in data[key]] == want
        assert len(data[key]) == planted.counts[key]
    assert [entry["line"] for entry in data["malformed"]] == [
        row["line"] for row in planted.expected if row["status"] == "malformed"]
    (duplicate,) = data["duplicates"]
    assert duplicate["times"] == 3 and duplicate["locations"] == ["Shelf B", "Shelf C"]
    assert [entry["code"] for entry in data["missing"]] == planted.missing
    for entry in data["bad_check"] + data["not_issued"]:
        row = next(row for row in planted.expected if row["code"] == entry["code"])
        if row["likely_code"]:
            assert entry["likely"][0]["code"] == row["likely_code"]
            assert entry["likely"][0]["missing"] is True
        else:
            assert entry["likely"] == []
    replaced = next(entry for entry in data["voided"] if entry["replacement"])
    assert replaced["reason"] == "label scratched"
    new = replaced["replacement"]
    assert replaced["replacement_display"] == f"{new[:3]}-{new[3:7]}-{new[7:]}"
    (other,) = data["other_series"]
    assert other["display"] and other["display"] != other["code"]
    assert other["display"].replace("-", "") == other["code"]


def test_plain_list_and_a_clean_stocktake(register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    codes = [info.code for info in issue_codes(register, "tools", 12).codes]
    scan = tmp_path / "scan.txt"
    scan.write_text("\n".join(codes) + "\n\n")
    recon = reconcile(register, "tools", read_scans(scan))
    assert recon.clean
    assert recon.counts == {"issued": 12, "expired": 0, "suspended": 0, "voided": 0, "bad_check": 0, "not_issued": 0, "malformed": 0,
                            "duplicates": 0, "missing": 0, "elsewhere": 0, "out_of_scope": 0, "other_series": 0,
                            "blank_lines": 1, "comment_lines": 0}
    assert [line.line for line in recon.lines()] == list(range(1, 13))


def test_record_sets_last_seen_and_history_shows_it(register: Register, planted: Planted, tmp_path: Path) -> None:
    recon = reconcile(register, "tools", read_scans(write_scan(tmp_path / "scan.csv", planted.rows)))
    recorded = record_seen(register, recon)
    present = {row["code"] for row in planted.expected if row["status"] in ("issued", "voided")}
    assert recorded == len(present)
    duplicate = planted.expected[20]["code"]
    with register.reading() as session:
        record, events = code_history(session, duplicate)
        # the latest of its three scans: 09:22 at Shelf C
        assert record.last_seen_at == datetime(2026, 3, 14, 9, 22, tzinfo=UTC)
        assert record.last_seen_where == "Shelf C"
        seen = [event for event in events if event.action == "seen"]
        assert len(seen) == 1
        assert json.loads(seen[0].detail)["source"] == "scan.csv"
        assert verify_chain(session).intact
    # an older stocktake recorded later does not move the sighting back
    older = [(text, when.replace("2026-03-14", "2025-11-02"), "Old shed") for text, when, _ in planted.rows]
    record_seen(register, reconcile(register, "tools", read_scans(write_scan(tmp_path / "old.csv", older))))
    with register.reading() as session:
        record, events = code_history(session, duplicate)
        assert record.last_seen_where == "Shelf C"
        assert [event.action for event in events].count("seen") == 2


def test_a_bad_scan_time_refuses_to_record(register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    code = issue_codes(register, "tools").codes[0].code
    scan = tmp_path / "scan.csv"
    scan.write_text(f"barcode,scanned_at\n{code},14/03/2026 09:30\n")
    recon = reconcile(register, "tools", read_scans(scan))
    with pytest.raises(InvalidFormat, match="line 2: '14/03/2026 09:30' is not a date"):
        record_seen(register, recon)
    with register.reading() as session:
        record, events = code_history(session, code)
    assert record.last_seen_at is None and [event.action for event in events] == ["issue"]


@pytest.mark.parametrize(
    ("content", "message"),
    [
        (b"", "is empty"),
        (b"\n\n  \n", "holds no codes"),
        (b"QTL11213001\n\x00\x13\x88\x01binary", "looks binary"),
        ("barcode\nQTL11213001\nQTL-caf\u00e9\n".encode("latin-1"), r"is not UTF-8 text \(line 3\)"),
        ("barcode\nQTL11213001\n".encode("utf-16"), "is UTF-16 text"),
        (b"when,where\n2026-03-14,Shelf A\n", "which column holds the codes"),
    ],
    ids=["empty", "blank", "binary", "latin-1", "utf-16", "no-code-column"],
)
def test_bad_scan_files_are_refused_in_one_line(tmp_path: Path, content: bytes, message: str) -> None:
    path = tmp_path / "scan.csv"
    path.write_bytes(content)
    with pytest.raises(InvalidFormat, match=message) as caught:
        read_scans(path)
    assert "\n" not in str(caught.value)


def test_named_column_must_exist(tmp_path: Path) -> None:
    path = tmp_path / "scan.csv"
    path.write_text("tag;room\nQTL11213001;Workshop\n")
    assert read_scans(path, column="TAG").codes == ["QTL11213001"]
    with pytest.raises(InvalidFormat, match="has no column 'code'"):
        read_scans(path, column="code")


def test_an_overlong_line_is_refused_without_reading_it_whole(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from issuer.readers import scanfile

    # a 2 GB line stands in as a line past a lowered limit, read in small blocks
    monkeypatch.setattr(scanfile, "BLOCK_BYTES", 64)
    path = tmp_path / "scan.txt"
    path.write_bytes(b"QTL11213001\n" + b"7" * 5000 + b"\nQTL11213019\n")
    with pytest.raises(InvalidFormat, match="line 2 is longer than 1,000 bytes"):
        read_scans(path, max_line_bytes=1000)


def test_ten_thousand_scans_cost_a_handful_of_queries(register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    codes = [info.code for info in issue_codes(register, "tools", 10_000).codes]
    void_code(register, codes[5], reason="broken")
    scans = codes[:9_000] + codes[:50] + [c[:-1] + ("0" if c[-1] != "0" else "1") for c in codes[9_900:]]
    path = tmp_path / "scan.txt"
    path.write_text("\n".join(scans))
    statements: list[str] = []

    def count(*args: Any) -> None:
        statements.append(args[2])

    from issuer.register import stocktake

    raw = stocktake.driver_rows  # type: ignore[attr-defined]

    def counted(session: Any, sql: str, params: Any = ()) -> Any:
        statements.append(sql)
        return raw(session, sql, params)

    event.listen(register.engine, "before_cursor_execute", count)
    try:
        with pytest.MonkeyPatch.context() as patch:
            patch.setattr(stocktake, "driver_rows", counted)
            recon = reconcile(register, "tools", read_scans(path))
    finally:
        event.remove(register.engine, "before_cursor_execute", count)
    # damm catches every single substitution (common practice: a property of Damm's quasigroup)
    assert recon.counts == {"issued": 8_999, "expired": 0, "suspended": 0, "voided": 1, "bad_check": 100, "not_issued": 0,
                            "malformed": 0, "duplicates": 50, "missing": 1_000, "elsewhere": 0,
                            "out_of_scope": 0, "other_series": 0, "blank_lines": 0, "comment_lines": 0}
    assert len(statements) < 20, statements
    assert all(likely and likely[0].missing for code, likely in recon.likely.items())
