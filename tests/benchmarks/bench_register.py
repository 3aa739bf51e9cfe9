"""Register speed, as ratios against baselines run side by side in one run.

1. One code at a time, one durable commit each: issuer's issue_codes (the one issuing
   path: claim, batch, code, log entry, head) vs a raw sqlite3 loop doing one insert per
   transaction into one indexed table (same WAL and synchronous=FULL settings), rounds
   interleaved, each loop first run until its WAL file has stopped growing (a growing
   WAL makes every fsync carry the file's size too: about 2x a raw loop's steady cost,
   which an early version of this benchmark measured the raw loop in). Beside them the
   raw floor of an issue's own rows. Target: issuer at least 0.5 of the raw rate.
2. Scattered issuance at 99 % full vs empty: per-code cost ratio. Target: <= 1.2.
3. ``issuer check CODE`` as a whole process vs a minimal Typer app that imports
   SQLAlchemy's ORM and Rich and answers one command with one query on the same file.
   Target: within 1.3x.

Run: .venv/bin/python tests/benchmarks/bench_register.py [startup | codes]
(``startup``: part 3 alone; BENCH_ROUNDS start-up rounds, default 21; ``codes``: part 1
alone, with the pages one issue writes).
"""

from __future__ import annotations

import os
import resource
import sqlite3
import statistics
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

ROUNDS = 5
STARTUP_ROUNDS = int(os.environ.get("BENCH_ROUNDS", "21"))  # start-up rounds, interleaved


def _settled(act: Callable[[], None], wal: Path, step: int = 50, most: int = 6000) -> None:
    """Run ``act`` until its database's WAL has stopped growing (its first automatic
    checkpoint has passed and the file is reused): while the WAL grows, every commit's
    fsync also carries the file's new size, which costs a raw loop about twice its steady
    rate. Measured loops start from the steady state, all of them alike."""
    done, size = 0, -1
    while done < most:
        for _ in range(step):
            act()
        done += step
        now = wal.stat().st_size if wal.exists() else 0
        if now == size:
            return
        size = now


def per_code_rates(folder: Path, per_round: int = 200) -> tuple[float, float, float]:
    """Rates (codes a second) of issuer's issue, the raw one-row insert loop and the raw
    floor of an issue's own rows (:func:`floor_loop`), in interleaved rounds from the
    steady state; medians."""
    register = open_register(str(folder / "per-code.sqlite"), actor="bench")
    add_series(register, SeriesSpec(key="tools", scheme="damm", length=9, prefix="QTL"))
    raw = sqlite3.connect(folder / "raw.sqlite", isolation_level=None)
    raw.execute("PRAGMA journal_mode=WAL")
    raw.execute("PRAGMA synchronous=FULL")
    raw.execute("CREATE TABLE issued (id INTEGER PRIMARY KEY, code TEXT NOT NULL, base INTEGER, issued_at TEXT)")
    raw.execute("CREATE UNIQUE INDEX ix_code ON issued(code)")
    counter = 0

    def ours() -> None:
        issue_codes(register, "tools", 1)

    def theirs() -> None:
        nonlocal counter
        counter += 1
        raw.execute("BEGIN IMMEDIATE")
        raw.execute("INSERT INTO issued (code, base, issued_at) VALUES (?, ?, ?)",
                    (f"QTL{counter:010d}", counter, "2026-01-01T00:00:00"))
        raw.execute("COMMIT")

    loops = {"ours": ours, "raw": theirs, "floor": floor_loop(folder)}
    files = {"ours": "per-code", "raw": "raw", "floor": "floor"}
    for name, act in loops.items():
        _settled(act, folder / f"{files[name]}.sqlite-wal")
    rates: dict[str, list[float]] = {name: [] for name in loops}
    for _ in range(ROUNDS):
        for name, act in loops.items():
            start = time.perf_counter()
            for _ in range(per_round):
                act()
            rates[name].append(per_round / (time.perf_counter() - start))
    register.close()
    return (statistics.median(rates["ours"]), statistics.median(rates["raw"]),
            statistics.median(rates["floor"]))


def _wal_frames(path: Path) -> int:
    """Frames in a WAL file (written since its last reset)."""
    import struct

    data = path.read_bytes()
    if len(data) < 32:
        return 0
    page_size = struct.unpack(">I", data[8:12])[0]
    return (len(data) - 32) // (24 + page_size)


