"""PostgreSQL's append function of migration ``lean_append``: the entries it chains hash
exactly as Python computes them (strings that need JSON escapes included, several chains
in one call, given out of order), and a register whose log the previous function wrote
upgrades with its chains going on unbroken, and back down again."""

from __future__ import annotations

from datetime import UTC, datetime
from itertools import pairwise
from typing import Any

from sqlalchemy import create_engine, text

from issuer.register.anchors import verify_log
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.doctor import run_doctor
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import void_code
from issuer.register.log import GENESIS, NewEntry, append_entries, entry_hash
from issuer.register.store import SCHEMA_HEAD, Register, database_url, open_register
from tests.register.pg import pg_database, pg_url  # noqa: F401
from tests.register.upgrades import to_revision

PREVIOUS_HEAD = "fewer_pages"
AT = datetime(2026, 5, 2, 10, 15, 7, 120, tzinfo=UTC)

#: strings a JSON text must escape, and some it must not: quote, backslash, the short
#: escapes, another control character, non-ASCII letters, a line separator and a character
#: outside the Basic Multilingual Plane
# source: RFC 8259, section 7 (strings: the characters that must be escaped)
AWKWARD = 'a "quoted" \\ path\nnext\tline \x01 \x1f Łódź — ✓ \u2028 \U0001f527'


def _rows(url: str) -> list[Any]:
    engine = create_engine(database_url(url))
    try:
        with engine.connect() as connection:
            return list(connection.execute(text("SELECT * FROM log_entry ORDER BY id")))
    finally:
        engine.dispose()


def _python_hash(row: Any) -> str:
    return entry_hash(
        entry_id=row.id, at=row.at, actor=row.actor, action=row.action, series_id=row.series_id, code=row.code,
        batch_id=row.batch_id, detail=row.detail, prev_hash=row.prev_hash, login=row.login, chain=row.chain,
    )  # fmt: skip


def _append_source(url: str) -> str:
    engine = create_engine(database_url(url))
    try:
        with engine.connect() as connection:
            return str(connection.execute(text(
                "SELECT prosrc FROM pg_proc WHERE proname = 'issuer_log_append' "
                "AND pronamespace = current_schema()::regnamespace"
            )).scalar_one())  # fmt: skip
    finally:
        engine.dispose()


def _move(register: Register, revision: str, *, down: bool) -> None:
    to_revision(register, revision, down=down)
    assert register.schema_revision() == revision


def test_entries_chained_by_the_database_hash_as_python_computes_them(pg_url: str) -> None:  # noqa: F811
    register = open_register(pg_url, actor='desk "Ann" \\ Łódź ✓')
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
    add_series(register, SeriesSpec(key="bolts", scheme="luhn", length=6, prefix="B"))
    tools, bolts = 1, 2
    # one call, its entries on three chains given out of chain order, one of them new
    entries = [
        NewEntry("void", bolts, f"B{AWKWARD}", None, {"reason": AWKWARD}),
        NewEntry("token-add", None, None, None, {"token": AWKWARD, "role": "clerk"}),
        NewEntry("void", tools, "T000018", None, {"reason": "lost"}),
        NewEntry("series.add", bolts, None, None, {"key": "bolts"}),  # on the register's chain
        NewEntry("void", bolts, "B000026", None, {}),
        *(NewEntry("void", (tools, bolts)[n % 2], f"X{n}", None, {"n": n}) for n in range(200)),
    ]
    # (an actor's text is checked before it gets here; the function escapes whatever it is given)
    actor = f"desk {AWKWARD}"
    appended = register.write(lambda session: append_entries(session, entries, actor=actor, at=AT))
    assert appended == len(entries)
    issue_codes(register, "tools", 1)  # and through the tool's own path (in a pipeline)
    register.close()

    rows = _rows(pg_url)
    for row in rows:
        assert row.hash == _python_hash(row), row.id
        assert row.login == "postgres"
    mine = [row for row in rows if row.actor == actor]
    given = [(e.action, e.series_id, e.code) for e in entries]
    assert [(r.action, r.series_id, r.code) for r in mine] == given
    assert [r.chain for r in mine[:5]] == [bolts, 0, tools, 0, bolts]
    assert [r.id for r in mine] == sorted(r.id for r in mine)  # ids in the order given
    # within each chain each entry follows the one before it, the first the chain's last head
    for chain in (0, tools, bolts):
        links = [r for r in rows if r.chain == chain]
        assert links[0].prev_hash == GENESIS
        assert all(later.prev_hash == earlier.hash for earlier, later in pairwise(links))

    register = open_register(pg_url, actor="auditor")
    report = verify_log(register)[0]
    assert report.intact, report.problem
    assert report.chains == 3 and report.entries == len(rows)
    register.close()


def test_a_log_the_previous_function_wrote_goes_on_across_the_upgrade_and_back(pg_url: str) -> None:  # noqa: F811
    register = open_register(pg_url, actor="desk-ann")
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
    _move(register, PREVIOUS_HEAD, down=True)
    assert "jsonb_build_object" in _append_source(pg_url)  # the previous function appends
    first = issue_codes(register, "tools", 1).codes[0].code
    issue_codes(register, "tools", 3)
    void_code(register, first, reason="lost")
    add_series(register, SeriesSpec(key="bolts", scheme="luhn", length=6, prefix="B"))
    register.close()

    register = open_register(pg_url, actor="desk-bo")  # opening upgrades
    assert register.schema_revision() == SCHEMA_HEAD
    assert "jsonb_array_length" in _append_source(pg_url)
    issue_codes(register, "tools", 1)
    issue_codes(register, "bolts", 2)
    add_series(register, SeriesSpec(key="nuts", scheme="luhn", length=6, prefix="N"))
    report = verify_log(register)[0]
    assert report.intact, report.problem
    assert not [f for f in run_doctor(register).findings if f.status == "problem"]

    _move(register, PREVIOUS_HEAD, down=True)  # back down: the previous function again
    assert "jsonb_build_object" in _append_source(pg_url)
    issue_codes(register, "tools", 1)
    issue_codes(register, "nuts", 1)
    report = verify_log(register)[0]
    assert report.intact, report.problem
    _move(register, SCHEMA_HEAD, down=False)
    issue_codes(register, "tools", 1)
    register.close()

    rows = _rows(pg_url)
    assert all(row.hash == _python_hash(row) for row in rows)
    assert {row.chain for row in rows} == {0, 1, 2, 3}
    register = open_register(pg_url, actor="auditor")
    report = verify_log(register)[0]
    assert report.intact and report.entries == len(rows) and report.chains == 4
    register.close()
