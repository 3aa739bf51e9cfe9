"""The tamper-evident log on both backends: raw SQL behind the tool's back (an entry
altered, deleted, inserted, forged at the end, the whole tail rewritten) and what
``issuer log verify`` (with and without an anchor) makes of it."""

from __future__ import annotations

import json
from collections.abc import Iterator
from typing import Any

import pytest
from sqlalchemy import create_engine, text
from typer.testing import CliRunner

from issuer.cli.app import app
from issuer.register.admin import open_existing
from issuer.register.anchors import Anchor, current_anchor, verify_log
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code, void_code
from issuer.register.log import entry_hash
from issuer.register.store import database_url, open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.sidestep import sidestep, sql_behind_the_back


@pytest.fixture
def logged(register_url: str) -> Iterator[str]:  # noqa: F811
    """A register with ten logged acts on the chosen backend."""
    register = open_register(register_url, actor="quartermaster")
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
    codes = [issue_codes(register, "tools", 1).codes[0].code for _ in range(5)]
    issue_codes(register, "tools", 40, holder="workshop shelf B")
    void_code(register, codes[0], reason="lost in the car park")
    replace_code(register, codes[1], reason="label peeled off")  # two entries: void, replace
    register.close()
    yield register_url


def sql(url: str, statement: str, **params: Any) -> None:
    sql_behind_the_back(url, statement, **params)  # the append-only trigger side-stepped


def entry(url: str, entry_id: int) -> dict[str, Any]:
    engine = create_engine(database_url(url))
    with engine.connect() as connection:
        row = connection.execute(text("SELECT * FROM log_entry WHERE id = :i"), {"i": entry_id}).one()
    engine.dispose()
    return dict(row._mapping)


def verify(url: str, anchors: list[Anchor] = ()) -> Any:  # type: ignore[assignment]
    register = open_existing(url)
    try:
        return verify_log(register, anchors)
    finally:
        register.close()


def cli(*args: str) -> Any:
    return CliRunner().invoke(app, list(args), env={"COLUMNS": "200"})


def forge(url: str, entry_id: int, prev_hash: str, **content: Any) -> str:
    """Insert an entry whose hash is computed exactly as issuer computes it."""
    from datetime import UTC, datetime

    at = datetime(2026, 3, 1, 9, 30, tzinfo=UTC)
    fields = {"actor": "someone", "action": "void", "series_id": 1, "code": None,
              "batch_id": None, "detail": "{}", "chain": 1} | content  # fmt: skip
    digest = entry_hash(entry_id=entry_id, at=at, prev_hash=prev_hash, **fields)
    engine = create_engine(database_url(url))
    with engine.begin() as connection:
        # SQLite keeps times as text in SQLAlchemy's format; PostgreSQL as timestamptz
        stamp: Any = "2026-03-01 09:30:00.000000" if connection.dialect.name == "sqlite" else at
        connection.execute(
            text(
                "INSERT INTO log_entry (id, at, actor, action, series_id, code, batch_id, detail, "
                "prev_hash, hash, chain) VALUES (:id, :at, :actor, :action, :series_id, :code, :batch_id, "
                ":detail, :prev, :hash, :chain)"
            ),
            {"id": entry_id, "at": stamp, "prev": prev_hash, "hash": digest, **fields},
        )
    engine.dispose()
    return digest


def test_an_untouched_log_verifies(logged: str) -> None:
    report, _ = verify(logged)
    assert report.intact and report.entries == report.head_id == 10
    result = cli("log", "verify", "--db", logged, "--json")
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    assert data["intact"] and data["entries"] == 10 and data["problem"] is None


def test_an_altered_detail_is_named(logged: str) -> None:
    sql(logged, "UPDATE log_entry SET detail = :d WHERE id = 7", d='{"count": 39}')
    report, _ = verify(logged)
    assert report.problem is not None and report.problem.entry_id == 7
    assert "altered" in report.problem.problem
    result = cli("log", "verify", "--db", logged)
    assert result.exit_code == 1
    assert "broken at entry 7" in result.stdout


def test_an_altered_actor_or_code_is_named(logged: str) -> None:
    sql(logged, "UPDATE log_entry SET actor = 'nobody' WHERE id = 3")
    report, _ = verify(logged)
    assert report.problem is not None and report.problem.entry_id == 3


