"""Calling the service in tests: through httpx's ASGI transport (no network)."""

from __future__ import annotations

import asyncio
from typing import Any

import httpx


class Api:
    """A synchronous face over an ASGI app; ``token`` goes in the Authorization header."""

    def __init__(self, app: Any, token: str | None = None, client: tuple[str, int] = ("127.0.0.1", 50000)) -> None:
        self.app, self.token, self.client = app, token, client
        self.cookies = httpx.Cookies()

    def as_(self, token: str | None) -> Api:
        return Api(self.app, token, self.client)

    def request(self, method: str, url: str, **kwargs: Any) -> httpx.Response:
        headers = dict(kwargs.pop("headers", {}) or {})
        if self.token is not None:
            headers.setdefault("Authorization", f"Bearer {self.token}")

        async def go() -> httpx.Response:
            transport = httpx.ASGITransport(app=self.app, raise_app_exceptions=False, client=self.client)
            async with httpx.AsyncClient(transport=transport, base_url="http://desk.test",
                                         cookies=self.cookies) as client:  # fmt: skip
                response = await client.request(method, url, headers=headers, **kwargs)
                self.cookies.update(client.cookies)
                return response

        return asyncio.run(go())

    def get(self, url: str, **kwargs: Any) -> httpx.Response:
        return self.request("GET", url, **kwargs)

    def post(self, url: str, **kwargs: Any) -> httpx.Response:
        return self.request("POST", url, **kwargs)
