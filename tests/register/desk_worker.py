"""Desks as separate processes, for the concurrency and crash tests.

Run as ``python desk_worker.py JOBS`` where JOBS is a JSON list of jobs ``{"mode", "db",
"series", "count", "seed", ...}``. This process (the "room") imports issuer once, then
forks one desk process per job, so that starting sixteen desks costs milliseconds, not
sixteen interpreter start-ups. Each desk opens its own connection (nothing is shared
across the fork), opens the register, reports ``{"desk": i, "op": "ready", "pid": ...}``, waits until the
room reads a line on stdin, then works, writing one JSON line per act only *after* its
transaction committed (one ``write`` per line, so a line is never torn by ``kill -9``).
Before each act of the
crash modes a desk writes ``{"op": "begin"}``, so a test knows whether a kill landed
inside an act. A test compares those lines with the register: whatever a desk was told is issued must
be there, even after the desk was killed. When every desk has ended the room reports
``{"desk": i, "op": "exit", "status": ..., "signal": ...}`` for each, and exits.

Modes: ``define`` (define one series from ``spec``), ``issue`` (count codes one at a time), ``mixed`` (count acts: issue, or void or
replace one of this desk's own codes), ``failover`` (issue under request ids until
the server goes away, then wait for the address of the new one, retry the act whose
outcome is unknown under the same id and go on; see ``_issue_across_failover``), ``bulk`` (batches of low..high codes until
killed), ``replace`` (replace recent issued codes until killed), ``import`` (import
blocks of codes from the top of the range until killed).

With a second argument ``serial`` the room runs the desks one after another instead,
each started by its own line on stdin: a crash test kills each one in turn.
"""

from __future__ import annotations

import json
import os
import random
import sys
import traceback
from typing import Any


def say(desk: int, record: dict[str, Any]) -> None:
    os.write(1, (json.dumps({"desk": desk, **record}) + "\n").encode())


def work(desk: int, job: dict[str, Any], register: Any) -> None:
    from issuer.errors import Conflict
    from issuer.register.issuing import issue_codes
    from issuer.register.lifecycle import replace_code, void_code

    rng = random.Random(job.get("seed", desk))
    key, mode = job["series"], job["mode"]
    if mode == "define":
        from issuer.register.defining import SeriesSpec, add_series

        try:
            add_series(register, SeriesSpec(key=key, **job["spec"]))
        except Conflict as exc:
            say(desk, {"op": "refused", "why": str(exc)})
        else:
            say(desk, {"op": "defined", "series": key})
    elif mode == "issue":
        for _ in range(job["count"]):
            result = issue_codes(register, key, 1)
            say(desk, {"op": "issue", "code": result.codes[0].code, "batch": result.batch})
    elif mode == "mixed":
        mine: list[str] = []
        for _ in range(job["count"]):
            roll = rng.random()
            if roll < 0.6 or not mine:
                result = issue_codes(register, key, 1)
                mine.append(result.codes[0].code)
                say(desk, {"op": "issue", "code": result.codes[0].code, "batch": result.batch})
            elif roll < 0.8:
                code = mine.pop(rng.randrange(len(mine)))
                void_code(register, code, reason="card lost at the counter")
                say(desk, {"op": "void", "code": code})
            else:
                code = mine.pop(rng.randrange(len(mine)))
                new = replace_code(register, code, reason="tag damaged")
                mine.append(new.code)
                say(desk, {"op": "replace", "old": code, "code": new.code, "batch": new.batch})
    elif mode == "bulk":
        low, high = job.get("low", 200), job.get("high", 4000)
        while True:
            say(desk, {"op": "begin"})
            result = issue_codes(register, key, rng.randint(low, high))
            say(desk, {
                "op": "bulk", "batch": result.batch, "count": result.count,
                "first": result.codes[0].code, "last": result.codes[-1].code,
            })
    elif mode == "replace":
        from sqlalchemy import select

        from issuer.register.models import ISSUED, IssuedCode, Series

        while True:
            with register.reading() as session:
                recent = list(session.scalars(
                    select(IssuedCode.code)
                    .join(Series, Series.id == IssuedCode.series_id)
                    .where(Series.key == key, IssuedCode.status == ISSUED)
                    .order_by(IssuedCode.id.desc())
                    .limit(200)
                ))
            code = rng.choice(recent)
            say(desk, {"op": "begin"})
            try:
                new = replace_code(register, code, reason="tag damaged")
            except Conflict:  # another desk got there first
                continue
            say(desk, {"op": "replace", "old": code, "code": new.code, "batch": new.batch})
    elif mode == "import":
        _import_until_killed(desk, job, register, rng)
    elif mode == "failover":
        register = _issue_across_failover(desk, job, register, rng)
    else:
        raise SystemExit(f"unknown mode {mode!r}")
    register.close()


def _fork_desk(desk: int, job: dict[str, Any], start_read: int, start_write: int) -> int:
    pid = os.fork()
    if pid:
        return pid
    os.close(start_write)
    status = 0
    try:
        from issuer.register.store import open_register

        # the desk is open (connected, schema checked) before it says it is ready, so a
        # test's clock starts when the work does
        register = open_register(job["db"], actor=job.get("actor", f"desk-{desk}"), key_file=job.get("key_file"))
        say(desk, {"op": "ready", "pid": os.getpid()})
        os.read(start_read, 1)  # wait for the room's signal
        work(desk, job, register)
    except BaseException:  # noqa: BLE001 - a forked desk must never return into the room
        traceback.print_exc()
        sys.stderr.flush()
        status = 1
    os._exit(status)


