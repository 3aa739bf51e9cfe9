"""Desks on their own series, PostgreSQL: eight desks each issuing in its own in-order
series against one desk alone, for two builds of issuer side by side in the same run
(by default the build installed here, and another given with --before PYTHON: a Python
whose ``issuer`` is an older build, e.g. one with a single register-wide log chain).

Every measurement gets a fresh database made by that build's own migrations; each desk is
a separate process issuing one durable code per transaction (synchronous_commit on).
Beside them, the raw floor of the machine: a raw insert loop (one psycopg connection per
process, autocommit, one durable one-row INSERT per transaction into one table with a
unique index) with one connection and with eight, in separate processes like the desks.
Its eight-vs-one ratio is the scaling the machine itself allows (2 cores, server and
clients sharing them): the desks cannot scale further than it does.
Rounds interleave builds, desk counts and the raw loops so all see the same disk; medians.
Each process also reports its CPU time and its server process's (from /proc): CPU per code
against the cores gives the most any number of desks could reach, whatever the disk does.
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

#: CPU seconds of a process (user + system) from /proc: the desk reads its server's too
PROCESS_CPU = """
import os
def process_cpu(pid):
    fields = open(f"/proc/{pid}/stat").read().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")
"""

DESK = PROCESS_CPU + """
import json, sys, time
from sqlalchemy import text
from issuer.register.issuing import issue_codes
from issuer.register.store import open_register
url, key, count = sys.argv[1], sys.argv[2], int(sys.argv[3])
register = open_register(url, actor="desk-" + key)
issue_codes(register, key, 1)  # connected and warm
with register.engine.connect() as connection:  # the pool's one connection: the desk's server process
    server = connection.execute(text("SELECT pg_backend_pid()")).scalar()
print("ready", flush=True)
sys.stdin.readline()
start, client, served = time.time(), time.process_time(), process_cpu(server)
for _ in range(count):
    issue_codes(register, key, 1)
print(json.dumps({"start": start, "end": time.time(), "client": time.process_time() - client,
                  "server": process_cpu(server) - served}), flush=True)
register.close()
"""

RAW_SETUP = """
import sys
import psycopg
with psycopg.connect(sys.argv[1], autocommit=True) as connection:
    connection.execute("CREATE TABLE raw_issued (id bigserial PRIMARY KEY, code text NOT NULL UNIQUE)")
"""

RAW = PROCESS_CPU + """
import json, sys, time
import psycopg
url, name, count = sys.argv[1], sys.argv[2], int(sys.argv[3])
with psycopg.connect(url, autocommit=True) as connection:
    connection.execute("INSERT INTO raw_issued (code) VALUES (%s)", (name + "-warm",))  # connected and warm
    server = connection.execute("SELECT pg_backend_pid()").fetchone()[0]
    print("ready", flush=True)
    sys.stdin.readline()
    start, client, served = time.time(), time.process_time(), process_cpu(server)
    for n in range(count):
        # autocommit: each INSERT is its own durable transaction (synchronous_commit on)
        connection.execute("INSERT INTO raw_issued (code) VALUES (%s)", (f"{name}-{n}",))
    print(json.dumps({"start": start, "end": time.time(), "client": time.process_time() - client,
                      "server": process_cpu(server) - served}), flush=True)
