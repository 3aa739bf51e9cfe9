"""Failover without loss: desks issue on a PostgreSQL primary with a synchronous standby
(``synchronous_commit = remote_apply``), the primary is killed (SIGKILL, every server
process) in the middle of their traffic, the standby is promoted and the desks carry on
against it. On the way, the two cases synchronous replication leaves open are staged
(see the test's own docstring): a commit whose wait was ended, visible on the primary,
told to no one; and a commit waiting on the primary alone when it dies.

What must hold afterwards, checked through issuer's own commands and API:
every code a desk was told it received is in the new primary's register, and nothing
else is; no code was handed out twice; the in-order series is gapless; an act whose
outcome the desk could not know (the server died under it) returns, retried under its
request id, the codes it was given the first time, or is issued once; ``log verify`` and
``doctor`` pass on the promoted server.

The pair is built from PostgreSQL's own tools (tests/register/pgpair.py); the test skips
with the reason when those are not installed. It runs in the default suite: about 10 s
of setup (initdb, the register's migrations, a base backup) and 5-8 s of traffic and
checks on a loaded 2-core machine.
"""

from __future__ import annotations

import json
import os
import threading
import time
from collections import Counter
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from issuer.errors import CommitUnconfirmed
from tests.register.desks import DeskRoom
from tests.register.pgpair import ServerPair, build_pair

DATABASE = "register"
#: desks per series; each keeps issuing until it has done AFTER acts on the new server
DESKS, AFTER = 3, 3
#: the primary is killed once the desks together have been told this many acts
BEFORE_KILL = 18
SERIES = {
    "tools": ["--scheme", "luhn", "--length", "6", "--prefix", "T", "--title", "Tool tags"],
    "cards": ["--scheme", "luhn", "--length", "7", "--prefix", "M", "--mode", "scattered", "--title", "Member cards"],
}


def cli(*args: str) -> Any:
    from typer.testing import CliRunner

    from issuer.cli.app import app

    return CliRunner().invoke(app, list(args), env={"COLUMNS": "120"})


def _make_register(pair: ServerPair) -> None:
    """On the primary, before its commits wait for the standby: the database, the
    register's schema and its two series."""
    pair.sql(pair.primary, f'CREATE DATABASE "{DATABASE}"')
    url = pair.primary.url(DATABASE)
    for args in (["db", "init"], *(["series", "add", key, *spec] for key, spec in SERIES.items())):
        result = cli(*args, "--db", url)
        assert result.exit_code == 0, f"{args}: {result.output}"


@pytest.fixture
def key_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """The register's key file named outright, as the README asks for a primary and a
    standby: the default name comes from the server's host and port, which a failover
    changes, and the scattered series could not issue on the promoted standby."""
    path = tmp_path / "keys" / "register.key"
    path.parent.mkdir(mode=0o700)
    monkeypatch.setenv("ISSUER_KEY_FILE", str(path))
    return path


@pytest.fixture
def pair(key_file: Path) -> Iterator[ServerPair]:
    yield from build_pair(synchronous_commit="remote_apply", before_standby=_make_register)


def _exported(url: str, key: str) -> list[str]:
    result = cli("export", key, "--format", "json", "--db", url)
    assert result.exit_code == 0, result.output
    return [row["code"] for row in json.loads(result.stdout)]


class _Replay(threading.Thread):
    """An issue retried under its request id, in a thread of its own."""

    def __init__(self, url: str, key: str, count: int, request: str, key_file: Path) -> None:
        super().__init__(daemon=True)
        self.args_ = (url, key, count, request)
        self.key_file = key_file
        self.result: Any = None
        self.error: BaseException | None = None
        self.start()

    def run(self) -> None:
        from issuer.register.issuing import issue_codes
        from issuer.register.store import open_register

        url, key, count, request = self.args_
        register = open_register(url, actor="auditor", create=False, key_file=self.key_file)
        try:
            self.result = issue_codes(register, key, count, request_id=request)
        except BaseException as exc:  # noqa: BLE001 - handed to the test
            self.error = exc
        finally:
            register.close()


def _sync_waiters(pair: ServerPair, name: str | None = None) -> list[int]:
    """The primary's backends whose commit waits for the standby's confirmation (only
    those of connections named ``name``, if given)."""
    rows = pair.sql(pair.primary, "SELECT pid FROM pg_stat_activity WHERE wait_event = 'SyncRep'"
                    + ("" if name is None else f" AND application_name = '{name}'"))
    return [int(pid) for (pid,) in rows]  # type: ignore[call-overload]


def _wait(what: str, done: Any, timeout: float = 30) -> Any:
    deadline = time.monotonic() + timeout
    while not (result := done()):
        assert time.monotonic() < deadline, f"gave up waiting: {what}"
        time.sleep(0.02)
    return result


def _told(lines: list[dict[str, Any]], jobs: list[dict[str, Any]]) -> list[tuple[str, str]]:
    return [(jobs[line["desk"]]["series"], code) for line in lines if line["op"] in ("issue", "retried")
            for code in line["codes"]]


