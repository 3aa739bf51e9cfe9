"""How the service runs register calls: on SQLite every write goes to one thread, one at a
time, in the order the requests came; reads run beside it on threads of their own;
PostgreSQL writes run a few at once."""

from __future__ import annotations

import asyncio
import threading
import time
from typing import Any

import pytest

from tests.register.pg import pg_database, pg_url  # noqa: F401


def _state(register: Any) -> Any:
    from issuer.config import load_settings
    from issuer.service.state import ServiceState

    return ServiceState(register=register, settings=load_settings())


def test_sqlite_writes_queue_in_arrival_order_on_one_thread(register: Any) -> None:
    state = _state(register)
    order: list[int] = []
    threads: set[int] = set()
    busy = [0]
    most = [0]
    reads_during_writes: list[int] = []

    def write(i: int) -> Any:
        def run() -> int:
            busy[0] += 1
            most[0] = max(most[0], busy[0])
            threads.add(threading.get_ident())
            time.sleep(0.01)
            order.append(i)
            busy[0] -= 1
            return i

        return run

    def read() -> int:
        reads_during_writes.append(busy[0])
        return threading.get_ident()

    async def main() -> tuple[list[int], list[int]]:
        writes = [asyncio.ensure_future(state.write(write(i))) for i in range(30)]
        await asyncio.sleep(0.01)
        readers = await asyncio.gather(*(state.read(read) for _ in range(5)))
        return list(await asyncio.gather(*writes)), list(readers)

    try:
        answers, reader_threads = asyncio.run(main())
    finally:
        state.close()
    assert answers == list(range(30)) and order == list(range(30))  # first come, first served
    assert most[0] == 1 and len(threads) == 1  # one writer at a time, always the same thread
    assert not threads & set(reader_threads)  # reads are not queued behind the writes
    assert any(reads_during_writes)  # ...they ran while writes were still queued


def test_threads_follow_the_connection_pool(register: Any) -> None:
    from issuer.service.state import MAX_THREADS

    state = _state(register)
    try:
        assert register.connections >= 2
        assert state._writer is not None and state._threads is not None
        assert state._writer._max_workers == 1
        # a connection for every thread: the writer's and each reader's
        assert state._threads._max_workers == min(MAX_THREADS, register.connections - 1)
    finally:
        state.close()


@pytest.mark.postgres
def test_postgres_writes_run_concurrently(pg_url: str) -> None:  # noqa: F811
    from issuer.register.store import open_register

    register = open_register(pg_url, actor="test-clerk")
    state = _state(register)
    both = threading.Barrier(2, timeout=10)

    async def main() -> list[int]:
        # two writes that each wait for the other: they finish only if they run at once
        return list(await asyncio.gather(state.write(both.wait), state.write(both.wait)))

    try:
        assert sorted(asyncio.run(main())) == [0, 1]
        assert state._writer is not None and state._threads is not None
        writers, readers = state._writer._max_workers, state._threads._max_workers
        assert 2 <= writers and writers + readers <= register.connections
    finally:
        state.close()
        register.close()
