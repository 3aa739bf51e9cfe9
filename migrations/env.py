"""Alembic environment. issuer runs migrations itself (``issuer.register.migrate``),
handing over an open connection; the ``alembic`` command line works too with
``-x url=...``."""

from __future__ import annotations

from alembic import context
from sqlalchemy import create_engine

from issuer.register.models import Base

config = context.config
target_metadata = Base.metadata


def run_migrations() -> None:
    connection = config.attributes.get("connection")
    if connection is None:
        url = context.get_x_argument(as_dictionary=True).get("url")
        if not url:
            raise SystemExit("give the database: alembic -x url=sqlite:///path ...")
        engine = create_engine(url)
        with engine.begin() as own_connection:
            _run(own_connection)
        return
    _run(connection)


def _run(connection: object) -> None:
    context.configure(
        connection=connection,  # type: ignore[arg-type]
        target_metadata=target_metadata,
        render_as_batch=True,  # SQLite alters tables by copying them
        compare_type=True,
    )
    with context.begin_transaction():
        context.run_migrations()


run_migrations()
