"""A PostgreSQL primary and a synchronous standby of its own, built for one test with the
server's own tools (``initdb``, ``pg_ctl``, ``pg_basebackup``) in a temporary folder on
spare ports, and torn down (every process killed, the folder removed) whatever happens.

The server binaries are looked for under ``/usr/lib/postgresql/*/bin`` (newest first),
then on PATH; ``ISSUER_PG_BIN`` names the folder outright. PostgreSQL refuses to run as
root, so when the tests run as root the tools run as the ``postgres`` OS user through
``runuser``, in folders that user owns; as any other user they run as that user.

Nothing here is on the 5432 server the other PostgreSQL tests use.
"""

from __future__ import annotations

import os
import pwd
import shutil
import signal
import socket
import subprocess
import tempfile
import threading
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from glob import glob
from pathlib import Path

import pytest

#: the standby's name, as the primary's synchronous_standby_names asks for it
STANDBY_NAME = "issuer_standby"
TOOLS = ("initdb", "pg_ctl", "pg_basebackup", "postgres")


def find_server_tools() -> tuple[Path | None, str]:
    """The folder holding PostgreSQL's server programs, or None and why not."""
    named = os.environ.get("ISSUER_PG_BIN")
    candidates = [Path(named)] if named else []
    if not named:

        def version(folder: str) -> tuple[int, ...]:
            part = Path(folder).parent.name
            return tuple(int(x) for x in part.split(".") if x.isdigit())

        candidates += [Path(p) for p in sorted(glob("/usr/lib/postgresql/*/bin"), key=version, reverse=True)]
        on_path = shutil.which("initdb")
        if on_path:
            candidates.append(Path(on_path).parent)
    for folder in candidates:
        if all((folder / tool).is_file() for tool in TOOLS):
            return folder, ""
    where = named or "/usr/lib/postgresql/*/bin or PATH"
    return None, f"PostgreSQL's server programs ({', '.join(TOOLS)}) are not installed in {where}"


def _run_as() -> tuple[list[str], int | None, int | None, str]:
    """(command prefix, uid, gid, why not) to run the server tools as a user they accept."""
    if os.geteuid() != 0:
        return [], None, None, ""
    try:
        user = pwd.getpwnam("postgres")
    except KeyError:
        return [], None, None, "running as root and there is no 'postgres' OS user to run the server as"
    runuser = shutil.which("runuser")
    if runuser is None:
        return [], None, None, "running as root and 'runuser' is missing (needed to run the server as postgres)"
    return [runuser, "-u", "postgres", "--"], user.pw_uid, user.pw_gid, ""


