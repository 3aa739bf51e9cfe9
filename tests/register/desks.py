"""Start desks as real processes (see ``desk_worker.py``) and collect what they reported."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

WORKER = Path(__file__).with_name("desk_worker.py")
#: the long mode runs the full-size concurrency and crash tests
LONG = os.environ.get("ISSUER_LONG_TESTS") == "1"


class DeskRoom:
    """Desk processes started together: ``ready()``, ``go()``, then ``finish()``."""

    def __init__(self, jobs: list[dict[str, Any]]) -> None:
        self.jobs = jobs
        self.pids: dict[int, int] = {}
        self._lines: list[dict[str, Any]] = []
        self.process = subprocess.Popen(
            [sys.executable, str(WORKER), json.dumps(jobs)],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )

    def ready(self) -> None:
        assert self.process.stdout is not None
        while len(self.pids) < len(self.jobs):
            line = self.process.stdout.readline()
            if not line:
                _, err = self.process.communicate(timeout=60)
                raise AssertionError(f"the desks did not start: {err[-3000:]}")
            record = json.loads(line)
            if record["op"] == "ready":
                self.pids[record["desk"]] = record["pid"]
            else:
                self._lines.append(record)

    def go(self) -> None:
        assert self.process.stdin is not None
        self.process.stdin.write("go\n")
        self.process.stdin.flush()

    def until(self, enough: Callable[[list[dict[str, Any]]], bool]) -> list[dict[str, Any]]:
        """Read the desks' lines as they come until ``enough(lines so far)``; those lines
        (``finish`` returns them too)."""
        assert self.process.stdout is not None
        while not enough(self._lines):
            line = self.process.stdout.readline()
            if not line:
                _, err = self.process.communicate(timeout=60)
                raise AssertionError(f"the desks stopped early: {err[-3000:]}")
            record = json.loads(line)
            self._lines.append(record)
            if record["op"] == "exit" and record["status"] != 0:  # it will never say more
                self.close()
                _, err = self.process.communicate(timeout=60)
                lost = [line for line in self._lines if line["op"] == "unknown"]
                raise AssertionError(f"desk {record['desk']} failed: {err[-3000:]}; {lost}")
        return list(self._lines)

    def pause(self) -> None:
        """SIGSTOP every desk (a desk inside an act stays there)."""
        for pid in self.pids.values():
            os.kill(pid, signal.SIGSTOP)

    def resume(self) -> None:
        for pid in self.pids.values():
            os.kill(pid, signal.SIGCONT)

    def kill(self, desk: int) -> None:
        """kill -9 one desk, wherever it is in its work."""
        try:
            os.kill(self.pids[desk], signal.SIGKILL)
        except ProcessLookupError:  # it ended already
            pass

    def finish(self, timeout: float = 900) -> tuple[dict[int, list[dict[str, Any]]], dict[int, Any]]:
        """Wait for every desk; (reports per desk, exit record per desk)."""
        try:
            out, err = self.process.communicate(timeout=timeout)
        finally:
            self.close()
        self.stderr = err
        reports: dict[int, list[dict[str, Any]]] = {desk: [] for desk in range(len(self.jobs))}
        exits: dict[int, Any] = {}
        lines = self._lines + [json.loads(line) for line in out.splitlines() if line.strip()]
        for record in lines:
            if record["op"] == "exit":
                exits[record["desk"]] = record
            else:
                reports[record["desk"]].append(record)
        assert self.process.returncode == 0, f"the desk room failed: {err[-3000:]}"
        return reports, exits

    def close(self) -> None:
        if self.process.poll() is None:
            for pid in self.pids.values():
                try:
                    os.kill(pid, signal.SIGKILL)
                except ProcessLookupError:
                    pass
            self.process.kill()
            self.process.wait()


def run_desks(jobs: list[dict[str, Any]], *, timeout: float = 1800) -> list[list[dict[str, Any]]]:
    """Run desks together, all starting at the same moment; each one's reports."""
    room = DeskRoom(jobs)
    try:
        room.ready()
        room.go()
        reports, exits = room.finish(timeout)
    finally:
        room.close()
    failed = [desk for desk, record in exits.items() if record["status"] != 0]
    assert not failed, f"desk(s) {failed} failed: {room.stderr[-3000:]}"
    assert len(exits) == len(jobs)
    return [reports[desk] for desk in range(len(jobs))]


class SerialRoom:
    """Desks run one after another in one room, each killed by the test in turn."""

    def __init__(self, jobs: list[dict[str, Any]]) -> None:
        self.jobs = jobs
        self.process = subprocess.Popen(
            [sys.executable, str(WORKER), json.dumps(jobs), "serial"],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )

    def _next(self) -> dict[str, Any]:
        assert self.process.stdout is not None
        line = self.process.stdout.readline()
        if not line:
            self.process.kill()
            _, err = self.process.communicate(timeout=60)
            raise AssertionError(f"the desk room stopped: {err[-3000:]}")
        return json.loads(line)  # type: ignore[no-any-return]

    def run_and_kill(self, delay: float) -> tuple[int, list[dict[str, Any]]]:
        """Start the next desk, kill -9 it after ``delay`` seconds; its reports."""
        record = self._next()
        assert record["op"] == "ready", record
        desk, pid = record["desk"], record["pid"]
        assert self.process.stdin is not None
        self.process.stdin.write("go\n")
        self.process.stdin.flush()
        time.sleep(delay)
        try:
            os.kill(pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        reports = []
        while True:
            record = self._next()
            if record["op"] == "exit":
                break
            reports.append(record)
        assert record["desk"] == desk
        assert record["signal"] == signal.SIGKILL, (
            f"desk {desk} ended by itself ({record}); "
            f"stderr so far: {self._stderr_tail()}"
        )
        return desk, reports

    def _stderr_tail(self) -> str:
        """Only on failure: stop the room and read what the desks wrote on stderr."""
        self.process.kill()
        _, err = self.process.communicate(timeout=60)
        return err[-3000:]

    def close(self) -> None:
        if self.process.poll() is None:
            self.process.kill()
        self.process.communicate(timeout=60)