def frames_per_issue(folder: Path, prior: int = 2000, count: int = 50) -> float:
    """WAL frames (pages) one durable one-code issue writes, on a register already holding
    ``prior`` issues in two series (so each index is more than one page), read from the
    WAL's growth after a truncating checkpoint (``count`` issues stay below the automatic
    checkpoint's 1000 frames)."""
    db = folder / "frames.sqlite"
    register = open_register(str(db), actor="bench")
    add_series(register, SeriesSpec(key="tools", scheme="damm", length=9, prefix="QTL"))
    add_series(register, SeriesSpec(key="other", scheme="damm", length=9, prefix="OTH"))
    for n in range(prior):
        issue_codes(register, "tools" if n % 3 else "other", 1)
    with register.engine.connect() as connection:
        connection.exec_driver_sql("PRAGMA wal_checkpoint(TRUNCATE)")
    wal = db.with_name(db.name + "-wal")
    before = _wal_frames(wal)
    for _ in range(count):
        issue_codes(register, "tools", 1)
    frames = _wal_frames(wal) - before
    register.close()
    return frames / count


def floor_loop(folder: Path) -> Callable[[], None]:
    """The floor: raw sqlite3 writing what one logged issue writes (batch row, code row,
    counter update, chained log entry, log head) in one durable transaction; one call
    is one transaction."""
    import hashlib
    import json

    register = open_register(str(folder / "floor.sqlite"), actor="bench")
    add_series(register, SeriesSpec(key="tools", scheme="damm", length=9, prefix="QTL"))
    register.close()
    raw = sqlite3.connect(folder / "floor.sqlite", isolation_level=None)
    raw.execute("PRAGMA journal_mode=WAL")
    raw.execute("PRAGMA synchronous=FULL")
    at = "2026-01-01 00:00:00.000000"

    def one() -> None:
        raw.execute("BEGIN IMMEDIATE")
        series_id, counter = raw.execute("SELECT id, next_counter FROM series WHERE key='tools'").fetchone()
        batch = raw.execute(
            "INSERT INTO batch (series_id, kind, count, created_at, actor, code_id_from) "
            "VALUES (?, 'issue', 1, ?, 'b', (SELECT coalesce(max(id), 0) + 1 FROM issued_code))",
            (series_id, at),
        ).lastrowid
        code = f"QTL{counter + 1:010d}"
        raw.execute(
            "INSERT INTO issued_code (series_id, code, base, status, batch_id, print_count) "
            "VALUES (?, ?, ?, 'issued', ?, 0)",
            (series_id, code, counter + 1, batch),
        )
        raw.execute("UPDATE batch SET code_id_to = (SELECT max(id) FROM issued_code) WHERE id = ?", (batch,))
        raw.execute("UPDATE series SET next_counter=?, code_count=code_count+1 WHERE id=?",
                    (counter + 1, series_id))
        raw.execute("INSERT OR IGNORE INTO log_chain (chain, last_id, last_hash) VALUES (?, 0, ?)",
                    (series_id, "0" * 64))  # the series' own chain, as the tool appends
        last_hash = raw.execute("SELECT last_hash FROM log_chain WHERE chain=?", (series_id,)).fetchone()[0]
        last_id = raw.execute("SELECT coalesce(max(id), 0) FROM log_entry").fetchone()[0]
        digest = hashlib.sha256(json.dumps([last_id, last_hash, code]).encode()).hexdigest()
        raw.execute(
            "INSERT INTO log_entry (id, at, actor, action, series_id, code, batch_id, detail, "
            "prev_hash, hash, chain) VALUES (?, ?, 'b', 'issue', ?, ?, ?, '{}', ?, ?, ?)",
            (last_id + 1, at, series_id, code, batch, last_hash, digest, series_id),
        )
        raw.execute("UPDATE log_chain SET last_id=?, last_hash=? WHERE chain=?", (last_id + 1, digest, series_id))
        raw.execute("COMMIT")

    return one


