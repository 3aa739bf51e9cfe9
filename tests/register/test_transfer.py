"""Import and export through the Python API: the round trip export -> fresh register ->
import -> export gives the same file; a bad file is refused whole, naming each bad line;
a dry run writes nothing; the allocator never hands out an imported number."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import func, select
from stdnum import luhn

from issuer.errors import InvalidFormat
from issuer.readers.scanfile import read_table
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.importing import IMPORT_ROLES, import_codes, plan_import, rejects_rows
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import code_history, code_record, replace_code, void_code
from issuer.register.log import head
from issuer.register.logverify import verify_chain
from issuer.register.models import Batch, IssuedCode, Series
from issuer.register.series import get_series, permutation
from issuer.register.store import Register, open_register
from issuer.register.transfer import EXPORT_COLUMNS, export_codes
from issuer.stocktake.reconcile import read_scans, reconcile, record_seen
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", group=(4, 4), title="Quillmere tool tags")
MEMBERS = SeriesSpec(key="members", scheme="luhn", length=9, prefix="QM", group=(5, 5), mode="scattered",
                     title="Quillmere member cards")
PASSES = SeriesSpec(key="passes", scheme="damm", alphabet="crockford32", length=6, prefix="DP", group=(4, 3),
                    mode="scattered", title="Quillmere day passes")


def luhn_code(prefix: str, body: str) -> str:
    # source: python-stdnum's stdnum.luhn.calc_check_digit (ISO/IEC 7812-1 Annex B)
    return prefix + body + luhn.calc_check_digit(body)


def mistyped_check(code: str) -> str:
    return code[:-1] + str((int(code[-1]) + 1) % 10)


def export_text(register: Register, key: str, fmt: str = "csv", status: str = "all") -> str:
    stream = io.StringIO()
    export_codes(register, key, stream, fmt=fmt, status=status)
    return stream.getvalue()


def populate(register: Register) -> None:
    """A small register with every kind of row an export can hold."""
    for spec in (TOOLS, MEMBERS):
        add_series(register, spec)
    tools = [info.code for info in issue_codes(register, "tools", 6, note="spring intake").codes]
    issue_codes(register, "members", 3, holder="Demo member (workshop volunteer)")
    issue_codes(register, "members", 70, note="open day")  # the bulk path
    void_code(register, tools[1], reason="lost at the fair")
    replace_code(register, tools[2], reason="label scratched")
    path = register_scan_file(register, tools[:1])
    record_seen(register, reconcile(register, "tools", read_scans(path)))


def register_scan_file(register: Register, codes: list[str]) -> Path:
    import tempfile

    folder = Path(tempfile.mkdtemp(prefix="scan-"))
    path = folder / "scan.csv"
    path.write_text("barcode,timestamp,location\n" + "".join(f"{c},2026-03-14T09:30:00Z,Workshop bench\n" for c in codes))
    return path


def test_round_trip_export_import_export_is_identical(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    source = open_register(register_url, actor="old-desk")
    populate(source)
    target = open_register(str(tmp_path / "fresh.sqlite"), actor="migration")
    for spec in (TOOLS, MEMBERS):
        add_series(target, spec)
    for key in ("tools", "members"):
        first = export_text(source, key)
        path = tmp_path / f"{key}.csv"
        path.write_text(first, encoding="utf-8")
        plan, result = import_codes(target, key, read_table(path, roles=IMPORT_ROLES))
        assert result is not None and result.imported == len(plan.rows) == first.count("\n") - 1
        assert export_text(target, key) == first
        # the other formats carry the same rows
        rows = list(csv.DictReader(io.StringIO(first)))
        lines = [json.loads(line) for line in export_text(target, key, "jsonl").splitlines()]
        as_text = [{k: "" if v is None else str(v) for k, v in line.items()} for line in lines]
        assert as_text == rows
        assert json.loads(export_text(target, key, "json")) == lines
    tools = list(csv.DictReader(io.StringIO(export_text(target, "tools"))))
    assert [row["status"] for row in tools] == ["issued", "voided", "voided", "issued", "issued", "issued", "issued"]
    assert tools[6]["replaces"] == tools[2]["code"]
    assert tools[0]["last_seen_at"] == "2026-03-14T09:30:00Z" and tools[0]["last_seen_where"] == "Workshop bench"
    with target.reading() as session:
        record, events = code_history(session, tools[2]["code"])
        assert record.replaced_by == tools[6]["code"] and record.void_reason == "label scratched"
        assert [event.action for event in events] == ["import", "void"]
        assert verify_chain(session).intact
        series = get_series(session, "members")
        assert series.imported_count == series.code_count == 73
    source.close()
    target.close()


def test_export_filters_by_status_and_never_holds_the_key(register: Register) -> None:
    populate(register)
    voided = list(csv.DictReader(io.StringIO(export_text(register, "tools", status="voided"))))
    assert [row["status"] for row in voided] == ["voided", "voided"]
    issued = export_text(register, "members", status="issued")
    assert next(csv.reader(io.StringIO(issued))) == list(EXPORT_COLUMNS)
    assert "Demo member (workshop volunteer)" in issued  # holders do appear
    with register.reading() as session:
        key = get_series(session, "members").scatter_key
    assert key is not None
    for fmt in ("csv", "json", "jsonl"):
        text = export_text(register, "members", fmt)
        assert key.hex() not in text.lower() and "scatter" not in text
    with pytest.raises(InvalidFormat, match="--format must be one of"):
        export_codes(register, "members", io.StringIO(), fmt="xml")


def write_csv(path: Path, header: list[str], rows: list[list[str]]) -> Path:
    with path.open("w", newline="", encoding="utf-8") as stream:
        writer = csv.writer(stream)
        writer.writerow(header)
        writer.writerows(rows)
    return path


def state(register: Register) -> tuple[int, int, tuple[int, str]]:
    with register.reading() as session:
        codes = session.scalar(select(func.count()).select_from(IssuedCode))
        batches = session.scalar(select(func.count()).select_from(Batch))
        return int(codes or 0), int(batches or 0), head(session)


def test_a_bad_file_is_refused_whole_naming_each_line(register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    add_series(register, PASSES)
    pass_issued = issue_codes(register, "passes").codes[0]
    pass_code = pass_issued.code
    good = luhn_code("QTL", "0004001")
    path = write_csv(tmp_path / "legacy.csv", ["code", "issued_at", "holder"], [
        [good, "2019-04-01", "Workshop"],                      # line 2
        [luhn_code("QTL", "0004002"), "2019-04-02", ""],      # line 3
        [good.lower(), "2019-04-03", ""],                      # line 4: duplicate of line 2
        [mistyped_check(luhn_code("QTL", "0004003")), "", ""],  # line 5: bad check
        [pass_code, "", ""],                                   # line 6: a day pass
        ["QTL1234", "", ""],                                   # line 7: too short
        [luhn_code("QTL", "0004004"), "2999-01-01", ""],      # line 8: issued in the future
    ])
    before = state(register)
    with pytest.raises(InvalidFormat) as caught:
        import_codes(register, "tools", read_table(path, roles=IMPORT_ROLES))
    message = str(caught.value)
    assert message.startswith("5 bad rows in")
    assert "\n" not in message
    # refusals name codes in their display form (QTL-0004-0011), as every line for people
    good_shown = f"{good[:3]}-{good[3:7]}-{good[7:]}"
    assert f"line 4: {good_shown} is a duplicate of line 2" in message
    assert "line 5: QTL-0004-003" in message and "check character does not match" in message
    assert f"line 6: {pass_issued.display} belongs to series passes, not tools" in message
    assert "line 7: 'QTL1234' has 4 characters between prefix and suffix" in message
    assert "line 8: issued_at 2999-01-01 is in the future" in message
    assert state(register) == before
    # --skip-bad takes the good rows and lists the others
    plan, result = import_codes(register, "tools", read_table(path, roles=IMPORT_ROLES), skip_bad=True)
    assert result is not None and result.imported == 2
    assert [r.line for r in plan.rejected] == [4, 5, 6, 7, 8]
    rejects = rejects_rows(plan, read_table(path, roles=IMPORT_ROLES))
    assert rejects[0] == ["line", "reason", "code", "issued_at", "holder"]
    assert rejects[1][:3] == ["4", f"{good_shown} is a duplicate of line 2", good.lower()]
    with register.reading() as session:
        row = session.scalar(select(IssuedCode).where(IssuedCode.code == good))
        assert row is not None and row.holder == "Workshop"
        assert code_record(session, row).issued_at.isoformat() == "2019-04-01T00:00:00+00:00"
    # the same file again: everything is in the register already
    with pytest.raises(InvalidFormat, match=f"line 2: {good_shown} is in the register already"):
        import_codes(register, "tools", read_table(path, roles=IMPORT_ROLES))


def test_out_of_range_and_bad_fields_are_refused(register: Register, tmp_path: Path) -> None:
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", start=100, end=999))
    path = write_csv(tmp_path / "legacy.csv", ["code", "status", "voided_at"], [
        [luhn_code("QTL", "0000050"), "", ""],
        [luhn_code("QTL", "0000150"), "lost", ""],
        [luhn_code("QTL", "0000151"), "issued", "2020-01-01"],
        [luhn_code("QTL", "0000152"), "voided", "yesterday"],
    ])
    with pytest.raises(InvalidFormat) as caught:
        import_codes(register, "tools", read_table(path, roles=IMPORT_ROLES))
    message = str(caught.value)
    outside = luhn_code("QTL", "0000050")
    assert f"line 2: QTL-{outside[3:]} lies outside the series' range 100..999" in message
    assert "line 3: status must be issued, expired, suspended or voided, not 'lost'" in message
    assert "line 4: voided_at is given but the status is not voided" in message
    assert "line 5: voided_at 'yesterday' is not a date" in message


def test_dry_run_writes_nothing(register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    path = tmp_path / "list.txt"
    path.write_text("".join(luhn_code("QTL", f"{n:07d}") + "\n" for n in range(500, 520)))
    before = state(register)
    plan, result = import_codes(register, "tools", read_table(path), dry_run=True)
    assert result is None and len(plan.rows) == 20 and not plan.rejected
    assert state(register) == before
    with register.reading() as session:
        series = get_series(session, "tools")
        assert (series.imported_count, series.code_count) == (0, 0)


def test_in_order_issuance_skips_imported_numbers(register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    imported = [1, 2, 3, 4, 5, 8, 70, 71, 200]
    path = tmp_path / "legacy.txt"
    path.write_text("\n".join(luhn_code("QTL", f"{n:07d}") for n in imported))
    import_codes(register, "tools", read_table(path))
    small = [info.base for info in issue_codes(register, "tools", 3).codes]
    assert small == [6, 7, 9]
    bulk = [info.base for info in issue_codes(register, "tools", 200).codes]  # the bulk path
    expected = [n for n in range(10, 300) if n not in imported][:200]
    assert bulk == expected
    with register.reading() as session:
        series = get_series(session, "tools")
        assert series.code_count == len(imported) + 203
        assert session.scalar(select(func.count()).select_from(IssuedCode)) == len(imported) + 203


def test_scattered_issuance_skips_imported_numbers(register: Register, tmp_path: Path) -> None:
    add_series(register, MEMBERS)
    with register.reading() as session:
        scatter = permutation(get_series(session, "members"))
    taken_counters = [0, 2, 5, 64, 65, 130]
    bases = [scatter.base_for_counter(k) for k in taken_counters]
    path = tmp_path / "cards.txt"
    path.write_text("\n".join(luhn_code("QM", f"{b:09d}") for b in bases))
    import_codes(register, "members", read_table(path))
    first = [info.base for info in issue_codes(register, "members", 3).codes]
    assert first == [scatter.base_for_counter(k) for k in (1, 3, 4)]
    bulk = [info.base for info in issue_codes(register, "members", 150).codes]
    counters = [k for k in range(6, 400) if k not in taken_counters][:150]
    assert bulk == sorted(scatter.base_for_counter(k) for k in counters)  # a bulk batch is in number order
    with register.reading() as session:
        assert session.scalar(select(Series.imported_count)) == len(bases)


def test_a_code_issued_meanwhile_stops_the_import(register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    path = tmp_path / "legacy.txt"
    path.write_text(luhn_code("QTL", "0000001") + "\n" + luhn_code("QTL", "0000900") + "\n")
    plan = plan_import(register, "tools", read_table(path))
    issue_codes(register, "tools")  # another desk issues base 1 before the import is applied
    from issuer.errors import Conflict
    from issuer.register.importing import apply_import

    before = state(register)
    with pytest.raises(Conflict, match="line 1: QTL-0000-001.* entered the register meanwhile"):
        apply_import(register, plan)
    assert state(register) == before


def test_jsonl_and_json_exports_stream_every_row(register: Register) -> None:
    add_series(register, TOOLS)
    issue_codes(register, "tools", 2_500)
    lines = export_text(register, "tools", "jsonl").splitlines()
    assert len(lines) == 2_500
    assert [json.loads(line)["code"] for line in lines[:2]] == [luhn_code("QTL", "0000001"), luhn_code("QTL", "0000002")]
    data: list[dict[str, Any]] = json.loads(export_text(register, "tools", "json"))
    assert len(data) == 2_500 and data[-1]["display"] == "QTL-" + luhn_code("", "0002500")[:4] + "-" + luhn_code("", "0002500")[4:]


@pytest.mark.parametrize("fmt", ["jsonl", "json"])
def test_json_exports_import_back_too(register: Register, tmp_path: Path, fmt: str) -> None:
    populate(register)
    for key in ("tools", "members"):
        path = tmp_path / f"{key}.{fmt}"
        path.write_text(export_text(register, key, fmt), encoding="utf-8")
        target = open_register(str(tmp_path / f"{key}-{fmt}.sqlite"), actor="migration")
        add_series(target, TOOLS if key == "tools" else MEMBERS)
        import_codes(target, key, read_table(path, roles=IMPORT_ROLES))
        assert export_text(target, key) == export_text(register, key)
        target.close()


def test_a_json_line_that_is_not_an_object_is_named(tmp_path: Path) -> None:
    path = tmp_path / "codes.jsonl"
    path.write_text('{"code": "QTL00000018"}\n["QTL00000026"]\n')
    with pytest.raises(InvalidFormat, match="line 2 is not one JSON object"):
        read_table(path, roles=IMPORT_ROLES)


def test_the_register_stays_consistent_after_imports_sightings_and_bulk(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    from tests.register.consistency import assert_consistent

    register = open_register(register_url, actor="desk")
    populate(register)
    path = tmp_path / "cards.csv"
    with register.reading() as session:
        scatter = permutation(get_series(session, "members"))
        start = get_series(session, "members").next_counter
    bases = [scatter.base_for_counter(start + k) for k in (0, 3, 90)]
    write_csv(path, ["code", "status", "void_reason"], [
        [luhn_code("QM", f"{bases[0]:09d}"), "issued", ""],
        [luhn_code("QM", f"{bases[1]:09d}"), "voided", "card cut up"],
        [luhn_code("QM", f"{bases[2]:09d}"), "", ""],
    ])
    import_codes(register, "members", read_table(path, roles=IMPORT_ROLES))
    issue_codes(register, "members", 150, collect=False)
    issue_codes(register, "members", 2)
    replace_code(register, luhn_code("QM", f"{bases[0]:09d}"), reason="faded")
    register.close()
    facts = assert_consistent(register_url)
    assert facts.actions["import"] == 1