def test_a_deleted_entry_is_named(logged: str) -> None:
    # ids interleave across chains, so a gap in ids proves nothing: the entry after the
    # deleted one names it by the last good entry of its chain
    sql(logged, "DELETE FROM log_entry WHERE id = 4")
    report, _ = verify(logged)
    assert report.problem is not None and report.problem.entry_id == 5
    assert "missing" in report.problem.problem and "after #3" in report.problem.problem
    data = json.loads(cli("log", "verify", "--db", logged, "--json").stdout)
    assert data["intact"] is False and data["problem"]["entry"] == 5


def test_the_last_entry_deleted_is_named(logged: str) -> None:
    sql(logged, "DELETE FROM log_entry WHERE id = 10")
    report, _ = verify(logged)
    assert report.problem is not None and report.problem.entry_id == 10
    assert "missing" in report.problem.problem


def test_a_forged_entry_after_the_head_is_named(logged: str) -> None:
    # a careful forger computes the hash right and links it to the head, but cannot
    # move the head without also being caught by an anchor (next test)
    head_hash = entry(logged, 10)["hash"]
    forge(logged, 11, head_hash, code="T0000018", detail='{"reason": "never happened"}')
    report, _ = verify(logged)
    assert report.problem is not None and report.problem.entry_id == 11
    assert "beyond the chain's head" in report.problem.problem
    assert cli("log", "verify", "--db", logged).exit_code == 1


def test_a_naive_forgery_in_place_is_named(logged: str) -> None:
    # a made-up hash at the next id, head moved along with it
    sql(logged, "UPDATE log_chain SET last_id = 11, last_hash = :h WHERE chain = 1", h="f" * 64)
    previous = entry(logged, 10)["hash"]
    forge(logged, 11, previous)
    sql(logged, "UPDATE log_entry SET hash = :h WHERE id = 11", h="f" * 64)
    report, _ = verify(logged)
    assert report.problem is not None and report.problem.entry_id == 11
    assert "altered" in report.problem.problem


def test_an_entry_slipped_into_the_middle_is_caught_where_the_chain_breaks(logged: str) -> None:
    # make room at id 6 by moving entries 6..10 up one (through negative ids, so the
    # primary key never clashes), then slip a well-formed entry in
    sql(logged, "UPDATE log_entry SET id = -id WHERE id >= 6")
    sql(logged, "UPDATE log_entry SET id = 1 - id WHERE id < 0")
    forge(logged, 6, entry(logged, 5)["hash"], detail='{"reason": "slipped in"}')
    report, _ = verify(logged)
    # the forged entry itself links and hashes correctly; the one after it no longer links
    assert report.problem is not None and report.problem.entry_id == 7
    assert "does not link" in report.problem.problem


def rewrite_tail(url: str, from_id: int) -> None:
    """What verify alone cannot catch: every entry from ``from_id`` on rewritten with
    fresh hashes and the head moved to match."""
    from sqlalchemy import select
    from sqlalchemy.orm import Session

    from issuer.register.models import LogEntry

    engine = create_engine(database_url(url))
    with Session(engine) as session, session.begin():
        rows = session.scalars(select(LogEntry).where(LogEntry.id >= from_id).order_by(LogEntry.id)).all()
        previous = session.scalar(select(LogEntry.hash).where(LogEntry.id == from_id - 1))
        for row in rows:
            detail = row.detail.replace("lost in the car park", "returned to stock")
            digest = entry_hash(
                entry_id=row.id, at=row.at, actor=row.actor, action=row.action,
                series_id=row.series_id, code=row.code, batch_id=row.batch_id,
                detail=detail, prev_hash=previous, login=row.login, chain=row.chain,
            )  # fmt: skip
            sidestep(
                session.connection(),
                "UPDATE log_entry SET detail = :d, prev_hash = :p, hash = :h WHERE id = :i",
                {"d": detail, "p": previous, "h": digest, "i": row.id},
            )
            previous = digest
        session.execute(text("UPDATE log_chain SET last_hash = :h WHERE chain = 1"), {"h": previous})
    engine.dispose()


def test_a_rewritten_tail_passes_verify_but_not_the_anchor(logged: str) -> None:
    register = open_existing(logged)
    anchor, _at = current_anchor(register)
    register.close()
    assert anchor.tree and anchor.entry_id == 10  # all ten entries sealed

    rewrite_tail(logged, 8)  # entry 8 is the void; its reason is rewritten
    report, checks = verify(logged, [anchor])
    assert report.intact  # the chain alone cannot show a consistent rewrite ...
    assert not checks[0].holds  # ... the anchor written down elsewhere does
    assert "no longer give the anchor's root" in (checks[0].problem or "")
    result = cli("log", "verify", "--db", logged, "--anchor", str(anchor))
    assert result.exit_code == 1
    assert "Anchor fails" in result.stdout


