"""``issuer issue``, ``void``, ``replace``, ``restore`` and ``history``."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

from issuer.cli.common import (
    PERSONAL_DATA_CAUTION,
    ActorOption,
    DbOption,
    ForceOption,
    JsonOption,
    command_set,
    console,
    open_register_from_options,
    print_json,
    progress_bar,
    shown,
)
from issuer.cli.signing import KeyOption

commands = command_set()

#: batches up to this size are listed code by code in the terminal
LIST_UP_TO = 50

ReasonOption = Annotated[str, typer.Option("--reason", help="Why, in a few words: it goes into the log.")]


@commands.command("issue")
def issue(
    key: Annotated[str, typer.Argument(help="The series to issue from.")],
    *,
    count: Annotated[int, typer.Option("--count", "-n", help="How many codes, all in one batch.", min=1)] = 1,
    holder: Annotated[
        str | None,
        typer.Option("--holder", help="Who holds the item or card. Personal data: store only what your policy allows."),
    ] = None,
    note: Annotated[str | None, typer.Option("--note", help="A note kept with each code.")] = None,
    request_id: Annotated[
        str | None,
        typer.Option("--request-id", help="An id for this request: a retry with the same id returns the same codes."),
    ] = None,
    out: Annotated[
        Path | None, typer.Option("--out", help="Also write the batch's codes to this CSV file.", dir_okay=False)
    ] = None,
    force: ForceOption = False,
    valid_until: Annotated[
        str | None,
        typer.Option("--valid-until", help="The codes are valid through this date (YYYY-MM-DD, UTC); default: the series' period."),
    ] = None,
    receipt: Annotated[
        Path | None,
        typer.Option(
            "--receipt",
            help="Also write a signed inclusion receipt for this batch's log entry to this file, "
            "checkable offline with the log's public key ('issuer log check-receipt').",
            dir_okay=False,
        ),
    ] = None,
    sign_key: KeyOption = None,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Issue the next code(s) of a series: whole batch or nothing."""
    from contextlib import ExitStack

    from issuer.register.standing import parse_instant

    until = parse_instant(valid_until, end_of_day=True) if valid_until is not None else None
    signing = None
    if receipt is not None:  # the key and the receipt's file are checked before anything is issued
        from issuer.cli.signing import read_key_file, signing_key_path
        from issuer.outputs import check_target

        from issuer.proofs.statements import check_private_key

        signing = read_key_file(signing_key_path(sign_key), "signing key")
        check_private_key(signing)
        check_target(receipt, force=force, what="receipt file")

    from issuer.cli.interrupts import batch_told, now, truthful_interrupt

    # the table and --json list every code; a big batch's summary needs only first and last
    collect = as_json or count <= LIST_UP_TO
    tell = batch_told("issued", key, out, now())
    opener = lambda: open_register_from_options(db, actor)
    with truthful_interrupt(opener, ("issue",), tell, series=key) as register:
        from issuer.register.bulk import CodesCsv
        from issuer.register.fill import after_batch
        from issuer.register.issuing import issue_codes

        # the output file is checked before anything is issued; it appears once the batch commits
        csv_out = CodesCsv(out, force=force) if out is not None else None
        with progress_bar(count, f"Issuing {count:,} codes") as advance, ExitStack() as stack:
            sink = stack.enter_context(csv_out) if csv_out is not None else None
            result = issue_codes(
                register, key, count, holder=holder, note=note, request_id=request_id,
                progress=advance, collect=collect, sink=sink, valid_until=until,
            )  # fmt: skip
        with register.reading() as session:
            fill, warning = after_batch(session, result.series, 0 if result.replayed else result.count)
        proof = _write_receipt(register, result.batch, signing, receipt, force) if receipt is not None else None
        if as_json:
            print_json({
                "batch": result.batch,
                "series": result.series,
                "replayed": result.replayed,
                "codes": [info.as_dict() for info in result.codes],
                "fill": fill,
                "fill_warning": warning.as_dict() if warning else None,
                "receipt": proof,
            })
            return
        _render_issue(result, out, holder is not None and _holds_people(register, key))
        if proof is not None:
            console().print(f"Receipt written to {receipt}: leaf {proof['index']} of the tree of {proof['size']:,}")
        if warning is not None:
            from issuer.cli.common import err_console

            err_console().print(f"[bold yellow]Warning:[/bold yellow] {warning.message()}")


def _write_receipt(register: Any, batch: int, signing: Any, path: Path, force: bool) -> dict[str, Any]:
    """Seal, sign and prove the batch's log entry; the receipt file appears whole."""
    from issuer.outputs import output_text
    from issuer.register.checkpoints import receipt_for_batch

    made = receipt_for_batch(register, batch, signing)
    with output_text(path, force=force, what="receipt file") as stream:
        stream.write(made.text())
    return {"file": str(path), "index": made.index, "size": made.checkpoint.size,
            "root": made.checkpoint.root.hex(), "entry_hash": made.entry_hash}  # fmt: skip


def _holds_people(register: Any, key: str) -> bool:
    """Whether ``key``'s holders are people (the personal-data caution shows then)."""
    from issuer.register.series import get_series

    with register.reading() as session:
        return bool(get_series(session, key).holds_people)


