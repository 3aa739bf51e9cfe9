"""Bulk speed, as ratios against baselines run side by side in one run.

1. N in-order codes issued into SQLite (``issue_codes(..., collect=False)``, the whole
   batch in one transaction) vs a raw sqlite3 ``executemany`` of the same rows into one
   table with a unique index, in one transaction, with the same WAL and
   synchronous=FULL settings. Target: issuer within 1.5x.
2. N scattered codes (FF1 with cycle walking) vs the in-order figure. Target: 1.5x.
3. Reconcile of N scans against N issued codes (``reconcile()``, check characters
   verified, every category worked out) vs a raw sqlite3 script that loads the scans
   into a temporary table and joins it with the codes. Target: time within 1.2x; peak
   RSS (each side in its own process, read_scans + reconcile vs the raw script) within
   1.5x.
5. A stock count of the same N scans in ten files: open, add the ten files, close
   (``finish_count``). Target: the close within 2x the single-file reconcile time of
   the same run; the adding is reported beside it.
4. Export of N codes to CSV (``export_codes``) vs a raw sqlite3 + csv module script.
   Target: within 2x. Peak RSS of the export at N/10 and N, each in its own process:
   it must stay flat.

Rounds alternate issuer and baseline so that both see the same machine load; the
figure of each side is its best round.

6. N in-order codes (as 1.) vs raw sqlite3 ``executemany`` of the codes alone into a
   one-column table with a unique index: what a register row costs over the bare
   minimum. Target: within 2.5x. Medians of at least 3 interleaved rounds. Beside it, a
   second baseline: raw sqlite3 with both of issued_code's unique indexes (code; series
   and number), the floor of what never-twice needs.

Run: .venv/bin/python tests/benchmarks/bench_bulk.py [N] [ROUNDS] [issue,reconcile,export,one-column]
(default 1,000,000, 2 rounds, the first three; one-column runs only when named)

The codes are invented Quillmere tool tags (QTL...) and member cards (QM...).
"""

from __future__ import annotations

import csv
import os
import random
import sqlite3
import subprocess
import sys
import tempfile
import textwrap
import time
from collections.abc import Callable
from pathlib import Path

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.store import open_register

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=9, prefix="QTL", group=(4, 4, 2))
MEMBERS = SeriesSpec(key="members", scheme="luhn", length=9, prefix="QM", group=(5, 5), mode="scattered")

RAW_COLUMNS = "series_id, code, base, status, batch_id, holder, note, replaces_id, print_count"


def fresh(folder: Path, name: str) -> Path:
    path = folder / name
    for suffix in ("", "-wal", "-shm"):
        Path(f"{path}{suffix}").unlink(missing_ok=True)
    return path


def timed(work: Callable[[], object]) -> float:
    start = time.perf_counter()
    work()
    return time.perf_counter() - start


# --- 1 and 2: issuance -------------------------------------------------------------------


def issue_round(folder: Path, spec: SeriesSpec, count: int) -> tuple[float, list[str]]:
    register = open_register(str(fresh(folder, f"{spec.key}.sqlite")), actor="bench")
    add_series(register, spec)
    sample: list[str] = []

    def work() -> None:
        result = issue_codes(register, spec.key, count, collect=False)
        assert result.count == count and result.first is not None and result.last is not None
        sample.extend([result.first.code, result.last.code])

    seconds = timed(work)
    with register.engine.connect() as connection:
        stored = connection.exec_driver_sql("SELECT count(*) FROM issued_code").scalar_one()
    assert stored == count, stored
    register.close()
    return seconds, sample


def raw_rows(folder: Path, count: int) -> list[tuple[object, ...]]:
    """The rows issuer writes for an in-order batch, read back from its register."""
    connection = sqlite3.connect(folder / "tools.sqlite")
    rows = connection.execute(f"SELECT {RAW_COLUMNS} FROM issued_code ORDER BY id").fetchall()
    connection.close()
    assert len(rows) == count
    return rows


