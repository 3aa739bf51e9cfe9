"""The web desk page at ``/``: a scan field that keeps focus, the answer with its
suggestions, and buttons for the acts the signed-in role may do.

Server-rendered HTML (Jinja2, autoescaped) with no JavaScript, web fonts, or anything
fetched from elsewhere. The session cookie is HttpOnly and SameSite=Strict; every form
that changes something carries a CSRF token bound to the session.
"""

from __future__ import annotations

import hmac
import secrets
from importlib import resources
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import HTMLResponse, RedirectResponse, Response
from fastapi.templating import Jinja2Templates

from issuer.errors import IssuerError
from issuer.service.auth import slow_down
from issuer.service.state import Caller, ServiceState, WebSession, client_address

router = APIRouter(include_in_schema=False)
templates = Jinja2Templates(directory=str(resources.files("issuer.service") / "templates"))

SESSION_COOKIE = "issuer_desk"
LOGIN_COOKIE = "issuer_login"

#: words and a symbol for every answer, so colour is never the only signal
WORDS = {
    "issued": "In use: issued by this register",
    "voided": "Voided: do not accept",
    "not_issued": "Never issued",
    "bad_check": "Typing or reading error",
    "malformed": "Not a code",
    "expired": "Expired",
    "suspended": "Suspended",
}
MARKS = {"issued": "✓", "voided": "✗", "not_issued": "✗", "bad_check": "?", "malformed": "✗"}

SECURITY_HEADERS = {
    "Content-Security-Policy": "default-src 'none'; style-src 'self'; img-src 'self'; "
    "form-action 'self'; frame-ancestors 'none'; base-uri 'none'",
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
    "Cache-Control": "no-store",
}


class _Words(dict[str, str]):
    def __missing__(self, key: str) -> str:
        return key.replace("_", " ").capitalize()


def _state(request: Request) -> ServiceState:
    return request.app.state.issuer  # type: ignore[no-any-return]


def _secure(request: Request) -> bool:
    return request.url.scheme == "https" or request.headers.get("x-forwarded-proto") == "https"


def _page(request: Request, name: str, context: dict[str, Any], status: int = 200) -> HTMLResponse:
    context.setdefault("caller", None)
    context.setdefault("message", None)
    response = templates.TemplateResponse(request, name, context, status_code=status)
    response.headers.update(SECURITY_HEADERS)
    return response


def _login_page(request: Request, message: str | None = None, status: int = 200) -> HTMLResponse:
    token = secrets.token_urlsafe(24)
    response = _page(request, "login.html", {"csrf": token, "message": message}, status)
    response.set_cookie(LOGIN_COOKIE, token, httponly=True, samesite="strict", secure=_secure(request), path="/")
    return response


def _session(request: Request) -> WebSession | None:
    return _state(request).session(request.cookies.get(SESSION_COOKIE))


def _desk(request: Request, web: WebSession, *, code: str | None = None, message: str | None = None,
          message_kind: str = "done", status: int = 200) -> HTMLResponse:  # fmt: skip
    from issuer.register.desk import check_codes
    from issuer.register.series import all_series

    state = _state(request)
    caller = web.caller
    answer = None
    with state.register.reading() as session:
        if code is not None and code.strip():
            answer = check_codes(session, [code[:200]], state.register.clock())[0]
        series = [{"key": s.key, "title": s.title} for s in all_series(session)]
    may = {act: caller.may(act) for act in ("issue", "void", "replace", "reprint")}
    context = {
        "caller": caller, "csrf": web.csrf, "answer": answer, "series": series, "may": may,
        "marks": _Words(MARKS), "words": _Words(WORDS), "message": message,
        "message_kind": message_kind, "request_key": secrets.token_urlsafe(12),
    }  # fmt: skip
    return _page(request, "desk.html", context, status)


@router.get("/", response_class=HTMLResponse)
def desk(request: Request, code: str | None = None) -> Response:
    web = _session(request)
    if web is None:
        return _login_page(request)
    return _desk(request, web, code=code)


@router.post("/login")
async def login(request: Request) -> Response:
    state = _state(request)
    form = await request.form()
    expected = request.cookies.get(LOGIN_COOKIE, "")
    given = str(form.get("csrf", ""))
    if not expected or not hmac.compare_digest(expected, given):
        return _login_page(request, "The sign-in form expired; try again.", 403)
    address = client_address(request.client)
    if state.blocked(address):
        return _login_page(request, "Too many failed sign-ins from this address; wait a minute.", 429)
    presented = str(form.get("token", ""))[:200]
    caller: Caller | None = await state.read(lambda: state.caller_for(presented))
    if caller is None:
        await slow_down(state, address)
        return _login_page(request, "That token is not valid.", 401)
    response = RedirectResponse("/", status_code=303)
    response.set_cookie(SESSION_COOKIE, state.open_session(caller), httponly=True,
                        samesite="strict", secure=_secure(request), path="/")  # fmt: skip
    response.delete_cookie(LOGIN_COOKIE, path="/")
    return response