def _report_exit(desk: int, status: int) -> None:
    say(desk, {
        "op": "exit",
        "status": os.waitstatus_to_exitcode(status),
        "signal": os.WTERMSIG(status) if os.WIFSIGNALED(status) else None,
    })


def _import_until_killed(desk: int, job: dict[str, Any], register: Any, rng: random.Random) -> None:
    """Import blocks of codes from the top of the series' range downwards (codes
    issued elsewhere, say), each block below the lowest one imported so far."""
    from sqlalchemy import func, select

    from issuer.readers.scanfile import Table
    from issuer.register.importing import import_codes
    from issuer.register.models import Batch, IssuedCode
    from issuer.register.series import code_format, get_series

    low, high = job.get("low", 50), job.get("high", 2000)
    while True:
        with register.reading() as session:
            series = get_series(session, job["series"])
            lowest = session.scalar(
                select(func.min(IssuedCode.base))
                .join(Batch, Batch.id == IssuedCode.batch_id)
                .where(IssuedCode.series_id == series.id, Batch.kind == "import")
            )
            shape = code_format(series)
            top = (series.range_end + 1 if lowest is None else lowest) - 1
        count = rng.randint(low, high)
        codes = [shape.code_for_base(base) for base in range(top, top - count, -1)]
        table = Table(source="crash-test", lines=list(range(1, count + 1)), codes=codes)
        say(desk, {"op": "begin"})
        _plan, result = import_codes(register, job["series"], table)
        assert result is not None
        say(desk, {
            "op": "import", "batch": result.batch, "count": result.imported,
            "first": result.first, "last": result.last,
        })


def _issue_across_failover(desk: int, job: dict[str, Any], register: Any, rng: random.Random) -> Any:
    """Issue 1..3 codes at a time, each act under its own request id, until ``after``
    acts have been done on the new server. An act that fails because the server went
    away has an unknown outcome: the desk says so, waits for the file ``switch`` to name
    the new server, and sends the same act again under the same request id."""
    import time
    from pathlib import Path

    from sqlalchemy.exc import DBAPIError

    from issuer.errors import IssuerError
    from issuer.register.issuing import issue_codes
    from issuer.register.store import open_register

    key, switch = job["series"], Path(job["switch"])
    act, after, moved = 0, 0, False
    while after < job["after"]:
        request = f"{job.get('actor', desk)}-{act:05d}"
        count = rng.randint(1, 3)
        say(desk, {"op": "begin", "request": request, "count": count})
        try:
            result = issue_codes(register, key, count, request_id=request)
        except (IssuerError, DBAPIError) as exc:
            if moved:
                raise
            say(desk, {"op": "unknown", "request": request, "count": count, "why": str(exc).splitlines()[0][:300]})
            register.close()
            deadline = time.monotonic() + job.get("wait", 60)
            while not switch.exists():
                if time.monotonic() > deadline:
                    raise SystemExit(f"desk {desk}: no new server named in {switch}") from None
                time.sleep(0.02)
            register = open_register(
                switch.read_text().strip(), actor=job.get("actor", f"desk-{desk}"), create=False,
                key_file=job.get("key_file"),
            )
            moved = True
            result = issue_codes(register, key, count, request_id=request)
            op = "retried"
        else:
            op = "issue"
        say(desk, {
            "op": op, "request": request, "count": count, "replayed": result.replayed,
            "codes": [code.code for code in result.codes], "moved": moved,
        })
        act += 1
        after += moved
    return register


def main() -> None:
    jobs = json.loads(sys.argv[1])
    serial = len(sys.argv) > 2 and sys.argv[2] == "serial"
    # everything a desk needs, imported once before forking
    import numpy  # noqa: F401
    import sqlalchemy.dialects.postgresql.psycopg
    import sqlalchemy.dialects.sqlite.pysqlite  # noqa: F401

    import issuer.register.issuing
    import issuer.register.lifecycle
    import issuer.register.models
    import issuer.register.store  # noqa: F401

    for optional in ("issuer.scattering.scatter", "issuer.register.importing"):
        try:
            __import__(optional)
        except ImportError:  # pragma: no cover - not every checkout has every part
            pass
    sys.stdout.flush()
    if serial:
        # one desk at a time: each waits for its own "go" line, and the next one is
        # forked only when it has ended (a crash test kills each in turn)
        for desk, job in enumerate(jobs):
            start_read, start_write = os.pipe()
            pid = _fork_desk(desk, job, start_read, start_write)
            os.close(start_read)
            if not sys.stdin.readline():
                os.kill(pid, 9)
            os.write(start_write, b"g")
            os.close(start_write)
            _, status = os.waitpid(pid, 0)
            _report_exit(desk, status)
        return
    start_read, start_write = os.pipe()
    children = {_fork_desk(desk, job, start_read, start_write): desk for desk, job in enumerate(jobs)}
    os.close(start_read)
    sys.stdin.readline()
    os.write(start_write, b"g" * len(jobs))
    while children:
        pid, status = os.wait()
        _report_exit(children.pop(pid), status)


if __name__ == "__main__":
    main()
