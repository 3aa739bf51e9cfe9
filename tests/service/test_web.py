"""The web desk page: sign-in, cookies, CSRF on every changing form, the role's buttons;
then the same in a real browser (Debian's chromium driven by Playwright)."""

from __future__ import annotations

import os
import re
import shutil
from typing import Any

import pytest

from tests.service.client import Api


def _csrf(html: str) -> str:
    found = re.search(r'name="csrf" value="([^"]+)"', html)
    assert found, html
    return found.group(1)


def _sign_in(api: Api, token: str) -> str:
    page = api.get("/")
    assert page.status_code == 200 and "Sign in" in page.text
    response = api.post("/login", data={"csrf": _csrf(page.text), "token": token}, follow_redirects=False)
    assert response.status_code == 303, response.text
    cookie = response.headers["set-cookie"]
    assert "HttpOnly" in cookie and "SameSite=strict" in cookie.replace("Strict", "strict")
    desk = api.get("/")
    assert "Scan or type a code" in desk.text
    return _csrf(desk.text)


def test_sign_in_needs_the_form_token_and_a_valid_token(served: tuple[Api, dict[str, str], Any]) -> None:
    api, tokens, _ = served
    page = api.get("/")
    assert page.headers["content-security-policy"].startswith("default-src 'none'")
    forged = Api(api.app).post("/login", data={"csrf": "made-up", "token": tokens["clerk"]}, follow_redirects=False)
    assert forged.status_code == 403
    wrong = api.post("/login", data={"csrf": _csrf(page.text), "token": "not a token"}, follow_redirects=False)
    assert wrong.status_code == 401 and "not valid" in wrong.text
    assert "Scan or type a code" not in Api(api.app).get("/").text


def test_desk_answers_and_acts_with_csrf(served: tuple[Api, dict[str, str], Any]) -> None:
    from issuer.register.issuing import issue_codes
    from issuer.register.lifecycle import code_history

    api, tokens, register = served
    csrf = _sign_in(api, tokens["admin"])
    code = issue_codes(register, "tools", 1, holder="workshop shelf B").codes[0]
    answer = api.get("/", params={"code": code.display})
    assert "In use" in answer.text and "workshop shelf B" in answer.text and "✓" in answer.text
    # a changing form without the session's CSRF token is refused and changes nothing
    refused = api.post("/desk/void", data={"code": code.code, "reason": "lost", "csrf": "guess"})
    assert refused.status_code == 403
    with register.reading() as session:
        assert code_history(session, code.code)[0].status == "issued"
    done = api.post("/desk/void", data={"code": code.code, "reason": "tag snapped", "csrf": csrf})
    assert done.status_code == 200 and "Voided" in done.text
    with register.reading() as session:
        record, events = code_history(session, code.code)
    assert record.status == "voided" and events[-1].actor == "admin-desk"
    issued = api.post("/desk/issue", data={"series": "members", "holder": "", "note": "", "csrf": csrf,
                                           "request": "form-1"})  # fmt: skip
    assert issued.status_code == 200 and "Issued" in issued.text
    again = api.post("/desk/issue", data={"series": "members", "csrf": csrf, "request": "form-1"})
    assert "Already issued for this form" in again.text  # a resent form issues once


def test_clerk_sees_no_void_button_and_cannot_post_one(served: tuple[Api, dict[str, str], Any]) -> None:
    from issuer.register.issuing import issue_codes

    api, tokens, register = served
    csrf = _sign_in(api, tokens["clerk"])
    code = issue_codes(register, "tools", 1).codes[0]
    page = api.get("/", params={"code": code.code})
    assert "Reprint label" in page.text and "Void for good" not in page.text
    refused = api.post("/desk/void", data={"code": code.code, "reason": "x", "csrf": csrf})
    assert refused.status_code == 403 and "may not void" in refused.text
    reprint = api.post("/desk/reprint", data={"code": code.code, "reason": "label faded", "csrf": csrf})
    assert reprint.status_code == 200 and reprint.content.startswith(b"%PDF")


def _log_size(register: Any) -> int:
    from issuer.register.log import head

    with register.reading() as session:
        return int(head(session)[0])


@pytest.mark.parametrize("form", ["issue", "void", "replace", "reprint", "logout"])
def test_every_changing_form_needs_the_sessions_csrf(served: tuple[Api, dict[str, str], Any], form: str) -> None:
    from issuer.register.issuing import issue_codes

    api, tokens, register = served
    csrf = _sign_in(api, tokens["admin"])
    code = issue_codes(register, "tools", 1).codes[0].code
    fields = {"series": "tools", "code": code, "reason": "tag snapped", "request": "form-9"}
    path = "/logout" if form == "logout" else f"/desk/{form}"
    before = _log_size(register)
    for forged in ({}, {"csrf": ""}, {"csrf": "guess"}, {"csrf": csrf + "x"}):
        refused = api.post(path, data={**fields, **forged}, follow_redirects=False)
        assert refused.status_code == 403, (form, forged, refused.text)
        assert _log_size(register) == before  # nothing happened
    # another session's form token is no good either
    other = Api(api.app)
    _sign_in(other, tokens["admin"])
    assert other.post(path, data={**fields, "csrf": csrf}, follow_redirects=False).status_code == 403
    assert "Scan or type a code" in api.get("/").text  # still signed in
    done = api.post(path, data={**fields, "csrf": csrf}, follow_redirects=False)
    assert done.status_code in (200, 303), done.text


