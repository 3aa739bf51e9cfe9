"""The ``issuer`` command: one Typer app whose commands load on demand.

The root is a lazily loading Click group (Click's documented pattern for lazy
subcommands): it knows each command's name, module and one-line summary from
:data:`COMMANDS`, lists them in the root help without importing a single command
module, and imports a command's module only when that command runs. A clerk's
``issuer check CODE`` loads the engine commands and nothing else. Each command module
adds its commands to its own ``commands`` Typer (:func:`issuer.cli.common.command_set`);
``tests/cli/test_lazy.py`` holds the table to the real commands.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from difflib import get_close_matches
from typing import Annotated, Any

import typer
import typer.main

from issuer.cli.common import Command, Context, Group, IssuerGroup, TyperCommand, UsageError


@dataclass(frozen=True)
class Entry:
    module: str  # under issuer.cli
    summary: str  # the first paragraph of the command's help, as the root help shows it


#: every top-level command, in the order the root help lists them
COMMANDS: dict[str, Entry] = {
    'check': Entry('engine', 'Verify codes. With --scheme, by the check character alone; without it, against the register (in use, voided, never issued, or a typo of which issued code). Exit 0 when every code passes (valid; in use, for the register), 1 otherwise.'),
    'calc': Entry('engine', 'Append the check character(s) to each BODY and print the full code.'),
    'schemes': Entry('engine', 'List the check-character schemes, their alphabets and what each measurably detects (single substitutions, adjacent transpositions) on a short series.'),
    'assess': Entry('engine', 'Measure which errors each scheme detects on this series shape, weighted by how often people make them; with --expect, how long the codes should be.'),
    'series': Entry('series', 'Define series (the shape of their codes) and see how full they are.'),
    'issue': Entry('issuing', 'Issue the next code(s) of a series: whole batch or nothing.'),
    'void': Entry('issuing', 'Void a code (lost, stolen, damaged). It is never issued again.'),
    'replace': Entry('issuing', 'Void a code and issue its replacement from the same series, linked both ways.'),
    'restore': Entry('issuing', 'Undo a mistaken void (logged).'),
    'history': Entry('issuing', 'Everything that happened to a code: issue, prints, sightings, void, replacement.'),
    'holder': Entry('holders', "Who holds a code: set, clear or erase it. Personal data: A member register holds personal data: local law and your organisation's policy decide what may be stored and for how long."),
    'holders': Entry('holders', 'Holders in bulk: erase them by age, as your retention policy says.'),
    'find': Entry('holders', 'Find codes by holder or note: which number does this person or shelf hold?'),
    'renew': Entry('standing', 'Extend (or set) how long a code stays valid. Logged.'),
    'suspend': Entry('standing', "Hold a code back (a card reported lost that may turn up): it checks as suspended and is not printed until reinstated; 'replace' issues a new one."),
    'reinstate': Entry('standing', 'Take a suspended code back into use.'),
    'desk': Entry('desk', 'Keep a prompt open: type or scan code after code and see each answer at once.'),
    'counter': Entry('counter', 'A full-screen counter: scan or type codes, and issue, void, replace, restore, reprint and look up by single keys. A check character catches mistakes, not fraud.'),
    'labels': Entry('printing', 'Print labels for issued codes: a PDF sheet, or one label as PNG or SVG.'),
    'reprint': Entry('printing', 'Print labels again for codes already issued (a damaged, faded or lost label): each code\'s print count goes up by one and a "reprint" entry logs who reprinted and why (--reason is required). \'issuer history CODE\' shows every print.'),
    'layouts': Entry('labels', 'List the label layouts: built-in presets and your own layouts.NAME tables from the config file, with their physical dimensions (mm). Print label PDFs at 100 % scale (actual size), never "fit to page", or the labels will not line up.'),
    'reconcile': Entry('stocktake', 'Reconcile a stocktake scan against the register.'),
    'stocktake': Entry('counts', "Counts that span days: open a count (a series, or one place, range, batch or holder), add the scanners' files as they come in, watch its progress, close it, print its report."),
    'place': Entry('counts', 'Say where tagged items belong (their expected place), for counts by place.'),
    'import': Entry('transfer', 'Bring numbers issued outside the register under its protection.'),
    'export': Entry('transfer', "Stream a series' codes out to CSV, JSON or JSON Lines."),
    'log': Entry('logcmd', "Show the log of who did what and when; 'log verify' checks that nobody edited it."),
    'db': Entry('admin', "The register's database: its status, schema upgrades, and the roles PostgreSQL enforces."),
    'backup': Entry('admin', "Copy the register while desks keep working (SQLite's online backup)."),
    'doctor': Entry('admin', 'Check the register is whole; exit 1 when anything disagrees.'),
    'serve': Entry('service', 'Serve the register over HTTP: the JSON API (/api/v1) and the web desk page (/).'),
    'tokens': Entry('service', 'Bearer tokens for the HTTP service: add, list, revoke.'),
    'demo': Entry('demo', 'Build a demo register (tool tags in order, member cards scattered, day passes), issue, void, replace, and check a few typed-in codes with typos.'),
}  # fmt: skip


def load_command(name: str) -> Command:
    """Import the module that defines the top-level command ``name``; the command."""
    module = importlib.import_module(f"issuer.cli.{COMMANDS[name].module}")
    built = typer.main.get_command(module.commands)
    if isinstance(built, Group):
        found = built.commands.get(name)
        if found is None:
            raise LookupError(f"issuer.cli.{COMMANDS[name].module} defines no command {name!r}")
        return found
    return built  # a module with one command builds that command itself


class LazyGroup(IssuerGroup):
    """The root group: lists commands from :data:`COMMANDS` and loads one when it runs."""

    _summaries_only = False

    def list_commands(self, ctx: Context) -> list[str]:
        return [*COMMANDS, *(name for name in super().list_commands(ctx) if name not in COMMANDS)]

    def get_command(self, ctx: Context, cmd_name: str) -> Command | None:
        if cmd_name not in COMMANDS:
            return super().get_command(ctx, cmd_name)
        if self._summaries_only:  # listing for --help: the table says all that is shown
            return TyperCommand(cmd_name, help=COMMANDS[cmd_name].summary)
        if cmd_name not in self.commands:
            self.commands[cmd_name] = load_command(cmd_name)
        return self.commands[cmd_name]

    def format_help(self, ctx: Context, formatter: Any) -> None:
        self._summaries_only = True
        try:
            super().format_help(ctx, formatter)
        finally:
            self._summaries_only = False

    def resolve_command(self, ctx: Context, args: list[str]) -> Any:
        try:
            return super().resolve_command(ctx, args)
        except UsageError as exc:
            matches = get_close_matches(args[0], list(COMMANDS)) if args else []
            if matches and "Did you mean" not in exc.message:
                suggestions = ", ".join(repr(match) for match in matches)
                exc.message = f"{exc.message.rstrip('.')}. Did you mean {suggestions}?"
            raise


app = typer.Typer(
    name="issuer",
    cls=LazyGroup,
    help=(
        "Run registers of identifier series: check characters, in-order and scattered "
        "issuance, labels, desk verification and stocktake. A check character catches "
        "mistakes, not fraud."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode="rich",
    context_settings={"help_option_names": ["-h", "--help"]},
)


def _version(value: bool) -> None:
    if value:
        from issuer import __version__

        typer.echo(f"issuer {__version__}")
        raise typer.Exit()


@app.callback()
def root(
    version: Annotated[
        bool,
        typer.Option("--version", callback=_version, is_eager=True, help="Print the version and stop."),
    ] = False,
) -> None:
    """Run registers of identifier series. A check character catches mistakes, not fraud."""


def main() -> None:
    app(prog_name="issuer")
