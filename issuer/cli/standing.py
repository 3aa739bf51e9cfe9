"""``issuer renew``, ``suspend`` and ``reinstate``: how long a code is valid, and holding
one back for a while."""

from __future__ import annotations

from typing import Annotated

import typer

from issuer.cli.common import (
    ActorOption,
    DbOption,
    JsonOption,
    command_set,
    console,
    open_register_from_options,
    print_json,
    shown,
)

commands = command_set()

CodeArgument = Annotated[str, typer.Argument(help="The code, as typed or scanned.")]


@commands.command("renew")
def renew(
    code: CodeArgument,
    *,
    until: Annotated[str | None, typer.Option("--until", help="Valid through this date (YYYY-MM-DD, UTC).")] = None,
    period: Annotated[
        str | None, typer.Option("--for", help="Valid this much longer, e.g. 365d or 2w (from its current end if not yet past).")
    ] = None,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Extend (or set) how long a code stays valid. Logged."""
    from issuer.register.standing import parse_instant, parse_period
    from issuer.register.validity import renew_code

    register = open_register_from_options(db, actor)
    renewal = renew_code(
        register, code,
        until=parse_instant(until, end_of_day=True) if until is not None else None,
        days=parse_period(period) if period is not None else None,
    )  # fmt: skip
    if as_json:
        print_json(renewal.as_dict())
        return
    console().print(f"[bold]{renewal.display}[/bold] is valid until {renewal.valid_until:%Y-%m-%d %H:%M} UTC")


@commands.command("suspend")
def suspend(
    code: CodeArgument,
    *,
    reason: Annotated[str, typer.Option("--reason", help="Why, e.g. 'reported lost': it goes into the log.")],
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Hold a code back (a card reported lost that may turn up): it checks as suspended
    and is not printed until reinstated; 'replace' issues a new one."""
    from issuer.register.suspension import suspend_code

    record = suspend_code(open_register_from_options(db, actor), code, reason=reason)
    if as_json:
        print_json(record.as_dict())
        return
    console().print(f"[bold]{record.display}[/bold] is suspended: {shown(record.suspend_reason)}")


@commands.command("reinstate")
def reinstate(
    code: CodeArgument,
    *,
    reason: Annotated[str | None, typer.Option("--reason", help="Why (optional; goes into the log).")] = None,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Take a suspended code back into use."""
    from issuer.register.suspension import reinstate_code

    record = reinstate_code(open_register_from_options(db, actor), code, reason=reason)
    if as_json:
        print_json(record.as_dict())
        return
    console().print(f"[bold]{record.display}[/bold] is in use again")
