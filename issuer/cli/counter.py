"""``issuer counter``: the full-screen counter (Textual)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from issuer.cli.common import ActorOption, DbOption, command_set, open_register_from_options

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
    from issuer.counter.desk import CounterDesk
    from issuer.register.admin import redacted_url

    settings = load_settings(database=db, actor=actor)
    register = open_register_from_options(db, actor)
    if series is not None:
        from issuer.register.series import get_series

        with register.reading() as session:
            get_series(session, series)  # an unknown series is one line now, not a screen later
    folder = labels or settings.section("counter").get("label_folder")
    desk = CounterDesk(register, series=series, settings=settings)
    if folder:
        desk.label_folder = Path(str(folder)).expanduser()
    screen = CounterApp(desk, where=redacted_url(register))
    desk.on_reconnect = screen.reconnecting
    screen.run()
