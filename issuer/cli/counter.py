"""``issuer counter``: the full-screen counter (Textual)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from issuer.cli.common import ActorOption, DbOption, command_set, fail

commands = command_set()


@commands.command("counter")
def counter(
    *,
    series: Annotated[str | None, typer.Option("--series", help="The series new codes come from (F10 changes it).")] = None,
    labels: Annotated[
        Path | None, typer.Option("--labels", help="Folder for reprinted labels (default: [counter] label_folder, else a temporary folder).", file_okay=False)
    ] = None,
    db: DbOption = None,
    actor: ActorOption = None,
) -> None:
    """A full-screen counter: scan or type codes, and issue, void, replace, restore,
    reprint and look up by single keys. A check character catches mistakes, not fraud."""
    from issuer.config import load_settings
    from issuer.counter.app import CounterApp
    from issuer.counter.desk import open_desk
    from issuer.errors import redact

    # the screen first: the register (and the database library) open behind it
    settings = load_settings(database=db, actor=actor)
    screen = CounterApp(
        opener=lambda: open_desk(settings, series=series, label_folder=labels),
        where=redact(settings.database),
        series=series,
    )
    try:
        screen.run()
    finally:
        if screen.desk is not None:
            screen.desk.register.close()
    if screen.failure is not None:
        fail(screen.failure)
