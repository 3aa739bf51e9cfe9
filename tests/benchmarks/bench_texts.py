"""What holder and note digests cost: a bulk issue with a holder and note (each code gets
its own salt and digest) against the same issue without text, and the doctor's replay of
each register, side by side in one process on fresh registers. A batch without text makes
no salt and writes no salt column; the replay does per-code work only where codes hold text.

Run: .venv/bin/python tests/benchmarks/bench_texts.py [--count N] [--rounds R]
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.replay_findings import replay_problems
from issuer.register.store import open_register


def one(url: str, count: int, with_text: bool) -> tuple[float, float]:
    register = open_register(url, actor="bench")
    try:
        add_series(register, SeriesSpec(key="tools", scheme="luhn", length=9, prefix="QT"))
        texts = {"holder": "workshop shelf B", "note": "spring intake"} if with_text else {}
        started = time.perf_counter()
        issue_codes(register, "tools", count, collect=False, **texts)
        issued = time.perf_counter() - started
        started = time.perf_counter()
        with register.reading() as session:
            problems, _warnings, _acts = replay_problems(session)
        replayed = time.perf_counter() - started
        assert problems == [], problems[:3]
        return issued, replayed
    finally:
        register.close()


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--count", type=int, default=200_000)
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args()
    times: dict[bool, list[tuple[float, float]]] = {False: [], True: []}
    with tempfile.TemporaryDirectory() as folder:
        for round_ in range(args.rounds):
            for with_text in (False, True):  # alternated, so load on the machine falls on both
                url = str(Path(folder) / f"r{round_}-{int(with_text)}.sqlite")
                times[with_text].append(one(url, args.count, with_text))
    for what, index in (("issue", 0), ("replay", 1)):
        plain = statistics.median(t[index] for t in times[False])
        texts = statistics.median(t[index] for t in times[True])
        print(f"{what} of {args.count:,} codes (SQLite, median of {args.rounds}): without text {plain:.2f} s, "
              f"with holder and note {texts:.2f} s: {texts / plain:.2f}x")


if __name__ == "__main__":
    main()
