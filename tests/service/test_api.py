"""The JSON API through httpx's ASGI transport: every act, rights, idempotency, problems."""

from __future__ import annotations

import json
from typing import Any

import pytest

from tests.service.client import Api

PROBLEM = "application/problem+json"


def _log_size(register: Any) -> int:
    from issuer.register.log import head

    with register.reading() as session:
        return head(session)[0]


def test_issue_check_history_as_clerk(served: tuple[Api, dict[str, str], Any]) -> None:
    api, tokens, register = served
    clerk = api.as_(tokens["clerk"])
    made = clerk.post("/api/v1/series/tools/issue", json={"count": 2, "holder": "workshop shelf B"})
    assert made.status_code == 201, made.text
    body = made.json()
    assert body["series"] == "tools" and len(body["codes"]) == 2
    code = body["codes"][0]["code"]
    # the API answers exactly what the library answers
    from issuer.register.desk import check_codes

    with register.reading() as session:
        expected = json.loads(json.dumps(check_codes(session, [code])[0].as_dict(), default=str))
    assert clerk.get(f"/api/v1/check/{code}").json() == expected
    many = clerk.post("/api/v1/check", json={"codes": [code, "QT000000"]}).json()
    assert [answer["status"] for answer in many][0] == "issued"
    history = clerk.get(f"/api/v1/codes/{code}/history").json()
    assert history["code"]["holder"] == "workshop shelf B"
    # the token's name is the actor the log records
    assert history["events"][-1]["actor"] == "clerk-desk"


def test_idempotency_key_returns_the_same_codes(served: tuple[Api, dict[str, str], Any]) -> None:
    api, tokens, _ = served
    clerk = api.as_(tokens["clerk"])
    first = clerk.post("/api/v1/series/tools/issue", json={"count": 3}, headers={"Idempotency-Key": "form-17"})
    again = clerk.post("/api/v1/series/tools/issue", json={"count": 3}, headers={"Idempotency-Key": "form-17"})
    other = clerk.post("/api/v1/series/tools/issue", json={"count": 3}, headers={"Idempotency-Key": "form-18"})
    assert first.status_code == again.status_code == other.status_code == 201
    assert again.json()["replayed"] is True
    assert [c["code"] for c in again.json()["codes"]] == [c["code"] for c in first.json()["codes"]]
    assert set(c["code"] for c in other.json()["codes"]).isdisjoint(c["code"] for c in first.json()["codes"])


def test_void_replace_restore_as_admin(served: tuple[Api, dict[str, str], Any]) -> None:
    api, tokens, _ = served
    admin = api.as_(tokens["admin"])
    codes = [c["code"] for c in admin.post("/api/v1/series/members/issue", json={"count": 2}).json()["codes"]]
    voided = admin.post(f"/api/v1/codes/{codes[0]}/void", json={"reason": "card reported lost"})
    assert voided.status_code == 200 and voided.json()["status"] == "voided"
    assert admin.get(f"/api/v1/check/{codes[0]}").json()["status"] == "voided"
    again = admin.post(f"/api/v1/codes/{codes[0]}/void", json={"reason": "twice"})
    assert again.status_code == 409 and again.headers["content-type"] == PROBLEM
    restored = admin.post(f"/api/v1/codes/{codes[0]}/restore", json={"reason": "card found"})
    assert restored.json()["status"] == "issued"
    replaced = admin.post(f"/api/v1/codes/{codes[1]}/replace", json={"reason": "card damaged"})
    assert replaced.status_code == 201
    new = replaced.json()["code"]
    assert admin.get(f"/api/v1/check/{codes[1]}").json()["status"] == "voided"
    assert admin.get(f"/api/v1/check/{new}").json()["status"] == "issued"


# every act, and the role it needs: the same split as the database roles
ACTS: list[tuple[str, str, str, Any]] = [
    ("read", "GET", "/api/v1/series", None),
    ("read", "GET", "/api/v1/series/tools", None),
    ("read", "GET", "/api/v1/check/QT0000006", None),
    ("read", "POST", "/api/v1/check", {"codes": ["QT0000006"]}),
    ("read", "GET", "/api/v1/codes/{code}/history", None),
    ("read", "GET", "/api/v1/series/tools/export", None),
    ("issue", "POST", "/api/v1/series/tools/issue", {"count": 1}),
    ("labels", "GET", "/api/v1/labels?code={code}&format=svg", None),
    ("reprint", "GET", "/api/v1/labels?code={code}&format=svg&reason=faded", None),
    ("reconcile", "POST", "/api/v1/series/tools/reconcile", b"{code}\n"),
    ("void", "POST", "/api/v1/codes/{code}/void", {"reason": "broken"}),
    ("replace", "POST", "/api/v1/codes/{code}/replace", {"reason": "broken"}),
    ("restore", "POST", "/api/v1/codes/{voided}/restore", {"reason": "found"}),
]
ADMIN_ONLY = {"void", "replace", "restore"}


