"""The schema comes from the migrations, and the models agree with it."""

from __future__ import annotations

import stat
from pathlib import Path

import pytest
from sqlalchemy import inspect

from issuer.errors import RegisterError
from issuer.register.migrate import alembic_config, head_revision
from issuer.register.models import Base
from issuer.register.store import SCHEMA_HEAD, open_register


def test_code_expects_the_migrations_head() -> None:
    assert head_revision() == SCHEMA_HEAD


def test_an_empty_database_is_upgraded_to_head_and_matches_the_models(tmp_path: Path) -> None:
    from alembic.autogenerate import compare_metadata
    from alembic.migration import MigrationContext

    path = tmp_path / "fresh.sqlite"
    register = open_register(str(path), actor="test")
    assert register.schema_revision() == SCHEMA_HEAD
    with register.engine.connect() as connection:
        context = MigrationContext.configure(connection, opts={"compare_type": True})
        differences = compare_metadata(context, Base.metadata)
    register.close()
    assert differences == []


def test_an_older_database_is_upgraded_when_opened(tmp_path: Path) -> None:
    from alembic import command

    path = tmp_path / "old.sqlite"
    register = open_register(str(path), actor="test")
    config = alembic_config()
    with register.engine.connect() as connection:
        config.attributes["connection"] = connection
        command.downgrade(config, "base")
        connection.commit()
    assert register.schema_revision() is None
    register.close()
    reopened = open_register(str(path), actor="test")
    assert reopened.schema_revision() == SCHEMA_HEAD
    assert {"series", "issued_code", "log_entry", "batch", "log_chain", "log_leaf", "log_tree"} <= set(
        inspect(reopened.engine).get_table_names()
    )
    reopened.close()


def test_sqlite_register_is_in_wal_mode_and_owner_only(tmp_path: Path) -> None:
    path = tmp_path / "perm.sqlite"
    register = open_register(str(path), actor="test")
    with register.engine.connect() as connection:
        assert connection.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
        assert connection.exec_driver_sql("PRAGMA synchronous").scalar() == 2  # FULL
    register.close()
    assert stat.S_IMODE(path.stat().st_mode) == 0o600


def test_a_database_path_that_cannot_be_written_is_a_clear_error(tmp_path: Path) -> None:
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        if (locked / "probe").parent.stat().st_uid == 0 and _running_as_root():
            pytest.skip("root can write anywhere; the permission check cannot be shown as root")
        with pytest.raises(RegisterError, match="cannot"):
            open_register(str(locked / "sub" / "register.sqlite"), actor="test")
        assert not (locked / "sub").exists()
    finally:
        locked.chmod(0o700)


def _running_as_root() -> bool:
    import os

    return os.geteuid() == 0


def test_a_path_under_a_file_is_a_clear_error(tmp_path: Path) -> None:
    blocker = tmp_path / "plain-file"
    blocker.write_text("not a folder")
    with pytest.raises(RegisterError, match="cannot create the register"):
        open_register(str(blocker / "register.sqlite"), actor="test")


def test_a_file_that_is_not_a_database_is_a_clear_error(tmp_path: Path) -> None:
    junk = tmp_path / "junk.sqlite"
    junk.write_bytes(b"this is not a database" * 100)
    with pytest.raises(RegisterError):
        open_register(str(junk), actor="test")


def test_models_metadata_is_not_used_to_create_tables() -> None:
    # the migrations create the schema; create_all appears nowhere in the package
    import issuer

    package = Path(issuer.__file__).parent
    offenders = [p for p in package.rglob("*.py") if "create_all(" in p.read_text("utf-8")]
    assert offenders == []
