"""A register whose log was written at the previous head (one chain, one head row, the
append of revision log_rights) upgrades to per-series chains and still verifies; edits
behind the tool's back after the upgrade, to old and new entries alike, still show."""

from __future__ import annotations

import json
from datetime import UTC, datetime, timedelta
from typing import Any

from sqlalchemy import Connection, create_engine, text

from issuer.register.admin import open_existing
from issuer.register.anchors import current_anchor, verify_log
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.driver import begin_immediate
from issuer.register.issuing import issue_codes
from issuer.register.log import GENESIS, entry_hash
from issuer.register.migrate import alembic_config
from issuer.register.store import SCHEMA_HEAD, database_url, open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.sidestep import sql_behind_the_back

PREVIOUS_HEAD = "log_rights"
AT = datetime(2026, 4, 7, 9, 0, tzinfo=UTC)

#: acts as the previous release logged them: (action, on the series?, code, detail)
OLD_ACTS = [
    ("issue", True, "T000018", {"count": 1}),
    ("issue", True, "T000026", {"count": 1}),
    ("token-add", False, None, {"token": "front desk", "role": "clerk"}),
    ("void", True, "T000018", {"reason": "lost in the car park"}),
    ("issue", True, "T000034", {"count": 1}),
]


def _old_append(connection: Connection, actions: list[tuple[str, int | None, str | None, dict[str, Any]]],
                at: datetime) -> None:  # fmt: skip
    """Append as revision log_rights did: PostgreSQL through its issuer_log_append (still
    the old function at that revision), SQLite with the single chain under log_head."""
    if connection.dialect.name == "postgresql":
        payload = [{"action": a, "series": s, "code": c, "batch": None, "detail": json.dumps(d, sort_keys=True)}
                   for a, s, c, d in actions]  # fmt: skip
        connection.execute(text("SELECT issuer_log_append(:at, 'desk-ann', :e)"), {"at": at, "e": json.dumps(payload)})
        return
    last_id, last_hash = connection.execute(text("SELECT last_id, last_hash FROM log_head WHERE id = 1")).one()
    for action, series, code, detail in actions:
        last_id += 1
        detail_text = json.dumps(detail, sort_keys=True)
        digest = entry_hash(entry_id=last_id, at=at, actor="desk-ann", action=action, series_id=series, code=code,
                            batch_id=None, detail=detail_text, prev_hash=last_hash)  # fmt: skip
        connection.execute(
            text("INSERT INTO log_entry (id, at, actor, action, series_id, code, batch_id, detail, prev_hash, hash) "
                 "VALUES (:i, :at, 'desk-ann', :a, :s, :c, NULL, :d, :p, :h)"),
            {"i": last_id, "at": at.strftime("%Y-%m-%d %H:%M:%S.%f"), "a": action, "s": series, "c": code,
             "d": detail_text, "p": last_hash, "h": digest},
        )  # fmt: skip
        last_hash = digest
    connection.execute(text("UPDATE log_head SET last_id = :i, last_hash = :h"), {"i": last_id, "h": last_hash})


def _at_previous_head(url: str) -> int:
    """A register at the previous head with a series and the old acts logged; its series id."""
    from alembic import command

    register = open_register(url, actor="desk-ann")
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))  # the register's chain
    config = alembic_config()
    with register.engine.connect() as connection:
        begin_immediate(connection)
        config.attributes["connection"] = connection
        command.downgrade(config, PREVIOUS_HEAD)
        connection.commit()
    assert register.schema_revision() == PREVIOUS_HEAD
    register.close()
    engine = create_engine(database_url(url))
    with engine.begin() as connection:
        series = int(connection.execute(text("SELECT id FROM series WHERE key = 'tools'")).scalar_one())
        for number, (action, on_series, code, detail) in enumerate(OLD_ACTS):
            _old_append(connection, [(action, series if on_series else None, code, detail)],
                        AT + timedelta(minutes=number))  # fmt: skip
        assert "chain" not in {c for c in connection.execute(text("SELECT * FROM log_entry")).keys()}
    engine.dispose()
    return series


def _verify(url: str) -> Any:
    register = open_existing(url)
    try:
        return verify_log(register)[0]
    finally:
        register.close()


def test_a_log_written_at_the_previous_head_verifies_after_the_upgrade(register_url: str) -> None:  # noqa: F811
    series = _at_previous_head(register_url)
    register = open_register(register_url, actor="desk-ann")  # opening upgrades
    assert register.schema_revision() == SCHEMA_HEAD
    old_heads = {"entries": len(OLD_ACTS) + 1}
    register.close()
    report = _verify(register_url)
    assert report.intact, report.problem
    assert report.entries == old_heads["entries"] and report.chains == 1 and report.tree_size == 0

    # the register goes on: new acts on the series start its own chain; the old entries are sealed with them
    register = open_register(register_url, actor="desk-bo")
    issue_codes(register, "tools", 1)
    issue_codes(register, "tools", 3)
    anchor, _ = current_anchor(register)
    register.close()
    engine = create_engine(database_url(register_url))
    with engine.connect() as connection:
        rows = connection.execute(text("SELECT id, chain, prev_hash FROM log_entry ORDER BY id")).all()
    engine.dispose()
    assert [r.chain for r in rows] == [0] * (len(OLD_ACTS) + 1) + [series, series]
    assert rows[len(OLD_ACTS) + 1].prev_hash == GENESIS
    report = _verify(register_url)
    assert report.intact and report.chains == 2 and anchor.entry_id == report.tree_size == len(rows)

    # edits behind the tool's back after the upgrade: an old entry, then a new one
    old_id, new_id = rows[2].id, rows[-1].id
    sql_behind_the_back(register_url, "UPDATE log_entry SET detail = :d WHERE id = :i", d='{"count": 2}', i=old_id)
    report = _verify(register_url)
    assert report.problem is not None and report.problem.entry_id == old_id and "altered" in report.problem.problem
    sql_behind_the_back(register_url, "UPDATE log_entry SET detail = :d WHERE id = :i", d='{"count": 1}', i=old_id)
    assert _verify(register_url).intact
    sql_behind_the_back(register_url, "DELETE FROM log_leaf WHERE entry_id = :i", i=new_id)
    sql_behind_the_back(register_url, "UPDATE log_tree SET size = size - 1")
    sql_behind_the_back(register_url, "DELETE FROM log_entry WHERE id = :i", i=new_id)
    report = _verify(register_url)
    assert report.problem is not None and report.problem.entry_id == new_id and "missing" in report.problem.problem
