"""Benchmark: bulk verification through the engine against python-stdnum's per-code loop.

Run:  .venv/bin/python tests/benchmarks/bench_schemes.py [--count 2000000] [--all]

Not collected by pytest. Side by side in one run, on the same seeded random ten-digit
codes (half carry their correct check digit, half a random last digit): the engine's
``code_matrix`` + ``verify_bulk`` from a list of Python strings (best of three runs),
against one run of ``[stdnum.<scheme>.is_valid(code) for code in codes]``. The two
verdicts must agree code for code; the figures reported are the ratios of wall-clock
and of CPU times (the CPU ratio is the steadier one on a shared machine). ``--all`` adds the engine's
own throughput for every scheme in the registry (no baseline: stdnum lacks most).
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable

import numpy as np
from stdnum import luhn, verhoeff

from issuer.checking.schemes import SCHEMES, get_scheme

SEED = 20260
WIDTH = 10  # ten-digit codes: nine body digits and the check


def make_codes(scheme_name: str, count: int) -> list[str]:
    """Seeded ten-digit codes; every other one has its check digit replaced at random."""
    scheme = get_scheme(scheme_name)
    rng = np.random.default_rng(SEED)
    bodies = rng.integers(0, 10, size=(count, WIDTH - 1), dtype=np.int64)
    checks = scheme.compute_bulk(bodies)
    noise = rng.integers(0, 10, size=(count, 1), dtype=np.int64)
    checks[1::2] = noise[1::2]
    digits = np.concatenate([bodies, checks], axis=1)
    return scheme.alphabet.from_matrix(digits).astype(str).tolist()  # type: ignore[no-any-return]


def timed(run: Callable[[], object]) -> tuple[float, float, object]:
    """Wall-clock and CPU seconds of one call, and its result."""
    wall, cpu = time.perf_counter(), time.process_time()
    result = run()
    return time.perf_counter() - wall, time.process_time() - cpu, result


def compare(scheme_name: str, baseline: Callable[[str], bool], count: int) -> float:
    scheme = get_scheme(scheme_name)
    codes = make_codes(scheme_name, count)
    scheme.verify_bulk(scheme.code_matrix(codes[:1000], WIDTH))  # warm: numpy, tables
    # the engine's run is short, so a busy neighbour can spoil one: best of three
    runs = [timed(lambda: scheme.verify_bulk(scheme.code_matrix(codes, WIDTH))) for _ in range(3)]
    engine_wall = min(run[0] for run in runs)
    engine_cpu = min(run[1] for run in runs)
    engine = runs[0][2]
    stdnum_wall, stdnum_cpu, reference = timed(lambda: [baseline(code) for code in codes])
    assert isinstance(engine, np.ndarray)
    assert engine.tolist() == reference, "engine and stdnum disagree"
    valid = int(engine.sum())
    ratio = stdnum_wall / engine_wall
    print(
        f"{scheme_name:9} {count:,} codes ({valid:,} valid)\n"
        f"    wall: engine {engine_wall:6.3f} s  stdnum {stdnum_wall:7.3f} s  ratio {ratio:6.1f}x\n"
        f"    cpu:  engine {engine_cpu:6.3f} s  stdnum {stdnum_cpu:7.3f} s  "
        f"ratio {stdnum_cpu / engine_cpu:6.1f}x"
    )
    return ratio


def engine_only(count: int) -> None:
    print("\nengine throughput, every scheme on its natural alphabet, body length 9:")
    rng = np.random.default_rng(SEED)
    for name in SCHEMES:
        scheme = get_scheme(name)
        bodies = rng.integers(0, scheme.alphabet.size, size=(count, 9), dtype=np.int64)
        checks = scheme.compute_bulk(bodies)
        body_text = scheme.alphabet.from_matrix(bodies)
        if scheme.check_length:
            text = np.char.add(body_text, scheme.check_alphabet.from_matrix(checks))
        else:
            text = body_text
        codes = text.astype(str).tolist()
        width = 9 + scheme.check_length
        seconds, _, verdicts = timed(
            lambda s=scheme, c=codes, w=width: s.verify_bulk(s.code_matrix(c, w))  # type: ignore[misc]
        )
        assert isinstance(verdicts, np.ndarray) and verdicts.all()
        print(f"  {name:16} {count / seconds / 1e6:6.2f} M codes/s")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=2_000_000)
    parser.add_argument("--all", action="store_true", help="also time every scheme alone")
    args = parser.parse_args()
    print(f"bulk verification, engine vs python-stdnum per-code is_valid, seed {SEED}")
    compare("luhn", luhn.is_valid, args.count)
    compare("verhoeff", verhoeff.is_valid, args.count)
    if args.all:
        engine_only(args.count)


if __name__ == "__main__":
    main()
