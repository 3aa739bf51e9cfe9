"""A served register with a tool series (in order), a member series (scattered) and a
token per role. Demo data only: the fictional Quillmere Tool Library."""

from __future__ import annotations

from typing import Any

import pytest

from tests.service.client import Api


def build_service(register: Any, **options: Any) -> tuple[Any, dict[str, str]]:
    from issuer.register.defining import SeriesSpec, add_series
    from issuer.register.tokens import add_token
    from issuer.service.app import create_app

    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="QT", title="Tool tags"))
    add_series(register, SeriesSpec(key="members", scheme="verhoeff", length=7, prefix="QM", mode="scattered"))
    tokens = {role: add_token(register, f"{role}-desk", role)[1] for role in ("clerk", "admin")}
    return create_app(register, **options), tokens


@pytest.fixture
def served(register: Any) -> tuple[Api, dict[str, str], Any]:
    app, tokens = build_service(register)
    return Api(app), tokens, register
