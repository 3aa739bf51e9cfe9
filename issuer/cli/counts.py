"""``issuer stocktake``: counts that span days (open, add, status, close, list, report), and
``issuer place``: where each tagged item belongs."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from issuer.cli.common import (
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
from issuer.cli.inputs import FileOption, read_inputs

commands = command_set()

if TYPE_CHECKING:
    from issuer.stocktake.counts import CountStatus

stocktake_app = typer.Typer(
    help="Counts that span days: open a count (a series, or one place, range, batch or holder), add the "
    "scanners' files as they come in, watch its progress, close it, print its report."
)
commands.add_typer(stocktake_app, name="stocktake")

ZoneOption = Annotated[
    str | None,
    typer.Option("--tz", help="Time zone of scan times written without one: a name like Europe/Lisbon, UTC, "
                 "or an offset like +01:00 (default: this machine's zone).", show_default=False),
]  # fmt: skip


@stocktake_app.command("open")
def open_(
    name: Annotated[str, typer.Argument(help="A name for the count, e.g. spring-aisle-1.")],
    *,
    series: Annotated[str, typer.Option("--series", help="The series the count covers.")],
    where: Annotated[str | None, typer.Option("--where", help="Count one place: the codes expected there.")] = None,
    first: Annotated[str | None, typer.Option("--from", help="Count a range of codes: the first.")] = None,
    last: Annotated[str | None, typer.Option("--to", help="Count a range of codes: the last.")] = None,
    batch: Annotated[int | None, typer.Option("--batch", help="Count one batch (its number).", min=1)] = None,
    holder: Annotated[str | None, typer.Option("--holder", help="Count the codes one holder holds.")] = None,
    tz: ZoneOption = None,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Open a count: what it expects (the whole series unless narrowed) and the zone of its scan times."""
    from issuer.register.counting import CountScope
    from issuer.stocktake.counts import start_count

    chosen = [flag for flag, value in (("--where", where), ("--from/--to", first or last), ("--batch", batch),
                                       ("--holder", holder)) if value]  # fmt: skip
    if len(chosen) > 1:
        fail(f"a count has one scope; choose one of {', '.join(chosen)}")
    if (first is None) != (last is None):
        fail("a range count needs both --from CODE and --to CODE")
    scope = (
        CountScope("where", text=where) if where else CountScope("range", first=first, last=last) if first
        else CountScope("batch", batch=batch) if batch else CountScope("holder", text=holder) if holder
        else CountScope()
    )  # fmt: skip
    register = open_register_from_options(db, actor)
    info = start_count(register, name, series, scope, tz=tz)
    if as_json:
        print_json(info.as_dict())
        return
    console().print(f"Opened count {info.name} of series {info.series} ({info.describe_scope()}); "
                    f"scan times without a zone are read in {info.zone}.")  # fmt: skip
    console().print(f"Add scan files with: issuer stocktake add {info.name} FILE...", style="dim")