def spare_port() -> int:
    """A TCP port on 127.0.0.1 that nothing listens on just now."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


class Relay:
    """A TCP relay between the standby and the primary's port: the replication link.

    ``hold()`` keeps back what the primary sends (its WAL) in the relay, as a network
    that stalls would; the standby gets nothing more and so confirms nothing more, and
    every commit on the primary waits for it. ``release()`` passes what was held on to
    the standby while the standby's answers (its confirmations) go nowhere: the standby
    has the commits, the primary never learns it. ``close()`` cuts the link, dropping
    whatever is still held, and refuses new connections.
    """

    def __init__(self, target_port: int) -> None:
        self.target_port = target_port
        self.listener = socket.create_server(("127.0.0.1", 0))
        self.port = int(self.listener.getsockname()[1])
        self.lock = threading.Lock()
        self.holding = False
        self.deaf = False
        self.held = bytearray()
        self.links: list[tuple[socket.socket, socket.socket]] = []
        self.closed = False
        threading.Thread(target=self._accept, daemon=True).start()

    def _accept(self) -> None:
        while True:
            try:
                standby, _ = self.listener.accept()
            except OSError:  # closed
                return
            try:
                primary = socket.create_connection(("127.0.0.1", self.target_port), timeout=10)
            except OSError:
                standby.close()
                continue
            primary.settimeout(None)
            with self.lock:
                if self.closed:
                    standby.close()
                    primary.close()
                    return
                self.links.append((standby, primary))
            threading.Thread(target=self._pump, args=(primary, standby, True), daemon=True).start()
            threading.Thread(target=self._pump, args=(standby, primary, False), daemon=True).start()

    def _pump(self, source: socket.socket, sink: socket.socket, downstream: bool) -> None:
        try:
            while True:
                data = source.recv(65536)
                if not data:
                    break
                with self.lock:  # decide under the lock, send outside it
                    if downstream and self.holding:
                        self.held += data
                        continue
                    if not downstream and self.deaf:
                        continue
                sink.sendall(data)
        except OSError:
            pass
        for end in (source, sink):
            try:
                end.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass

    def hold(self) -> None:
        with self.lock:
            self.holding = True

    def release(self) -> int:
        """Hand the standby everything held so far, keeping its answers from the primary;
        how many bytes went."""
        with self.lock:
            self.deaf = True
            data, self.held = bytes(self.held), bytearray()
            for standby, _primary in self.links[-1:]:
                standby.sendall(data)
            return len(data)

    def close(self) -> None:
        with self.lock:
            self.closed = True
            self.held.clear()
            links, self.links = self.links, []
        self.listener.close()
        for pair in links:
            for end in pair:
                try:
                    end.shutdown(socket.SHUT_RDWR)
                except OSError:
                    pass
                end.close()


@dataclass
class Server:
    name: str
    data: Path
    port: int
    pid: int | None = None

    def url(self, database: str) -> str:
        return f"postgresql+psycopg://postgres@127.0.0.1:{self.port}/{database}"


@dataclass
class ServerPair:
    """A primary streaming to one synchronous standby; ``kill_primary``, ``promote``."""

    bin: Path
    root: Path
    prefix: list[str]
    primary: Server
    standby: Server
    relay: Relay | None = None
    started: list[Server] = field(default_factory=list)

    def tool(self, name: str, *args: str, timeout: float = 60) -> str:
        done = subprocess.run(
            [*self.prefix, str(self.bin / name), *args],
            capture_output=True, text=True, timeout=timeout, cwd=self.root,
        )
        if done.returncode != 0:
            raise AssertionError(f"{name} {' '.join(args)} failed ({done.returncode}): {done.stderr[-2000:]}")
        return done.stdout

    def write_as_owner(self, path: Path, text: str, *, append: bool = True) -> None:
        with path.open("a" if append else "w") as handle:
            handle.write(text)
        owner = self.root.stat()
        os.chown(path, owner.st_uid, owner.st_gid)

    def start(self, server: Server) -> None:
        self.started.append(server)
        log = self.root / f"{server.name}.log"
        self.tool("pg_ctl", "-D", str(server.data), "-l", str(log), "-w", "-t", "60", "-s", "start")
        server.pid = int((server.data / "postmaster.pid").read_text().splitlines()[0])

    def sql(self, server: Server, statement: str, database: str = "postgres") -> list[tuple[object, ...]]:
        import psycopg

        with psycopg.connect(
            host="127.0.0.1", port=server.port, user="postgres", dbname=database, autocommit=True, connect_timeout=10
        ) as connection:
            cursor = connection.execute(statement)  # type: ignore[arg-type]
            return cursor.fetchall() if cursor.description else []

    def kill_primary(self) -> None:
        """SIGKILL the primary's postmaster and every backend: no shutdown, no goodbye."""
        _kill_server(self.primary)

    def promote(self) -> None:
        self.tool("pg_ctl", "-D", str(self.standby.data), "-w", "-t", "60", "-s", "promote")

    def close(self) -> None:
        for server in self.started:
            _kill_server(server)
        if self.relay is not None:
            self.relay.close()
        shutil.rmtree(self.root, ignore_errors=True)


def _children(pid: int) -> list[int]:
    """The processes whose parent is ``pid`` (the server's backends, walsender, ...)."""
    found = []
    for stat in glob("/proc/[0-9]*/stat"):
        try:
            with open(stat) as handle:
                fields = handle.read().rsplit(") ", 1)[1].split()
        except (OSError, IndexError):
            continue
        if int(fields[1]) == pid:
            found.append(int(stat.split("/")[2]))
    return found


def _signal(pid: int, number: int) -> None:
    try:
        os.kill(pid, number)
    except ProcessLookupError:
        pass


def _kill_server(server: Server) -> None:
    """Stop a server's every process at one instant, then SIGKILL them all.

    Each backend of a PostgreSQL server is a process group of its own, so killing the
    postmaster's group would leave the backends running until they notice it is gone.
    The postmaster is frozen first (it can start no one new), then its children, and
    only then is anything killed: none of them gets a moment to act on another's death.
    """
    if server.pid is None or not _alive(server.pid):
        return
    _signal(server.pid, signal.SIGSTOP)
    children = _children(server.pid)
    for child in children:
        _signal(child, signal.SIGSTOP)
    for pid in [server.pid, *children]:
        _signal(pid, signal.SIGKILL)
    deadline = time.monotonic() + 10
    while any(_alive(pid) for pid in [server.pid, *children]) and time.monotonic() < deadline:
        time.sleep(0.01)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    try:  # a zombie left by pg_ctl's start is dead for our purposes
        with open(f"/proc/{pid}/stat") as stat:
            return stat.read().split(") ", 1)[1][:1] != "Z"
    except (OSError, IndexError):
        return True


