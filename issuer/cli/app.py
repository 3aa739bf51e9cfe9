"""The ``issuer`` command: one Typer app, one module per command group."""

from __future__ import annotations

from typing import Annotated

import typer

from issuer.cli import _launch
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


#: which module defines each top-level command; a process that runs one command
#: imports only that module (start-up time matters at a counter)
COMMAND_MODULES: dict[str, tuple[str, ...]] = {
    "schemes": ("engine",), "calc": ("engine",), "check": ("engine",), "assess": ("engine",),
    "series": ("series",),
    "issue": ("issuing",), "void": ("issuing",), "replace": ("issuing",),
    "restore": ("issuing",), "history": ("issuing",),
    "log": ("logcmd", "admin"), "db": ("admin",), "backup": ("admin",), "doctor": ("admin",),
    "desk": ("desk",), "demo": ("demo",),
    "layouts": ("labels",), "labels": ("printing",), "reprint": ("printing",),
    "reconcile": ("stocktake",), "import": ("transfer",), "export": ("transfer",),
    "stocktake": ("counts",), "place": ("counts",),
    "serve": ("service",), "tokens": ("service",), "counter": ("counter",),
    "holder": ("holders",), "holders": ("holders",), "find": ("holders",),
    "renew": ("standing",), "suspend": ("standing",), "reinstate": ("standing",),
}  # fmt: skip


def register_commands(only: str | None = None) -> None:
    """Import the command modules (each adds its commands to ``app``): all of them, or
    just the one that defines the command ``only``."""
    import importlib

    names = COMMAND_MODULES.get(only or "") or sorted({m for ms in COMMAND_MODULES.values() for m in ms})
    for name in names:
        importlib.import_module(f"issuer.cli.{name}")


register_commands(_launch.only_command)


def main() -> None:
    app(prog_name="issuer")
