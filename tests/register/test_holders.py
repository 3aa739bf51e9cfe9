"""Holders through the Python API on SQLite and PostgreSQL: set, clear, find, erase,
purge. The log records each act on the code but never the holder's text, so erasure
leaves the chain whole and no trace of the text anywhere in the database.

Names are invented members of the Quillmere Tool Library & Makers' Co-op."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import closing
from datetime import UTC, datetime, timedelta
from typing import Any

import pytest
from sqlalchemy import String, Text, inspect, select, text

from issuer.errors import Conflict, InvalidFormat
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.holders import (
    clear_holder,
    erase_holder,
    find_holders,
    purge_holders,
    set_holder,
)
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import code_history, replace_code, void_code
from issuer.register.logverify import verify_chain
from issuer.register.models import IssuedCode
from issuer.register.store import open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

MEMBERS = SeriesSpec(key="members", scheme="luhn", length=7, prefix="M", mode="scattered", title="Member cards")
TOOLS = SeriesSpec(key="tools", scheme="luhn", length=6, prefix="QTL")
NAME = "Wren Halloway-Quill"


class Clock:
    """A register clock the test moves by hand."""

    def __init__(self) -> None:
        self.now = datetime(2026, 3, 2, 9, 30, tzinfo=UTC)

    def __call__(self) -> datetime:
        return self.now

    def advance(self, **delta: float) -> None:
        self.now += timedelta(**delta)


@pytest.fixture
def clock() -> Clock:
    return Clock()


@pytest.fixture
def reg(register_url: str, clock: Clock) -> Iterator[Any]:  # noqa: F811
    register = open_register(register_url, actor="desk-ann", clock=clock)
    add_series(register, MEMBERS)
    add_series(register, TOOLS)
    yield register
    register.close()


def every_text(register: Any) -> list[tuple[str, str, str]]:
    """Every value of every text column of every table: (table, column, value)."""
    found = []
    names = inspect(register.engine).get_table_names()
    with register.engine.connect() as connection:
        for table in names:
            for column in inspect(register.engine).get_columns(table):
                if not isinstance(column["type"], String | Text):
                    continue
                quoted = connection.dialect.identifier_preparer.quote
                rows = connection.execute(text(
                    f"SELECT {quoted(column['name'])} FROM {quoted(table)} WHERE {quoted(column['name'])} IS NOT NULL"
                ))  # fmt: skip
                found += [(table, column["name"], str(row[0])) for row in rows]
    return found


def traces(register: Any, needle: str) -> list[tuple[str, str]]:
    folded = needle.casefold()
    return [(table, column) for table, column, value in every_text(register) if folded in value.casefold()]


def test_set_change_clear_and_find(reg: Any) -> None:
    cards = [info.code for info in issue_codes(reg, "members", 3).codes]
    tag = issue_codes(reg, "tools", 1, note="Shelf B-12, drill press").codes[0].code
    set_holder(reg, cards[0], NAME)
    set_holder(reg, cards[1], "Ottoline  Brack", note="workshop volunteer")
    changed = set_holder(reg, cards[1], "Ottoline Bracken")
    assert changed.holder == "Ottoline Bracken" and changed.note == "workshop volunteer"
    with reg.reading() as session:
        assert [f.code for f in find_holders(session, "wren")] == [cards[0]]
        assert [f.code for f in find_holders(session, "WREN   halloway")] == [cards[0]]  # case and spaces
        assert [f.code for f in find_holders(session, "otto")] == [cards[1]]
        by_note = find_holders(session, "shelf b")
        assert [(f.code, f.matched) for f in by_note] == [(tag, "note")]
        assert find_holders(session, "wren", series="tools") == []
        assert find_holders(session, "halloway") == []  # the start of the text, not the middle
    cleared = clear_holder(reg, cards[0])
    assert cleared.holder is None
    with reg.reading() as session:
        assert find_holders(session, "wren") == []
        _, events = code_history(session, cards[1])
        assert [e.action for e in events][-2:] == ["holder.set", "holder.set"]
        detail = events[-1].as_dict()["detail"]
        # what changed, and salted digests of the texts before and after: never the texts
        assert detail.pop("holder") == "changed" and set(detail) == {"text_before", "text_after"}
        assert all(len(digest) == 64 for digest in detail.values()) and len(set(detail.values())) == 2
        assert verify_chain(session).intact
    # the log says that the holder changed, never to what
    assert traces(reg, "ottoline") == [("issued_code", "holder"), ("issued_code", "holder_key")]
    assert traces(reg, NAME) == []


def test_bad_holders_are_refused_before_the_database(reg: Any) -> None:
    card = issue_codes(reg, "members", 1).codes[0].code
    with pytest.raises(InvalidFormat, match="limit is 200"):  # the one table of field limits
        set_holder(reg, card, "x" * 201)
    with pytest.raises(InvalidFormat, match="control character"):
        set_holder(reg, card, "Wren\nHalloway")
    with pytest.raises(InvalidFormat):
        set_holder(reg, card, "   ")
    with pytest.raises(InvalidFormat, match="limit is 200"):
        issue_codes(reg, "members", 1, holder="y" * 201)
    void_code(reg, card, reason="card cut up at the desk")
    with pytest.raises(Conflict, match="voided"):
        set_holder(reg, card, NAME)


def test_issue_with_holder_is_found_on_every_issue_path(reg: Any) -> None:
    few = issue_codes(reg, "members", 1, holder="Isolde Marrow").codes[0].code
    bulk = issue_codes(reg, "tools", 70, holder="Tool shelf C", note="Spring intake").codes
    with reg.reading() as session:
        assert [f.code for f in find_holders(session, "isolde")] == [few]
        assert len(find_holders(session, "tool shelf c", limit=500)) == 70
        assert len(find_holders(session, "spring", limit=500)) == 70
        assert len(find_holders(session, "tool", limit=10)) == 10
    assert bulk[0].holder == "Tool shelf C"


def test_erasure_leaves_no_trace_and_the_chain_whole(reg: Any) -> None:
    card = issue_codes(reg, "members", 1, holder=NAME, note="Prefers evening shifts").codes[0].code
    other = issue_codes(reg, "members", 1, holder="Ottoline Bracken").codes[0].code
    replacement = replace_code(reg, card, reason="card worn out").code  # carries a copy
    assert traces(reg, "halloway")
    with pytest.raises(InvalidFormat, match="repeats"):
        erase_holder(reg, replacement, reason=f"{NAME} left the co-op")
    erased = erase_holder(reg, replacement, reason="member left the co-op")
    assert sorted(erased.codes) == sorted([card, replacement])
    assert traces(reg, "halloway") == []
    assert traces(reg, "evening shifts") == []
    assert traces(reg, "ottoline")  # another member's holder stays
    with reg.reading() as session:
        assert verify_chain(session).intact
        record, events = code_history(session, replacement)
        assert record.holder is None and record.erased_at is not None
        assert events[-1].action == "holder.erase"
        detail = events[-1].as_dict()["detail"]
        assert detail.pop("text_before") and detail == {"reason": "member left the co-op", "text_after": None}
        assert find_holders(session, "wren") == []
    with pytest.raises(Conflict, match="no holder"):
        erase_holder(reg, card, reason="asked twice")
    assert other


def test_erasure_reaches_the_sqlite_file_bytes(tmp_path: Any, clock: Clock) -> None:
    path = tmp_path / "register.sqlite"
    register = open_register(str(path), actor="desk-ann", clock=clock)
    add_series(register, MEMBERS)
    card = issue_codes(register, "members", 1, holder=NAME, note="Quillmere evening shifts").codes[0].code
    issue_codes(register, "members", 50, holder="Ottoline Bracken")

    def on_disk() -> bytes:
        files = [path, path.with_name(path.name + "-wal")]
        return b"".join(f.read_bytes() for f in files if f.exists())

    assert b"Halloway" in on_disk()
    erase_holder(register, card, reason="member asked to be forgotten")
    # no VACUUM yet: freed space is zeroed and the write-ahead file folded back
    data = on_disk()
    assert b"Halloway" not in data and b"halloway" not in data and b"evening shifts" not in data
    register.close()
    import sqlite3

    with closing(sqlite3.connect(path, isolation_level=None)) as raw:
        raw.execute("VACUUM")
        raw.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    data = on_disk()
    assert b"alloway" not in data and b"evening shifts" not in data
    assert b"Ottoline" in data


def test_purge_by_void_date_and_by_expiry(reg: Any, clock: Clock) -> None:
    old = [info.code for info in issue_codes(reg, "members", 3, holder="Ada Fenwick-Rowe").codes]
    day_passes = [info.code for info in issue_codes(
        reg, "members", 2, holder="Visitor Tamsin Ord", valid_until=clock.now + timedelta(days=1)).codes]  # fmt: skip
    void_code(reg, old[0], reason="member left")
    void_code(reg, old[1], reason="member left")
    clock.advance(days=400)
    void_code(reg, old[2], reason="member left")  # voided recently: kept
    before = clock.now - timedelta(days=365)
    dry = purge_holders(reg, voided_before=before, dry_run=True)
    assert dry.count == 2 and sorted(dry.codes) == sorted(old[:2])
    assert len(traces(reg, "fenwick")) == 2 * 3  # nothing erased by the dry run
    done = purge_holders(reg, voided_before=before)
    assert done.count == 2
    with reg.reading() as session:
        held = dict(session.execute(select(IssuedCode.code, IssuedCode.holder).where(IssuedCode.code.in_(old))).all())
    assert held == {old[0]: None, old[1]: None, old[2]: "Ada Fenwick-Rowe"}
    assert purge_holders(reg, expired_before=clock.now - timedelta(days=30)).count == 2
    assert traces(reg, "tamsin") == []
    with pytest.raises(InvalidFormat, match="exactly one"):
        purge_holders(reg)
    with pytest.raises(InvalidFormat, match="future"):
        purge_holders(reg, voided_before=clock.now + timedelta(days=2))
    with reg.reading() as session:
        assert verify_chain(session).intact
        assert day_passes


def test_erasure_reaches_a_count_narrowed_to_the_holder(reg: Any, tmp_path: Any) -> None:
    from issuer.register.counting import CountScope
    from issuer.stocktake.counts import add_files, finish_count, start_count

    tags = [info.code for info in issue_codes(reg, "tools", 3, holder=NAME).codes]
    start_count(reg, "wren-loans", "tools", CountScope(kind="holder", text=NAME), tz="UTC")
    scan = tmp_path / "scan.csv"
    scan.write_text("code\n" + "\n".join(tags[:2]) + "\n")
    add_files(reg, "wren-loans", [scan])
    finish_count(reg, "wren-loans")
    assert ("stock_count", "scope_text") in traces(reg, NAME)
    assert not [t for t in traces(reg, NAME) if t[0] == "log_entry"]  # the count's log entry names no holder
    erase_holder(reg, tags[0], reason="member left the co-op")
    erase_holder(reg, tags[1], reason="member left the co-op")
    erase_holder(reg, tags[2], reason="member left the co-op")
    assert traces(reg, "halloway") == []
    with reg.reading() as session:
        assert verify_chain(session).intact
