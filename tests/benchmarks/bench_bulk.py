"""Bulk speed, as ratios against baselines run side by side in one run.

1. N in-order codes issued into SQLite (``issue_codes(..., collect=False)``, the whole
   batch in one transaction) vs a raw sqlite3 ``executemany`` of the same rows into one
   table with a unique index, in one transaction, with the same WAL and
   synchronous=FULL settings. Target: issuer within 1.5x.
2. N scattered codes (FF1 with cycle walking) vs the in-order figure. Target: 1.5x.
3. Reconcile of N scans against N issued codes (``reconcile()``, check characters
   verified, every category worked out) vs a raw sqlite3 script that loads the scans
   into a temporary table and joins it with the codes. Target: within 2x.
4. Export of N codes to CSV (``export_codes``) vs a raw sqlite3 + csv module script.
   Target: within 2x. Peak RSS of the export at N/10 and N, each in its own process:
   it must stay flat.

Rounds alternate issuer and baseline so that both see the same machine load; the
figure of each side is its best round.

Run: .venv/bin/python tests/benchmarks/bench_bulk.py [N] [ROUNDS]   (default 1,000,000 and 2)

The codes are invented Quillmere tool tags (QTL...) and member cards (QM...).
"""

from __future__ import annotations

import sqlite3
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

from issuer.register.issuing import issue_codes
from issuer.register.series import SeriesSpec, add_series
from issuer.register.store import open_register

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=9, prefix="QTL", group=(4, 4, 2))
MEMBERS = SeriesSpec(key="members", scheme="luhn", length=9, prefix="QM", group=(5, 5), mode="scattered")

RAW_COLUMNS = (
    "series_id, code, base, status, batch_id, holder, note, issued_at, issued_by, replaces_id, print_count"
)


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
        "batch_id INTEGER NOT NULL, holder VARCHAR(200), note TEXT, issued_at DATETIME NOT NULL, "
        "issued_by VARCHAR(120) NOT NULL, void_reason TEXT, voided_at DATETIME, voided_by VARCHAR(120), "
        "replaces_id INTEGER, replaced_by_id INTEGER, print_count INTEGER NOT NULL, "
        "last_seen_at DATETIME, last_seen_where VARCHAR(200))"
    )
    connection.execute("CREATE UNIQUE INDEX ix_code ON issued_code (code)")

    def work() -> None:
        connection.execute("BEGIN IMMEDIATE")
        connection.executemany(
            f"INSERT INTO issued_code ({RAW_COLUMNS}) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)", rows
        )
        connection.execute("COMMIT")

    seconds = timed(work)
    connection.close()
    return seconds


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


def main() -> None:
    count = int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000
    rounds = int(sys.argv[2]) if len(sys.argv) > 2 else 2
    with tempfile.TemporaryDirectory(prefix="issuer-bench-") as name:
        folder = Path(name)
        bench_issue(folder, count, rounds)


if __name__ == "__main__":
    main()
