"""Shared by the edge tests: run the CLI against a register on either backend, and take a
fingerprint of everything a register holds, to show that a refusal changed nothing."""

from __future__ import annotations

import hashlib
from typing import Any

from sqlalchemy import create_engine, text
from sqlalchemy.pool import NullPool
from stdnum import luhn

TABLES = ("series", "batch", "issued_code", "log_entry", "log_chain", "log_leaf", "log_tree")


def tool(base: int) -> str:
    # source: python-stdnum's stdnum.luhn.calc_check_digit (ISO/IEC 7812-1 Annex B)
    return "QTL" + f"{base:07d}" + luhn.calc_check_digit(f"{base:07d}")


_ENGINES: dict[str, Any] = {}


def fingerprint(url: str) -> str:
    """A digest of every row of the register's tables, in key order (one engine per
    register for the whole run: the fuzz takes a fingerprint before and after each input)."""
    from issuer.register.store import database_url

    engine = _ENGINES.get(url)
    if engine is None:
        if len(_ENGINES) > 8:
            for old in _ENGINES.values():
                old.dispose()
            _ENGINES.clear()
        engine = _ENGINES[url] = create_engine(database_url(url), poolclass=NullPool)
    digest = hashlib.sha256()
    with engine.connect() as connection:
        for table in TABLES:
            for row in connection.execute(text(f"SELECT * FROM {table} ORDER BY 1")):
                digest.update(repr(tuple(row)).encode("utf-8", "backslashreplace"))
            digest.update(b"|")
    return digest.hexdigest()


def run(url: str, *args: str, env: dict[str, str] | None = None) -> Any:
    """The CLI in-process with ``--db``-less calls pointed at ``url``."""
    from typer.testing import CliRunner

    from issuer.cli.app import app

    return CliRunner().invoke(app, list(args), env={"ISSUER_DB": url, "COLUMNS": "120", **(env or {})})


def refused(result: Any, *words: str) -> str:
    """One line on stderr starting 'issuer: ', exit 2, no traceback; the line."""
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("issuer: "), result.stderr
    for word in words:
        assert word in lines[0], lines[0]
    return str(lines[0])


def ok(result: Any) -> Any:
    assert result.exit_code == 0, result.output
    return result


def tools_register(url: str, issued: int = 5) -> None:
    ok(run(url, "series", "add", "tools", "--scheme", "luhn", "--length", "7", "--prefix", "QTL", "--group", "4,4"))
    if issued:
        ok(run(url, "issue", "tools", "-n", str(issued)))


def execute(url: str, statement: str, **values: Any) -> None:
    """Change the register behind the tool's back (what a careless admin could do)."""
    from issuer.register.store import database_url

    engine = create_engine(database_url(url))
    try:
        with engine.begin() as connection:
            connection.execute(text(statement), values)
    finally:
        engine.dispose()
