"""Errors as JSON problem documents (RFC 9457), with the CLI's one-line messages.

A problem's ``type`` is a stable URI naming its kind; ``detail`` is the same line the
command-line tool prints. No stack trace ever reaches a client.
"""

from __future__ import annotations

import logging
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from starlette.exceptions import HTTPException

from issuer.errors import (
    Conflict,
    Exhausted,
    InvalidCheck,
    InvalidFormat,
    IssuerError,
    LabelError,
    NotFound,
    PermissionDenied,
    RegisterError,
    UnknownName,
    UnsupportedAlphabet,
)

MEDIA_TYPE = "application/problem+json"
_BASE = "urn:issuer:problem:"
_log = logging.getLogger("issuer.service")

_TITLES = {
    400: "Bad request",
    401: "Unauthorized",
    403: "Forbidden",
    404: "Not found",
    405: "Method not allowed",
    409: "Conflict",
    413: "Content too large",
    415: "Unsupported media type",
    422: "Unprocessable content",
    429: "Too many requests",
    500: "Internal server error",
    503: "Service unavailable",
}

# most specific first: the first class an error is an instance of decides
_STATUS: tuple[tuple[type[IssuerError], int, str], ...] = (
    (NotFound, 404, "not-found"),
    (Exhausted, 409, "exhausted"),
    (Conflict, 409, "conflict"),
    (PermissionDenied, 403, "forbidden"),
    (UnknownName, 404, "unknown-name"),
    (InvalidCheck, 422, "bad-check"),
    (UnsupportedAlphabet, 422, "unsupported"),
    (LabelError, 422, "label"),
    (InvalidFormat, 422, "invalid"),
    (RegisterError, 503, "register-unavailable"),
)


def problem(status: int, detail: str, kind: str, **extra: Any) -> JSONResponse:
    body = {"type": _BASE + kind, "title": _TITLES.get(status, "Error"), "status": status,
            "detail": detail, **extra}  # fmt: skip
    headers = {"Retry-After": "5"} if status in (429, 503) else None
    return JSONResponse(body, status_code=status, media_type=MEDIA_TYPE, headers=headers)


def status_for(exc: IssuerError) -> tuple[int, str]:
    for cls, status, kind in _STATUS:
        if isinstance(exc, cls):
            return status, kind
    return 400, "refused"


def install(app: FastAPI) -> None:
    @app.exception_handler(IssuerError)
    async def _issuer(_request: Request, exc: IssuerError) -> JSONResponse:
        status, kind = status_for(exc)
        return problem(status, exc.message, kind)

    @app.exception_handler(RequestValidationError)
    async def _validation(_request: Request, exc: RequestValidationError) -> JSONResponse:
        errors = exc.errors()
        first = errors[0] if errors else {}
        if first.get("type") == "json_invalid":
            return problem(400, "the request body is not valid JSON", "malformed-json")
        where = ".".join(str(part) for part in first.get("loc", ()) if part != "body")
        message = str(first.get("msg", "invalid request"))
        return problem(422, f"{where}: {message}" if where else message, "invalid-request")

    @app.exception_handler(HTTPException)
    async def _http(_request: Request, exc: HTTPException) -> JSONResponse:
        detail = exc.detail if isinstance(exc.detail, str) else _TITLES.get(exc.status_code, "error")
        if exc.status_code == 404 and detail == "Not Found":
            detail = "no such path in this API (the document is at /api/v1/openapi.json)"
        elif exc.status_code == 405 and detail == "Method Not Allowed":
            detail = "this path does not take that method"
        response = problem(exc.status_code, detail, f"http-{exc.status_code}")
        for name, value in (exc.headers or {}).items():
            response.headers[name] = value
        return response

    @app.exception_handler(Exception)
    async def _unexpected(_request: Request, exc: Exception) -> JSONResponse:
        # the trace goes to the server's log, never to the client
        _log.exception("unexpected error", exc_info=exc)
        return problem(500, "the service failed unexpectedly; the operator's log has the details", "internal")
