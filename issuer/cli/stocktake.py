"""``issuer reconcile``: a stocktake scan against the register."""

from __future__ import annotations

from collections.abc import Sequence
from itertools import islice
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer

from issuer.cli.common import (
    ActorOption,
    DbOption,
    ForceOption,
    JsonOption,
    command_set,
    console,
    err_console,
    open_register_from_options,
    print_json,
    progress_bar,
    shown,
)
from issuer.outputs import check_target, output_text

commands = command_set()

if TYPE_CHECKING:
    from issuer.stocktake.reconcile import Reconciliation

#: lines listed per class in the terminal before "and N more"
SHOW_LINES = 10

#: the classes a single reconcile shows (a count's scope and places add the others)
SHOWN = (
    "issued", "elsewhere", "expired", "suspended", "voided", "other_series", "bad_check", "not_issued", "malformed",
    "duplicates", "missing",
)


@commands.command(
    "reconcile",
    epilog="Exit status: 0 when every scan is an issued code, scanned once, and nothing is "
    "missing; 1 when the stocktake found something to look at; 2 on bad input.",
)
def reconcile_command(
    key: Annotated[str, typer.Argument(help="The series the stocktake covers.")],
    scanfile: Annotated[
        Path,
        typer.Argument(
            help="The scan: one code per line, or a CSV with a header (comma, semicolon, tab "
            "or bar separated) with a code column and perhaps time and location columns.",
            dir_okay=False,
        ),
    ],
    *,
    column: Annotated[
        str | None, typer.Option("--column", help="The CSV column holding the codes (default: code, barcode, tag, ...).")
    ] = None,
    time_column: Annotated[
        str | None, typer.Option("--time-column", help="The column with each scan's time (default: timestamp, scanned_at, time, ...).")
    ] = None,
    where_column: Annotated[
        str | None, typer.Option("--where-column", help="The column with each scan's place (default: location, shelf, room, ...).")
    ] = None,
    out: Annotated[
        Path | None,
        typer.Option("--out", help="Write the full report (every scanned line, then every missing code) to this CSV.", dir_okay=False),
    ] = None,
    tz: Annotated[
        str | None,
        typer.Option("--tz", help="Time zone of scan times written without one: a name like Europe/Lisbon, UTC, "
                     "or an offset like +01:00 (default: this machine's zone).", show_default=False),
    ] = None,
    record: Annotated[
        bool,
        typer.Option("--record", help="Log a 'seen' event for every scanned code the register holds, with the scan's time "
                     "and place ('issuer history' then shows when a tag was last seen)."),
    ] = False,
    force: ForceOption = False,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Reconcile a stocktake scan against the register.

    Sorts every scanned line: issued, found elsewhere (a place column against each tag's expected place), voided (should have been pulled), a code of another series (named), bad check (a typo, with the issued code probably meant), not issued, malformed; then lists the codes scanned more than once and the issued codes nobody scanned (missing). Blank and comment lines are counted. For a count over days and scanners, see 'issuer stocktake'.
    """
    from issuer.stocktake.reconcile import read_scans, reconcile, record_seen, sightings
    from issuer.stocktake.report import as_json as report_json
    from issuer.stocktake.report import write_report
    from issuer.stocktake.zones import resolve_zone

    zone = resolve_zone(tz)
    register = open_register_from_options(db, actor)
    if out is not None:
        check_target(out, force=force, what="--out")
    with err_console().status("Reading the scans and comparing them with the register..."):
        table = read_scans(scanfile, column=column, time_column=time_column, where_column=where_column)
        recon = reconcile(register, key, table, zone=zone)
    found = sightings(recon) if record else None  # a bad scan time stops us before any write
    if out is not None:
        with output_text(out, force=force, what="--out") as stream:
            write_report(recon, stream)
    recorded = None
    if found is not None:
        from issuer.cli.interrupts import truthful_interrupt

        def tell(done: Any) -> str:
            if not done:
                return "nothing was recorded: no sighting is in the log"
            return f"the stocktake was recorded ({len(found):,} sightings; log entry {done.last_id})"

        with (
            truthful_interrupt(lambda: register, ("stocktake",), tell, series=key),
            progress_bar(len(found), f"Recording {len(found):,} sightings") as advance,
        ):
            recorded = record_seen(register, recon, found=found, progress=advance)
    if as_json:
        data = report_json(recon)
        data["recorded"] = recorded
        data["report"] = str(out) if out is not None else None
        print_json(data)
    else:
        _render(recon, out, recorded)
    raise typer.Exit(0 if recon.clean else 1)


def _render(recon: Reconciliation, out: Path | None, recorded: int | None) -> None:
    from rich.table import Table

    terminal = console()
    summary = Table(title=f"Stocktake of series {recon.series}: {recon.scans:,} scans from {Path(recon.source).name}")
    summary.add_column("result")
    summary.add_column("count", justify="right")
    summary.add_column("meaning")
    styles = {"issued": "green", "missing": "yellow", "duplicates": "yellow"}
    from issuer.stocktake.results import MEANINGS

    for key in SHOWN:
        label, meaning = key.replace("_", " "), MEANINGS[key]
        count = recon.counts[key]
        style = styles.get(key, "red") if count else "dim"
        summary.add_row(f"[{style}]{label}[/{style}]", f"{count:,}", meaning)
    terminal.print(summary)
    notes = recon.counts["blank_lines"], recon.counts["comment_lines"]
    if any(notes):
        terminal.print(f"Not scans: {notes[0]:,} blank and {notes[1]:,} comment lines", style="dim")
    if recon.time_column:
        terminal.print(f"Scan times written without a zone were read in {recon.zone}", style="dim")
    problems = list(islice(recon.lines(skip_issued=True), SHOW_LINES + 1))
    if problems:
        table = Table(title="Scans to look at")
        for name in ("line", "scanned", "result", "detail", "probably meant"):
            table.add_column(name)
        for line in problems[:SHOW_LINES]:
            table.add_row(
                str(line.line), shown(line.scanned), line.status.replace("_", " "), shown(line.detail), _meant(line.likely),
            )  # fmt: skip
        terminal.print(table)
        more = len(recon.statuses) - recon.statuses.count("issued") - SHOW_LINES
        if more > 0:
            terminal.print(f"... and {more:,} more lines")
    _render_duplicates(terminal, recon)
    if recon.counts["missing"]:
        listed = [item for _, item in zip(range(SHOW_LINES), recon.missing_codes())]
        terminal.print(
            "Missing: " + ", ".join(item.display for item in listed)
            + (f" ... and {recon.counts['missing'] - len(listed):,} more" if recon.counts["missing"] > len(listed) else "")
        )
    if out is not None:
        terminal.print(f"Full report written to {out}")
    elif not recon.clean:
        terminal.print("Write every line to a CSV with --out REPORT.csv", style="dim")
    if recorded is not None:
        terminal.print(f"Recorded {recorded:,} sightings in the log")


def _meant(likely: Sequence[Any]) -> str:
    """The likeliest code, or every close one and the advice to read it again."""
    from issuer.stocktake.results import close_advice

    if not likely:
        return ""
    words = close_advice(likely)
    if words is None:
        return f"{likely[0].display} ({likely[0].description})"
    top = [item for item in likely if item.missing == likely[0].missing]
    close = [item for item in top if item.likelihood >= top[0].likelihood / 2]
    return " or ".join(f"{item.display} ({item.description})" for item in close) + f"; {words}"


def _render_duplicates(terminal: Any, recon: Reconciliation) -> None:
    repeated = recon.duplicates()
    if not repeated:
        return
    listed = []
    for code, times, lines, places in repeated[:SHOW_LINES]:
        where = f" at {', '.join(places)}" if places else ""
        listed.append(f"{recon.shape.display(code)} x{times} (lines {', '.join(map(str, lines))}{where})")
    more = f" ... and {len(repeated) - SHOW_LINES:,} more" if len(repeated) > SHOW_LINES else ""
    terminal.print("Scanned more than once: " + "; ".join(listed) + more)
