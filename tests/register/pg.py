"""PostgreSQL for the tests: a fresh database per test module, a fresh schema per test.

The server is the one on 127.0.0.1:5432 (trust auth, user postgres), or the one named by
``ISSUER_TEST_PG`` (a libpq URL to its maintenance database). When no server answers,
the tests that need it skip with the reason — unless ``ISSUER_REQUIRE_POSTGRES=1`` (CI
sets it), when they fail instead.

Import the fixtures into a test module: ``from tests.register.pg import pg_database``.
"""

from __future__ import annotations

import os
import secrets
from collections.abc import Iterator
from contextlib import contextmanager
from functools import lru_cache
from typing import Any
from urllib.parse import quote

import pytest

ADMIN_URL = os.environ.get("ISSUER_TEST_PG", "postgresql://postgres@127.0.0.1:5432/postgres")


def _connect(url: str = ADMIN_URL) -> Any:
    import psycopg

    return psycopg.connect(url, autocommit=True, connect_timeout=5)


@lru_cache(maxsize=1)
def server_problem() -> str | None:
    """Why the server cannot be used, or None when it answers."""
    try:
        import psycopg
    except ImportError as exc:  # pragma: no cover - psycopg is a dependency
        return f"psycopg is not installed ({exc})"
    try:
        with _connect() as connection:
            connection.execute("SELECT 1")
    except psycopg.Error as exc:
        return str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return None


def require_server() -> None:
    problem = server_problem()
    if problem is None:
        return
    where = ADMIN_URL.rsplit("@", 1)[-1]
    message = f"no PostgreSQL server at {where} ({problem})"
    if os.environ.get("ISSUER_REQUIRE_POSTGRES") == "1":
        pytest.fail(f"{message}; ISSUER_REQUIRE_POSTGRES=1 says these tests must run", pytrace=False)
    pytest.skip(f"{message}; start one or set ISSUER_TEST_PG to run the PostgreSQL tests")


def database_url(name: str, *, user: str | None = None, schema: str | None = None) -> str:
    """A SQLAlchemy URL for database ``name`` on the test server."""
    from sqlalchemy.engine import make_url

    url = make_url(ADMIN_URL).set(drivername="postgresql+psycopg", database=name)
    if user is not None:
        url = url.set(username=user, password=None)
    text = url.render_as_string(hide_password=False)
    if schema is not None:
        text += ("&" if "?" in text else "?") + "options=" + quote(f"-csearch_path={schema}")
    return text


def admin_sql(statement: str, database: str | None = None) -> None:
    """Run one statement on the server as the maintenance user."""
    url = ADMIN_URL
    if database is not None:
        from sqlalchemy.engine import make_url

        url = make_url(ADMIN_URL).set(database=database).render_as_string(hide_password=False)
    with _connect(url) as connection:
        connection.execute(statement)  # type: ignore[arg-type]


@contextmanager
def temporary_database(label: str) -> Iterator[str]:
    """Create a database, yield its name, drop it (with any sessions still on it)."""
    name = f"issuer_t_{label[:20]}_{secrets.token_hex(4)}".lower()
    admin_sql(f'CREATE DATABASE "{name}"')
    try:
        yield name
    finally:
        admin_sql(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')


@pytest.fixture(scope="module")
def pg_database(request: pytest.FixtureRequest) -> Iterator[str]:
    """A fresh database for this test module; its name."""
    require_server()
    label = request.module.__name__.rsplit(".", 1)[-1].removeprefix("test_")
    with temporary_database(label) as name:
        yield name


@pytest.fixture
def pg_url(pg_database: str) -> str:
    """A fresh, empty schema for this test in the module's database: the register URL."""
    schema = f"t_{secrets.token_hex(5)}"
    admin_sql(f'CREATE SCHEMA "{schema}"', pg_database)
    return database_url(pg_database, schema=schema)


@pytest.fixture(params=["sqlite", "postgresql"])
def register_url(request: pytest.FixtureRequest, tmp_path: Any) -> str:
    """A fresh register location on each backend in turn (not yet migrated)."""
    if request.param == "sqlite":
        return str(tmp_path / "register.sqlite")
    return str(request.getfixturevalue("pg_url"))


def new_login_role(database: str, *members_of: str) -> str:
    """A login role with a unique name, made a member of ``members_of``."""
    name = f"t_login_{secrets.token_hex(4)}"
    admin_sql(f'CREATE ROLE "{name}" LOGIN')
    for group in members_of:
        admin_sql(f'GRANT "{group}" TO "{name}"')
    return name


def drop_roles(database: str, *names: str) -> None:
    """Drop roles made for a test: their privileges in ``database`` first."""
    for name in names:
        admin_sql(f'DROP OWNED BY "{name}"', database)
        admin_sql(f'DROP ROLE IF EXISTS "{name}"')
