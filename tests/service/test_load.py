"""Many desks through one server: concurrent HTTP clients issue, check and void; no
duplicate, no gap in the in-order series, no 5xx, and every idempotent retry returns the
same codes; then doctor and log verify pass beside the running server. CI runs 32 clients x
10 issues per backend (seconds); ISSUER_LONG_TESTS=1 runs the full 32 x 200."""

from __future__ import annotations

import json
import os
from typing import Any

import pytest

from tests.register.pg import pg_database, pg_url  # noqa: F401
from tests.service.conftest import build_service
from tests.service.load import run_load, with_bare_endpoint
from tests.service.server import running

CLIENTS = 32
ISSUES = 200 if os.environ.get("ISSUER_LONG_TESTS") == "1" else 10


def _check_register(register: Any, result: Any) -> None:
    from issuer.register.series import get_series
    from issuer.register.transfer import export_session_rows

    issued = [code for codes in result.issued.values() for code in codes]
    assert len(issued) == CLIENTS * ISSUES
    assert len(set(issued)) == len(issued), "a code was handed out twice"
    assert len(result.retried) == CLIENTS * len(range(0, ISSUES, max(1, ISSUES // 5)))
    for key, codes in result.retried.items():
        assert codes == result.issued[key], f"retry of {key} returned other codes"
    assert all(result.replayed), "a retry issued anew instead of replaying"
    with register.reading() as session:
        series = get_series(session, "tools")
        rows = export_session_rows(session, series)
        bases = sorted(row_base for row_base in _bases(session, series))
    assert len(rows) == CLIENTS * ISSUES
    assert bases == list(range(series.range_start, series.range_start + len(bases))), "gap in an in-order series"


def _bases(session: Any, series: Any) -> list[int]:
    from sqlalchemy import select

    from issuer.register.models import IssuedCode

    return list(session.scalars(select(IssuedCode.base).where(IssuedCode.series_id == series.id)))


def _run(register: Any) -> None:
    app, tokens = build_service(register)
    with running(with_bare_endpoint(app)) as base:
        result = run_load(base, tokens["clerk"], tokens["admin"], clients=CLIENTS, issues=ISSUES)
        # doctor and log verify, run as a person would beside the running service
        place = register.engine.url.render_as_string(hide_password=False)
        doctor = _cli("doctor", "--db", place, "--json")
        assert doctor.exit_code == 0 and json.loads(doctor.stdout)["healthy"] is True, doctor.output
        verify = _cli("log", "verify", "--db", place, "--json")
        assert verify.exit_code == 0, verify.output
        chain = json.loads(verify.stdout)
        # every issue and void is one entry (and the series and tokens made before)
        assert chain["intact"] is True and chain["entries"] >= CLIENTS * ISSUES + len(result.latency["void"])
    assert result.server_errors == 0, sorted(set(result.statuses))
    assert set(result.statuses) <= {200, 201}, sorted(set(result.statuses))
    assert all(status == 201 for status in result.retry_statuses)
    _check_register(register, result)


def _cli(*args: str) -> Any:
    from typer.testing import CliRunner

    from issuer.cli.app import app

    return CliRunner().invoke(app, list(args), env={"COLUMNS": "120"})


def test_many_desks_over_http_sqlite(register: Any) -> None:
    _run(register)


@pytest.mark.postgres
def test_many_desks_over_http_postgres(pg_url: str) -> None:  # noqa: F811
    from issuer.register.store import open_register

    register = open_register(pg_url, actor="test-clerk")
    try:
        _run(register)
    finally:
        register.close()
