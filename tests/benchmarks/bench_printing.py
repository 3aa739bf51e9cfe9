"""Benchmark: a whole print job from the register — select 10,000 codes, draw them as
Code 128 labels into one PDF, record 10,000 prints (one transaction, one log entry per
code) — against drawing the same labels alone with ``render_sheet``, side by side.

The ratio is what the register glue costs on top of drawing.

Run: .venv/bin/python tests/benchmarks/bench_printing.py [COUNT] [ROUNDS]

The codes are invented Quillmere tool tags (prefix QTL, Luhn check digit) in a
throw-away register.
"""

from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path

from issuer.labels import get_layout, render_sheet
from issuer.labels.printjob import LabelOptions, label_contents, print_selection
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.printing import record_prints, select_for_printing
from issuer.register.store import open_register


def main() -> None:
    count = int(sys.argv[1]) if len(sys.argv) > 1 else 10_000
    rounds = int(sys.argv[2]) if len(sys.argv) > 2 else 3
    layout = get_layout("a4-3x8")
    with tempfile.TemporaryDirectory() as folder:
        register = open_register(str(Path(folder) / "bench.sqlite"), actor="bench")
        add_series(
            register,
            SeriesSpec(
                "tools", "luhn", 7, prefix="QTL", group=(4, 4), title="Quillmere Tool Library"
            ),
        )
        issue_codes(register, "tools", count, collect=False)
        job_out = Path(folder) / "job.pdf"
        draw_out = Path(folder) / "draw.pdf"
        jobs: list[float] = []
        draws: list[float] = []
        parts: dict[str, list[float]] = {"select": [], "record": []}
        warm = select_for_printing(register, series="tools")
        render_sheet(label_contents(warm.rows[:24]), layout, draw_out)  # warm-up
        for _ in range(rounds):
            start = time.perf_counter()
            selection = select_for_printing(register, series="tools")
            outcome = print_selection(register, selection, job_out, LabelOptions(layout))
            jobs.append(time.perf_counter() - start)

            labels = label_contents(selection.rows)
            start = time.perf_counter()
            render_sheet(labels, layout, draw_out)
            draws.append(time.perf_counter() - start)

            start = time.perf_counter()
            select_for_printing(register, series="tools")
            parts["select"].append(time.perf_counter() - start)
            start = time.perf_counter()
            record_prints(register, selection.codes, layout=layout.name, symbology="code128")
            parts["record"].append(time.perf_counter() - start)
        register.close()
    best_job, best_draw = min(jobs), min(draws)
    print(f"labels: {count}, pages: {outcome.pages}, rounds: {rounds}")
    print(
        f"whole job (select, draw, record): best {best_job:.2f} s, median {statistics.median(jobs):.2f} s"
    )
    print(
        f"render_sheet alone              : best {best_draw:.2f} s, median {statistics.median(draws):.2f} s"
    )
    print(
        f"  of which select {min(parts['select']):.2f} s, record {min(parts['record']):.2f} s "
        "(best of each)"
    )
    print(
        f"ratio job/draw: best {best_job / best_draw:.2f}, "
        f"median {statistics.median(jobs) / statistics.median(draws):.2f}"
    )


if __name__ == "__main__":
    main()