"""

#: the name the raw loop's rates are kept under
RAW_LOOP = "raw loop"
#: a raw connection writes this many rows per code a desk issues (it is that much faster:
#: a short run would measure the processes' start more than the loop)
RAW_ROWS_PER_CODE = 10


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
#: CPU seconds (client, server) and rows of each measurement
CPU: dict[tuple[str, int], list[tuple[float, float, int]]] = {}


def measure(python: str, desks: int, per_desk: int, folder: Path, name: str = "") -> float:
    """Aggregate codes per second of ``desks`` desks, each in its own series (or, for
    :data:`RAW_LOOP`, rows per second of ``desks`` raw insert loops)."""
    with temporary_database("series_desks") as database:
        url = database_url(database)
        setup, script = SETUP, DESK
        if name == RAW_LOOP:
            url = url.replace("postgresql+psycopg://", "postgresql://")
            setup, script, per_desk = RAW_SETUP, RAW, per_desk * RAW_ROWS_PER_CODE
        subprocess.run([python, "-c", setup, url, str(desks)], check=True, cwd=folder)
        procs = [
            subprocess.Popen([python, "-c", script, url, f"s{n}", str(per_desk)], cwd=folder,
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
        rows = desks * per_desk
        CPU.setdefault((name, desks), []).append(
            (sum(t["client"] for t in times), sum(t["server"] for t in times), rows)
        )
        return rows / (max(t["end"] for t in times) - min(t["start"] for t in times))


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
    runs = {RAW_LOOP: sys.executable, **builds}  # the raw loop needs only psycopg
    rates: dict[tuple[str, int], list[float]] = {(b, d): [] for b in runs for d in DESKS}
    loads = []
    with tempfile.TemporaryDirectory() as folder:  # the desks run outside the source tree
        for _ in range(ROUNDS):
            for name, python in runs.items():
                for desks in DESKS:
                    loads.append(os.getloadavg()[0])
                    rates[(name, desks)].append(measure(python, desks, per_desk, Path(folder), name))
    print(f"PostgreSQL, desks each in their own in-order series, {per_desk} codes per desk, "
          f"median of {ROUNDS} interleaved rounds; load average {min(loads):.1f}-{max(loads):.1f}")
    print(f"{'build':>12} {'1 desk/s':>9} {'8 desks/s':>10} {'8 vs 1':>7} {'1 vs raw 1':>10} "
          f"{'8 vs raw 8':>10} {'lock waits':>10}   rounds (1 desk | 8 desks)")
    raw_one, raw_eight = (statistics.median(rates[(RAW_LOOP, d)]) for d in DESKS)
    medians = {}
    for name in runs:
        one, eight = statistics.median(rates[(name, 1)]), statistics.median(rates[(name, 8)])
        medians[name] = (one, eight)
        waits = "" if name == RAW_LOOP else f"{statistics.median(WAITS.get(name, [0.0])):.0%}"
        print(f"{name:>12} {one:>9.1f} {eight:>10.1f} {eight / one:>7.2f} {one / raw_one:>10.2f} "
              f"{eight / raw_eight:>10.2f} {waits:>10}   {' '.join(f'{r:.0f}' for r in rates[(name, 1)])} | "
              f"{' '.join(f'{r:.0f}' for r in rates[(name, 8)])}")
    print(f"targets: 8 desks >= 4x one desk, and >= 0.3 of the raw 8-connection loop; the raw loop "
          f"itself scales {raw_eight / raw_one:.2f}x from 1 to 8 connections on this machine "
          f"({os.cpu_count()} cores), the ceiling for the desks' 8 vs 1")
    # CPU per row (the disk's moods do not move it): what the cores allow at most; over all
    # rounds, as /proc counts in clock ticks (10 ms: 150 codes alone would be +-67 us a code)
    cores = os.cpu_count() or 1
    print(f"CPU per code, one desk (client + its server process), all rounds; the {cores} cores' "
          f"ceiling for any number of desks = {cores} / CPU per code:")
    for name in runs:
        rows = sum(n for _, _, n in CPU[(name, 1)])
        client = sum(c for c, _, _ in CPU[(name, 1)]) / rows
        server = sum(s for _, s, _ in CPU[(name, 1)]) / rows
        ceiling = cores / (client + server)
        print(f"{name:>12} {client * 1e6:5.0f} us + {server * 1e6:4.0f} us = {(client + server) * 1e6:5.0f} us; "
              f"ceiling {ceiling:,.0f}/s = {ceiling / medians[name][0]:.1f}x its one-desk rate")
    if len(builds) == 2:
        (b1, e1), (b2, e2) = medians["before"], medians["this build"]
        print(f"this build / before: one desk {b2 / b1:.2f}x, eight desks {e2 / e1:.2f}x")


if __name__ == "__main__":
    main()
