"""What replaying stock counts, tokens and batch ranges costs the doctor, as ratios in one run.

A register with one series of N codes (a print run) and a stock count holding one scan
file of N lines (every code once, a time and place on each):

1. the scanned lines' replay (``count_problems``: one pass over the lines, hashing each)
   vs the floor: the same rows fetched through the same session and thrown away;
2. the new checks together (tokens, stock counts, batch ranges) vs the whole doctor;
3. adding the file: the digest over its lines (``scans_digest``) vs the whole
   ``add_scan_file`` (the lines written in one transaction).

Rounds are interleaved; the median is printed. Run:
.venv/bin/python tests/benchmarks/bench_doctor_rows.py [N] [postgresql URL]
"""

from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path

from sqlalchemy import text

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.doctor import run_doctor
from issuer.register.issuing import issue_codes
from issuer.register.replay_rows import batch_range_problems, count_problems, token_problems
from issuer.register.scanfiles import SCANNED_WIDTH, add_scan_file, scans_digest
from issuer.register.store import open_register
from issuer.stocktake.counts import read_scan_file, start_count

ROUNDS = 3


def _timed(work: object) -> float:
    start = time.perf_counter()
    work()  # type: ignore[operator]
    return time.perf_counter() - start


def main() -> None:
    size = int(sys.argv[1]) if len(sys.argv) > 1 else 200_000
    folder = Path(tempfile.mkdtemp(prefix="bench-doctor-rows-"))
    url = sys.argv[2] if len(sys.argv) > 2 else str(folder / "register.sqlite")
    register = open_register(url, actor="bench")
    add_series(register, SeriesSpec(key="tools", scheme="damm", length=9, prefix="QTL"))
    codes = [issued.code for issued in issue_codes(register, "tools", size).codes]
    scans = folder / "scans.csv"
    with scans.open("w", encoding="utf-8") as out:
        out.write("code,seen,place\n")
        for number, code in enumerate(codes):
            out.write(f"{code},2026-05-04T10:{number // 60 % 60:02d}:{number % 60:02d}Z,aisle {number % 40}\n")
    start_count(register, "spring", "tools", tz="UTC")
    scan_file = read_scan_file(scans, zone="UTC", column="code", time_column="seen", where_column="place")
    adding = _timed(lambda: add_scan_file(register, "spring", scan_file))
    digesting = min(_timed(lambda: scans_digest((r.line, r.scanned[:SCANNED_WIDTH], r.at, r.where)
                                                for r in scan_file.rows)) for _ in range(ROUNDS))  # fmt: skip

    floor, replay, ours, whole = [], [], [], []
    for _ in range(ROUNDS):
        with register.reading() as session:
            floor.append(_timed(lambda: [None for _ in session.execute(
                text("SELECT file_id, count_id, line, scanned, seen_at, seen_where FROM stock_count_scan "
                     "ORDER BY count_id, file_id, line, id"), execution_options={"yield_per": 50_000})]))  # fmt: skip
            replay.append(_timed(lambda: count_problems(session)))
            ours.append(_timed(lambda: (count_problems(session), token_problems(session), batch_range_problems(session))))
        whole.append(_timed(lambda: run_doctor(register)))
    register.close()
    m = statistics.median
    print(f"{size:,} codes and scans on {url.split(':', 1)[0] if '://' in url else 'sqlite'}, {ROUNDS} rounds (median)")
    print(f"1. scanned lines' replay {m(replay):.2f} s vs fetching them {m(floor):.2f} s: {m(replay) / m(floor):.2f}x")
    print(f"2. new checks {m(ours):.2f} s of the whole doctor {m(whole):.2f} s: {m(ours) / m(whole):.1%}")
    print(f"3. digest of the file's lines {digesting:.2f} s of adding the file {adding:.2f} s: {digesting / adding:.1%}")


if __name__ == "__main__":
    main()
