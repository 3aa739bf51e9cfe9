"""Many desks through one HTTP server: 32 concurrent clients each issuing (with an
Idempotency-Key), checking and now and then voiding, on SQLite and on PostgreSQL.

The server runs in a process of its own (uvicorn over the register, as ``issuer serve``
runs it); the 32 clients run here, so they do not share the server's interpreter lock.
Reports p50/p99 latency of check and issue, each beside a bare ASGI endpoint that returns
a constant on the same server in the same run (the floor any request costs here), and
verifies the run: no duplicate, no gap, no 5xx, retries return the same codes.

Run from the repository root:
.venv/bin/python tests/benchmarks/bench_service.py [issues-per-client [sqlite|postgresql ...]]
(PostgreSQL on 127.0.0.1:5432 as user postgres, or ISSUER_TEST_PG; skipped if down).
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
from pathlib import Path

import httpx

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.register.pg import database_url, server_problem, temporary_database
from tests.service.conftest import build_service
from tests.service.load import percentile, run_load
from tests.service.served import served

CLIENTS = 32


def measure(url: str, issues: int) -> None:
    from issuer.register.store import open_register

    register = open_register(url, actor="bench")
    _, tokens = build_service(register)  # the series and a token per role, made beforehand
    register.close()
    with served(url) as base:
        for token in tokens.values():  # each token's slow hash once, before the clock runs
            httpx.get(f"{base}/api/v1/series", headers={"Authorization": f"Bearer {token}"}, timeout=120)
        loaded = os.getloadavg()[0]
        began = time.perf_counter()
        result = run_load(base, tokens["clerk"], tokens["admin"], clients=CLIENTS, issues=issues)
        wall = time.perf_counter() - began
    codes = [code for codes in result.issued.values() for code in codes]
    assert len(set(codes)) == len(codes) == CLIENTS * issues, "duplicate or lost code"
    assert all(result.retried[key] == result.issued[key] for key in result.retried)
    assert result.server_errors == 0
    bare50, bare99 = (percentile(result.latency["bare"], q) * 1000 for q in (0.5, 0.99))
    print(f"  {len(codes):,} issues by {CLIENTS} clients in {wall:.1f} s "
          f"({len(codes) / wall:.0f} issues/s), 0 duplicates, 0 5xx; "
          f"machine load (1-min average) {loaded:.1f} before, {os.getloadavg()[0]:.1f} after")
    for op in ("check", "issue", "void"):
        values = result.latency[op]
        if not values:
            continue
        p50, p99 = percentile(values, 0.5) * 1000, percentile(values, 0.99) * 1000
        print(f"  {op:6} p50 {p50:7.1f} ms ({p50 / bare50:5.1f}x bare)   p99 {p99:7.1f} ms ({p99 / bare99:5.1f}x bare)")
    print(f"  bare   p50 {bare50:7.1f} ms              p99 {bare99:7.1f} ms")


def main() -> None:
    issues = int(sys.argv[1]) if len(sys.argv) > 1 else 200
    backends = sys.argv[2:] or ["sqlite", "postgresql"]
    if "sqlite" in backends:
        with tempfile.TemporaryDirectory() as folder:
            print("SQLite")
            measure(str(Path(folder) / "register.sqlite"), issues)
    if "postgresql" not in backends:
        return
    problem = server_problem()
    if problem:
        print(f"PostgreSQL skipped: {problem}")
        return
    with temporary_database("bench_service") as name:
        print("PostgreSQL")
        measure(database_url(name), issues)


if __name__ == "__main__":
    main()
