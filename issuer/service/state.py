"""What the service keeps between requests: the register, who is calling, the threads that
run the register's blocking calls (one writer on SQLite, fed in arrival order), failed-token
counts, and the web page's sessions."""

from __future__ import annotations

import asyncio
import hashlib
import secrets
import threading
import time
from collections import deque
from collections.abc import Callable
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field, replace
from typing import Any, TypeVar

from issuer.config import Settings
from issuer.register.store import Register
from issuer.register.tokens import TokenInfo, role_may, token_active, verify_token

T = TypeVar("T")

#: failed tokens from one address within this many seconds...
FAILURE_WINDOW_S = 60.0
#: ...beyond this many are answered 429 without looking at the token
FAILURE_LIMIT = 10
#: a web session ends after this long without a request
SESSION_IDLE_S = 8 * 3600.0
#: the most threads that run register reads at once: a thread per pooled connection, up to
#: this (the work holds the interpreter lock most of the time; more threads only queue there)
MAX_THREADS = 8
#: on PostgreSQL, the most writes at once; they have threads of their own, so writers queued
#: on a series' row lock never leave reads without a thread
MAX_WRITERS = 4


@dataclass(frozen=True)
class Caller:
    """Who sent a request: a token's name (the log's actor) and its role."""

    name: str
    role: str
    lookup: str

    def may(self, act: str) -> bool:
        return role_may(self.role, act)


@dataclass
class WebSession:
    caller: Caller
    csrf: str
    last_used: float


@dataclass
class ServiceState:
    register: Register
    #: the settings in force (label layouts, fonts, ...), as the CLI reads them
    settings: Settings
    clock: Callable[[], float] = time.monotonic
    _threads: ThreadPoolExecutor | None = None
    _writer: ThreadPoolExecutor | None = None
    _lock: threading.Lock = field(default_factory=threading.Lock)
    _verified: dict[str, Caller] = field(default_factory=dict)
    _failures: dict[str, deque[float]] = field(default_factory=dict)
    _sessions: dict[str, WebSession] = field(default_factory=dict)

    # -- the register, acting as the caller ------------------------------------------

    def acting(self, caller: Caller) -> Register:
        """The register with the caller's token name as the log's actor (same engine)."""
        return replace(self.register, actor=caller.name)

    def __post_init__(self) -> None:
        connections = self.register.connections
        if self.register.backend == "sqlite":
            # SQLite has one writer at a time: every write goes to one thread, in the order the
            # requests came (the executor's queue is first in, first out). A waiting desk holds
            # no thread and no connection, and nobody spins on the file's lock.
            writers = 1
        else:
            # PostgreSQL serves concurrent writers; a few at once, the rest wait their turn here
            writers = max(1, min(MAX_WRITERS, connections // 3))
        readers = max(1, min(MAX_THREADS, connections - writers))
        self._writer = ThreadPoolExecutor(writers, thread_name_prefix="issuer-writer")
        self._threads = ThreadPoolExecutor(readers, thread_name_prefix="issuer-register")

    def _submit(self, work: Callable[[], T], *, writing: bool) -> Future[T]:
        executor = self._writer if writing else self._threads
        assert executor is not None
        return executor.submit(work)

    async def read(self, work: Callable[[], T]) -> T:
        """Run a blocking register call off the event loop, on the register's threads."""
        return await asyncio.wrap_future(self._submit(work, writing=False))

    async def write(self, work: Callable[[], T]) -> T:
        """Run a writing act on the writers' threads, in arrival order: on SQLite one thread
        (one act at a time); on PostgreSQL a few at once (the database serves concurrent
        writers). Reads never wait behind writes for a thread."""
        return await asyncio.wrap_future(self._submit(work, writing=True))

    def write_blocking(self, work: Callable[[], T]) -> T:
        """:meth:`write` for code already running in a worker thread of the server's own
        pool (never on the writers' threads: it would wait on itself)."""
        return self._submit(work, writing=True).result()

    def close(self) -> None:
        for executor in (self._threads, self._writer):
            if executor is not None:
                executor.shutdown(wait=True)

    # -- tokens -----------------------------------------------------------------------

    def blocked(self, address: str) -> bool:
        """Whether ``address`` has failed too often lately to be heard."""
        now = self.clock()
        with self._lock:
            recent = self._failures.get(address)
            while recent and now - recent[0] > FAILURE_WINDOW_S:
                recent.popleft()
            return recent is not None and len(recent) >= FAILURE_LIMIT

    def failed(self, address: str) -> int:
        with self._lock:
            recent = self._failures.setdefault(address, deque())
            recent.append(self.clock())
            return len(recent)

    def caller_for(self, presented: str) -> Caller | None:
        """The caller a token names, or None. The slow hash runs once per token and
        process; a revocation still takes effect at the next request."""
        key = hashlib.sha256(presented.encode("utf-8", "replace")).hexdigest()
        with self._lock:
            known = self._verified.get(key)
        if known is not None:
            if token_active(self.register, known.lookup):
                return known
            with self._lock:
                self._verified.pop(key, None)
            return None
        info: TokenInfo | None = verify_token(self.register, presented)
        if info is None:
            return None
        caller = Caller(info.name, info.role, info.lookup)
        with self._lock:
            self._verified[key] = caller
        return caller

    # -- the web page's sessions -------------------------------------------------------

    def open_session(self, caller: Caller) -> str:
        sid = secrets.token_urlsafe(32)
        with self._lock:
            self._sessions[sid] = WebSession(caller, secrets.token_urlsafe(24), self.clock())
        return sid

    def session(self, sid: str | None) -> WebSession | None:
        if not sid:
            return None
        now = self.clock()
        with self._lock:
            found = self._sessions.get(sid)
            if found is None:
                return None
            if now - found.last_used > SESSION_IDLE_S:
                del self._sessions[sid]
                return None
            found.last_used = now
        if not token_active(self.register, found.caller.lookup):
            self.close_session(sid)
            return None
        return found

    def close_session(self, sid: str | None) -> None:
        with self._lock:
            self._sessions.pop(sid or "", None)


def client_address(scope_client: Any) -> str:
    return str(scope_client[0]) if scope_client else "unknown"
