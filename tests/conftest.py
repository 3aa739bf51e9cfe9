"""Shared fixtures: every test gets its own register file and its own config folders,
so no test ever touches a user's real register or settings."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest


@pytest.fixture(autouse=True)
def isolated_environment(tmp_path_factory: pytest.TempPathFactory, monkeypatch: pytest.MonkeyPatch) -> None:
    home = tmp_path_factory.mktemp("home")
    monkeypatch.setenv("XDG_DATA_HOME", str(home / "data"))
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home / "config"))
    monkeypatch.setenv("XDG_STATE_HOME", str(home / "state"))
    monkeypatch.setenv("ISSUER_CONFIG", str(home / "no-such-config.toml"))
    monkeypatch.delenv("ISSUER_DB", raising=False)
    monkeypatch.setenv("ISSUER_ACTOR", "test-clerk")
    monkeypatch.setenv("COLUMNS", "120")


@pytest.fixture(scope="session")
def migrated_template(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """One register migrated to head per run; tests start from copies of it."""
    from issuer.register.store import open_register

    path = tmp_path_factory.mktemp("template") / "register.sqlite"
    opened = open_register(str(path), actor="template")
    with opened.engine.connect() as connection:
        connection.exec_driver_sql("PRAGMA wal_checkpoint(TRUNCATE)")
    opened.close()
    return path


@pytest.fixture
def db_path(tmp_path: Path, migrated_template: Path) -> Path:
    """A fresh, migrated register file for this test (owner-only, like a real one)."""
    import shutil

    path = tmp_path / "register.sqlite"
    shutil.copyfile(migrated_template, path)
    path.chmod(0o600)
    # the register's key file (its scatter keys are sealed under it) goes with it
    key = migrated_template.with_name(migrated_template.name + ".key")
    shutil.copyfile(key, path.with_name(path.name + ".key"))
    path.with_name(path.name + ".key").chmod(0o600)
    return path


@pytest.fixture
def register(db_path: Path) -> Iterator[Any]:
    from issuer.register.store import open_register

    opened = open_register(str(db_path), actor="test-clerk")
    yield opened
    opened.close()


@pytest.fixture
def cli(db_path: Path, monkeypatch: pytest.MonkeyPatch) -> Any:
    """Run the CLI in-process against the test's register: ``cli("issue", "tools")``."""
    from typer.testing import CliRunner

    from issuer.cli.app import app

    monkeypatch.setenv("ISSUER_DB", str(db_path))
    runner = CliRunner()

    def run(*args: str, input: str | None = None) -> Any:
        return runner.invoke(app, list(args), input=input, env={"COLUMNS": "120"})

    return run
