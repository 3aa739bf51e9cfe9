"""``issuer stocktake`` and ``issuer place`` through the command line: a count opened,
filled from two scanners, watched, closed with its record, listed, and reported as PDF
(its text read back with pypdfium2), CSV and JSON; refusals in one line."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path
from typing import Any

import pytest
from stdnum import luhn

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import void_code
from issuer.register.store import Register

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", group=(4, 4), start=4_300_000)


@pytest.fixture
def tags(register: Register) -> list[str]:
    add_series(register, TOOLS)
    codes = [info.code for info in issue_codes(register, "tools", 12).codes]
    void_code(register, codes[11], reason="snapped in half")
    return codes


def typo(code: str) -> str:
    body = code[3:-1]
    typed = "QTL" + body[:-1] + str((int(body[-1]) + 1) % 10) + code[-1]
    # source: python-stdnum's stdnum.luhn.is_valid (a single substitution never passes)
    assert not luhn.is_valid(typed[3:])
    return typed


def test_a_count_from_open_to_signed_report(cli: Any, tags: list[str], tmp_path: Path) -> None:
    assert cli("place", *tags[:6], "--at", "Bay 3").exit_code == 0
    opened = cli("stocktake", "open", "bay-3", "--series", "tools", "--where", "Bay 3", "--tz", "Europe/Lisbon", "--json")
    assert opened.exit_code == 0, opened.output
    assert json.loads(opened.stdout)["zone"] == "Europe/Lisbon"
    north = tmp_path / "north.txt"
    north.write_text("# north\n" + "\n".join(tags[:3]) + "\n\n" + typo(tags[4]) + "\n")
    south = tmp_path / "south.csv"
    south.write_text(f"code,where\n{tags[1]},Bay 3\n{tags[7]},Bay 3\n{tags[11]},Bay 3\n")
    assert cli("stocktake", "add", "bay-3", str(north), "--scanner", "north").exit_code == 0
    added = cli("stocktake", "add", "bay-3", str(south), "--scanner", "south", "--json")
    assert json.loads(added.stdout)["added"][0]["scans"] == 3
    again = cli("stocktake", "add", "bay-3", str(north))
    assert again.exit_code == 2 and "already" in again.stderr and "Traceback" not in again.output
    status = json.loads(cli("stocktake", "status", "bay-3", "--json").stdout)
    assert (status["expected"], status["found"]) == (6, 3)
    assert status["counts"]["bad_check"] == 1 and status["counts"]["out_of_scope"] == 1
    assert status["counts"]["voided"] == 1 and status["counts"]["missing"] == 3
    assert status["counts"]["blank_lines"] == 1 and status["counts"]["comment_lines"] == 1
    closed = cli("stocktake", "close", "bay-3", "--record", "--json")
    assert closed.exit_code == 0, closed.output
    assert json.loads(closed.stdout)["recorded"] == 5
    listed = json.loads(cli("stocktake", "list", "--json").stdout)
    assert [(item["name"], item["state"], item["files"]) for item in listed] == [("bay-3", "closed", 2)]
    pdf = tmp_path / "bay-3.pdf"
    made = cli("stocktake", "report", "bay-3", "--out", str(pdf))
    assert made.exit_code == 0, made.output
    text = pdf_text(pdf)
    assert "Stock count bay-3" in text and "scope: place Bay 3" in text
    assert "read in Europe/Lisbon" in text
    assert "Found 3 of 6 expected codes (50.0 %)" in text
    assert "Scans and codes by class" in text  # the chart's title
    display = {code: f"{code[:3]}-{code[3:7]}-{code[7:]}" for code in tags}
    for code in (tags[3], tags[4], tags[5]):
        assert display[code] in text  # missing
    assert display[tags[11]] in text and "snapped in half" in text  # voided but present
    assert typo(tags[4]) in text  # the typo, with the code probably meant beside it
    assert "Checked and signed by" in text
    refused = cli("stocktake", "report", "bay-3", "--out", str(pdf))
    assert refused.exit_code == 2 and "--force" in refused.stderr
    assert cli("stocktake", "report", "bay-3", "--out", str(pdf), "--force").exit_code == 0
    rows = list(csv.DictReader(io.StringIO(cli("stocktake", "report", "bay-3", "--format", "csv").stdout)))
    kinds = [row["class"] for row in rows]
    assert kinds.count("missing") == 3 and kinds.count("bad_check") == 1
    bad = next(row for row in rows if row["class"] == "bad_check")
    assert (bad["likely_code"], bad["file"], bad["line"]) == (tags[4], "north:north.txt", "6")
    assert bad["likely_display"] == display[tags[4]]
    missing = [row for row in rows if row["class"] == "missing"]
    assert all(row["display"] == display[row["code"]] for row in missing)
    data = json.loads(cli("stocktake", "report", "bay-3", "--format", "json").stdout)
    assert data["result"]["counts"]["missing"] == 3 and data["count"]["state"] == "closed"


def pdf_text(path: Path) -> str:
    import pypdfium2

    document = pypdfium2.PdfDocument(str(path))
    try:
        pages = []
        for page in document:
            page.render(scale=0.5)  # it rasterises
            pages.append(page.get_textpage().get_text_range())
        return "\n".join(pages)
    finally:
        document.close()


def test_bad_scope_and_unknown_count_are_one_line(cli: Any, tags: list[str]) -> None:
    both = cli("stocktake", "open", "x", "--series", "tools", "--where", "Bay 1", "--batch", "1")
    assert both.exit_code == 2 and "one scope" in both.stderr
    half = cli("stocktake", "open", "x", "--series", "tools", "--from", tags[0])
    assert half.exit_code == 2 and "--to" in half.stderr
    zone = cli("stocktake", "open", "x", "--series", "tools", "--tz", "Mars/Olympus")
    assert zone.exit_code == 2 and "not a time zone" in zone.stderr
    missing = cli("stocktake", "status", "nope")
    assert missing.exit_code == 2 and "no count called" in missing.stderr
    place = cli("place", "QTL-0000-0000", "--at", "Bay 1")
    assert place.exit_code == 2 and "Traceback" not in place.output
