"""The service as ``issuer serve`` runs it, in a process of its own, for the benchmark:
uvicorn builds it with ``app_from_environment`` (``--factory``) over the register named in
``ISSUER_SERVED_DB`` (its series and tokens made beforehand), with the bare endpoint."""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import httpx

ROOT = Path(__file__).resolve().parents[2]


def app_from_environment() -> Any:
    """The served register's application plus ``/bare`` (uvicorn calls this)."""
    from issuer.register.store import open_register
    from issuer.service.app import create_app
    from tests.service.load import with_bare_endpoint

    register = open_register(os.environ["ISSUER_SERVED_DB"], actor="service")
    return with_bare_endpoint(create_app(register))


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


@contextmanager
def served(database: str) -> Iterator[str]:
    """Start uvicorn over ``database`` in a child process; yield its base URL."""
    port = _free_port()
    argv = [sys.executable, "-m", "uvicorn", "tests.service.served:app_from_environment", "--factory",
            "--host", "127.0.0.1", "--port", str(port), "--log-level", "warning", "--no-server-header"]  # fmt: skip
    environment = {**os.environ, "ISSUER_SERVED_DB": database}
    server = subprocess.Popen(argv, cwd=ROOT, env=environment)
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 60
        while True:
            if server.poll() is not None:
                raise RuntimeError(f"the served register did not start (exit {server.returncode})")
            try:
                if httpx.get(f"{base}/bare", timeout=2).status_code == 200:
                    break
            except httpx.TransportError:
                pass
            if time.monotonic() > deadline:
                raise RuntimeError("the served register did not answer within 60 s")
            time.sleep(0.1)
        yield base
    finally:
        server.terminate()
        try:
            server.wait(timeout=15)
        except subprocess.TimeoutExpired:
            server.kill()
            server.wait()
