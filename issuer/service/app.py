"""The ASGI application: the JSON API, the web desk page, and what wraps them."""

from __future__ import annotations

from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from importlib import resources
from typing import Any

from fastapi import FastAPI
from fastapi.staticfiles import StaticFiles
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from issuer.config import Settings
from issuer.register.store import Register
from issuer.service import api, problems, web
from issuer.service.state import ServiceState

#: the largest request body accepted (a scan file for reconcile is the big one)
MAX_BODY_BYTES = 8 * 1024 * 1024


class BodyLimit:
    """Refuse a body over ``limit`` bytes with 413, whether it says its length or not."""

    def __init__(self, app: ASGIApp, limit: int) -> None:
        self.app, self.limit = app, limit

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        for name, value in scope.get("headers", ()):
            if name == b"content-length":
                if not value.isdigit() or int(value) > self.limit:
                    await _too_large(scope, send, self.limit)
                    return
                # the server holds the body to its stated length
                await self.app(scope, receive, send)
                return
        # no stated length (chunked): read the body here, up to the limit, then hand it on
        parts, seen = [], 0
        while True:
            message = await receive()
            if message["type"] != "http.request":
                return
            parts.append(message.get("body", b""))
            seen += len(parts[-1])
            if seen > self.limit:
                await _too_large(scope, send, self.limit)
                return
            if not message.get("more_body", False):
                break
        body = b"".join(parts)
        delivered = False

        async def replay() -> Message:
            nonlocal delivered
            if delivered:
                return await receive()
            delivered = True
            return {"type": "http.request", "body": body, "more_body": False}

        await self.app(scope, replay, send)


async def _too_large(scope: Scope, send: Send, limit: int) -> None:
    response = problems.problem(413, f"the request body is over {limit:,} bytes", "too-large")
    await response(scope, _no_receive, send)


async def _no_receive() -> Message:  # pragma: no cover - the response reads nothing
    return {"type": "http.disconnect"}


def create_app(register: Register, *, settings: Settings | None = None,
               max_body: int = MAX_BODY_BYTES) -> Any:  # fmt: skip
    """The service over ``register`` (its engine is shared by every request)."""
    from issuer import __version__

    @asynccontextmanager
    async def lifespan(served: FastAPI) -> AsyncIterator[None]:
        yield
        served.state.issuer.close()  # acts already queued finish; their threads end

    app = FastAPI(
        lifespan=lifespan,
        title="issuer",
        version=__version__,
        summary="Registers of identifier series over HTTP: issue, check, void, replace, labels, stocktake.",
        openapi_url="/api/v1/openapi.json",
        docs_url=None,  # the interactive pages load scripts from elsewhere; the document is enough
        redoc_url=None,
    )
    if settings is None:
        from issuer.config import load_settings

        settings = load_settings()
    app.state.issuer = ServiceState(register=register, settings=settings)
    problems.install(app)
    app.include_router(api.router)
    app.include_router(web.router)
    app.mount("/static", StaticFiles(directory=str(resources.files("issuer.service") / "static")), name="static")
    return BodyLimit(app, max_body)