def scattered_fill_ratio(folder: Path, size: int = 200_000, sample: int = 200) -> tuple[float, float]:
    register = open_register(str(folder / "scatter.sqlite"), actor="bench")
    add_series(register, SeriesSpec(key="empty", scheme="luhn", length=6, prefix="E", start=0,
                                    end=size - 1, mode="scattered"))
    add_series(register, SeriesSpec(key="full", scheme="luhn", length=6, prefix="F", start=0,
                                    end=size - 1, mode="scattered"))
    issue_codes(register, "full", size * 99 // 100 - sample * ROUNDS)
    empty_times, full_times = [], []
    for _ in range(ROUNDS):
        start = time.perf_counter()
        for _ in range(sample):
            issue_codes(register, "empty", 1)
        empty_times.append((time.perf_counter() - start) / sample)
        start = time.perf_counter()
        for _ in range(sample):
            issue_codes(register, "full", 1)
        full_times.append((time.perf_counter() - start) / sample)
    register.close()
    return statistics.median(empty_times), statistics.median(full_times)


BASELINE_APP = textwrap.dedent(
    """
    import sys
    import typer
    from rich.console import Console
    from rich.table import Table
    from sqlalchemy import String, create_engine, select
    from sqlalchemy.orm import DeclarativeBase, Mapped, Session, mapped_column

    class Base(DeclarativeBase):
        pass

    class IssuedCode(Base):
        __tablename__ = "issued_code"
        id: Mapped[int] = mapped_column(primary_key=True)
        code: Mapped[str] = mapped_column(String(100))
        status: Mapped[str] = mapped_column(String(16))

    app = typer.Typer()

    @app.command()
    def check(code: str, db: str) -> None:
        engine = create_engine(f"sqlite:///{db}")
        with Session(engine) as session:
            row = session.scalar(select(IssuedCode).where(IssuedCode.code == code))
        table = Table()
        table.add_column("code")
        table.add_column("status")
        table.add_row(code, row.status if row else "unknown")
        Console().print(table)

    app()
    """
)


def _child_cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def startup_ratio(folder: Path, runs: int = 15) -> dict[str, float]:
    """Medians of wall time and of CPU time (user + system of the child: less swayed by
    other work on a shared machine) for both processes, rounds interleaved."""
    db = folder / "desk.sqlite"
    register = open_register(str(db), actor="bench")
    add_series(register, SeriesSpec(key="tools", scheme="damm", length=7, prefix="QTL", group=(4, 4)))
    code = issue_codes(register, "tools", 50).codes[10].code
    register.close()
    script = folder / "baseline_app.py"
    script.write_text(BASELINE_APP)
    env = dict(os.environ, ISSUER_DB=str(db), COLUMNS="100")
    ours_cmd = [sys.executable, "-m", "issuer", "check", code]
    base_cmd = [sys.executable, str(script), code, str(db)]
    for command in (ours_cmd, base_cmd):  # warm the file cache
        subprocess.run(command, env=env, check=True, capture_output=True, cwd=folder)
    wall: dict[str, list[float]] = {"ours": [], "base": []}
    cpu: dict[str, list[float]] = {"ours": [], "base": []}
    for n in range(runs):
        pair = [("ours", ours_cmd), ("base", base_cmd)]
        for name, command in pair if n % 2 == 0 else pair[::-1]:  # alternate who goes first
            cpu_before, start = _child_cpu(), time.perf_counter()
            subprocess.run(command, env=env, check=True, capture_output=True, cwd=folder)
            wall[name].append(time.perf_counter() - start)
            cpu[name].append(_child_cpu() - cpu_before)
    ratios = sorted(o / b for o, b in zip(wall["ours"], wall["base"], strict=True))
    return {
        "ours": statistics.median(wall["ours"]), "base": statistics.median(wall["base"]),
        "ours_cpu": statistics.median(cpu["ours"]), "base_cpu": statistics.median(cpu["base"]),
        "round_ratio": statistics.median(ratios),
    }  # fmt: skip


def report_startup(folder: Path, runs: int) -> None:
    got = startup_ratio(folder, runs)
    print(f"'issuer check CODE' process vs a minimal Typer+ORM+Rich app, {runs} interleaved rounds, "
          f"load {os.getloadavg()[0]:.1f}")  # fmt: skip
    print(f"  wall: issuer {got['ours'] * 1000:.0f} ms, baseline {got['base'] * 1000:.0f} ms, "
          f"ratio of medians {got['ours'] / got['base']:.2f}, median of per-round ratios "
          f"{got['round_ratio']:.2f} (target <= 1.3)")  # fmt: skip
    print(f"  CPU:  issuer {got['ours_cpu'] * 1000:.0f} ms, baseline {got['base_cpu'] * 1000:.0f} ms, "
          f"ratio {got['ours_cpu'] / got['base_cpu']:.2f}")  # fmt: skip


def main() -> None:
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        if sys.argv[1:] == ["startup"]:
            report_startup(folder, STARTUP_ROUNDS)
            return
        ours, raw, floor = per_code_rates(folder)
        print(f"one durable code per transaction: issuer {ours:,.0f}/s, raw sqlite3 {raw:,.0f}/s, "
              f"ratio {ours / raw:.2f} (target >= 0.5)")
        print(f"  floor: raw sqlite3 writing the same rows as a logged issue {floor:,.0f}/s, "
              f"{floor / raw:.2f} of the single-insert rate; issuer reaches {ours / floor:.2f} of it")
        print(f"  pages (WAL frames) one issue writes: {frames_per_issue(folder):.1f}")
        if sys.argv[1:] == ["codes"]:
            return
        empty, full = scattered_fill_ratio(folder)
        print(f"scattered issue, per code: empty {empty * 1000:.2f} ms, 99% full {full * 1000:.2f} ms, "
              f"ratio {full / empty:.2f} (target <= 1.2)")
        report_startup(folder, STARTUP_ROUNDS)

if __name__ == "__main__":
    main()
