"""Alembic, driven from the package: the migrations ship inside the wheel as
``issuer.migrations`` and are found through it, never through a repository path."""

from __future__ import annotations

from importlib import resources
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from alembic.config import Config
    from sqlalchemy.engine import Engine


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


def upgrade_to_head(engine: Engine) -> None:
    """Create or upgrade the schema in one writing transaction."""
    from alembic import command

    config = alembic_config()
    with engine.connect() as connection:
        connection.execution_options(issuer_write=True)
        config.attributes["connection"] = connection
        command.upgrade(config, "head")
        connection.commit()