@stocktake_app.command("add")
def add(
    name: Annotated[str, typer.Argument(help="The count.")],
    files: Annotated[
        list[Path],
        typer.Argument(help="Scan files: one code per line, a CSV with a header, or JSON Lines.", dir_okay=False),
    ],
    *,
    scanner: Annotated[str | None, typer.Option("--scanner", help="Which scanner or person made these files.")] = None,
    tz: Annotated[str | None, typer.Option("--tz", help="Zone of these files' times without one (default: the count's).")] = None,
    column: Annotated[str | None, typer.Option("--column", help="The CSV column holding the codes.")] = None,
    time_column: Annotated[str | None, typer.Option("--time-column", help="The column with each scan's time.")] = None,
    where_column: Annotated[str | None, typer.Option("--where-column", help="The column with each scan's place.")] = None,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Add scan files to an open count. Each file goes in whole or not at all; the same file twice is refused."""
    from issuer.register.counting import count_info
    from issuer.register.scanfiles import add_scan_file
    from issuer.stocktake.counts import read_scan_file
    from issuer.stocktake.zones import resolve_zone

    register = open_register_from_options(db, actor)
    info = count_info(register, name)
    zone = resolve_zone(tz) if tz else info.zone
    added = []
    for path in files:
        with err_console().status(f"Reading {path.name}..."):
            scan_file = read_scan_file(path, zone=zone, scanner=scanner, column=column, time_column=time_column,
                                       where_column=where_column)  # fmt: skip
        with progress_bar(len(scan_file.rows), f"Adding {path.name}") as advance:
            added.append(add_scan_file(register, name, scan_file, progress=advance))
        if not as_json:
            item = added[-1]
            console().print(f"Added {path.name}: {item.scans:,} scans"
                            + (f", {item.blank_lines} blank and {item.comment_lines} comment lines"
                               if item.blank_lines or item.comment_lines else ""))  # fmt: skip
    if as_json:
        print_json({"count": name, "added": [item.as_dict() for item in added]})


@stocktake_app.command("status")
def status(
    name: Annotated[str, typer.Argument(help="The count.")],
    *,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """How far a count has got: expected codes found so far, scans it did not expect, its files."""
    from issuer.stocktake.counts import count_status

    register = open_register_from_options(db, actor)
    with err_console().status("Reading the count's scans..."):
        state = count_status(register, name)
    if as_json:
        print_json(state.as_dict())
        return
    _render_status(state)


def _render_status(state: CountStatus) -> None:
    from rich.table import Table

    from issuer.stocktake.results import COUNT_KEYS, MEANINGS

    info = state.info
    terminal = console()
    terminal.print(f"Count {info.name} ({info.state}): series {info.series}, {info.describe_scope()}; "
                   f"times without a zone read in {info.zone}")  # fmt: skip
    share = f" ({100 * state.found / state.expected:.1f} %)" if state.expected else ""
    terminal.print(f"Found {state.found:,} of {state.expected:,} expected{share}; {state.unexpected:,} unexpected")
    summary = Table(title="By class")
    for column in ("class", "count", "meaning"):
        summary.add_column(column, justify="right" if column == "count" else "left")
    for key in COUNT_KEYS:
        summary.add_row(key.replace("_", " "), f"{state.counts[key]:,}", MEANINGS[key])
    summary.add_row("blank lines", f"{state.counts['blank_lines']:,}", "empty lines in the files")
    summary.add_row("comment lines", f"{state.counts['comment_lines']:,}", "lines starting with # or //")
    terminal.print(summary)
    files = Table(title="Files")
    for column in ("file", "scanner", "scans", "added", "by"):
        files.add_column(column)
    for item in state.files:
        files.add_row(item.name, item.scanner or "", f"{item.scans:,}", f"{item.added_at:%Y-%m-%d %H:%M} UTC", item.added_by)
    terminal.print(files)


@stocktake_app.command("close")
def close(
    name: Annotated[str, typer.Argument(help="The count.")],
    *,
    record: Annotated[bool, typer.Option("--record", help="Log a sighting of every code found (last seen time and place).")] = False,
    move: Annotated[
        bool, typer.Option("--move-places", help="With --record: make where each found-elsewhere item was seen its expected place.")
    ] = False,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Close a count: its result is frozen in the register (and recorded, if asked); nothing more can be added."""
    from issuer.stocktake.counts import finish_count

    register = open_register_from_options(db, actor)
    with err_console().status("Reconciling the count..."):
        closed = finish_count(register, name, record=record, relocate=move)
    result = closed.info.result or {}
    if as_json:
        print_json({**closed.info.as_dict(), "recorded": closed.recorded, "moved": closed.moved,
                    "counts": result.get("counts"), "expected": result.get("expected"), "found": result.get("found")})
        return
    console().print(f"Closed count {closed.info.name}: found {result.get('found', 0):,} of {result.get('expected', 0):,} expected, "
                    f"{result.get('counts', {}).get('missing', 0):,} missing")  # fmt: skip
    if record:
        console().print(f"Recorded {closed.recorded:,} sightings; moved {closed.moved:,} expected places")
    console().print(f"Print its report with: issuer stocktake report {closed.info.name} --out report.pdf", style="dim")


@stocktake_app.command("list")
def list_(db: DbOption = None, actor: ActorOption = None, as_json: JsonOption = False) -> None:
    """Every count, open and closed."""
    from rich.table import Table

    from issuer.stocktake.counts import list_counts

    register = open_register_from_options(db, actor)
    counts = list_counts(register)
    if as_json:
        print_json([info.as_dict() for info in counts])
        return
    table = Table(title="Counts")
    for column in ("name", "series", "scope", "state", "files", "scans", "opened"):
        table.add_column(column)
    for info in counts:
        table.add_row(info.name, info.series, info.describe_scope(), info.state, f"{info.files:,}", f"{info.scans:,}",
                      f"{info.opened_at:%Y-%m-%d} by {info.opened_by}")  # fmt: skip
    console().print(table)


@stocktake_app.command("report")
def report(
    name: Annotated[str, typer.Argument(help="The count.")],
    *,
    out: Annotated[Path | None, typer.Option("--out", help="Write the report to this file (default: standard output for csv and json).", dir_okay=False)] = None,
    fmt: Annotated[str | None, typer.Option("--format", help="pdf, csv or json (default: from --out's suffix, else json).")] = None,
    force: ForceOption = False,
    db: DbOption = None,
    actor: ActorOption = None,
) -> None:
    """A count's report: scope, counts, a chart of the classes, the lists to act on, and a place to sign (PDF)."""
    import sys

    from issuer.stocktake.counts import count_result

    kind = (fmt or (out.suffix.lstrip(".").lower() if out is not None else "json")).lower()
    if kind not in ("pdf", "csv", "json"):
        fail(f"--format is pdf, csv or json, not {kind!r}")
    if kind == "pdf" and out is None:
        fail("a PDF report needs --out FILE.pdf")
    register = open_register_from_options(db, actor)
    if out is not None:
        from issuer.outputs import check_target

        check_target(out, force=force, what="--out")
    with err_console().status("Reading the count..."):
        info, files, result = count_result(register, name)
    if kind == "pdf":
        from issuer.outputs import staged_path
        from issuer.stocktake.pdf import write_pdf

        assert out is not None
        with staged_path(out, force=force, what="--out") as temporary, open(temporary, "wb") as stream:
            write_pdf(info, files, result, stream)
    else:
        from issuer.stocktake.summary import write_csv, write_json

        writer = write_csv if kind == "csv" else write_json
        if out is None:
            writer(info, files, result, sys.stdout)
            return
        from issuer.outputs import output_text

        with output_text(out, force=force, what="--out") as stream:
            writer(info, files, result, stream)
    err_console().print(f"Report written to {out}")


@commands.command("place", epilog="A place is where an item belongs; a count that sees it elsewhere says so.")
def place(
    codes: Annotated[list[str] | None, typer.Argument(help="Codes to place ('-' reads them from standard input).")] = None,
    *,
    at: Annotated[str | None, typer.Option("--at", help="The place: a shelf, room or bin, e.g. 'Aisle 1 Shelf A'.")] = None,
    clear: Annotated[bool, typer.Option("--clear", help="Forget the codes' expected place instead.")] = False,
    file: FileOption = None,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Say where tagged items belong (their expected place), for counts by place."""
    from issuer.register.places import place_codes

    if (at is None) == (not clear):
        fail("give --at PLACE, or --clear to forget the place")
    texts = read_inputs(codes, file).lines()
    register = open_register_from_options(db, actor)
    placed = place_codes(register, texts, None if clear else at)
    if as_json:
        print_json([item.__dict__ for item in placed])
        return
    where = f"at {placed[0].after}" if placed and placed[0].after else "with no place"
    console().print(f"Placed {len(placed):,} code{'s' if len(placed) != 1 else ''} {where}")
