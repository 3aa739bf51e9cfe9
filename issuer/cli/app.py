"""The ``issuer`` command: one Typer app, one module per command group."""

from __future__ import annotations

from typing import Annotated

import typer

from issuer.cli.common import IssuerGroup

app = typer.Typer(
    name="issuer",
    cls=IssuerGroup,
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


def _register_commands() -> None:
    # each module adds its commands to ``app``; imports here stay light
    from issuer.cli import admin, demo, desk, engine, issuing, labels, logcmd, series  # noqa: F401
    from issuer.cli import printing, stocktake, transfer  # noqa: F401


_register_commands()


def main() -> None:
    app(prog_name="issuer")