def raw_issue_round(folder: Path, rows: list[tuple[object, ...]]) -> float:
    connection = sqlite3.connect(fresh(folder, "raw-issue.sqlite"), isolation_level=None)
    connection.execute("PRAGMA journal_mode = WAL")
    connection.execute("PRAGMA synchronous = FULL")
    connection.execute(
        "CREATE TABLE issued_code (id INTEGER PRIMARY KEY, series_id INTEGER NOT NULL, "
        "code VARCHAR(100) NOT NULL, base BIGINT NOT NULL, status VARCHAR(16) NOT NULL, "
        "batch_id INTEGER NOT NULL, holder VARCHAR(200), note TEXT, origin_at DATETIME, "
        "origin_by VARCHAR(120), void_reason TEXT, voided_at DATETIME, voided_by VARCHAR(120), "
        "replaces_id INTEGER, replaced_by_id INTEGER, print_count INTEGER NOT NULL, "
        "last_seen_at DATETIME, last_seen_where VARCHAR(200))"
    )
    connection.execute("CREATE UNIQUE INDEX ix_code ON issued_code (code)")

    def work() -> None:
        connection.execute("BEGIN IMMEDIATE")
        connection.executemany(
            f"INSERT INTO issued_code ({RAW_COLUMNS}) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)", rows
        )
        connection.execute("COMMIT")

    seconds = timed(work)
    connection.close()
    return seconds


def raw_one_column_round(folder: Path, codes: list[str]) -> float:
    """The floor of any register: the codes alone into a one-column table with a unique
    index, one ``executemany`` in one durable transaction (WAL, synchronous=FULL)."""
    connection = sqlite3.connect(fresh(folder, "raw-one-column.sqlite"), isolation_level=None)
    connection.execute("PRAGMA journal_mode = WAL")
    connection.execute("PRAGMA synchronous = FULL")
    connection.execute("CREATE TABLE issued (code TEXT NOT NULL UNIQUE)")

    def work() -> None:
        connection.execute("BEGIN IMMEDIATE")
        connection.executemany("INSERT INTO issued (code) VALUES (?)", ((code,) for code in codes))
        connection.execute("COMMIT")

    seconds = timed(work)
    connection.close()
    return seconds


def raw_two_unique_round(folder: Path, codes: list[str], bases: list[int]) -> float:
    """The floor of the register's promises: the same codes with their series and number
    into a table with both of issued_code's unique indexes (code; series and number), one
    ``executemany`` in one durable transaction (WAL, synchronous=FULL)."""
    connection = sqlite3.connect(fresh(folder, "raw-two-unique.sqlite"), isolation_level=None)
    connection.execute("PRAGMA journal_mode = WAL")
    connection.execute("PRAGMA synchronous = FULL")
    connection.execute(
        "CREATE TABLE issued (id INTEGER PRIMARY KEY, series_id INTEGER NOT NULL, code TEXT NOT NULL UNIQUE, "
        "base BIGINT NOT NULL, UNIQUE (series_id, base))"
    )

    def work() -> None:
        connection.execute("BEGIN IMMEDIATE")
        connection.executemany(
            "INSERT INTO issued (series_id, code, base) VALUES (1, ?, ?)", zip(codes, bases, strict=True)
        )
        connection.execute("COMMIT")

    seconds = timed(work)
    connection.close()
    return seconds


def bench_one_column(folder: Path, count: int, rounds: int) -> None:
    """N in-order codes through issue_codes vs the one-column unique table, and vs a table
    with the same two unique indexes as issued_code; rounds interleaved, medians reported."""
    import statistics

    ours, raw, two = [], [], []
    codes: list[str] = []
    bases: list[int] = []
    for _ in range(rounds):
        ours.append(issue_round(folder, TOOLS, count)[0])
        if not codes:
            connection = sqlite3.connect(folder / "tools.sqlite")
            for code, base in connection.execute("SELECT code, base FROM issued_code ORDER BY id"):
                codes.append(code)
                bases.append(base)
            connection.close()
        raw.append(raw_one_column_round(folder, codes))
        two.append(raw_two_unique_round(folder, codes, bases))
    mine, floor, both = statistics.median(ours), statistics.median(raw), statistics.median(two)
    print(f"issue {count:,} in order vs raw sqlite3 into a one-column unique table (median of {rounds} "
          f"interleaved rounds, load {os.getloadavg()[0]:.1f}): issuer {mine:.2f} s, raw {floor:.2f} s, "
          f"ratio {mine / floor:.2f} (target <= 2.5); rounds {' '.join(f'{t:.2f}' for t in ours)} / "
          f"{' '.join(f'{t:.2f}' for t in raw)}")
    print(f"  second baseline, raw sqlite3 with both unique indexes (code; series and number): {both:.2f} s "
          f"(ratio to one column {both / floor:.2f}); issuer against it {mine / both:.2f}; rounds "
          f"{' '.join(f'{t:.2f}' for t in two)}")


