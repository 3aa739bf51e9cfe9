"""``find`` on a register of a million codes, each with a holder: issuer's indexed
prefix search (``find_holders``) against the same question asked without the index
(``lower(holder) LIKE 'text%'``, a full scan: what a register without search keys
would do), side by side on the same database. Target: every find under 50 ms.

Holders are invented (Quillmere members: a first name, a surname and a member number).
Run: .venv/bin/python tests/benchmarks/bench_find.py [--count N] [--postgres]
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path
from typing import Any

from sqlalchemy import text

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.holders import find_holders
from issuer.register.issuing import issue_codes
from issuer.register.store import open_register

ROUNDS = 5
#: the baseline: the same question without the index (a full scan and a sort)
SCAN = text("SELECT id FROM issued_code WHERE lower(holder) LIKE :p ORDER BY holder LIMIT 50")
FIRST = ("Wren", "Ottoline", "Isolde", "Tamsin", "Ambrose", "Perpetua", "Lowen", "Cato", "Fenna", "Jory")
LAST = ("Halloway", "Bracken", "Marrow", "Ord", "Quillfeather", "Dunmore", "Saltash", "Penhallow", "Treve", "Ashgrove")
#: (query, what it stands for): one member exactly, a name shared by many, a rare prefix
QUERIES = (("wren halloway 0004700", "one member"), ("isolde m", "a common name"), ("perpetua dunmore 09", "a range"))


def build(database: str, count: int) -> Any:
    register = open_register(database, actor="bench")
    add_series(register, SeriesSpec(key="members", scheme="luhn", length=9, prefix="QM"))
    started = time.perf_counter()
    issue_codes(register, "members", count, collect=False)
    names = [(f, s) for f in FIRST for s in LAST]
    cases = " ".join(f"WHEN {i} THEN '{f} {s}'" for i, (f, s) in enumerate(names))
    pad = "printf('%07d', id)" if register.backend == "sqlite" else "lpad(id::text, 7, '0')"
    holder = f"(CASE (id % {len(names)}) {cases} END) || ' ' || {pad}"
    with register.engine.begin() as connection:
        connection.execute(text(f"UPDATE issued_code SET holder = {holder}"))
        connection.execute(text("UPDATE issued_code SET holder_key = lower(holder)"))  # ASCII: lower = fold
        if register.backend == "postgresql":
            connection.execute(text("ANALYZE issued_code"))
    print(f"  built {count:,} codes with holders in {time.perf_counter() - started:.0f} s")
    return register


def timed(action: Any) -> float:
    best = []
    for _ in range(ROUNDS):
        start = time.perf_counter()
        action()
        best.append(time.perf_counter() - start)
    return statistics.median(best)


def run(database: str, count: int) -> None:
    register = build(database, count)
    try:
        for query, meaning in QUERIES:
            with register.reading() as session:
                found = find_holders(session, query)
                ours = timed(lambda: find_holders(session, query))  # noqa: B023 (called at once)
                theirs = timed(lambda: session.execute(SCAN, {"p": query + "%"}).all())  # noqa: B023
                assert len(session.execute(SCAN, {"p": query + "%"}).all()) == len(found)
            verdict = "ok" if ours < 0.050 else "OVER the 50 ms target"
            print(f"  find {query!r} ({meaning}, {len(found)} codes): {ours * 1000:.2f} ms ({verdict}); "
                  f"unindexed scan {theirs * 1000:.0f} ms; scan/find = {theirs / ours:,.0f}x")  # fmt: skip
    finally:
        register.close()


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--count", type=int, default=1_000_000)
    parser.add_argument("--postgres", help="also on PostgreSQL: an empty database URL to fill")
    options = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        print(f"SQLite, {options.count:,} codes")
        run(str(Path(folder) / "find.sqlite"), options.count)
    if options.postgres:
        print(f"PostgreSQL, {options.count:,} codes")
        run(options.postgres, options.count)


if __name__ == "__main__":
    main()
