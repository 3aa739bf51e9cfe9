"""Many desks, one register: aggregate issuance rate with 1, 2, 4 and 8 desks issuing at
once (separate processes, one durable transaction per code, all in the same in-order
series), on SQLite and on PostgreSQL, each as a ratio against a raw single-connection
insert loop (one durable transaction per row into one table with a unique index) on
the same backend in the same run.

Every code of an in-order series passes through one counter, so desks queue for it:
the curve shows how much of the single-desk rate survives the queue, not a speed-up.

Also, on PostgreSQL: one desk (issue_codes in this process) against the raw floor of the
same statements hand-written over one psycopg connection (target: at most 1.3x its time).

Run from the repository root: .venv/bin/python tests/benchmarks/bench_desks.py [codes]
Median of 5 rounds (BENCH_ROUNDS), desks and raw loop taking turns; BENCH_ONLY=one-desk
runs the one-desk comparison alone.
(PostgreSQL on 127.0.0.1:5432 as user postgres, or ISSUER_TEST_PG; skipped if down).
"""

from __future__ import annotations

import os
import sqlite3
import statistics
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.register.desks import DeskRoom
from tests.register.pg import database_url, server_problem, temporary_database

DESKS = (1, 2, 4, 8)
ROUNDS = int(os.environ.get("BENCH_ROUNDS", "5"))


def raw_sqlite(folder: Path, count: int) -> float:
    path = folder / "raw.sqlite"
    connection = sqlite3.connect(path, isolation_level=None)
    connection.execute("PRAGMA journal_mode=WAL")
    connection.execute("PRAGMA synchronous=FULL")
    connection.execute("CREATE TABLE IF NOT EXISTS issued (id INTEGER PRIMARY KEY, code TEXT NOT NULL)")
    connection.execute("CREATE UNIQUE INDEX IF NOT EXISTS ix_code ON issued(code)")
    start = time.perf_counter()
    for n in range(count):
        connection.execute("BEGIN IMMEDIATE")
        connection.execute("INSERT INTO issued (code) VALUES (?)", (f"R{time.time_ns()}-{n}",))
        connection.execute("COMMIT")
    elapsed = time.perf_counter() - start
    connection.close()
    return count / elapsed


def raw_postgres(database: str, count: int) -> float:
    import psycopg

    url = database_url(database).replace("postgresql+psycopg://", "postgresql://")
    with psycopg.connect(url, autocommit=True) as connection:
        connection.execute(
            "CREATE TABLE IF NOT EXISTS raw_issued (id bigserial PRIMARY KEY, code text NOT NULL UNIQUE)"
        )
        start = time.perf_counter()
        for n in range(count):
            # autocommit: each INSERT is its own durable transaction (synchronous_commit on)
            connection.execute("INSERT INTO raw_issued (code) VALUES (%s)", (f"R{time.time_ns()}-{n}",))
        return count / (time.perf_counter() - start)


def _floor_loop(url: str, key: str, count: int, pipelined: bool = False) -> float:
    """The raw floor of one issue on PostgreSQL: the statements the issuing path sends
    (claim, batch row, code row, the batch's id range, the log's append function, COMMIT),
    hand-written over one psycopg connection, one durable transaction per code."""
    import contextlib
    import json
    from datetime import UTC, datetime

    import psycopg

    plain = url.replace("postgresql+psycopg://", "postgresql://")
    with psycopg.connect(plain) as connection:
        start = time.perf_counter()
        for _ in range(count):
            series_id, counter = connection.execute(
                "UPDATE series SET next_counter = next_counter + 1, code_count = code_count + 1 "
                "WHERE key = %s RETURNING id, next_counter", (key,)
            ).fetchone()  # type: ignore[misc]
            at = datetime.now(UTC)
            batch = connection.execute(
                "INSERT INTO batch (series_id, kind, count, created_at, actor, code_id_from) VALUES "
                "(%s, 'issue', 1, %s, 'bench', (SELECT coalesce(max(id), 0) + 1 FROM issued_code)) RETURNING id",
                (series_id, at),
            ).fetchone()[0]  # type: ignore[index]
            code = f"F{counter:09d}"
            with connection.pipeline() if pipelined else contextlib.nullcontext():
                connection.execute(
                    "INSERT INTO issued_code (series_id, code, base, status, batch_id, print_count) "
                    "VALUES (%s, %s, %s, 'issued', %s, 0)", (series_id, code, counter, batch)
                )
                connection.execute(
                    "UPDATE batch SET code_id_to = (SELECT max(id) FROM issued_code) WHERE id = %s", (batch,)
                )
                entry = [{"action": "issue", "series": series_id, "code": code, "batch": batch, "detail": "{}"}]
                connection.execute("SELECT issuer_log_append(%s, %s, %s)", (at, "bench", json.dumps(entry)))
                connection.commit()
        return count / (time.perf_counter() - start)