def _render_issue(result: Any, out: Path | None, has_holder: bool) -> None:
    out_console = console()
    verb = "Already issued for this request id" if result.replayed else "Issued"
    if result.count <= LIST_UP_TO:
        from rich.table import Table

        table = Table(title=f"{verb}: batch {result.batch}, series {result.series}")
        table.add_column("code", style="bold")
        table.add_column("holder")
        for info in result.codes:
            table.add_row(info.display, shown(info.holder or ""))
        out_console.print(table)
    else:
        out_console.print(
            f"{verb} {result.count:,} codes in batch {result.batch} of series {result.series}: "
            f"first [bold]{result.first.display}[/bold], last [bold]{result.last.display}[/bold]"
        )
    if out is not None:
        out_console.print(f"Codes written to {out}")
    if result.protected is False:
        out_console.print(
            "Note: this scattered series' range is below FF1's one-million minimum domain: "
            "the order is only shuffled, not protected."
        )
    if has_holder:
        out_console.print(PERSONAL_DATA_CAUTION, style="dim")


@commands.command("void")
def void(
    code: Annotated[str, typer.Argument(help="The code to void, as typed or scanned.")],
    *,
    reason: ReasonOption,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Void a code (lost, stolen, damaged). It is never issued again."""
    from issuer.register.lifecycle import void_code

    record = void_code(open_register_from_options(db, actor), code, reason=reason)
    if as_json:
        print_json(record.as_dict())
    else:
        console().print(f"Voided [bold]{record.display}[/bold] ({record.series}): {shown(record.void_reason)}")


@commands.command("replace")
def replace(
    code: Annotated[str, typer.Argument(help="The code to replace, as typed or scanned.")],
    *,
    reason: ReasonOption,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Void a code and issue its replacement from the same series, linked both ways."""
    from issuer.register.lifecycle import replace_code

    result = replace_code(open_register_from_options(db, actor), code, reason=reason)
    if as_json:
        print_json({"code": result.code, "display": result.display, "replaces": result.replaces,
                    "replaces_display": result.replaces_display, "batch": result.batch})
    else:
        console().print(f"Voided {result.replaces_display}; its replacement is [bold]{result.display}[/bold]")


@commands.command("restore")
def restore(
    code: Annotated[str, typer.Argument(help="The voided code to bring back.")],
    *,
    reason: ReasonOption,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Undo a mistaken void (logged)."""
    from issuer.register.lifecycle import restore_code

    record = restore_code(open_register_from_options(db, actor), code, reason=reason)
    if as_json:
        print_json(record.as_dict())
    else:
        console().print(f"Restored [bold]{record.display}[/bold]: it is in use again")


@commands.command("history")
def history(
    code: Annotated[str, typer.Argument(help="The code, as typed or scanned.")],
    *,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Everything that happened to a code: issue, prints, sightings, void, replacement."""
    from issuer.register.lifecycle import code_history

    register = open_register_from_options(db, None)
    with register.reading() as session:
        record, events = code_history(session, code, register.clock())
    if as_json:
        print_json({"code": record.as_dict(), "events": [event.as_dict() for event in events]})
        return
    from rich.table import Table

    out = console()
    status = {
        "issued": "[green]in use[/green]",
        "expired": f"[yellow]expired[/yellow] (valid until {record.valid_until:%Y-%m-%d %H:%M} UTC)" if record.valid_until else "expired",
        "suspended": f"[yellow]suspended[/yellow] since {record.suspended_at:%Y-%m-%d %H:%M} UTC ({shown(record.suspend_reason)})" if record.suspended_at else "suspended",
    }.get(record.standing, f"[red]voided[/red] ({shown(record.void_reason)})")
    out.print(f"[bold]{record.display}[/bold]  series {record.series}  {status}")
    facts = [
        f"issued {record.issued_at:%Y-%m-%d %H:%M} UTC by {record.issued_by} (batch {record.batch})",
        f"printed {record.print_count} time(s)",
    ]
    if record.holder:
        facts.append(f"holder: {shown(record.holder)}")
    if record.valid_until and record.standing != "expired":
        facts.append(f"valid until {record.valid_until:%Y-%m-%d %H:%M} UTC")
    if record.erased_at:
        facts.append(f"holder and note erased {record.erased_at:%Y-%m-%d}")
    if record.replaces:
        facts.append(f"replaces {record.replaces_display}")
    if record.replaced_by:
        facts.append(f"replaced by {record.replaced_by_display}")
    if record.last_seen_at:
        facts.append(f"last seen {record.last_seen_at:%Y-%m-%d %H:%M} UTC {record.last_seen_where or ''}".rstrip())
    out.print("; ".join(facts))
    table = Table()
    for column in ("#", "when (UTC)", "who", "act", "details"):
        table.add_column(column)
    from issuer.cli.logcmd import _detail_summary

    for event in events:
        table.add_row(str(event.id), f"{event.at:%Y-%m-%d %H:%M:%S}", shown(event.actor), event.action,
                      shown(_detail_summary(event.shown_detail)))
    out.print(table)