def _all_blocked(count: int) -> Any:
    """Every desk's latest line says it is inside an act."""
    def check(lines: list[dict[str, Any]]) -> bool:
        last = {line["desk"]: line["op"] for line in lines}
        return len(last) == count and all(op == "begin" for op in last.values())
    return check


def test_no_told_code_is_lost_across_a_failover(pair: ServerPair, key_file: Path, tmp_path: Path) -> None:
    """The story: desks issue; the replication link stalls, so the commits in flight
    (X, one per series at most) wait for the standby; their sessions are ended (as a
    primary restart would end them): X is committed and visible on the primary, its desk
    was told nothing. The link passes X on to the standby, but the standby's
    confirmation never gets back. A replay of X on the old primary must wait for the
    standby like an issue, and its cancelled wait is an unknown outcome, not a success.
    The next commits, Y, wait on the primary alone; their waits are cancelled (the COMMIT
    then reports success with a warning: the desks must take it as unknown); the primary
    is killed with commits still waiting. After promotion X must come back under its
    request ids with the same codes, and Y (never replicated) is issued once."""
    started = time.monotonic()
    assert pair.relay is not None
    switch = tmp_path / "new-server"
    old_url, new_url = pair.primary.url(DATABASE), pair.standby.url(DATABASE)
    jobs = [
        {"mode": "failover", "db": old_url, "series": key, "switch": str(switch),
         "after": AFTER, "seed": desk, "actor": f"{key}-desk-{desk}", "key_file": str(key_file)}
        for key in SERIES for desk in range(DESKS)
    ]
    room = DeskRoom(jobs)
    try:
        room.ready()
        room.go()
        room.until(lambda lines: sum(line["op"] == "issue" for line in lines) >= BEFORE_KILL)
        traffic = time.monotonic()

        pair.relay.hold()  # the link stalls: commits now wait on the primary...

        def held_waiters() -> list[int]:
            """Commits still waiting a moment later (one whose WAL left before the stall
            is confirmed and goes on)."""
            first = set(_sync_waiters(pair))
            if not first:
                return []
            time.sleep(0.3)
            return sorted(first & set(_sync_waiters(pair)))
        _wait("a commit held waiting for the standby", held_waiters)
        # ... and soon every desk is inside an act, waiting for the standby or for a lock
        lines = room.until(_all_blocked(len(jobs)))
        # the desks stand still (no other act can reach its COMMIT) while the sessions of
        # the waiting commits (X: one per series at most) are ended, as a primary restart
        # or an administrator would end them
        room.pause()
        time.sleep(0.3)  # a COMMIT already sent reaches its wait
        xs = _sync_waiters(pair)
        assert xs, "no commit waits for the standby while the link is held"
        for x in xs:
            pair.sql(pair.primary, f"SELECT pg_terminate_backend({x})")
        # X is committed and visible on the primary, though its desk was told nothing
        told_before = {code for _key, code in _told(lines, jobs)}
        on_primary = {code for key in SERIES for code in _exported(old_url, key)}
        x_codes = on_primary - told_before
        assert told_before <= on_primary and x_codes

        # X reaches the standby; the standby's confirmation never gets back
        def standby_has_x() -> bool:
            pair.relay.release()
            return on_primary <= {code for key in SERIES for code in _exported(new_url, key)}
        _wait("X on the standby", standby_has_x)
        room.resume()
        x_lines = [line for line in room.until(lambda lines: sum(line["op"] == "unknown" for line in lines) >= len(xs))
                   if line["op"] == "unknown"]
        # the next commits, Y, wait on the primary alone: held in the link, not on the standby
        ys = _wait("a second commit waiting", lambda: [pid for pid in _sync_waiters(pair) if pid not in xs])

        # X retried on the old primary: its codes are there, but the replay waits for the
        # standby's confirmation as an issue would (it never comes) ...
        replay = _Replay(old_url + "?application_name=issuer-replay", jobs[x_lines[0]["desk"]]["series"],
                         x_lines[0]["count"], x_lines[0]["request"], key_file)
        waiting = _wait("the replay waiting", lambda: _sync_waiters(pair, "issuer-replay"))[0]
        assert replay.is_alive()
        # ... and a cancelled wait is an unknown outcome, not a success (the COMMIT only warned)
        pair.sql(pair.primary, f"SELECT pg_cancel_backend({waiting})")
        replay.join(30)
        assert isinstance(replay.error, CommitUnconfirmed), replay.error or replay.result
        # Y's wait is cancelled too: its desk must not take the COMMIT's success for one
        ys = [pid for pid in _sync_waiters(pair) if pid not in xs and pid != waiting]
        for y in ys:
            pair.sql(pair.primary, f"SELECT pg_cancel_backend({y})")
        seen = {*xs, *ys, waiting}
        _wait("a third commit waiting", lambda: [p for p in _sync_waiters(pair) if p not in seen])
        pair.kill_primary()
        killed = time.monotonic()
        pair.relay.close()  # Y, held in the link, is gone with the primary
        pair.promote()
        promoted = time.monotonic()
        staged = switch.with_suffix(".part")
        staged.write_text(new_url)
        os.replace(staged, switch)  # the desks see the whole address or none
        reports, exits = room.finish(timeout=120)
        finished = time.monotonic()
    finally:
        room.close()
    failed = {desk: record for desk, record in exits.items() if record["status"] != 0}
    assert not failed, f"desks failed: {failed}; {room.stderr[-3000:]}"

    lines = [line for desk in sorted(reports) for line in reports[desk]]
    told = _told(lines, jobs)
    unknown = {line["request"] for line in lines if line["op"] == "unknown"}
    retried = {line["request"]: line for line in lines if line["op"] == "retried"}
    # every desk lost the server under one act (it never stops issuing), and retried it
    assert len(unknown) == len(jobs) and set(retried) == unknown
    for line in retried.values():
        assert len(line["codes"]) == line["count"]
    # X was on the standby: its retry replays the very codes the old primary had given
    # it; every other act in flight (Y among them) had not reached the standby and is
    # issued now, once
    replayed = sorted(line["request"] for line in retried.values() if line["replayed"])
    fresh = sorted(line["request"] for line in retried.values() if not line["replayed"])
    came_back = [retried[line["request"]] for line in x_lines]
    assert all(line["replayed"] for line in came_back), "X did not come back under its request id"
    # X's codes are among those the old primary showed untold (an act acknowledged just
    # before the stall may be told only after that look, and another one committed
    # there may come back under its own request id at the kill)
    assert {code for line in came_back for code in line["codes"]} <= x_codes
    assert fresh, "no act in flight was issued anew (Y was on the standby?)"

    # no code twice, across desks and series
    codes = [code for _key, code in told]
    assert len(set(codes)) == len(codes), [c for c, n in Counter(codes).items() if n > 1]

    # every code a desk was told of is on the new primary, and nothing else is
    for key in SERIES:
        held = _exported(new_url, key)
        assert len(set(held)) == len(held)
        assert sorted(held) == sorted(code for k, code in told if k == key), f"{key}: register and desks disagree"
    # in order and gapless: the bodies of the in-order series are 1..n
    bodies = sorted(int(code[1:7]) for key, code in told if key == "tools")
    assert bodies == list(range(1, len(bodies) + 1))

    # retried again now, the acts whose outcome was unknown and each desk's last act
    # before the stall return the same codes (replayed, nothing issued)
    from issuer.register.issuing import issue_codes
    from issuer.register.store import open_register

    last_told = {line["desk"]: line for line in lines if line["op"] == "issue" and not line["moved"]
                 and set(line["codes"]) <= told_before}
    again_acts = [*retried.values(), *last_told.values()]
    retrying = time.monotonic()
    # through a URL naming both servers, the dead one first (as the README advises):
    # libpq passes over it and keeps the one that accepts writes
    both = (f"postgresql+psycopg://postgres@/{DATABASE}?host=127.0.0.1:{pair.primary.port}"
            f"&host=127.0.0.1:{pair.standby.port}&target_session_attrs=read-write")
    register = open_register(both, actor="auditor", create=False, key_file=key_file)
    try:
        for line in again_acts:
            again = issue_codes(register, jobs[line["desk"]]["series"], line["count"], request_id=line["request"])
            assert again.replayed and [c.code for c in again.codes] == line["codes"], line["request"]
    finally:
        register.close()
    for key in SERIES:  # and the retries issued nothing more
        assert len(_exported(new_url, key)) == sum(1 for k, _ in told if k == key)

    verifying = time.monotonic()
    verify = cli("log", "verify", "--json", "--db", new_url)
    assert verify.exit_code == 0, verify.output
    doctor = cli("doctor", "--json", "--db", new_url)
    assert doctor.exit_code == 0, doctor.output

    elapsed = time.monotonic() - started
    print(
        f"\nfailover: {len(codes)} codes in {sum(line['op'] in ('issue', 'retried') for line in lines)} acts; "
        f"in flight at the kill: {len(unknown)} acts ({sum(retried[r]['count'] for r in unknown)} codes), "
        f"{len(replayed)} on the standby unacknowledged (replayed), {len(fresh)} not on the standby "
        f"(issued on retry; {len(ys)} of them committed on the old primary alone, their wait cancelled); "
        f"X: {len(xs)} commit(s) ended while waiting; seconds: traffic {traffic - started:.1f}, "
        f"stall to kill {killed - traffic:.1f}, promote {promoted - killed:.2f}, "
        f"desks finish {finished - promoted:.1f}, exports {retrying - finished:.1f}, "
        f"retries {verifying - retrying:.1f}, verify+doctor {time.monotonic() - verifying:.1f}; "
        f"whole call {elapsed:.1f}"
    )
