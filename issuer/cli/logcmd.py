"""``issuer log``: the logged acts, filtered; subcommands check the chain."""

from __future__ import annotations

from datetime import datetime
from typing import Annotated, Any

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
    entries: Annotated[
        bool,
        typer.Option("--entries", help="Every log entry on its own line (default: one line per act, a batch or print job summed up)."),
    ] = False,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """List logged acts, oldest first (filter with --series, --actor, --since, --last).

    One line per act: a print of 300 labels or a stocktake's sightings is one line;
    --entries shows every entry. --json always lists every entry.
    """
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
    if entries:
        _render_entries(events)
    else:
        _render_acts(events)


def _render_entries(events: list[Any]) -> None:
    from issuer.cli.blocks import Rows

    rows = Rows(("#", "when (UTC)", "who", "act", "series", "code", "batch", "details"), title="Log",
                heading=(0, 1, 3))
    for event in events:
        rows.add_row(
            str(event.id),
            event.at.strftime("%Y-%m-%d %H:%M:%S"),
            shown(event.actor),
            event.action,
            event.series or "",
            shown(event.display or ""),
            str(event.batch or ""),
            shown(_detail_summary(event.shown_detail)),
        )
    rows.print(console())


def _render_acts(events: list[Any]) -> None:
    from issuer.cli.blocks import Rows
    from issuer.register.acts import group_acts

    rows = Rows(("#", "when (UTC)", "who", "act", "series", "what", "details"), title="Log", heading=(0, 1, 3))
    for act in group_acts(events):
        number = str(act.first_id) if act.entries == 1 else f"{act.first_id}-{act.last_id}"
        rows.add_row(
            number,
            act.at.strftime("%Y-%m-%d %H:%M:%S"),
            shown(act.actor),
            act.action,
            act.series or "",
            shown(_what(act)),
            shown(_detail_summary(act.detail)),
        )
    rows.print(console())


def _what(act: Any) -> str:
    """The codes an act touched, summed up: one code, or how many from first to last."""
    parts = []
    if act.batch:
        parts.append(f"batch {act.batch}")
    if 0 < len(act.codes) <= 3:
        parts.append(", ".join(act.codes))
    elif act.codes:
        parts.append(f"{len(act.codes):,} codes, {act.codes[0]} .. {act.codes[-1]}")
    return ", ".join(parts)


def _detail_summary(detail: str) -> str:
    import json

    data = json.loads(detail)
    data.pop("codes_sha256", None)
    return ", ".join(f"{key}={value}" for key, value in data.items())
