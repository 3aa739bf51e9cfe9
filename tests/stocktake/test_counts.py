"""A stock count over days: a planted count over three files (plain, CSV, JSON Lines)
from two scanners, with every class present, counted exactly; files refused twice;
times without a zone read in the count's zone; closing freezes, records and moves.

The planted typos are decided by python-stdnum's Luhn implementation, not issuer's own.
"""

from __future__ import annotations

import json
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pytest
from stdnum import luhn

from issuer.errors import Conflict, InvalidFormat
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import code_history, void_code
from issuer.register.logverify import verify_chain
from issuer.register.places import place_codes
from issuer.register.store import Register
from issuer.stocktake.counts import (
    CountScope,
    add_files,
    count_result,
    count_status,
    finish_count,
    list_counts,
    start_count,
)

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", group=(4, 4), start=2600000,
                   title="Quillmere tool tags")
PASSES = SeriesSpec(key="passes", scheme="luhn", length=7, prefix="DP", group=(4, 4), title="Quillmere day passes")


def luhn_code(body: str) -> str:
    # source: python-stdnum's stdnum.luhn.calc_check_digit
    return "QTL" + body + luhn.calc_check_digit(body)


def mistype(code: str) -> str:
    """The last body digit changed by one: Luhn catches every single substitution."""
    body = code[3:-1]
    body = body[:-1] + str((int(body[-1]) + 1) % 10)
    typed = "QTL" + body + code[-1]
    # source: python-stdnum's stdnum.luhn.is_valid (a single substitution never passes)
    assert not luhn.is_valid(typed[3:])
    return typed


def plant(register: Register, folder: Path) -> dict[str, Any]:
    add_series(register, TOOLS)
    add_series(register, PASSES)
    tags = [info.code for info in issue_codes(register, "tools", 40).codes]
    day_pass = issue_codes(register, "passes").codes[0].code
    place_codes(register, tags[0:10], "Aisle 1 Shelf A")
    place_codes(register, tags[10:20], "Aisle 1 Shelf B")
    void_code(register, tags[25], reason="lost at the spring fair")
    stranger = luhn_code("2609999")  # valid, never issued
    # scanner one, day one: a plain list (blank and comment lines counted)
    (folder / "north-1.txt").write_text(
        "# north scanner, Monday\n" + "\n".join(tags[0:5]) + "\n\n" + mistype(tags[6]) + "\n"
    )
    # scanner one, day two: CSV with places and times without a zone
    rows = ["scanned_at,code,location", "# Tuesday", *(f"2026-03-17 10:{i:02d},{tags[i]},Aisle 1 Shelf B"
                                                       for i in range(10, 15))]
    rows += [f"2026-03-17 10:30,{tags[3]},Aisle 1 Shelf B",  # expected on Shelf A: found elsewhere
             f"2026-03-17 10:31,{tags[25]},Aisle 1 Shelf B",  # voided, still on the shelf
             f"2026-03-17 10:32,{tags[35]},Aisle 1 Shelf B",  # issued, outside the count's range
             ",,", f"2026-03-17 10:33,{day_pass},Aisle 1 Shelf B"]
    (folder / "north-2.csv").write_text("\n".join(rows) + "\n")
    # scanner two: JSON Lines (a comment, a blank, a repeat, a stranger, junk)
    objects = [{"tag": tags[1], "when": "2026-03-17T11:00:00Z", "place": "Aisle 1 Shelf A"},
               {"tag": tags[15], "when": "2026-03-17T11:01:00+01:00", "place": "Aisle 1 Shelf B"},
               {"tag": stranger, "when": "2026-03-17 11:02", "place": "Aisle 1 Shelf B"},
               {"tag": "QTL-26??", "when": "2026-03-17 11:03", "place": "Aisle 1 Shelf B"}]
    lines = ["// south scanner", *(json.dumps(item) for item in objects[:2]), "", *(json.dumps(i) for i in objects[2:])]
    (folder / "south.jsonl").write_text("\n".join(lines) + "\n")
    scope = CountScope(kind="range", first=tags[0], last=tags[29])
    found = {*tags[0:5], *tags[10:16], tags[1]}
    expected = {code for code in tags[0:30] if code != tags[25]}
    return {
        "tags": tags, "pass": day_pass, "stranger": stranger, "scope": scope,
        "missing": sorted(expected - found - {tags[3]}),
    }


@pytest.fixture
def planted(register: Register, tmp_path: Path) -> dict[str, Any]:
    return plant(register, tmp_path)