def bench_issue(folder: Path, count: int, rounds: int) -> dict[str, float]:
    ours, scattered, raw = [], [], []
    rows: list[tuple[object, ...]] | None = None
    for _ in range(rounds):
        seconds, _ = issue_round(folder, TOOLS, count)
        ours.append(seconds)
        if rows is None:
            rows = raw_rows(folder, count)
        raw.append(raw_issue_round(folder, rows))
        scattered.append(issue_round(folder, MEMBERS, count)[0])
    best = {"in_order": min(ours), "raw": min(raw), "scattered": min(scattered)}
    print(f"issue {count:,} in order: issuer {best['in_order']:.2f} s, raw executemany {best['raw']:.2f} s, "
          f"ratio {best['in_order'] / best['raw']:.2f} (target <= 1.5)")
    print(f"issue {count:,} scattered: {best['scattered']:.2f} s, "
          f"ratio to in order {best['scattered'] / best['in_order']:.2f} (target <= 1.5)")
    return best


# --- 3: reconcile ----------------------------------------------------------------------------


def scan_file(folder: Path, count: int) -> tuple[Path, int]:
    """A stocktake of the tools register: 99 % of the tags once, 0.1 % twice, 0.1 % with a
    mistyped check digit, a few unreadable lines; codes as the scanner reads them."""
    connection = sqlite3.connect(folder / "tools.sqlite")
    codes = [row[0] for row in connection.execute("SELECT code FROM issued_code ORDER BY id")]
    connection.close()
    rng = random.Random(2026)
    scans = codes[: count * 99 // 100]
    scans += rng.sample(scans, count // 1000)  # duplicates
    typos = rng.sample(codes[count * 99 // 100:], count // 1000)
    scans += [code[:-1] + str((int(code[-1]) + 1) % 10) for code in typos]
    scans += ["QTL-??", "QTL12345"] * (count // 20_000 + 1)
    rng.shuffle(scans)
    path = folder / "stocktake.txt"
    path.write_text("\n".join(scans) + "\n")
    return path, len(scans)


def reconcile_round(folder: Path, path: Path) -> tuple[float, dict[str, int]]:
    from issuer.stocktake.reconcile import read_scans, reconcile

    register = open_register(str(folder / "tools.sqlite"), actor="bench")
    found: dict[str, int] = {}

    def work() -> None:
        found.update(reconcile(register, "tools", read_scans(path)).counts)

    seconds = timed(work)
    register.close()
    return seconds, found


def raw_reconcile_round(folder: Path, path: Path) -> tuple[float, int]:
    """What someone would write by hand: scans into a temporary table, joined."""
    connection = sqlite3.connect(folder / "tools.sqlite", isolation_level=None)
    answers = 0

    def work() -> None:
        nonlocal answers
        with path.open(encoding="utf-8") as stream:
            lines = [(number, text.strip()) for number, text in enumerate(stream, start=1) if text.strip()]
        connection.execute("CREATE TEMP TABLE scan (line INTEGER, code TEXT)")
        connection.executemany("INSERT INTO scan VALUES (?, ?)", lines)
        connection.execute("CREATE INDEX temp.ix_scan_code ON scan (code)")
        found = connection.execute(
            "SELECT s.line, s.code, i.status FROM scan s LEFT JOIN issued_code i ON i.code = s.code"
        ).fetchall()
        repeated = connection.execute("SELECT code, count(*) FROM scan GROUP BY code HAVING count(*) > 1").fetchall()
        missing = connection.execute(
            "SELECT code FROM issued_code i WHERE series_id = 1 AND status = 'issued' "
            "AND NOT EXISTS (SELECT 1 FROM scan s WHERE s.code = i.code) ORDER BY code"
        ).fetchall()
        answers = len(found) + len(repeated) + len(missing)
        connection.execute("DROP TABLE scan")

    seconds = timed(work)
    connection.close()
    return seconds, answers


def bench_reconcile(folder: Path, count: int, rounds: int) -> None:
    path, scans = scan_file(folder, count)
    ours, raw = [], []
    counts: dict[str, int] = {}
    for _ in range(rounds):
        seconds, counts = reconcile_round(folder, path)
        ours.append(seconds)
        raw.append(raw_reconcile_round(folder, path)[0])
    print(f"reconcile {scans:,} scans against {count:,} codes: issuer {min(ours):.2f} s, raw temp table + join "
          f"{min(raw):.2f} s, ratio {min(ours) / min(raw):.2f} (target <= 1.2)")
    print(f"  counts {counts}")
    ours_peak, raw_peak = reconcile_peak_kib(folder, path, "ours"), reconcile_peak_kib(folder, path, "raw")
    print(f"reconcile peak RSS: issuer {ours_peak / 1024:.0f} MiB, raw temp table + join {raw_peak / 1024:.0f} MiB, "
          f"ratio {ours_peak / raw_peak:.2f} (target <= 1.5)")
    bench_count(folder, path, min(ours), rounds)


RECONCILE_PEAK_SCRIPT = textwrap.dedent("""
    import sys
    from pathlib import Path
    sys.path.insert(0, sys.argv[4])
    import bench_bulk
    if sys.argv[3] == "ours":
        from issuer.register.store import open_register
        from issuer.stocktake.reconcile import read_scans, reconcile
        register = open_register(sys.argv[1], actor="bench")
        reconcile(register, "tools", read_scans(Path(sys.argv[2])))
    else:
        bench_bulk.raw_reconcile_round(Path(sys.argv[1]).parent, Path(sys.argv[2]))
    with open("/proc/self/status") as status:
        print(next(line.split()[1] for line in status if line.startswith("VmHWM:")))
""")


def reconcile_peak_kib(folder: Path, path: Path, side: str) -> int:
    done = subprocess.run(
        [sys.executable, "-c", RECONCILE_PEAK_SCRIPT, str(folder / "tools.sqlite"), str(path), side,
         str(Path(__file__).parent)], capture_output=True, text=True, check=True,
    )  # fmt: skip
    return int(done.stdout.split()[-1])


# --- 5: a stock count in ten files -------------------------------------------------------------


def bench_count(folder: Path, path: Path, single: float, rounds: int) -> None:
    from issuer.stocktake.counts import add_files, finish_count, start_count

    lines = path.read_text().splitlines()
    parts = []
    for index in range(10):
        part = folder / f"scanner-{index}.txt"
        part.write_text("\n".join(lines[index::10]) + "\n")
        parts.append(part)
    adding, closing = [], []
    for round_ in range(rounds):
        register = open_register(str(folder / "tools.sqlite"), actor="bench")
        name = f"bench-{round_}"
        start_count(register, name, "tools", tz="UTC")
        adding.append(timed(lambda: add_files(register, name, parts)))
        closing.append(timed(lambda: finish_count(register, name)))
        register.close()
    print(f"count of {len(lines):,} scans in 10 files: close {min(closing):.2f} s, single-file reconcile "
          f"{single:.2f} s, ratio {min(closing) / single:.2f} (target <= 2); adding the ten files {min(adding):.2f} s")


# --- 4: export ---------------------------------------------------------------------------------


def export_round(folder: Path, name: str) -> float:
    from issuer.register.transfer import export_codes

    register = open_register(str(folder / name), actor="bench")
    target = folder / "export.csv"

    def work() -> None:
        with target.open("w", newline="", encoding="utf-8") as stream:
            export_codes(register, "tools", stream, fmt="csv")

    seconds = timed(work)
    register.close()
    return seconds


def raw_export_round(folder: Path, name: str) -> float:
    connection = sqlite3.connect(folder / name)
    target = folder / "raw-export.csv"

    def work() -> None:
        with target.open("w", newline="", encoding="utf-8") as stream:
            writer = csv.writer(stream)
            writer.writerow(["code", "display", "status", "issued_at", "issued_by", "holder", "note", "voided_at",
                             "voided_by", "void_reason", "replaces_id", "last_seen_at", "last_seen_where"])
            writer.writerows(connection.execute(
                "SELECT c.code, c.code, c.status, coalesce(c.origin_at, b.created_at), "
                "coalesce(c.origin_by, b.actor), c.holder, c.note, c.voided_at, c.voided_by, "
                "c.void_reason, c.replaces_id, c.last_seen_at, c.last_seen_where FROM issued_code c "
                "JOIN batch b ON b.id = c.batch_id WHERE c.series_id = 1 ORDER BY c.id"))

    seconds = timed(work)
    connection.close()
    return seconds


# VmHWM, not getrusage: ru_maxrss carries the forking parent's peak across exec
PEAK_SCRIPT = textwrap.dedent("""
    import sys
    from issuer.register.store import open_register
    from issuer.register.transfer import export_codes
    register = open_register(sys.argv[1], actor="bench")
    with open(sys.argv[2], "w", newline="", encoding="utf-8") as stream:
        written = export_codes(register, "tools", stream, fmt=sys.argv[3])
    with open("/proc/self/status") as status:
        peak = next(line.split()[1] for line in status if line.startswith("VmHWM:"))
    print(written, peak)
""")


def export_peak_kib(database: Path, target: Path, fmt: str = "csv") -> tuple[int, int]:
    done = subprocess.run([sys.executable, "-c", PEAK_SCRIPT, str(database), str(target), fmt],
                          capture_output=True, text=True, check=True)
    written, peak = done.stdout.split()
    return int(written), int(peak)


def bench_export(folder: Path, count: int, rounds: int) -> None:
    ours, raw = [], []
    for _ in range(rounds):
        ours.append(export_round(folder, "tools.sqlite"))
        raw.append(raw_export_round(folder, "tools.sqlite"))
    same = (folder / "export.csv").stat().st_size
    print(f"export {count:,} codes to CSV: issuer {min(ours):.2f} s, raw sqlite3 + csv {min(raw):.2f} s, "
          f"ratio {min(ours) / min(raw):.2f} (target <= 2); {same / 1e6:.0f} MB written")
    small = folder / "small.sqlite"
    register = open_register(str(fresh(folder, "small.sqlite")), actor="bench")
    add_series(register, TOOLS)
    issue_codes(register, "tools", count // 10, collect=False)
    register.close()
    for fmt in ("csv", "jsonl"):
        few, few_peak = export_peak_kib(small, folder / "peak.out", fmt)
        many, many_peak = export_peak_kib(folder / "tools.sqlite", folder / "peak.out", fmt)
        print(f"export peak RSS ({fmt}): {few:,} codes {few_peak / 1024:.0f} MiB, {many:,} codes "
              f"{many_peak / 1024:.0f} MiB (ratio {many_peak / few_peak:.2f}; flat is about 1)")


def main() -> None:
    count = int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000
    rounds = int(sys.argv[2]) if len(sys.argv) > 2 else 2
    only = set(sys.argv[3].split(",")) if len(sys.argv) > 3 else {"issue", "reconcile", "export"}  # reconcile runs 5 too
    with tempfile.TemporaryDirectory(prefix="issuer-bench-") as name:
        folder = Path(name)
        if "one-column" in only:
            bench_one_column(folder, count, max(rounds, 3))
            only.discard("one-column")
            if not only:
                return
        if "issue" in only:
            bench_issue(folder, count, rounds)
        else:
            issue_round(folder, TOOLS, count)
        if "reconcile" in only:
            bench_reconcile(folder, count, rounds)
        if "export" in only:
            bench_export(folder, count, rounds)


if __name__ == "__main__":
    main()
