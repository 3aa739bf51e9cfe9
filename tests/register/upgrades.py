"""Moving a test's register to another Alembic revision, up or down, as ``issuer db
upgrade`` does (the write lock first, the sealing key at hand)."""

from __future__ import annotations

from issuer.register.driver import begin_immediate
from issuer.register.migrate import alembic_config, sealing_attributes
from issuer.register.store import Register


def to_revision(register: Register, revision: str, *, down: bool) -> None:
    from alembic import command

    config = alembic_config()
    with register.engine.connect() as connection:
        begin_immediate(connection)
        config.attributes["connection"] = connection
        sealing_attributes(config, register.keyring)
        (command.downgrade if down else command.upgrade)(config, revision)
        connection.commit()