def test_a_count_over_three_files_from_two_scanners(register: Register, planted: dict[str, Any], tmp_path: Path) -> None:
    tags = planted["tags"]
    start_count(register, "spring-aisle-1", "tools", planted["scope"], tz="Europe/Lisbon")
    add_files(register, "spring-aisle-1", [tmp_path / "north-1.txt", tmp_path / "north-2.csv"], scanner="north")
    add_files(register, "spring-aisle-1", [tmp_path / "south.jsonl"], scanner="south")
    status = count_status(register, "spring-aisle-1")
    assert status.expected == 29  # 30 in range, one of them voided
    assert status.found == 29 - len(planted["missing"])
    assert status.counts == {
        "issued": 10,  # tags 0-2, 4 (A) and 10-15 (B); tag 1 twice
        "expired": 0,
        "suspended": 0,
        "elsewhere": 1,  # tag 3: expected on Shelf A, seen on Shelf B
        "out_of_scope": 1,  # tag 35
        "voided": 1,
        "other_series": 1,  # the day pass
        "bad_check": 1,
        "not_issued": 1,
        "malformed": 1,
        "duplicates": 2,  # tag 1 (both scanners) and tag 3 (both days)
        "missing": len(planted["missing"]),
        "blank_lines": 3,  # one in each format
        "comment_lines": 3,
    }
    assert status.unexpected == 6
    _info, files, result = count_result(register, "spring-aisle-1")
    assert [(f.name, f.scanner, f.scans) for f in files] == [("north-1.txt", "north", 6), ("north-2.csv", "north", 9),
                                                             ("south.jsonl", "south", 4)]
    assert result["zone"] == "Europe/Lisbon"
    assert result["scope"] == f"codes {tags[0][:3]}-{tags[0][3:7]}-{tags[0][7:]} to {tags[29][:3]}-{tags[29][3:7]}-{tags[29][7:]}"
    assert [item["code"] for item in result["missing"]] == planted["missing"]
    (away,) = result["elsewhere"]
    assert (away["code"], away["expected_place"], away["seen_at_places"]) == (tags[3], "Aisle 1 Shelf A", ["Aisle 1 Shelf B"])
    (other,) = result["other_series"]
    assert (other["code"], other["series"]) == (planted["pass"], "passes")
    (typo,) = result["bad_check"]
    assert typo["likely"][0]["code"] == tags[6] and typo["likely"][0]["missing"] is True
    assert typo["file"] == "north:north-1.txt" and typo["line"] == 8
    (voided,) = result["voided"]
    assert voided["reason"] == "lost at the spring fair"
    assert [entry["code"] for entry in result["out_of_scope"]] == [tags[35]]
    assert [entry["code"] for entry in result["not_issued"]] == [planted["stranger"]]
    assert [entry["line"] for entry in result["malformed"]] == [6]


def test_the_same_file_twice_is_refused_and_adds_nothing(register: Register, planted: dict[str, Any], tmp_path: Path) -> None:
    start_count(register, "c1", "tools", tz="UTC")
    add_files(register, "c1", [tmp_path / "north-1.txt"])
    copy = tmp_path / "renamed.txt"
    copy.write_bytes((tmp_path / "north-1.txt").read_bytes())
    with pytest.raises(Conflict, match="added to count 'c1' already"):
        add_files(register, "c1", [copy])
    assert count_status(register, "c1").info.scans == 6
    assert [item.name for item in list_counts(register)] == ["c1"]


def test_times_without_a_zone_take_the_counts_zone(register: Register, planted: dict[str, Any], tmp_path: Path) -> None:
    tags = planted["tags"]
    start_count(register, "lisbon", "tools", tz="Europe/Lisbon")
    add_files(register, "lisbon", [tmp_path / "north-2.csv"])
    closed = finish_count(register, "lisbon", record=True)
    assert closed.recorded == 9 - 1  # all but the day pass (another series)
    with register.reading() as session:
        record, _ = code_history(session, tags[10])
    # 10:10 in Lisbon in March is 10:10 UTC (no summer time yet): from memory, Portugal's rule
    assert record.last_seen_at == datetime(2026, 3, 17, 10, 10, tzinfo=UTC)
    assert record.last_seen_where == "Aisle 1 Shelf B"


def test_closing_freezes_records_and_moves_places_when_asked(
    register: Register, planted: dict[str, Any], tmp_path: Path
) -> None:
    tags = planted["tags"]
    start_count(register, "c2", "tools", planted["scope"], tz="+01:00")
    add_files(register, "c2", [tmp_path / "north-2.csv"])
    with pytest.raises(InvalidFormat, match="--record"):
        finish_count(register, "c2", relocate=True)
    closed = finish_count(register, "c2", record=True, relocate=True)
    assert closed.moved == 1 and closed.info.state == "closed"
    with register.reading() as session:
        record, events = code_history(session, tags[3])
        assert verify_chain(session).intact
    assert record.expected_where == "Aisle 1 Shelf B"
    assert [event.action for event in events][-2:] == ["seen", "placed"]
    # 10:30 at +01:00 is 09:30 UTC
    assert record.last_seen_at == datetime(2026, 3, 17, 9, 30, tzinfo=UTC)
    with pytest.raises(Conflict, match="closed"):
        add_files(register, "c2", [tmp_path / "north-1.txt"])
    frozen = count_status(register, "c2")
    assert frozen.counts["elsewhere"] == 1  # the result kept, though the tag has moved since


def test_a_register_with_codes_from_the_previous_schema_is_upgraded(tmp_path: Path) -> None:
    from alembic import command

    from issuer.register.migrate import alembic_config
    from issuer.register.store import SCHEMA_HEAD, open_register

    path = str(tmp_path / "older.sqlite")
    register = open_register(path, actor="test")
    add_series(register, TOOLS)
    tags = [info.code for info in issue_codes(register, "tools", 5).codes]
    config = alembic_config()
    with register.engine.connect() as connection:
        config.attributes["connection"] = connection
        command.downgrade(config, "0001")
        connection.commit()
    register.close()
    reopened = open_register(path, actor="test")
    assert reopened.schema_revision() == SCHEMA_HEAD
    place_codes(reopened, tags[:2], "Bay 9")
    start_count(reopened, "after-upgrade", "tools", CountScope("where", text="bay 9"), tz="UTC")
    assert count_status(reopened, "after-upgrade").expected == 2
    reopened.close()