def test_an_anchor_before_the_rewrite_still_holds(logged: str) -> None:
    register = open_existing(logged)
    early = Anchor(7, entry(logged, 7)["hash"])
    register.close()
    rewrite_tail(logged, 8)
    _report, checks = verify(logged, [early])
    assert checks[0].holds  # entries 1..7 are as they were
    result = cli("log", "verify", "--db", logged, "--anchor", str(early), "--json")
    assert result.exit_code == 0
    assert json.loads(result.stdout)["anchors"][0]["holds"] is True


def test_log_anchor_prints_the_sealed_tree(logged: str) -> None:
    from issuer.proofs import merkle

    result = cli("log", "anchor", "--db", logged)
    assert result.exit_code == 0
    kind, size, digest = result.stdout.strip().split(":")
    # one writer: the ten entries were sealed in id order; the root is RFC 6962's over their hashes
    leaves = [merkle.leaf_hash(bytes.fromhex(entry(logged, i)["hash"])) for i in range(1, 11)]
    assert kind == "tree" and int(size) == 10 and digest == merkle.root(leaves).hex()
    data = json.loads(cli("log", "anchor", "--db", logged, "--json").stdout)
    assert data["anchor"] == result.stdout.strip() and data["size"] == 10


def test_an_anchor_past_the_end_or_malformed(logged: str) -> None:
    data = json.loads(cli("log", "verify", "--db", logged, "--anchor", f"99:{'a' * 64}", "--json").stdout)
    assert data["anchors"][0]["holds"] is False
    assert "no longer in the log" in data["anchors"][0]["problem"]
    bad = cli("log", "verify", "--db", logged, "--anchor", "ten:abc")
    assert bad.exit_code == 2
    assert bad.stderr.strip().count("\n") == 0 and "an anchor looks like" in bad.stderr


def test_acts_on_two_series_chain_apart_and_the_register_chain_holds_the_rest(register_url: str) -> None:  # noqa: F811
    register = open_register(register_url, actor="quartermaster")
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
    add_series(register, SeriesSpec(key="members", scheme="luhn", length=6, prefix="M"))
    for _ in range(3):
        issue_codes(register, "tools", 1)
        issue_codes(register, "members", 1)
    register.close()
    engine = create_engine(database_url(register_url))
    with engine.connect() as connection:
        rows = connection.execute(text("SELECT id, action, series_id, chain, prev_hash FROM log_entry ORDER BY id")).all()
        heads = dict(connection.execute(text("SELECT chain, last_id FROM log_chain")).all())
    engine.dispose()
    assert [r.chain for r in rows if r.action == "series.add"] == [0, 0]
    assert {r.chain for r in rows if r.action != "series.add"} == {r.series_id for r in rows if r.action != "series.add"}
    by_id = {r.id: r for r in rows}
    assert set(heads) == {0, *(r.series_id for r in rows)}
    for chain in heads:  # each chain's first entry starts from the genesis hash
        first = min(r.id for r in rows if r.chain == chain)
        assert by_id[first].prev_hash == "0" * 64
    report, _ = verify(register_url)
    assert report.intact and report.chains == 3 and report.entries == 8


def test_a_whole_chain_removed_is_caught_by_a_tree_anchor(logged: str) -> None:
    register = open_existing(logged)
    anchor, _at = current_anchor(register)
    register.close()
    # every entry of series #1's chain, its leaves and its head row gone, the tree's size moved:
    # what is left (the register's chain, one sealed leaf) is consistent in itself
    sql(logged, "DELETE FROM log_leaf WHERE chain = 1")
    sql(logged, "UPDATE log_tree SET size = 1")
    sql(logged, "DELETE FROM log_entry WHERE chain = 1")
    sql(logged, "DELETE FROM log_chain WHERE chain = 1")
    report, checks = verify(logged, [anchor])
    assert report.intact and report.entries == 1
    assert not checks[0].holds and "fewer than the anchor's 10" in (checks[0].problem or "")


def test_a_sealed_leaf_removed_or_moved_is_named(logged: str) -> None:
    register = open_existing(logged)
    current_anchor(register)
    register.close()
    sql(logged, "DELETE FROM log_leaf WHERE position = 4")
    report, _ = verify(logged)
    assert report.problem is not None and "leaf 4 of the sealed tree is missing" in report.problem.problem