@pytest.mark.parametrize("role", ["none", "wrong", "clerk", "admin"])
def test_rights_matrix(served: tuple[Api, dict[str, str], Any], role: str, monkeypatch: pytest.MonkeyPatch) -> None:
    import issuer.service.auth as auth
    from issuer.register.issuing import issue_codes
    from issuer.register.lifecycle import void_code

    async def no_pause(_seconds: float) -> None:
        return None

    monkeypatch.setattr(auth, "pause", no_pause)  # the guessing penalty is tested below
    api, tokens, register = served
    token = {"none": None, "wrong": "isr_0123456789abcdef_" + "x" * 43}.get(role, tokens.get(role))
    caller = api.as_(token) if role != "wrong" else Api(api.app, token, client=("127.0.0.9", 1))
    for act, method, path, body in ACTS:
        code = issue_codes(register, "tools", 1).codes[0].code
        voided = issue_codes(register, "tools", 1).codes[0].code
        void_code(register, voided, reason="set-up")
        url = path.format(code=code, voided=voided)
        kwargs: dict[str, Any] = {}
        if isinstance(body, bytes):
            kwargs = {"content": body.replace(b"{code}", code.encode()), "headers": {"Content-Type": "text/plain"}}
        elif body is not None:
            kwargs = {"json": body}
        before = _log_size(register)
        response = caller.request(method, url, **kwargs)
        if role in ("none", "wrong"):
            # a wrong token ten times from one address is then refused unheard (429)
            assert response.status_code in ((401,) if role == "none" else (401, 429)), (act, response.text)
            assert response.headers["content-type"] == PROBLEM
            assert "WWW-Authenticate" in response.headers or response.status_code == 429
            assert _log_size(register) == before  # refused: nothing happened
        elif role == "clerk" and act in ADMIN_ONLY:
            assert response.status_code == 403, (act, response.text)
            assert response.json()["detail"] == f"the clerk role may not {act}: ask an admin"
            assert _log_size(register) == before
        else:
            assert response.status_code in (200, 201), (act, response.text)


def test_problems_for_bad_requests_leave_the_register_unchanged(served: tuple[Api, dict[str, str], Any]) -> None:
    api, tokens, register = served
    clerk = api.as_(tokens["clerk"])
    before = _log_size(register)
    cases = [
        (clerk.post("/api/v1/series/tools/issue", content=b"{not json", headers={"Content-Type": "application/json"}), 400),
        (clerk.post("/api/v1/series/tools/issue", json={"count": "three"}), 422),
        (clerk.post("/api/v1/series/tools/issue", json={"count": 0}), 422),
        (clerk.post("/api/v1/series/tools/issue", json={"count": 1, "extra": True}), 422),
        (clerk.post("/api/v1/series/tools/issue", json={"count": 1, "holder": "x" * 201}), 422),
        (clerk.post("/api/v1/series/nosuch/issue", json={"count": 1}), 404),
        (clerk.get("/api/v1/series/..%2F..%2Fetc%2Fpasswd"), 404),
        (clerk.get("/api/v1/series/..%2F..%2Fetc%2Fpasswd/export"), 404),
        (clerk.get("/api/v1/codes/%2E%2E%2Fregister.sqlite/history"), 404),
        (clerk.get("/api/v1/check/" + "9" * 300), 422),
        (clerk.get("/api/v1/labels?series=tools&layout=../../etc/passwd"), 404),
        (clerk.post("/api/v1/check", json={"codes": []}), 422),
        (clerk.post("/api/v1/series/tools/reconcile", content=b"x", headers={"Content-Type": "image/png"}), 415),
    ]
    for response, status in cases:
        assert response.status_code == status, (response.request.url, response.text)
        assert response.headers["content-type"] == PROBLEM
        problem = response.json()
        assert problem["status"] == status and problem["type"].startswith("urn:issuer:problem:")
        assert "Traceback" not in response.text and "File \"" not in response.text
    assert _log_size(register) == before


def test_huge_bodies_are_refused(register: Any) -> None:
    from tests.service.conftest import build_service

    app, tokens = build_service(register, max_body=1024)
    clerk = Api(app, tokens["clerk"])
    response = clerk.post("/api/v1/series/tools/reconcile", content=b"QT0000006\n" * 500,
                          headers={"Content-Type": "text/plain"})  # fmt: skip
    assert response.status_code == 413 and response.headers["content-type"] == PROBLEM

    async def chunks():  # type: ignore[no-untyped-def]
        for _ in range(50):
            yield b"QT0000006\n" * 10

    unsized = clerk.post("/api/v1/series/tools/reconcile", content=chunks(), headers={"Content-Type": "text/plain"})
    assert unsized.status_code == 413


