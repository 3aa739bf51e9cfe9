"""Alembic, driven from the package: the migrations ship inside the wheel as
``issuer.migrations`` and are found through it, never through a repository path."""

from __future__ import annotations

from importlib import resources
from typing import TYPE_CHECKING

from issuer.errors import RegisterError

if TYPE_CHECKING:
    from alembic.config import Config
    from sqlalchemy.engine import Connection, Engine

    from issuer.register.sealing import Keyring


def alembic_config() -> Config:
    from alembic.config import Config

    config = Config()
    config.set_main_option("script_location", str(resources.files("issuer.migrations")))
    return config


def head_revision() -> str:
    from alembic.script import ScriptDirectory

    head = ScriptDirectory.from_config(alembic_config()).get_current_head()
    assert head is not None
    return head


def sealing_attributes(config: Config, keyring: Keyring) -> None:
    """Hand a migration the register's keyring: the sealed-keys migration seals (and its
    downgrade opens) the scatter keys with it."""
    config.attributes["seal_scatter_key"] = keyring.seal
    config.attributes["open_scatter_key"] = keyring.open


def upgrade_to_head(engine: Engine, keyring: Keyring | None = None) -> None:
    """Create or upgrade the schema in one writing transaction; the register's key file
    is made when the register holds no sealed key yet (a new or newly upgraded one)."""
    from alembic import command

    from issuer.register.driver import begin_immediate
    from issuer.register.sealing import Keyring, default_key_file

    keyring = keyring or Keyring(default_key_file(engine.url))
    config = alembic_config()
    with engine.connect() as connection:
        sqlite = connection.dialect.name == "sqlite"
        if sqlite:
            # SQLite alters a table by copying it, and dropping the old copy trips the rows
            # that refer to it while foreign keys are enforced: they are off while the
            # migrations run (set outside the transaction, the only place SQLite takes it)
            # and every link is checked before the COMMIT
            _foreign_keys(connection, on=False)
        try:
            begin_immediate(connection)  # SQLite: the write lock before anything is read
            config.attributes["connection"] = connection
            sealing_attributes(config, keyring)
            keyring.ensure(connection)
            command.upgrade(config, "head")
            if sqlite:
                broken = connection.exec_driver_sql("PRAGMA foreign_key_check").fetchall()
                if broken:
                    table, _row, parent, _key = broken[0]
                    raise RegisterError(
                        f"upgrading the register would leave {len(broken)} row(s) of {table} pointing "
                        f"at no row of {parent}; nothing was changed"
                    )
            connection.commit()
        except BaseException:
            connection.rollback()
            raise
        finally:
            if sqlite:
                _foreign_keys(connection, on=True)


def _foreign_keys(connection: Connection, *, on: bool) -> None:
    """Turn SQLite's foreign key enforcement on or off for this connection (outside a
    transaction); a connection that stays off is dropped rather than pooled."""
    raw = connection.connection.dbapi_connection
    assert raw is not None
    raw.execute(f"PRAGMA foreign_keys = {'ON' if on else 'OFF'}")
    if bool(raw.execute("PRAGMA foreign_keys").fetchone()[0]) != on:
        if on:
            connection.invalidate()
            return
        raise RegisterError("the register could not be prepared for upgrading (a transaction was open)")
