"""Independent checks that a register agrees with itself, written with plain SQL so they
do not lean on the code they check (``issuer doctor`` is checked against them).

``assert_consistent(url)`` asserts: the database's integrity check; every batch whole;
each series' counters equal to the codes it holds; in-order series gapless; scattered
series holding exactly the permutation's first ``next_counter`` values; the log chain
intact; every log entry matching the codes it names.
"""

from __future__ import annotations

import hashlib
import json
from collections import Counter
from dataclasses import dataclass
from typing import Any

from sqlalchemy import create_engine, text


@dataclass
class RegisterFacts:
    """What the checks found, for the tests to compare with what workers reported."""

    codes: dict[str, tuple[str, int, int]]  # code -> (status, batch id, base)
    batches: dict[int, tuple[str, int]]  # batch id -> (kind, count)
    actions: Counter[str]
    series_next: dict[str, int]


def _sqlalchemy_url(url: str) -> str:
    from issuer.register.store import database_url

    return database_url(url)


def _scatter_counters(url: str, key: str, bases: list[int]) -> list[int]:
    from issuer.register.series import get_series, permutation
    from issuer.register.store import open_register

    register = open_register(url, actor="checker")
    try:
        with register.reading() as session:
            scatter = permutation(get_series(session, key))
            return [int(k) for k in scatter.counters_for_bases(bases)] if bases else []
    finally:
        register.close()


def assert_consistent(url: str) -> RegisterFacts:
    engine = create_engine(_sqlalchemy_url(url))
    try:
        with engine.connect() as connection:
            if connection.dialect.name == "postgresql":
                # one snapshot for every read: a killed desk's server process may still be
                # finishing its COMMIT, and the series row read before it and the codes after
                # would disagree although the register never did
                connection.execution_options(isolation_level="REPEATABLE READ")
            facts = _check(connection, url)
    finally:
        engine.dispose()
    _check_chain(url)
    return facts


def _rows(connection: Any, sql: str, **params: Any) -> list[Any]:
    return list(connection.execute(text(sql), params))


def _check(connection: Any, url: str) -> RegisterFacts:
    if connection.dialect.name == "sqlite":
        assert _rows(connection, "PRAGMA integrity_check") == [("ok",)]
        assert _rows(connection, "PRAGMA foreign_key_check") == []

    batches = {
        int(r.id): (str(r.kind), int(r.count))
        for r in _rows(connection, "SELECT id, kind, count FROM batch")
    }
    codes: dict[str, tuple[str, int, int]] = {}
    per_batch: dict[int, list[str]] = {}
    for r in _rows(connection, "SELECT code, status, batch_id, base FROM issued_code ORDER BY id"):
        codes[r.code] = (r.status, int(r.batch_id), int(r.base))
        per_batch.setdefault(int(r.batch_id), []).append(r.code)
    # no batch half-issued: each holds exactly as many codes as it says
    for batch_id, (kind, count) in batches.items():
        assert len(per_batch.get(batch_id, [])) == count, f"batch {batch_id} ({kind}) is not whole"
    assert set(per_batch) <= set(batches)

    series_next: dict[str, int] = {}
    for s in _rows(connection, "SELECT * FROM series"):
        held = _rows(
            connection,
            "SELECT c.base, b.kind FROM issued_code c JOIN batch b ON b.id = c.batch_id "
            "WHERE c.series_id = :s",
            s=s.id,
        )
        drawn = [int(r.base) for r in held if r.kind != "import"]
        imported = [int(r.base) for r in held if r.kind == "import"]
        assert s.code_count == len(held), f"series {s.key}: code_count {s.code_count} != {len(held)} rows"
        assert s.imported_count == len(imported)
        series_next[s.key] = int(s.next_counter)
        if s.mode == "sequential":
            drawn_counters = [base - s.range_start for base in drawn]
            imported_counters = [base - s.range_start for base in imported]
        else:
            drawn_counters = _scatter_counters(url, s.key, drawn)
            imported_counters = _scatter_counters(url, s.key, imported)
        # the counter covers exactly the numbers drawn plus the imported ones it skipped:
        # in-order series gapless, scattered ones the permutation's first values
        skipped = [k for k in imported_counters if k < s.next_counter]
        assert sorted(drawn_counters + skipped) == list(range(s.next_counter)), (
            f"series {s.key}: the codes drawn do not fill counters 0..{s.next_counter - 1}"
        )

    actions: Counter[str] = Counter()
    logged_batches: Counter[int] = Counter()
    for e in _rows(connection, "SELECT id, action, code, batch_id, detail FROM log_entry ORDER BY id"):
        actions[e.action] += 1
        detail = json.loads(e.detail)
        if e.batch_id is not None:
            logged_batches[int(e.batch_id)] += 1
        if e.action in ("issue", "import"):
            issued = per_batch[int(e.batch_id)]
            assert detail["count"] == len(issued)
            digest = hashlib.sha256("".join(code + "\n" for code in issued).encode()).hexdigest()
            assert detail["codes_sha256"] == digest, f"log entry {e.id} does not match its batch"
            if len(issued) == 1:
                assert e.code == issued[0]
        elif e.action == "replace":
            assert per_batch[int(e.batch_id)] == [e.code]
            assert codes[detail["replaces"]][0] == "voided"
        elif e.action == "void":
            assert e.code in codes
    # every batch logged exactly once
    assert all(logged_batches[batch_id] == 1 for batch_id in batches), "a batch is not logged once"
    # every voided code has a logged void
    voided = {code for code, (status, _b, _base) in codes.items() if status == "voided"}
    void_logged = {
        r.code for r in _rows(connection, "SELECT code FROM log_entry WHERE action = 'void'")
    }
    assert voided <= void_logged
    # replacements point both ways
    for r in _rows(
        connection,
        "SELECT o.id, o.replaced_by_id, n.replaces_id FROM issued_code o "
        "JOIN issued_code n ON n.id = o.replaced_by_id",
    ):
        assert r.replaces_id == r.id
    return RegisterFacts(codes, batches, actions, series_next)


def _check_chain(url: str) -> None:
    from issuer.register.admin import open_existing
    from issuer.register.anchors import verify_log
    from issuer.register.doctor import run_doctor

    register = open_existing(url)
    try:
        report, _ = verify_log(register)
        assert report.intact, f"log chain broken: {report.problem}"
        doctor = run_doctor(register)
        assert doctor.healthy, [f for f in doctor.findings if f.status == "problem"]
    finally:
        register.close()