def test_unexpected_errors_never_show_a_trace(served: tuple[Api, dict[str, str], Any], monkeypatch: pytest.MonkeyPatch) -> None:
    import issuer.register.desk

    api, tokens, _ = served

    def broken(*_args: Any) -> None:
        raise RuntimeError("secret internals /srv/register.sqlite")

    monkeypatch.setattr(issuer.register.desk, "check_codes", broken)
    response = api.as_(tokens["clerk"]).get("/api/v1/check/QT0000006")
    assert response.status_code == 500
    assert response.headers["content-type"] == PROBLEM
    assert "secret internals" not in response.text and "Traceback" not in response.text


def test_failed_tokens_are_slowed_then_refused(served: tuple[Api, dict[str, str], Any], monkeypatch: pytest.MonkeyPatch) -> None:
    import issuer.service.auth as auth

    waited: list[float] = []

    async def pause(seconds: float) -> None:
        waited.append(seconds)

    monkeypatch.setattr(auth, "pause", pause)
    api, tokens, _ = served
    guesser = api.as_("isr_0123456789abcdef_" + "A" * 43)
    statuses = [guesser.get("/api/v1/series").status_code for _ in range(12)]
    assert statuses[:10] == [401] * 10 and statuses[10:] == [429, 429]
    assert waited == sorted(waited) and waited[-1] > waited[0]  # each failure waits longer
    # the right token from the same address is refused too, until the window passes
    assert api.as_(tokens["clerk"]).get("/api/v1/series").status_code == 429
    other = Api(api.app, tokens["clerk"], client=("127.0.0.2", 50001))
    assert other.get("/api/v1/series").status_code == 200


def test_revoked_token_is_refused_at_the_next_request(served: tuple[Api, dict[str, str], Any]) -> None:
    from issuer.register.tokens import revoke_token

    api, tokens, register = served
    clerk = api.as_(tokens["clerk"])
    assert clerk.get("/api/v1/series").status_code == 200
    revoke_token(register, "clerk-desk")
    assert clerk.get("/api/v1/series").status_code == 401


def test_labels_export_and_reconcile(served: tuple[Api, dict[str, str], Any]) -> None:
    api, tokens, _ = served
    clerk = api.as_(tokens["clerk"])
    codes = [c["code"] for c in clerk.post("/api/v1/series/tools/issue", json={"count": 3}).json()["codes"]]
    pdf = clerk.get("/api/v1/labels", params={"code": codes})
    assert pdf.status_code == 200 and pdf.content.startswith(b"%PDF") and pdf.headers["content-type"] == "application/pdf"
    png = clerk.get("/api/v1/labels", params={"code": codes[0], "format": "png"})
    assert png.content.startswith(b"\x89PNG")
    exported = clerk.get("/api/v1/series/tools/export", params={"format": "jsonl"})
    rows = [json.loads(line) for line in exported.text.splitlines()]
    assert [row["code"] for row in rows] == codes
    history = clerk.get(f"/api/v1/codes/{codes[0]}/history").json()
    assert history["code"]["print_count"] == 2  # the PDF and the PNG were both logged
    scans = f"{codes[0]}\n{codes[1]}\n".encode()
    result = clerk.post("/api/v1/series/tools/reconcile", content=scans, headers={"Content-Type": "text/plain"})
    assert result.status_code == 200, result.text
    assert json.dumps(result.json()).count(codes[2]) >= 1  # the third tag is missing


def test_openapi_document_names_every_route(served: tuple[Api, dict[str, str], Any]) -> None:
    api, _, _ = served
    document = api.get("/api/v1/openapi.json").json()
    assert document["openapi"].startswith("3.")
    paths = set(document["paths"])
    for path in ("/api/v1/series", "/api/v1/series/{key}/issue", "/api/v1/check", "/api/v1/codes/{code}/void",
                 "/api/v1/codes/{code}/replace", "/api/v1/codes/{code}/restore", "/api/v1/labels",
                 "/api/v1/series/{key}/export", "/api/v1/series/{key}/reconcile", "/api/v1/codes/{code}/history"):
        assert path in paths
    assert "/" not in paths and "/login" not in paths  # the web page is not part of the API


def test_tokens_are_stored_only_as_slow_hashes(register: Any, db_path: Any) -> None:
    from issuer.register.tokens import add_token, list_tokens, verify_token

    info, secret = add_token(register, "scanner-app", "clerk")
    assert verify_token(register, secret) is not None
    assert verify_token(register, secret[:-1] + ("A" if secret[-1] != "A" else "B")) is None
    register.close()
    raw = b"".join(p.read_bytes() for p in db_path.parent.glob(db_path.name + "*"))
    # the secret part may itself hold '_' or '-': cut it at its fixed place, not at a '_'
    secret_part = secret[len("isr_") + 16 + 1:]
    assert len(secret_part) == 43
    assert secret.encode() not in raw and secret_part.encode() not in raw
    assert [t.name for t in list_tokens(register)] == ["scanner-app"]
