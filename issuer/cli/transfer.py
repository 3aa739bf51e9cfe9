"""``issuer import`` and ``issuer export``: numbers in from elsewhere, codes out to other
systems."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from issuer.cli.common import (
    PERSONAL_DATA_CAUTION,
    ActorOption,
    DbOption,
    ForceOption,
    JsonOption,
    command_set,
    console,
    err_console,
    fail,
    open_register_from_options,
    print_json,
    progress_bar,
)
from issuer.outputs import check_target, output_text

commands = command_set()

if TYPE_CHECKING:
    from issuer.register.importing import ImportPlan, ImportResult

#: rows shown in the terminal per list before "and N more"
SHOW_ROWS = 10


@commands.command(
    "export",
    epilog=f"{PERSONAL_DATA_CAUTION} An export carries each code's holder; keep the file accordingly.",
)
def export(
    key: Annotated[str, typer.Argument(help="The series to export.")],
    *,
    fmt: Annotated[
        str, typer.Option("--format", help="csv (with a header), json (one array) or jsonl (one object per line).")
    ] = "csv",
    status: Annotated[str, typer.Option("--status", help="Which codes: issued, voided or all.")] = "all",
    batch: Annotated[
        int | None, typer.Option("--batch", help="Only the codes of this batch (its number is in 'issuer log').", min=1)
    ] = None,
    out: Annotated[
        Path | None,
        typer.Option("--out", help="Write to this file (whole or not at all) instead of standard output.", dir_okay=False),
    ] = None,
    force: ForceOption = False,
    db: DbOption = None,
) -> None:
    """Stream a series' codes out to CSV, JSON or JSON Lines.

    In issue order: code, display form, status, dates, holder, note, void details, replacement link, last sighting. The series' key is never exported. 'issuer import' reads the file back into another register.
    """
    from issuer.register.transfer import FORMATS, STATUS_CHOICES, count_codes, export_codes

    if fmt not in FORMATS:
        fail(f"--format must be one of {', '.join(FORMATS)}, not {fmt!r}")
    if status not in STATUS_CHOICES:
        fail(f"--status must be one of {', '.join(STATUS_CHOICES)}, not {status!r}")
    register = open_register_from_options(db, None)
    if out is not None:
        check_target(out, force=force, what="--out")
    total = count_codes(register, key, status, batch=batch)
    with progress_bar(total, f"Exporting {total:,} codes") as advance:
        if out is None:
            written = export_codes(register, key, sys.stdout, fmt=fmt, status=status, batch=batch, progress=advance)
            sys.stdout.flush()
            return
        with output_text(out, force=force, what="--out") as stream:
            written = export_codes(register, key, stream, fmt=fmt, status=status, batch=batch, progress=advance)
    err_console().print(f"Exported {written:,} codes of series {key} to {out}")


@commands.command(
    "import",
    epilog=f"{PERSONAL_DATA_CAUTION} Import holders only where your policy allows it.",
)
def import_(
    key: Annotated[str, typer.Argument(help="The series the numbers belong to.")],
    file: Annotated[
        Path,
        typer.Argument(
            help="A plain list (one code per line), a CSV with a header, or JSON Lines: code, and "
            "optionally issued_at, issued_by, holder, note, status, voided_at, voided_by, void_reason, "
            "replaces, last_seen_at, last_seen_where (as 'issuer export' writes them, in any of its formats).",
            dir_okay=False,
        ),
    ],
    *,
    column: Annotated[str | None, typer.Option("--column", help="The CSV column holding the codes (default: code).")] = None,
    dry_run: Annotated[bool, typer.Option("--dry-run", help="Check every row and report; write nothing.")] = False,
    skip_bad: Annotated[
        bool, typer.Option("--skip-bad", help="Import the good rows and skip the bad ones (default: one bad row stops it all).")
    ] = False,
    rejects: Annotated[
        Path | None,
        typer.Option("--rejects", help="With --skip-bad: write the skipped rows and why to this CSV.", dir_okay=False),
    ] = None,
    force: ForceOption = False,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Bring numbers issued outside the register under its protection.

    Each row is checked (shape, check character, range, not twice, not already in the register, not another series' code); original dates and holders are kept, and the register never issues these numbers again. All or nothing: one bad row stops the import, naming its line, unless --skip-bad.
    """
    from issuer.readers.scanfile import read_table
    from issuer.register.importing import IMPORT_ROLES, apply_import, plan_import, rejects_rows

    if rejects is not None and not skip_bad:
        fail("--rejects lists skipped rows: give it with --skip-bad")
    register = open_register_from_options(db, actor)
    if rejects is not None:
        check_target(rejects, force=force, what="--rejects")
    with err_console().status("Reading and checking every row..."):
        table = read_table(file, column=column, roles=IMPORT_ROLES)
        plan = plan_import(register, key, table)
    if plan.rejected and not skip_bad:
        fail(plan.refusal())
    result = None
    if not dry_run:
        if not plan.rows:
            fail(f"{file}: every row was bad, nothing imported")
        if rejects is not None and plan.rejected:
            from issuer.outputs import SafeCsvWriter

            with output_text(rejects, force=force, what="--rejects") as stream:
                SafeCsvWriter(stream).writerows(rejects_rows(plan, table))
        from issuer.cli.interrupts import batch_told, now, truthful_interrupt

        with (
            truthful_interrupt(lambda: register, ("import",), batch_told("imported", key, None, now()), series=key),
            progress_bar(len(plan.rows), f"Importing {len(plan.rows):,} codes") as advance,
        ):
            result = apply_import(register, plan, progress=advance)
    if as_json:
        print_json({
            "series": key, "source": str(file), "rows": plan.read, "dry_run": dry_run,
            "imported": result.imported if result else 0,
            "would_import": len(plan.rows), "batch": result.batch if result else None,
            "skipped": [{"line": r.line, "code": r.text, "reason": r.reason} for r in plan.rejected],
            "ignored_columns": plan.ignored_columns,
        })  # fmt: skip
        return
    _render_import(plan, result, dry_run, rejects)


def _render_import(plan: ImportPlan, result: ImportResult | None, dry_run: bool, rejects: Path | None) -> None:
    out = console()
    if result is None:
        out.print(f"Dry run: {len(plan.rows):,} of {plan.read:,} rows would be imported into series "
                  f"{plan.series}; nothing was written.")
    else:
        voided = f"; {result.voided:,} of them voided" if result.voided else ""
        out.print(f"Imported {result.imported:,} codes into series {result.series} (batch {result.batch}): "
                  f"first {result.first}, last {result.last}{voided}.")
    if plan.rejected:
        from rich.table import Table

        verb = "would be skipped" if dry_run else "skipped"
        table = Table(title=f"{len(plan.rejected):,} rows {verb}")
        table.add_column("line", justify="right")
        table.add_column("code")
        table.add_column("why")
        for item in plan.rejected[:SHOW_ROWS]:
            table.add_row(str(item.line), item.text, item.reason)
        out.print(table)
        if len(plan.rejected) > SHOW_ROWS:
            out.print(f"... and {len(plan.rejected) - SHOW_ROWS:,} more")
        if rejects is not None and result is not None:
            out.print(f"Skipped rows and reasons written to {rejects}")
    if plan.ignored_columns:
        out.print(f"Columns not imported: {', '.join(plan.ignored_columns)}", style="dim")