def one_desk_vs_floor(database: str, count: int) -> None:
    """One desk issuing one durable code per transaction (in this process, through
    issue_codes) against the raw floor of the same statements, rounds interleaved."""
    from issuer.register.issuing import issue_codes
    from issuer.register.defining import SeriesSpec, add_series
    from issuer.register.store import open_register

    url = database_url(database)
    register = open_register(url, actor="bench")
    add_series(register, SeriesSpec(key="desk", scheme="luhn", length=7, prefix="QD"))
    add_series(register, SeriesSpec(key="floor", scheme="luhn", length=9, prefix="F"))
    ours, floor, piped = [], [], []
    for _ in range(ROUNDS):
        start = time.perf_counter()
        for _ in range(count):
            issue_codes(register, "desk", 1)
        ours.append(count / (time.perf_counter() - start))
        floor.append(_floor_loop(url, "floor", count))
        piped.append(_floor_loop(url, "floor", count, pipelined=True))
    register.close()
    mine, raw, raw_piped = statistics.median(ours), statistics.median(floor), statistics.median(piped)
    print(f"\nPostgreSQL, one desk: issuer {mine:.0f} codes/s; raw floor of the same statements {raw:.0f}/s, "
          f"issuer takes {raw / mine:.2f}x its time (target <= 1.3); the same floor with its last writes "
          f"and COMMIT pipelined as issuer sends them {raw_piped:.0f}/s, issuer takes {raw_piped / mine:.2f}x; "
          f"median of {ROUNDS} interleaved rounds of {count}; load average {os.getloadavg()[0]:.1f}")


def desks_rate(url: str, desks: int, count: int, key: str) -> float:
    from issuer.register.defining import SeriesSpec, add_series
    from issuer.register.store import open_register

    register = open_register(url, actor="bench")
    prefix = "Q" + "".join(chr(ord("A") + int(d)) for d in key[-3:])
    add_series(register, SeriesSpec(key=key, scheme="luhn", length=7, prefix=prefix))
    register.close()
    each = count // desks
    room = DeskRoom([
        {"mode": "issue", "db": url, "series": key, "count": each, "seed": n} for n in range(desks)
    ])
    try:
        room.ready()
        start = time.perf_counter()
        room.go()
        reports, exits = room.finish(3600)
        elapsed = time.perf_counter() - start
    finally:
        room.close()
    assert all(record["status"] == 0 for record in exits.values()), room.stderr[-2000:]
    assert sum(len(r) for r in reports.values()) == each * desks
    return each * desks / elapsed


def curve(backend: str, url: str, raw: Callable[[int], float], count: int) -> None:
    """Desks and the raw loop take turns, round after round, so that both see the same
    disk; the median of the rounds is reported (the disk's fsync time drifts)."""
    print(f"\n{backend}: {count} codes per measurement, median of {ROUNDS} rounds; "
          f"load average {os.getloadavg()[0]:.1f}")
    print(f"{'desks':>6} {'codes/s':>9} {'raw codes/s':>12} {'ratio':>7} {'vs 1 desk':>10}"
          f"  {'desk rounds':>24}")
    single = None
    serial = 0
    for desks in DESKS:
        rates, raws = [], []
        for _ in range(ROUNDS):
            serial += 1
            raws.append(raw(count))
            rates.append(desks_rate(url, desks, count, f"s{serial:03d}"))
        rate, baseline = statistics.median(rates), statistics.median(raws)
        single = single or rate
        spread = " ".join(f"{r:.0f}" for r in rates)
        print(f"{desks:>6} {rate:>9.1f} {baseline:>12.1f} {rate / baseline:>7.2f} "
              f"{rate / single:>10.2f}  {spread:>24}")


def main() -> None:
    count = int(sys.argv[1]) if len(sys.argv) > 1 else 300
    if os.environ.get("BENCH_ONLY") == "one-desk":
        with temporary_database("bench") as database:
            one_desk_vs_floor(database, count)
        return
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder)
        curve("SQLite (WAL, synchronous=FULL)", str(path / "desks.sqlite"),
              lambda n: raw_sqlite(path, n), count)  # fmt: skip
    problem = server_problem()
    if problem is not None:
        print(f"\nPostgreSQL skipped: {problem}")
        return
    with temporary_database("bench") as database:
        one_desk_vs_floor(database, count)
        if os.environ.get("BENCH_ONLY") == "one-desk":
            return
        curve("PostgreSQL (synchronous_commit on)", database_url(database),
              lambda n: raw_postgres(database, n), count)  # fmt: skip


if __name__ == "__main__":
    main()
