"""Many desks at once over real HTTP: concurrent clients issuing (each with an
Idempotency-Key), checking and voiding, then retrying some issues. Used by the load
test and by the service benchmark."""

from __future__ import annotations

import asyncio
import random
import time
from dataclasses import dataclass, field
from typing import Any

import httpx


@dataclass
class LoadResult:
    issued: dict[str, list[str]] = field(default_factory=dict)  # idempotency key -> codes
    retried: dict[str, list[str]] = field(default_factory=dict)
    retry_statuses: list[int] = field(default_factory=list)
    replayed: list[bool] = field(default_factory=list)
    statuses: list[int] = field(default_factory=list)
    latency: dict[str, list[float]] = field(default_factory=lambda: {"issue": [], "check": [], "void": [], "bare": []})

    @property
    def server_errors(self) -> int:
        return sum(1 for status in self.statuses if status >= 500)


async def _client(base: str, clerk: str, admin: str, index: int, issues: int, result: LoadResult,
                  series: str, rng: random.Random) -> None:  # fmt: skip
    limits = httpx.Limits(max_connections=1)
    async with httpx.AsyncClient(base_url=base, limits=limits, timeout=120) as client:
        mine: list[str] = []
        for n in range(issues):
            key = f"desk{index}-{n}"
            began = time.perf_counter()
            response = await client.post(f"/api/v1/series/{series}/issue", json={"count": 1},
                                         headers={"Authorization": f"Bearer {clerk}", "Idempotency-Key": key})  # fmt: skip
            result.latency["issue"].append(time.perf_counter() - began)
            result.statuses.append(response.status_code)
            if response.status_code == 201:
                codes = [c["code"] for c in response.json()["codes"]]
                result.issued[key] = codes
                mine.extend(codes)
            # a check of a code just issued, and now and then of a typo
            if mine:
                target = rng.choice(mine)
                began = time.perf_counter()
                answer = await client.get(f"/api/v1/check/{target}", headers={"Authorization": f"Bearer {clerk}"})
                result.latency["check"].append(time.perf_counter() - began)
                result.statuses.append(answer.status_code)
            began = time.perf_counter()
            await client.get("/bare")
            result.latency["bare"].append(time.perf_counter() - began)
            if n % 10 == 9 and mine:
                victim = mine.pop(0)
                began = time.perf_counter()
                voided = await client.post(f"/api/v1/codes/{victim}/void", json={"reason": "load test"},
                                           headers={"Authorization": f"Bearer {admin}"})  # fmt: skip
                result.latency["void"].append(time.perf_counter() - began)
                result.statuses.append(voided.status_code)
        # retry some requests as a desk would after a lost answer: the same codes come back
        for n in range(0, issues, max(1, issues // 5)):
            key = f"desk{index}-{n}"
            response = await client.post(f"/api/v1/series/{series}/issue", json={"count": 1},
                                         headers={"Authorization": f"Bearer {clerk}", "Idempotency-Key": key})  # fmt: skip
            result.statuses.append(response.status_code)
            result.retry_statuses.append(response.status_code)
            if response.status_code == 201:
                result.retried[key] = [c["code"] for c in response.json()["codes"]]
                result.replayed.append(response.json()["replayed"])


def run_load(base: str, clerk: str, admin: str, *, clients: int, issues: int, series: str = "tools",
             seed: int = 7) -> LoadResult:  # fmt: skip
    result = LoadResult()
    rng = random.Random(seed)

    async def main() -> None:
        await asyncio.gather(*(
            _client(base, clerk, admin, index, issues, result, series, random.Random(rng.random()))
            for index in range(clients)
        ))  # fmt: skip

    asyncio.run(main())
    return result


def with_bare_endpoint(app: Any) -> Any:
    """``app`` plus ``/bare``, a constant answer with no work: the floor a request costs."""

    async def wrapped(scope: Any, receive: Any, send: Any) -> None:
        if scope["type"] == "http" and scope["path"] == "/bare":
            await send({"type": "http.response.start", "status": 200,
                        "headers": [(b"content-type", b"application/json")]})  # fmt: skip
            await send({"type": "http.response.body", "body": b'{"ok":true}'})
            return
        await app(scope, receive, send)

    return wrapped


def percentile(values: list[float], fraction: float) -> float:
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, int(fraction * len(ordered)))]
