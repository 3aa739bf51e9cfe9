"""Desks on their own series, PostgreSQL: eight desks each issuing in its own in-order
series against one desk alone, for two builds of issuer side by side in the same run
(by default the build installed here, and another given with --before PYTHON: a Python
whose ``issuer`` is an older build, e.g. one with a single register-wide log chain).

Every measurement gets a fresh database made by that build's own migrations; each desk is
a separate process issuing one durable code per transaction (synchronous_commit on).
Rounds interleave builds and desk counts so both builds see the same disk; medians.
"lock waits": of the eight desks' active database sessions, sampled every 5 ms, the share
waiting for a lock (pg_stat_activity.wait_event_type = 'Lock'): the queue itself, which a
busy machine's CPU shortage does not hide.

Run from the repository root:
  .venv/bin/python tests/benchmarks/bench_series_desks.py [--before PYTHON] [--after PYTHON] [codes per desk]
(PostgreSQL on 127.0.0.1:5432 as user postgres, or ISSUER_TEST_PG; skipped if down).
"""

from __future__ import annotations

import json
import os
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.register.pg import database_url, server_problem, temporary_database

ROUNDS = int(os.environ.get("BENCH_ROUNDS", "5"))
DESKS = (1, 8)

SETUP = """
import sys
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.store import open_register
register = open_register(sys.argv[1], actor="bench")
for n in range(int(sys.argv[2])):
    add_series(register, SeriesSpec(key=f"s{n}", scheme="luhn", length=7, prefix="Q" + chr(ord("A") + n)))
register.close()
"""

DESK = """
import json, sys, time
from issuer.register.issuing import issue_codes
from issuer.register.store import open_register
url, key, count = sys.argv[1], sys.argv[2], int(sys.argv[3])
register = open_register(url, actor="desk-" + key)
issue_codes(register, key, 1)  # connected and warm
print("ready", flush=True)
sys.stdin.readline()
start = time.time()
for _ in range(count):
    issue_codes(register, key, 1)
print(json.dumps({"start": start, "end": time.time()}), flush=True)
register.close()
"""


class LockSampler:
    """Samples pg_stat_activity every few milliseconds: how many of the desks' sessions are
    active, and how many of those wait for a row or transaction lock (wait_event_type Lock)."""

    def __init__(self, database: str) -> None:
        import threading

        self.url = database_url(database).replace("postgresql+psycopg://", "postgresql://")
        self.active = self.waiting = 0
        self.stop = threading.Event()
        self.thread = threading.Thread(target=self._run, daemon=True)
        self.thread.start()

    def _run(self) -> None:
        import psycopg

        with psycopg.connect(self.url, autocommit=True) as connection:
            while not self.stop.is_set():
                active, waiting = connection.execute(
                    "SELECT count(*) FILTER (WHERE state = 'active'), "
                    "count(*) FILTER (WHERE state = 'active' AND wait_event_type = 'Lock') "
                    "FROM pg_stat_activity WHERE datname = current_database() AND pid <> pg_backend_pid()"
                ).fetchone()
                self.active += active
                self.waiting += waiting
                self.stop.wait(0.005)

    def share(self) -> float:
        self.stop.set()
        self.thread.join()
        return self.waiting / self.active if self.active else 0.0


WAITS: dict[str, list[float]] = {}


def measure(python: str, desks: int, per_desk: int, folder: Path, name: str = "") -> float:
    """Aggregate codes per second of ``desks`` desks, each in its own series."""
    with temporary_database("series_desks") as database:
        url = database_url(database)
        subprocess.run([python, "-c", SETUP, url, str(desks)], check=True, cwd=folder)
        procs = [
            subprocess.Popen([python, "-c", DESK, url, f"s{n}", str(per_desk)], cwd=folder,
                             stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
            for n in range(desks)
        ]  # fmt: skip
        for proc in procs:
            assert proc.stdout is not None and proc.stdout.readline().strip() == "ready"
        sampler = LockSampler(database) if desks > 1 else None
        for proc in procs:
            assert proc.stdin is not None
            proc.stdin.write("go\n")
            proc.stdin.flush()
        times = []
        for proc in procs:
            assert proc.stdout is not None
            times.append(json.loads(proc.stdout.readline()))
            proc.wait(timeout=600)
        if sampler is not None:
            WAITS.setdefault(name, []).append(sampler.share())
        return desks * per_desk / (max(t["end"] for t in times) - min(t["start"] for t in times))


def main() -> None:
    args = sys.argv[1:]
    builds = {"this build": sys.executable}
    if "--after" in args:  # another Python for "this build" (e.g. the exact commit measured)
        at = args.index("--after")
        builds = {"this build": args[at + 1]}
        del args[at : at + 2]
    if "--before" in args:
        at = args.index("--before")
        builds = {"before": args[at + 1], **builds}
        del args[at : at + 2]
    per_desk = int(args[0]) if args else 150
    problem = server_problem()
    if problem is not None:
        print(f"PostgreSQL skipped: {problem}")
        return
    rates: dict[tuple[str, int], list[float]] = {(b, d): [] for b in builds for d in DESKS}
    loads = []
    with tempfile.TemporaryDirectory() as folder:  # the desks run outside the source tree
        for _ in range(ROUNDS):
            for name, python in builds.items():
                for desks in DESKS:
                    loads.append(os.getloadavg()[0])
                    rates[(name, desks)].append(measure(python, desks, per_desk, Path(folder), name))
    print(f"PostgreSQL, desks each in their own in-order series, {per_desk} codes per desk, "
          f"median of {ROUNDS} interleaved rounds; load average {min(loads):.1f}-{max(loads):.1f}")
    print(f"{'build':>12} {'1 desk/s':>9} {'8 desks/s':>10} {'8 vs 1':>7} {'lock waits':>10}   "
          "rounds (1 desk | 8 desks)")
    medians = {}
    for name in builds:
        one, eight = statistics.median(rates[(name, 1)]), statistics.median(rates[(name, 8)])
        medians[name] = (one, eight)
        waits = statistics.median(WAITS.get(name, [0.0]))
        print(f"{name:>12} {one:>9.1f} {eight:>10.1f} {eight / one:>7.2f} {waits:>10.0%}   "
              f"{' '.join(f'{r:.0f}' for r in rates[(name, 1)])} | {' '.join(f'{r:.0f}' for r in rates[(name, 8)])}")
    if len(builds) == 2:
        (b1, e1), (b2, e2) = medians["before"], medians["this build"]
        print(f"this build / before: one desk {b2 / b1:.2f}x, eight desks {e2 / e1:.2f}x")


if __name__ == "__main__":
    main()
