"""Benchmark: scattered base numbers (FF1 + cycle walking), batch against one at a time.

Run:  .venv/bin/python tests/benchmarks/bench_scatter.py [--count 1000000]

Not collected by pytest. Every figure is a ratio against a baseline measured in the
same run, in CPU seconds of this process: the vectorised batch against the scalar loop
(timed on a sample, then extrapolated), and counters near the end of a range against
counters near its start.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable

import numpy as np

from issuer.scattering.ff1 import ff1_encrypt
from issuer.scattering.scatter import ScatterPermutation

KEY = bytes.fromhex("0b5e6a1d9c2f47e8a3b1c0d9e8f7a6b5c4d3e2f1a0b9c8d7e6f5a4b3c2d1e0f9")

# Series of the Quillmere Tool Library & Makers' Co-op (invented), and two awkward ones.
SERIES = [
    ("member cards, radix 10, 10000000..99999999", 10, 10_000_000, 99_999_999),
    ("day passes, radix 36, 0..36**6-1", 36, 0, 36**6 - 1),
    ("worst walk, radix 10, 0..10**7 (domain 10x)", 10, 0, 10**7),
    ("worst walk, radix 36, 0..36**4 (domain 36x)", 36, 0, 36**4),
    ("all of int64, radix 10", 10, 0, (1 << 63) - 1),
]


def best_of(repeats: int, run: Callable[[], object]) -> float:
    """Least CPU seconds of this process over ``repeats`` runs. CPU time, not wall time:
    the work is single-threaded, and other jobs on a shared 2-core machine then barely
    move the figures."""
    times = []
    for _ in range(repeats):
        began = time.process_time()
        run()
        times.append(time.process_time() - began)
    return min(times)


def measure(title: str, perm: ScatterPermutation, count: int, sample: int) -> str:
    """One table row: batch and scalar seconds, and end-of-range over start-of-range."""
    n = perm.capacity
    count = min(count, n)
    first = np.arange(count, dtype=np.int64)
    last = np.arange(n - count, n, dtype=np.int64)
    perm.base_for_counter(0)  # warm: key schedule and round constants
    batch = batch_end = scalar_first = scalar_end = float("inf")
    for _ in range(2):  # interleaved, so a busy neighbour slows both ends alike
        batch = min(batch, best_of(1, lambda: perm.bases_for_counters(first)))
        batch_end = min(batch_end, best_of(1, lambda: perm.bases_for_counters(last)))
        scalar_first = min(
            scalar_first, best_of(1, lambda: [perm.base_for_counter(k) for k in range(sample)])
        )
        scalar_end = min(
            scalar_end,
            best_of(1, lambda: [perm.base_for_counter(k) for k in range(n - sample, n)]),
        )
    scalar = scalar_first * count / sample
    return (
        f"{title:46} {perm.domain_size / n:5.2f} {batch:8.2f} {scalar:9.1f}"
        f" {scalar / batch:7.1f}x {batch_end / batch:15.2f} {scalar_end / scalar_first:16.2f}"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=1_000_000, help="bases per batch")
    parser.add_argument("--sample", type=int, default=20_000, help="scalar sample size")
    args = parser.parse_args()
    count, sample = args.count, args.sample

    print(f"{count:,} bases per batch; scalar loop timed on {sample:,} and extrapolated\n")
    header = (
        f"{'series':46} {'walk':>5} {'batch s':>8} {'scalar s':>9} {'speed-up':>8}"
        f" {'end/start batch':>15} {'end/start scalar':>16}"
    )
    print(header)
    print("-" * len(header))
    for title, radix, start, end in SERIES:
        print(measure(title, ScatterPermutation(KEY, radix, start, end), count, sample))

    # The register's "99 % full against empty": one code at a time, as issuance does it.
    perm = ScatterPermutation(KEY, *SERIES[0][1:])
    n = perm.capacity
    at = {"empty": 0, "half full": n // 2, "99 % full": int(n * 0.99)}
    perm.base_for_counter(0)  # warm: key schedule and round constants
    per_code = dict.fromkeys(at, float("inf"))
    for _ in range(5):  # interleaved, so a busy neighbour slows every position alike
        for name, k in at.items():
            seconds = best_of(1, lambda k=k: [perm.base_for_counter(k + j) for j in range(sample)])
            per_code[name] = min(per_code[name], seconds / sample)
    print("\none code at a time on the member-card series (20,000 consecutive counters):")
    for name, seconds in per_code.items():
        ratio = seconds / per_code["empty"]
        print(f"  {name:10} {seconds * 1e6:7.1f} us per code   ratio to empty {ratio:.2f}")

    # The engine's one-block shortcut against FF1 exactly as written (numeral lists).
    digits = perm.digits
    k_list = list(range(2000))
    literal = best_of(
        1, lambda: [ff1_encrypt(KEY, b"", 10, [int(c) for c in f"{k:0{digits}d}"]) for k in k_list]
    )
    engine = best_of(1, lambda: [perm._ff1.encrypt_int(digits, k) for k in k_list])
    print(
        f"\nFF1 as written {literal / len(k_list) * 1e6:.1f} us, engine value path"
        f" {engine / len(k_list) * 1e6:.1f} us per encryption"
        f" (ratio {literal / engine:.1f})"
    )


if __name__ == "__main__":
    main()
