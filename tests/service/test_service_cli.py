"""``issuer tokens`` and ``issuer serve`` from the command line."""

from __future__ import annotations

import json
from typing import Any


def test_tokens_add_list_revoke(cli: Any, register: Any) -> None:
    from issuer.register.tokens import verify_token

    made = cli("tokens", "add", "front-desk", "--role", "clerk")
    assert made.exit_code == 0, made.output
    token = made.output.strip().splitlines()[-1]
    assert token.startswith("isr_") and "not shown again" in made.output
    assert verify_token(register, token) is not None
    listed = json.loads(cli("tokens", "list", "--json").output)
    assert listed == [{**listed[0], "name": "front-desk", "role": "clerk", "active": True}]
    assert token not in cli("tokens", "list").output
    assert cli("tokens", "revoke", "front-desk").exit_code == 0
    assert verify_token(register, token) is None
    twice = cli("tokens", "revoke", "front-desk")
    assert twice.exit_code == 2 and "revoked already" in twice.output
    bad = cli("tokens", "add", "office", "--role", "owner")
    assert bad.exit_code == 2 and "role must be one of clerk, admin" in bad.output


def test_token_acts_are_logged(cli: Any) -> None:
    cli("tokens", "add", "scanner-app", "--role", "admin")
    cli("tokens", "revoke", "scanner-app")
    log = json.loads(cli("log", "--json").output)
    acts = [(entry["action"], entry["detail"].get("token") if isinstance(entry["detail"], dict) else None)
            for entry in log if entry["action"].startswith("token")]
    assert [a for a, _ in acts] == ["token-add", "token-revoke"]


def test_serve_has_help(cli: Any) -> None:
    result = cli("serve", "--help")
    assert result.exit_code == 0 and "--host" in result.output and "TLS" in result.output