async def _form_for_act(request: Request) -> tuple[WebSession | None, dict[str, str], Response | None]:
    """The session and form of a changing request, or the response that refuses it."""
    state = _state(request)
    web = await state.read(lambda: _session(request))
    if web is None:
        return None, {}, RedirectResponse("/", status_code=303)
    form = {key: str(value) for key, value in (await request.form()).items()}
    signed: WebSession = web
    if not hmac.compare_digest(web.csrf, form.get("csrf", "")):
        return web, form, await state.read(lambda: _desk(request, signed, message="The form expired; try again.",
                                                         message_kind="refused", status=403))  # fmt: skip
    return web, form, None


@router.post("/logout")
async def logout(request: Request) -> Response:
    web, _form, refused = await _form_for_act(request)
    if refused is not None and web is not None:
        return refused
    _state(request).close_session(request.cookies.get(SESSION_COOKIE))
    response = RedirectResponse("/", status_code=303)
    response.delete_cookie(SESSION_COOKIE, path="/")
    return response


async def _act(request: Request, act: str) -> Response:
    from starlette.concurrency import run_in_threadpool

    web, form, refused = await _form_for_act(request)
    if refused is not None:
        return refused
    assert web is not None
    signed: WebSession = web
    state = _state(request)
    if not web.caller.may(act):
        return await state.read(lambda: _desk(request, signed, message=f"The {signed.caller.role} role may not {act}.",
                                              message_kind="refused", status=403))  # fmt: skip
    try:
        # not on the register's threads: _do waits there for its write (on PostgreSQL on
        # those same threads), so it runs on the server's general pool
        return await run_in_threadpool(_do, request, web, act, form)
    except IssuerError as exc:
        message = exc.message
        return await state.read(lambda: _desk(request, signed, code=form.get("code"), message=message,
                                              message_kind="refused", status=422))  # fmt: skip


def _do(request: Request, web: WebSession, act: str, form: dict[str, str]) -> Response:
    from issuer.register.issuing import issue_codes
    from issuer.register.lifecycle import replace_code, void_code
    from issuer.service.api import draw_labels

    state = _state(request)
    register = state.acting(web.caller)
    code, reason = form.get("code", "")[:200], form.get("reason", "")[:2000]
    if act == "issue":
        holder = form.get("holder", "").strip()[:200] or None
        note = form.get("note", "").strip()[:2000] or None
        # a double-clicked or resent form issues once: its key is the request id
        request_id = f"{web.caller.name}:web:{form.get('request', '')[:40]}" if form.get("request") else None
        result = state.write_blocking(lambda: issue_codes(register, form.get("series", ""), 1, holder=holder,
                                                 note=note, request_id=request_id))  # fmt: skip
        made = result.codes[0]
        verb = "Already issued for this form" if result.replayed else "Issued"
        return _desk(request, web, code=made.code, message=f"{verb} {made.display} (batch {result.batch}).")
    if act == "void":
        record = state.write_blocking(lambda: void_code(register, code, reason=reason))
        return _desk(request, web, code=record.code, message=f"Voided {record.display}.")
    if act == "replace":
        replacement = state.write_blocking(lambda: replace_code(register, code, reason=reason))
        return _desk(request, web, code=replacement.code,
                     message=f"Voided the old code; its replacement is {replacement.display}.")  # fmt: skip
    content = state.write_blocking(lambda: draw_labels(state, web.caller, codes=[code], reason=reason))
    return Response(content, media_type="application/pdf", headers={
        "Content-Disposition": 'attachment; filename="reprint.pdf"', **SECURITY_HEADERS})  # fmt: skip


@router.post("/desk/issue")
async def desk_issue(request: Request) -> Response:
    return await _act(request, "issue")


@router.post("/desk/void")
async def desk_void(request: Request) -> Response:
    return await _act(request, "void")


@router.post("/desk/replace")
async def desk_replace(request: Request) -> Response:
    return await _act(request, "replace")


@router.post("/desk/reprint")
async def desk_reprint(request: Request) -> Response:
    return await _act(request, "reprint")
