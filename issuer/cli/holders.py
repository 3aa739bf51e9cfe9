"""``issuer holder`` (set, clear, erase), ``issuer holders purge`` and ``issuer find``."""

from __future__ import annotations

from typing import Annotated

import typer

from issuer.cli.common import (
    PERSONAL_DATA_CAUTION,
    ActorOption,
    DbOption,
    JsonOption,
    command_set,
    console,
    err_console,
    open_register_from_options,
    print_json,
    progress_bar,
    shown,
)

commands = command_set()

ERASURE_REACH = (
    "Erasure cannot reach copies made before it: backups, exported files, printed labels, "
    "and any reason or note typed into the log."
)

holder_app = typer.Typer(help="Who holds a code: set, clear or erase it. Personal data: " + PERSONAL_DATA_CAUTION)
commands.add_typer(holder_app, name="holder")
holders_app = typer.Typer(help="Holders in bulk: erase them by age, as your retention policy says.")
commands.add_typer(holders_app, name="holders")

CodeArgument = Annotated[str, typer.Argument(help="The code, as typed or scanned.")]


def _show_change(change: object, as_json: bool, message: str) -> None:
    if as_json:
        print_json(change.as_dict())  # type: ignore[attr-defined]
    else:
        console().print(message)


@holder_app.command("set")
def holder_set(
    code: CodeArgument,
    holder: Annotated[str, typer.Argument(help="Who holds it: a name, a member number, a shelf.")],
    *,
    note: Annotated[str | None, typer.Option("--note", help="Also set the code's note ('' clears it).")] = None,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Give a code a holder, or change it. Logged without the text itself."""
    from issuer.register.holders import set_holder

    register = open_register_from_options(db, actor)
    change = set_holder(register, code, holder, **({} if note is None else {"note": note}))
    _show_change(change, as_json, f"[bold]{change.display}[/bold] is held by {shown(change.holder)}")


@holder_app.command("clear")
def holder_clear(
    code: CodeArgument,
    *,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Take the holder off a code (the note stays; 'holder erase' removes both)."""
    from issuer.register.holders import clear_holder

    change = clear_holder(open_register_from_options(db, actor), code)
    _show_change(change, as_json, f"[bold]{change.display}[/bold] has no holder now")


@holder_app.command("erase")
def holder_erase(
    code: CodeArgument,
    *,
    reason: Annotated[str, typer.Option("--reason", help="Why (goes into the log; do not repeat the name).")],
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Erase holder and note from a code and every copy the register keeps of them."""
    from issuer.register.holders import erase_holder

    erasure = erase_holder(open_register_from_options(db, actor), code, reason=reason)
    if as_json:
        print_json(erasure.as_dict())
        return
    console().print(f"Erased holder and note of {', '.join(erasure.codes)}; the log keeps the act, not the text.")
    err_console().print(ERASURE_REACH)


@holders_app.command("purge")
def holders_purge(
    *,
    voided_before: Annotated[
        str | None, typer.Option("--voided-before", help="Erase holders of codes voided before this date (YYYY-MM-DD, UTC).")
    ] = None,
    expired_before: Annotated[
        str | None, typer.Option("--expired-before", help="Erase holders of codes whose validity ended before this date.")
    ] = None,
    dry_run: Annotated[bool, typer.Option("--dry-run", help="Only count (and list a few of) the codes it would erase.")] = False,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Erase holders and notes in bulk by age. Local law and your policy set how long to keep them."""
    from issuer.register.holders import purge_holders
    from issuer.register.standing import parse_instant

    def moment(text: str | None) -> object:
        return None if text is None else parse_instant(text, end_of_day=False)

    register = open_register_from_options(db, actor)
    rule = {"voided_before": moment(voided_before), "expired_before": moment(expired_before)}
    purge = purge_holders(register, **rule, dry_run=True)  # type: ignore[arg-type]
    if not dry_run:
        with progress_bar(purge.count, "Erasing holders") as advance:
            purge = purge_holders(register, **rule, progress=advance)  # type: ignore[arg-type]
    if as_json:
        print_json(purge.as_dict())
        return
    when = purge.before.date().isoformat()
    if purge.dry_run:
        listed = f": {', '.join(purge.codes)}" + (" ..." if purge.count > len(purge.codes) else "") if purge.codes else ""
        console().print(f"Would erase the holder and note of {purge.count:,} code(s) {purge.rule} {when}{listed}")
        return
    console().print(f"Erased the holder and note of {purge.count:,} code(s) {purge.rule} {when}.")
    err_console().print(ERASURE_REACH)


@commands.command("find")
def find(
    text: Annotated[str, typer.Argument(help="The start of a holder or note; case and spacing do not matter.")],
    *,
    series: Annotated[str | None, typer.Option("--series", help="Look only in this series.")] = None,
    limit: Annotated[int, typer.Option("--limit", help="At most this many codes.", min=1, max=10_000)] = 50,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Find codes by holder or note: which number does this person or shelf hold?"""
    from issuer.register.holders import find_holders

    register = open_register_from_options(db, None)
    with register.reading() as session:
        found = find_holders(session, text, series=series, limit=limit, now=register.clock())
    if as_json:
        print_json([item.as_dict() for item in found])
        return
    if not found:
        console().print(f"No holder or note starts with {shown(text)}.")
        return
    from rich import box
    from rich.table import Table

    table = Table(box=box.SIMPLE_HEAD)
    for column in ("code", "series", "status", "holder", "note"):
        table.add_column(column, no_wrap=column == "code")
    for item in found:
        table.add_row(item.display, item.series, item.status, shown(item.holder or ""), shown(item.note or ""))
    console().print(table)
