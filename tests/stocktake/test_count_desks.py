"""A count survives a desk killed mid-add (nothing of that file lands, and it can be added
again, once), and two desks adding files to one count at once lose nothing, on SQLite and
PostgreSQL."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
from pathlib import Path

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.scanfiles import SCAN_CHUNK
from issuer.register.store import open_register
from issuer.stocktake.counts import add_files, count_status, start_count
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401 - fixtures

WORKER = Path(__file__).with_name("count_worker.py")
TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", group=(4, 4))


def _desk(url: str, mode: str, files: list[Path]) -> subprocess.Popen[str]:
    process = subprocess.Popen(
        [sys.executable, str(WORKER), url, "spring", mode, *map(str, files)],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True, cwd=Path(WORKER).anchor,
        env={**os.environ, "PYTHONPATH": ""},
    )  # fmt: skip
    assert process.stdout is not None
    assert json.loads(process.stdout.readline()) == {"op": "ready"}
    return process


def _setup(url: str, folder: Path, files: int, lines: int) -> tuple[list[str], list[Path]]:
    register = open_register(url, actor="test")
    add_series(register, TOOLS)
    codes = [info.code for info in issue_codes(register, "tools", files * lines, collect=True).codes]
    start_count(register, "spring", "tools", tz="UTC")
    register.close()
    paths = []
    for index in range(files):
        path = folder / f"shelf-{index}.txt"
        path.write_text("\n".join(codes[index * lines: (index + 1) * lines]) + "\n")
        paths.append(path)
    return codes, paths


def test_a_desk_killed_while_adding_leaves_nothing_and_the_file_goes_in_once(tmp_path: Path) -> None:
    url = str(tmp_path / "register.sqlite")
    codes, (big,) = _setup(url, tmp_path, 1, SCAN_CHUNK + 500)
    desk = _desk(url, "stall", [big])
    desk.stdin.write("go\n")  # type: ignore[union-attr]
    desk.stdin.flush()  # type: ignore[union-attr]
    assert json.loads(desk.stdout.readline()) == {"op": "writing"}  # type: ignore[union-attr]
    os.kill(desk.pid, signal.SIGKILL)
    desk.communicate()  # reaps it and closes its pipes
    assert desk.returncode == -signal.SIGKILL
    register = open_register(url, actor="test")
    status = count_status(register, "spring")
    assert (status.info.files, status.info.scans, status.found) == (0, 0, 0)
    add_files(register, "spring", [big])
    status = count_status(register, "spring")
    assert (status.info.files, status.info.scans, status.found) == (1, len(codes), len(codes))
    assert status.counts["duplicates"] == 0
    with register.engine.connect() as connection:
        assert connection.exec_driver_sql("PRAGMA integrity_check").scalar() == "ok"
    register.close()


def test_two_desks_adding_at_once_lose_nothing(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    _codes, paths = _setup(register_url, tmp_path, 8, 400)
    shared = paths[-1]
    # each desk adds its own three files and then the shared one: exactly one may add it
    desks = [_desk(register_url, "add", [*paths[0:3], shared]), _desk(register_url, "add", [*paths[3:6], shared])]
    for desk in desks:
        desk.stdin.write("go\n")  # type: ignore[union-attr]
        desk.stdin.flush()  # type: ignore[union-attr]
    reports = []
    for desk in desks:
        out, _ = desk.communicate(timeout=120)
        assert desk.returncode == 0
        reports += [json.loads(line) for line in out.splitlines()]
    added = [item for item in reports if item["op"] == "added"]
    refused = [item for item in reports if item["op"] == "refused"]
    assert len(added) == 7 and [item["file"] for item in refused] == [str(shared)]
    assert "already" in refused[0]["reason"]
    register = open_register(register_url, actor="test")
    status = count_status(register, "spring")
    assert (status.info.files, status.info.scans) == (7, 7 * 400)
    assert status.found == 7 * 400 and status.counts["duplicates"] == 0
    assert status.counts["missing"] == 400  # paths[6] was never added
    register.close()