def test_cookies_are_http_only_strict_and_secure_behind_tls(served: tuple[Api, dict[str, str], Any]) -> None:
    api, tokens, _ = served
    behind_proxy = {"X-Forwarded-Proto": "https"}
    page = api.get("/", headers=behind_proxy)
    login_cookie = page.headers["set-cookie"].lower()
    assert "httponly" in login_cookie and "samesite=strict" in login_cookie and "secure" in login_cookie
    # a Secure cookie goes back only over https: send it by hand (this client speaks plain http)
    form_cookie = page.headers["set-cookie"].split(";")[0]
    signed = Api(api.app).post("/login", data={"csrf": _csrf(page.text), "token": tokens["clerk"]},
                               headers={**behind_proxy, "Cookie": form_cookie}, follow_redirects=False)  # fmt: skip
    assert signed.status_code == 303, signed.text
    session_cookies = [value.lower() for name, value in signed.headers.multi_items() if name == "set-cookie"]
    issued = next(value for value in session_cookies if value.startswith("issuer_desk="))
    assert "httponly" in issued and "samesite=strict" in issued and "secure" in issued and "path=/" in issued
    # plain HTTP on localhost (no proxy): the cookie cannot be Secure or the browser drops it
    plain = Api(api.app).get("/").headers["set-cookie"].lower()
    assert "httponly" in plain and "samesite=strict" in plain and "secure" not in plain


def test_failed_sign_ins_are_slowed_then_refused(served: tuple[Api, dict[str, str], Any],
                                                 monkeypatch: pytest.MonkeyPatch) -> None:  # fmt: skip
    from issuer.service import auth

    waited: list[float] = []

    async def pause(seconds: float) -> None:
        waited.append(seconds)

    monkeypatch.setattr(auth, "pause", pause)
    api, tokens, _ = served
    statuses = []
    for _ in range(12):
        page = api.get("/")
        statuses.append(api.post("/login", data={"csrf": _csrf(page.text), "token": "isr_guess"},
                                 follow_redirects=False).status_code)  # fmt: skip
    assert statuses == [401] * 10 + [429, 429]
    assert waited == sorted(waited) and waited[-1] > waited[0]  # each failure waits longer
    # the right token from that address waits out the window too; the API shares the count
    page = api.get("/")
    late = api.post("/login", data={"csrf": _csrf(page.text), "token": tokens["clerk"]}, follow_redirects=False)
    assert late.status_code == 429 and "Too many failed sign-ins" in late.text
    assert api.as_(tokens["clerk"]).get("/api/v1/series").status_code == 429


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


def test_desk_in_a_real_browser(register: Any) -> None:
    browser_path = _chromium()
    if browser_path is None:
        if os.environ.get("ISSUER_REQUIRE_BROWSER") == "1":
            pytest.fail("no chromium installed, and ISSUER_REQUIRE_BROWSER=1 says this test must run")
        pytest.skip("no chromium on this machine (Debian: apt-get install chromium)")
    playwright = pytest.importorskip("playwright.sync_api")
    from issuer.register.issuing import issue_codes
    from tests.service.conftest import build_service
    from tests.service.server import running

    app, tokens = build_service(register)
    tags = [info for info in issue_codes(register, "tools", 40).codes]
    target = tags[12]
    # one adjacent swap of the body: a slip a person makes reading a tag aloud
    body = target.code[2:]
    swapped = next(
        target.code[:2] + body[:i] + body[i + 1] + body[i] + body[i + 2:]
        for i in range(len(body) - 2, -1, -1) if body[i] != body[i + 1]
    )
    with running(app) as base, playwright.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=browser_path, args=["--no-sandbox"], headless=True)
        try:
            page = browser.new_page()
            page.goto(base + "/")
            page.fill("#token", tokens["admin"])
            page.click("button[type=submit]")
            page.wait_for_selector("#code")
            assert page.evaluate("document.activeElement.id") == "code"  # the scan field has focus
            page.keyboard.type(target.display)
            page.keyboard.press("Enter")
            page.wait_for_selector("#answer")
            assert "In use" in page.inner_text("#answer")
            # a typo: the page offers the intended code, and picking it answers it
            page.fill("#code", swapped)
            page.keyboard.press("Enter")
            page.wait_for_selector(".suggestions a")
            assert target.display in page.inner_text(".suggestions")
            page.click(f".suggestions a:has-text('{target.display}')")
            page.wait_for_selector("#answer")
            assert "In use" in page.inner_text("#answer")
            # issue one with a holder
            page.select_option("#series", "tools")
            page.fill("#holder", "Quillmere workshop, bench 3")
            page.click("section.issue button[type=submit]")
            page.wait_for_selector("p.answer.done")
            assert "Issued" in page.inner_text("p.answer.done")
            # void the answered code
            page.fill("form[action='/desk/void'] input[name=reason]", "tag snapped")
            page.click("form[action='/desk/void'] button")
            page.wait_for_selector("p.answer.done")
            assert "Voided" in page.inner_text("p.answer.done")
        finally:
            browser.close()
    from issuer.register.desk import check_codes

    with register.reading() as session:
        statuses = [a.status for a in check_codes(session, [target.code])]
        tools = check_codes(session, [tags[-1].code])
    assert statuses == ["issued"] and tools[0].status == "issued"
    from issuer.register.lifecycle import log_entries

    with register.reading() as session:
        acts = [(e.action, e.actor) for e in log_entries(session)][-2:]
    assert acts == [("issue", "admin-desk"), ("void", "admin-desk")]
