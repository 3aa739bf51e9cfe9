"""``issuer series``: define series and see their state."""

from __future__ import annotations

from typing import Annotated

import typer

from issuer.cli.common import (
    SCATTER_CAUTION,
    ActorOption,
    DbOption,
    JsonOption,
    command_set,
    console,
    err_console,
    open_register_from_options,
    print_json,
    shown,
)
from issuer.errors import InvalidFormat

commands = command_set()

PeopleOption = Annotated[
    bool | None,
    typer.Option(
        "--people/--no-people",
        help="Whether holders are people (member cards: personal data) or places and things "
        "(a workshop shelf). Decides where the personal-data caution shows. Default for a "
        "new series: people if scattered, not if in order.",
        show_default=False,
    ),
]

series_app = typer.Typer(help="Define series (the shape of their codes) and see how full they are.")
commands.add_typer(series_app, name="series")


def parse_group(text: str | None) -> tuple[int, ...]:
    if not text:
        return ()
    try:
        return tuple(int(part) for part in text.split(","))
    except ValueError:
        raise InvalidFormat(f"--group {text!r} must be sizes separated by commas, e.g. 4,4") from None


@series_app.command("add")
def add(
    key: Annotated[str, typer.Argument(help="Short name of the series, e.g. tools (lower case).")],
    *,
    scheme: Annotated[str, typer.Option("--scheme", help="Check-character method (see 'issuer schemes').")],
    length: Annotated[int, typer.Option("--length", help="Body length, without the check character(s).", min=1)],
    alphabet: Annotated[
        str | None, typer.Option("--alphabet", help="Body symbols: digits, letters, alnum, crockford32, hex or custom:SYMBOLS (default: the scheme's own).")
    ] = None,
    prefix: Annotated[str, typer.Option("--prefix", help="Fixed text before the body, e.g. QTL.")] = "",
    suffix: Annotated[str, typer.Option("--suffix", help="Fixed text after the check character(s).")] = "",
    mode: Annotated[
        str, typer.Option("--mode", help="sequential (in order) or scattered (keyed permutation, hard to guess).")
    ] = "sequential",
    start: Annotated[int | None, typer.Option("--start", help="Lowest base number (default 1).", min=0)] = None,
    end: Annotated[int | None, typer.Option("--end", help="Highest base number (default: the largest the length allows).", min=0)] = None,
    group: Annotated[str | None, typer.Option("--group", help="How to group body+check for people, e.g. 4,4.")] = None,
    sep: Annotated[str, typer.Option("--sep", help="Separator between prefix, groups and suffix.")] = "-",
    title: Annotated[str, typer.Option("--title", help="A title for people and labels.")] = "",
    people: PeopleOption = None,
    valid_for: Annotated[
        str | None, typer.Option("--valid-for", help="How long each new code stays valid, e.g. 1d, 30d, 365d (default: no end).")
    ] = None,
    warn_at: Annotated[
        str, typer.Option("--warn-at", help="Fill levels (percent) at which issuing warns, e.g. 80,95; or none.")
    ] = "80,95",
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Define a series. Its shape is frozen once it has issued a number."""
    from issuer.register.defining import SeriesSpec, add_series
    from issuer.register.fill import parse_levels
    from issuer.register.series import series_state
    from issuer.register.standing import parse_period

    spec = SeriesSpec(
        key=key, scheme=scheme, length=length, alphabet=alphabet, prefix=prefix, suffix=suffix,
        mode=mode, start=start, end=end, group=parse_group(group), sep=sep, title=title,
        holds_people=people,
        valid_for_days=parse_period(valid_for) if valid_for else None, fill_levels=parse_levels(warn_at),
    )
    register = open_register_from_options(db, actor, create=True)
    series = add_series(register, spec)
    with register.reading() as session:
        state = series_state(session, series, register.clock())
    if as_json:
        print_json(state.as_dict())
        return
    out = console()
    out.print(f"Series [bold]{state.key}[/bold] defined: codes like [bold]{state.example}[/bold], "
              f"{state.capacity:,} numbers ({state.mode}).")
    if state.mode == "scattered":
        if state.protected is False:
            err_console().print(
                "Note: this range is below the one-million minimum domain of NIST SP 800-38G FF1, "
                "so the order is only shuffled, not protected."
            )
        out.print(SCATTER_CAUTION)


@series_app.command("change")
def change(
    key: Annotated[str, typer.Argument(help="The series to change.")],
    *,
    title: Annotated[str | None, typer.Option("--title", help="A new title (always allowed).")] = None,
    scheme: Annotated[str | None, typer.Option("--scheme", help="A new check method (only before the first code).")] = None,
    alphabet: Annotated[str | None, typer.Option("--alphabet", help="New body symbols (only before the first code).")] = None,
    length: Annotated[int | None, typer.Option("--length", help="A new body length (only before the first code).", min=1)] = None,
    prefix: Annotated[str | None, typer.Option("--prefix", help="A new prefix (only before the first code).")] = None,
    suffix: Annotated[str | None, typer.Option("--suffix", help="A new suffix (only before the first code).")] = None,
    mode: Annotated[str | None, typer.Option("--mode", help="sequential or scattered (only before the first code).")] = None,
    start: Annotated[int | None, typer.Option("--start", help="A new lowest base number (only before the first code).", min=0)] = None,
    end: Annotated[int | None, typer.Option("--end", help="A new highest base number (only before the first code).", min=0)] = None,
    group: Annotated[str | None, typer.Option("--group", help="New grouping for people, e.g. 4,4.")] = None,
    sep: Annotated[str | None, typer.Option("--sep", help="A new separator between groups.")] = None,
    people: PeopleOption = None,
    valid_for: Annotated[
        str | None, typer.Option("--valid-for", help="How long new codes stay valid, e.g. 30d; 'none' for no end (codes issued already keep theirs).")
    ] = None,
    warn_at: Annotated[str | None, typer.Option("--warn-at", help="New fill warning levels, e.g. 80,95; or none.")] = None,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Change a series' title, or its shape while it has issued nothing (then it is frozen)."""
    from issuer.register.defining import change_series
    from issuer.register.fill import parse_levels
    from issuer.register.series import series_state
    from issuer.register.standing import parse_period

    days = None if valid_for is None else 0 if valid_for.strip().lower() == "none" else parse_period(valid_for)
    register = open_register_from_options(db, actor)
    series = change_series(
        register, key, title=title, scheme=scheme, alphabet=alphabet, length=length,
        prefix=prefix, suffix=suffix, mode=mode, start=start, end=end,
        group=parse_group(group) if group is not None else None, sep=sep, holds_people=people,
        valid_for_days=days, fill_levels=parse_levels(warn_at) if warn_at is not None else None,
    )  # fmt: skip
    with register.reading() as session:
        state = series_state(session, series, register.clock())
    if as_json:
        print_json(state.as_dict())
    else:
        _render_state(state)


def _render_state(state: object) -> None:
    from rich.table import Table

    data = state.as_dict()  # type: ignore[attr-defined]
    table = Table(show_header=False, title=f"Series {data['key']}")
    table.add_column("field", style="bold")
    table.add_column("value")
    labels = {
        "title": "Title", "example": "Codes look like", "scheme": "Check method",
        "alphabet": "Body symbols", "length": "Body length", "mode": "Issued",
        "capacity": "Capacity", "issued": "In use", "voided": "Voided",
        "suspended": "Suspended", "expired": "Expired",
        "remaining": "Left to issue", "fill": "Fill", "next_code": "Next in order",
        "protected": "FF1 domain ≥ 10⁶", "holds_people": "Holders are people", "valid_for": "Valid for",
        "fill_levels": "Warns at",
    }
    for key, label in labels.items():
        value = data.get(key)
        if value is None or value == "":
            continue
        if key == "fill":
            value = f"{value:.4%}"
            if data.get("fill_level") is not None:
                value += f"  [bold yellow]past {data['fill_level']}%[/bold yellow]"
        elif key == "fill_levels":
            value = ", ".join(f"{level}%" for level in value) if value else "never"
        elif key in ("suspended", "expired") and value == 0:
            continue
        elif key == "mode":
            value = "in order" if value == "sequential" else "scattered"
        elif isinstance(value, int) and not isinstance(value, bool):
            value = f"{value:,}"
        elif key == "protected":
            value = "yes" if value else "no: order only shuffled, not protected"
        elif key == "holds_people":
            value = "yes (personal data)" if value else "no"
        table.add_row(label, str(value))
    table.add_row("Range", f"{data['start']:,} .. {data['end']:,}")
    console().print(table)


@series_app.command("show")
def show(
    key: Annotated[str, typer.Argument(help="The series to show.")],
    *,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Show a series: capacity, in use, voided, left, next in-order number or fill."""
    from issuer.register.series import get_series, series_state

    register = open_register_from_options(db, None)
    with register.reading() as session:
        state = series_state(session, get_series(session, key), register.clock())
    if as_json:
        print_json(state.as_dict())
    else:
        _render_state(state)


def _compact(number: int) -> str:
    """A large count in a few characters (the exact figure is in 'series show')."""
    for size, unit in ((10**12, "T"), (10**9, "G"), (10**6, "M")):
        if number >= size * 0.9995:  # so 999,999,995 reads 1.0 G, not 1000.0 M
            return f"{number / size:.1f} {unit}"
    return f"{number:,}"


@series_app.command("list")
def list_series(
    *,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """List the register's series with how full each is."""
    from issuer.register.series import all_series, series_state

    register = open_register_from_options(db, None)
    with register.reading() as session:
        states = [series_state(session, series, register.clock()) for series in all_series(session)]
    if as_json:
        print_json([state.as_dict() for state in states])
        return
    from rich import box
    from rich.table import Table

    table = Table(title="Series", box=box.SIMPLE_HEAD)
    for column in ("series", "looks like", "mode", "in use", "voided", "left"):
        table.add_column(
            column,
            justify="right" if column in ("in use", "voided", "left") else "left",
            no_wrap=column in ("looks like", "in use", "voided", "left"),
            min_width=12 if column == "series" else None,
        )
    for state in states:
        name = f"{state.key}\n[dim]{shown(state.title)}[/dim]" if state.title else state.key
        table.add_row(
            name, state.example,
            "in order" if state.mode == "sequential" else "scattered",
            f"{state.issued:,}", f"{state.voided:,}",
            _compact(state.remaining) + (f"\n[bold yellow]past {state.fill_level}%[/bold yellow]" if state.fill_level else ""),
        )  # fmt: skip
    if not states:
        console().print("No series yet: define one with 'issuer series add'.")
        return
    console().print(table)
