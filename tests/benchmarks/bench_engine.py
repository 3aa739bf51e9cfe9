"""Benchmark: ``issuer check --file`` as a whole process, and exhaustive assessment.

Run:  .venv/bin/python tests/benchmarks/bench_engine.py [--count 2000000] [--repeats 3]

Not collected by pytest. Two figures, each measured in this one run:

1. ``issuer check --scheme luhn --file F --summary`` as a subprocess against a plain
   Python script that reads F and calls ``stdnum.luhn.is_valid`` on every line, on the
   same file of seeded ten-digit codes (half valid). Both count the valid codes and the
   counts must agree. Runs alternate (best of ``--repeats``) so a busy neighbour slows
   both alike; wall-clock and child CPU seconds are reported, with their ratios.
2. ``assess`` over every one of the 10^6 six-digit bodies, every error class, for
   Luhn, Verhoeff and Damm (seconds, best of two).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np

from issuer.checking.assess import assess
from issuer.checking.schemes import get_scheme

SEED = 20261
BASELINE = """
import sys
from stdnum import luhn
total = valid = 0
with open(sys.argv[1]) as handle:
    for line in handle:
        line = line.strip()
        if line:
            total += 1
            valid += luhn.is_valid(line)
print(total, valid)
"""


def write_codes(path: Path, count: int) -> None:
    """Seeded ten-digit Luhn codes, one a line; every other one with a random last digit."""
    scheme = get_scheme("luhn")
    rng = np.random.default_rng(SEED)
    bodies = rng.integers(0, 10, size=(count, 9), dtype=np.int64)
    checks = scheme.compute_bulk(bodies)
    checks[1::2] = rng.integers(0, 10, size=(count // 2, 1), dtype=np.int64)
    lines = scheme.alphabet.from_matrix(np.concatenate([bodies, checks], axis=1))
    path.write_bytes(b"\n".join(lines.tolist()) + b"\n")


def timed_process(command: list[str]) -> tuple[float, float, str]:
    """Wall-clock and CPU seconds (user + system) of a child process, and its stdout."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    began = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True, check=False)
    wall = time.perf_counter() - began
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    if done.returncode not in (0, 1):
        raise SystemExit(f"{command[0]} failed: {done.stderr.strip()}")
    return wall, cpu, done.stdout


def check_process(count: int, repeats: int) -> None:
    issuer = str(Path(sys.executable).with_name("issuer"))
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "codes.txt"
        script = Path(folder) / "baseline.py"
        script.write_text(BASELINE)
        write_codes(path, count)
        ours = [issuer, "check", "--scheme", "luhn", "--file", str(path), "--summary", "--json"]
        theirs = [sys.executable, str(script), str(path)]
        best = {"issuer": [float("inf")] * 2, "stdnum": [float("inf")] * 2}
        counts: dict[str, tuple[int, int]] = {}
        for _ in range(repeats):
            for name, command in (("issuer", ours), ("stdnum", theirs)):
                wall, cpu, out = timed_process(command)
                best[name] = [min(best[name][0], wall), min(best[name][1], cpu)]
                if name == "issuer":
                    data = json.loads(out)
                    counts[name] = (data["total"], data["valid"])
                else:
                    total, valid = out.split()
                    counts[name] = (int(total), int(valid))
        if counts["issuer"] != counts["stdnum"]:
            raise SystemExit(f"verdicts differ: {counts}")
        size = path.stat().st_size / 1e6
    print(f"{count:,} ten-digit codes ({size:.0f} MB), {counts['issuer'][1]:,} valid; "
          f"best of {repeats}")  # fmt: skip
    for name in ("issuer", "stdnum"):
        wall, cpu = best[name]
        print(f"  {name:>6}: {wall:6.2f} s wall, {cpu:6.2f} s CPU")
    print(f"  ratio (stdnum script / issuer check): "
          f"{best['stdnum'][0] / best['issuer'][0]:.1f}x wall, "
          f"{best['stdnum'][1] / best['issuer'][1]:.1f}x CPU  (goal: >= 5x)")  # fmt: skip


def seconds(run: Callable[[], object], repeats: int = 2) -> tuple[float, float]:
    wall = cpu = float("inf")
    for _ in range(repeats):
        w, c = time.perf_counter(), time.process_time()
        run()
        wall, cpu = min(wall, time.perf_counter() - w), min(cpu, time.process_time() - c)
    return wall, cpu


def exhaustive_assessment() -> None:
    print("exhaustive assessment, all 10^6 six-digit bodies, every error class:")
    for name in ("luhn", "verhoeff", "damm"):
        scheme = get_scheme(name)
        result = assess(scheme, 6)
        if not result.exhaustive:
            raise SystemExit(f"{name}: not measured over every body")
        wall, cpu = seconds(lambda scheme=scheme: assess(scheme, 6))
        weighted = result.undetected_weighted or 0.0
        print(f"  {name:>8}: {wall:5.2f} s wall, {cpu:5.2f} s CPU; "
              f"undetected weighted {weighted * 100:.3f} %")  # fmt: skip


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=2_000_000)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    print(f"machine: {os.cpu_count()} CPUs, load {os.getloadavg()[0]:.1f}")
    check_process(args.count, args.repeats)
    exhaustive_assessment()


if __name__ == "__main__":
    main()
