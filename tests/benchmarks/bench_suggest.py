"""Benchmark: "did you mean" for one typo on a register of 1,000,000 codes, warm process.

Side by side on the same register file and the same open register:
  ours     check_codes(session, [typo]): read the typo, rank every issued code one slip
           away (issuer.checking.likely), one query for the candidates;
  baseline check_codes(session, [code]) for an issued code: read it, one indexed lookup.
Also the bare floor: a raw SELECT of one code by its index on the same file.

Target (issue 11): suggestions under 20 ms; the ratio to the indexed lookup is reported.
Typos are each of the six slip classes on random issued codes of an in-order series
(damm, 7 digits, prefix QTL) and of a scattered alphanumeric one (damm over Crockford
Base32, 6 symbols, prefix DP); medians over the rounds.

Run: .venv/bin/python tests/benchmarks/bench_suggest.py
"""

from __future__ import annotations

import random
import sqlite3
import statistics
import sys
import tempfile
import time
from pathlib import Path

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.desk import check_codes
from issuer.register.issuing import issue_codes
from issuer.register.series import code_format, get_series
from issuer.register.store import open_register

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
from tests.checking.test_likely import slip

SIZE = 1_000_000
PER_SERIES = {"tools": 600_000, "passes": 400_000}
TYPOS = 300


def main() -> None:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "big.sqlite"
        register = open_register(str(path), actor="bench")
        add_series(register, SeriesSpec(key="tools", scheme="damm", length=7, prefix="QTL", group=(4, 4)))
        add_series(register, SeriesSpec(key="passes", scheme="damm", alphabet="crockford32", length=6,
                                        prefix="DP", group=(4, 3), mode="scattered"))
        started = time.perf_counter()
        codes: dict[str, list[str]] = {}
        for key, count in PER_SERIES.items():
            result = issue_codes(register, key, count, collect=True)
            codes[key] = [info.code for info in result.codes]
        print(f"register of {sum(PER_SERIES.values()):,} codes built in {time.perf_counter() - started:.0f} s")
        rng = random.Random(5)
        issued = {code for values in codes.values() for code in values}
        with register.reading() as session:
            shapes = {key: code_format(get_series(session, key)) for key in PER_SERIES}
            typos: list[str] = []
            known: list[str] = []
            classes = ("single", "adjacent", "jump", "twin", "jump_twin", "phonetic")
            while len(typos) < TYPOS:
                key = rng.choice(list(PER_SERIES))
                code = rng.choice(codes[key])
                typed = slip(shapes[key], code, rng.choice(classes), rng)
                if typed is not None and typed not in issued:
                    typos.append(typed)
                    known.append(rng.choice(codes[key]))
            check_codes(session, typos[:20] + known[:20])  # warm: imports, caches, pages
            ours, theirs, sizes = [], [], []
            for typo, code in zip(typos, known):
                start = time.perf_counter()
                (answer,) = check_codes(session, [typo])
                ours.append(time.perf_counter() - start)
                sizes.append(len(answer.suggestions))
                start = time.perf_counter()
                check_codes(session, [code])
                theirs.append(time.perf_counter() - start)
        register.close()
        raw = sqlite3.connect(path)
        floor = []
        for code in known:
            start = time.perf_counter()
            raw.execute("SELECT status FROM issued_code WHERE code = ?", (code,)).fetchone()
            floor.append(time.perf_counter() - start)
        raw.close()
    mine, base, bare = statistics.median(ours), statistics.median(theirs), statistics.median(floor)
    print(f"suggestions for one typo : median {mine * 1000:.2f} ms, 95th pct "
          f"{sorted(ours)[int(len(ours) * 0.95)] * 1000:.2f} ms (target < 20 ms); "
          f"suggestions per typo: median {statistics.median(sizes):.0f}, max {max(sizes)}")
    print(f"check of an issued code : median {base * 1000:.2f} ms (one indexed lookup through check_codes)")
    print(f"raw indexed SELECT      : median {bare * 1000:.3f} ms")
    print(f"ratio typo/issued check : {mine / base:.1f}x; typo/raw lookup {mine / bare:.0f}x")


if __name__ == "__main__":
    main()
