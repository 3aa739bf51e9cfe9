"""Who is calling: a bearer token in the ``Authorization`` header (the API) or a session
cookie (the web page), and whether their role allows the act."""

from __future__ import annotations

import asyncio

from fastapi import HTTPException, Request

from issuer.service.state import Caller, ServiceState, client_address

#: a failed token costs its sender this much more waiting per recent failure (capped)
FAILURE_DELAY_S = 0.2
FAILURE_DELAY_CAP_S = 2.0


async def caller_from_header(request: Request) -> Caller:
    state: ServiceState = request.app.state.issuer
    address = client_address(request.client)
    if state.blocked(address):
        raise HTTPException(429, "too many failed tokens from this address; wait a minute")
    header = request.headers.get("authorization", "")
    scheme, _, presented = header.partition(" ")
    if scheme.lower() != "bearer" or not presented.strip():
        raise HTTPException(401, "send a token: 'Authorization: Bearer <token>' (issuer tokens add)",
                            headers={"WWW-Authenticate": 'Bearer realm="issuer"'})  # fmt: skip
    caller = await state.read(lambda: state.caller_for(presented.strip()))
    if caller is None:
        await slow_down(state, address)
        raise HTTPException(401, "the token is not valid (unknown, mistyped or revoked)",
                            headers={"WWW-Authenticate": 'Bearer realm="issuer", error="invalid_token"'})  # fmt: skip
    return caller


async def slow_down(state: ServiceState, address: str) -> None:
    """Count a failure from ``address`` and make its sender wait: guessing gets slower
    (the wait holds no thread: other desks are served meanwhile)."""
    failures = state.failed(address)
    await pause(min(FAILURE_DELAY_S * failures, FAILURE_DELAY_CAP_S))


async def pause(seconds: float) -> None:
    await asyncio.sleep(seconds)


def require(caller: Caller, act: str) -> None:
    if not caller.may(act):
        raise HTTPException(403, f"the {caller.role} role may not {act}: ask an admin")
