"""Alembic, driven from the package: the migrations ship inside the wheel as
``issuer.migrations`` and are found through it, never through a repository path."""

from __future__ import annotations

from importlib import resources
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from alembic.config import Config
    from sqlalchemy.engine import Engine

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

    from issuer.register.sealing import Keyring, default_key_file

    keyring = keyring or Keyring(default_key_file(engine.url))
    config = alembic_config()
    with engine.connect() as connection:
        connection.execution_options(issuer_write=True)
        config.attributes["connection"] = connection
        sealing_attributes(config, keyring)
        keyring.ensure(connection)
        command.upgrade(config, "head")
        connection.commit()
