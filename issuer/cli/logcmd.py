"""``issuer log``: the logged acts, filtered; subcommands check the chain."""

from __future__ import annotations

from datetime import datetime
from typing import Annotated

import typer

from issuer.cli.app import app
from issuer.cli.common import (
    DbOption,
    JsonOption,
    console,
    open_register_from_options,
    print_json,
    shown,
)

log_app = typer.Typer(
    help="Show the log of who did what and when; 'log verify' checks that nobody edited it.",
    invoke_without_command=True,
    no_args_is_help=False,
)
app.add_typer(log_app, name="log")


def parse_since(text: str | None) -> datetime | None:
    from issuer import limits

    return None if text is None else limits.moment("--since", text)


@log_app.callback()
def show_log(
    ctx: typer.Context,
    *,
    series: Annotated[str | None, typer.Option("--series", help="Only this series' entries.")] = None,
    by: Annotated[
        str | None, typer.Option("--actor", help="Only entries by this person (as logged).")
    ] = None,
    since: Annotated[
        str | None, typer.Option("--since", help="Only entries at or after this date/time (UTC), e.g. 2026-03-01.")
    ] = None,
    last: Annotated[int | None, typer.Option("--last", help="Only the newest N entries.", min=1)] = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """List logged acts, oldest first (filter with --series, --actor, --since, --last)."""
    if ctx.invoked_subcommand is not None:
        return
    from issuer import limits
    from issuer.register.lifecycle import log_entries

    limits.number("entries", last, label="--last")
    register = open_register_from_options(db, None)
    with register.reading() as session:
        events = log_entries(session, series=series, actor=by, since=parse_since(since), limit=last)
    if as_json:
        print_json([event.as_dict() for event in events])
        return
    from rich.table import Table

    table = Table(title="Log", show_lines=False)
    for column in ("#", "when (UTC)", "who", "act", "series", "code", "batch", "details"):
        table.add_column(column)
    for event in events:
        table.add_row(
            str(event.id),
            event.at.strftime("%Y-%m-%d %H:%M:%S"),
            shown(event.actor),
            event.action,
            event.series or "",
            shown(event.code or ""),
            str(event.batch or ""),
            shown(_detail_summary(event.detail)),
        )
    console().print(table)


def _detail_summary(detail: str) -> str:
    import json

    data = json.loads(detail)
    data.pop("codes_sha256", None)
    return ", ".join(f"{key}={value}" for key, value in data.items())