def _configure(pair: ServerPair, server: Server, lines: list[str]) -> None:
    pair.write_as_owner(server.data / "postgresql.auto.conf", "".join(f"{line}\n" for line in lines))


def build_pair(
    *, synchronous_commit: str = "remote_apply", before_standby: object = None
) -> Iterator[ServerPair]:
    """Build, start and yield a primary with its synchronous standby; tear both down.

    ``before_standby(pair)`` runs on the primary before its commits wait for the standby
    (while the standby is being copied and started), so setting up a register there
    pays no round trip to the standby per statement.
    """
    folder, why = find_server_tools()
    if folder is None:
        pytest.skip(why)
    prefix, uid, gid, why = _run_as()
    if why:
        pytest.skip(why)
    root = Path(tempfile.mkdtemp(prefix="issuer-failover-"))
    if uid is not None and gid is not None:
        os.chown(root, uid, gid)
    pair = ServerPair(
        bin=folder, root=root, prefix=prefix,
        primary=Server("primary", root / "primary", spare_port()),
        standby=Server("standby", root / "standby", spare_port()),
    )
    try:
        pair.tool("initdb", "-D", str(pair.primary.data), "-U", "postgres", "-A", "trust", "--no-sync",
                  "--no-instructions", "-E", "UTF8", "--locale", "C")
        common = [
            "listen_addresses = '127.0.0.1'",
            f"unix_socket_directories = '{root}'",
            "shared_buffers = 16MB",
            "max_connections = 40",
            "max_wal_senders = 4",
            "wal_level = replica",
            "hot_standby = on",
            "fsync = on",
        ]
        _configure(pair, pair.primary, [
            *common, f"port = {pair.primary.port}", f"synchronous_commit = {synchronous_commit}",
        ])
        pair.start(pair.primary)
        # the standby is copied and started while the register is set up on the primary
        # (the two overlap; the standby replays the register's making as it streams)
        standby_problem: list[BaseException] = []
        making = threading.Thread(target=_make_standby, args=(pair, standby_problem))
        making.start()
        try:
            if callable(before_standby):
                before_standby(pair)
        finally:
            making.join()
        if standby_problem:
            raise standby_problem[0]
        # from now on every commit on the primary waits for the standby named here
        pair.sql(pair.primary, f"ALTER SYSTEM SET synchronous_standby_names = '{STANDBY_NAME}'")
        pair.sql(pair.primary, "SELECT pg_reload_conf()")
        _wait_synchronous(pair)
        yield pair
    finally:
        pair.close()


def _make_standby(pair: ServerPair, problems: list[BaseException]) -> None:
    try:
        # the standby reaches the primary through a relay the test can stall
        pair.relay = Relay(pair.primary.port)
        pair.tool("pg_basebackup", "-D", str(pair.standby.data), "-h", "127.0.0.1", "-p", str(pair.primary.port),
                  "-U", "postgres", "--checkpoint=fast", "-X", "stream", "--no-sync", "-R")
        # the standby's own settings: its port, its name as the primary knows it, and no
        # synchronous standby of its own once promoted (there is none: commits would hang)
        _configure(pair, pair.standby, [
            f"port = {pair.standby.port}",
            f"primary_conninfo = 'host=127.0.0.1 port={pair.relay.port} user=postgres "
            f"application_name={STANDBY_NAME}'",
            "synchronous_standby_names = ''",
        ])
        pair.start(pair.standby)
    except BaseException as exc:  # noqa: BLE001 - handed to the test's thread
        problems.append(exc)


def _wait_synchronous(pair: ServerPair, timeout: float = 30) -> None:
    deadline = time.monotonic() + timeout
    rows: list[tuple[object, ...]] = []
    while time.monotonic() < deadline:
        rows = pair.sql(pair.primary, "SELECT application_name, sync_state, state FROM pg_stat_replication")
        if (STANDBY_NAME, "sync", "streaming") in rows:
            return
        time.sleep(0.05)
    raise AssertionError(f"the standby never became synchronous: {rows}")
