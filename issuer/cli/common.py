"""What every command shares: option types, consoles, JSON output, error handling.

Commands stay thin: parse options, call one library function, render the result.
Heavy libraries (numpy, Alembic, reportlab) are imported inside the functions that
need them so that a one-code command starts quickly.
"""

from __future__ import annotations

import json
import sys
from typing import Annotated, Any, NoReturn

import typer

try:  # recent Typer releases carry their own copy of click
    from typer._click import exceptions as click_exceptions
    from typer._click.core import Command, Context
except ImportError:  # pragma: no cover - older Typer uses the click package
    from click import Command, Context  # type: ignore[assignment]
    from click import exceptions as click_exceptions  # type: ignore[no-redef]
from typer.core import TyperCommand, TyperGroup, TyperOption

from issuer.errors import IssuerError, redact
from issuer.limits import json_safe, printable

JsonOption = Annotated[
    bool, typer.Option("--json", help="Print machine-readable JSON on stdout, and nothing else there.")
]
DbOption = Annotated[
    str | None,
    typer.Option(
        "--db",
        help="Register database: a SQLite file path or an SQLAlchemy URL "
        "(default: ISSUER_DB, then the config file, then issuer's file in your data directory).",
        show_default=False,
    ),
]
ActorOption = Annotated[
    str | None,
    typer.Option(
        "--actor",
        help="Who is acting, for the log (default: ISSUER_ACTOR, then your OS user name).",
        show_default=False,
    ),
]

ForceOption = Annotated[
    bool,
    typer.Option(
        "--force",
        help="Replace the output file if it exists (never the register, its journals or a non-file).",
    ),
]

CHECK_CAUTION = "A check character catches mistakes, not fraud: anyone can compute a valid one."
SCATTER_CAUTION = (
    "Scattered numbers are hard to guess, not secret: treat them as public once printed."
)
PERSONAL_DATA_CAUTION = (
    "A member register holds personal data: local law and your organisation's policy "
    "decide what may be stored and for how long."
)


_value_type = TyperOption.display_type_rich


def _flag_shows_no_type(self: TyperOption, ctx: Context) -> str | None:
    """A flag takes no value, so --help shows no ``<bool>`` beside it (``--json true``
    is refused: the label would promise what the parser does not accept)."""
    return None if self.is_flag else _value_type(self, ctx)


TyperOption.display_type_rich = _flag_shows_no_type  # type: ignore[method-assign]


UsageError = click_exceptions.UsageError
#: every group Typer builds (the root included) is one of these
Group = TyperGroup
__all__ = ["Command", "Context", "Group", "TyperCommand", "UsageError"]  # the click names faces use


def command_set() -> typer.Typer:
    """The Typer a command module adds its commands to (as ``commands``); the root group
    (:mod:`issuer.cli.app`) imports the module and takes them only when one runs."""
    return typer.Typer(add_completion=False, rich_markup_mode="rich", pretty_exceptions_enable=False)


def open_existing_from_options(db: str | None) -> Any:
    """The register the settings point at, as it is: no upgrade, no new file."""
    from issuer.config import load_settings
    from issuer.register.admin import open_existing

    settings = load_settings(database=db)
    timeout = int(settings.section("register").get("busy_timeout_ms", 15000))
    register = open_existing(
        settings.database, actor=settings.actor, busy_timeout_ms=timeout, key_file=settings.key_file
    )
    close_with_command(register)
    return register


class UserError(click_exceptions.ClickException):
    """A user's mistake: one line on stderr, exit code 2."""

    exit_code = 2

    def show(self, file: Any = None) -> None:
        typer.echo(redact(f"issuer: {one_line(self.format_message())}"), err=True)


class IssuerGroup(TyperGroup):
    """Root command group: turns library errors and usage errors into one line."""

    def invoke(self, ctx: Context) -> Any:
        try:
            return super().invoke(ctx)
        except IssuerError as exc:
            raise UserError(exc.message) from None

    def main(self, *args: Any, standalone_mode: bool = True, **kwargs: Any) -> Any:
        try:
            result = super().main(*args, standalone_mode=False, **kwargs)  # type: ignore[misc]
        except click_exceptions.NoArgsIsHelpError as exc:
            typer.echo(exc.ctx.get_help() if exc.ctx else str(exc))
            return _finish(standalone_mode, 0)
        except click_exceptions.ClickException as exc:
            message = printable(exc.format_message().splitlines()[0]) if exc.format_message() else "error"
            hint = ""
            if isinstance(exc, click_exceptions.UsageError) and exc.ctx is not None:
                hint = f" (see '{exc.ctx.command_path} --help')"
            typer.echo(redact(f"issuer: {message}{hint}"), err=True)
            return _finish(standalone_mode, exc.exit_code)
        except typer.Exit as exc:
            return _finish(standalone_mode, exc.exit_code)
        except typer.Abort:
            typer.echo("issuer: aborted", err=True)
            return _finish(standalone_mode, 130)
        if isinstance(result, int) and not isinstance(result, bool):
            return _finish(standalone_mode, result)
        return _finish(standalone_mode, 0) if standalone_mode else result


def _finish(standalone_mode: bool, code: int) -> Any:
    if standalone_mode:
        sys.exit(code)
    return code


def one_line(message: str) -> str:
    """A message as one terminal line: controls escaped, and a line break inside a
    quoted value (a CSV header, a note) shown as ``\\n`` rather than starting a line."""
    return printable(message).replace("\n", "\\n").replace("\t", " ")


def print_json(data: Any) -> None:
    """JSON on stdout, exactly, with nothing else around it."""
    sys.stdout.write(json_safe(json.dumps(data, ensure_ascii=False, default=str)))
    sys.stdout.write("\n")
    sys.stdout.flush()


def fail(message: str, code: int = 2) -> NoReturn:
    """Stop with one line on stderr."""
    typer.echo(redact(f"issuer: {one_line(message)}"), err=True)
    raise typer.Exit(code)


def safe_console_class() -> Any:
    """A Rich console that shows stored text safely: control characters escaped
    (``\\x1b``), and text that is not valid markup (a holder ``[/b]``) shown as written
    instead of stopping the command."""
    from rich.console import Console
    from rich.errors import MarkupError

    class SafeConsole(Console):
        def render_str(self, text: str, **options: Any) -> Any:
            text = printable(text)
            try:
                return super().render_str(text, **options)
            except MarkupError:
                options["markup"] = False
                return super().render_str(text, **options)

    return SafeConsole


def console() -> Any:
    return safe_console_class()(highlight=False)


def err_console() -> Any:
    return safe_console_class()(stderr=True, highlight=False)


def shown(value: object) -> str:
    """Stored text for a Rich markup string or table cell: escaped controls and markup."""
    from rich.markup import escape

    return escape(printable(str(value)))


def open_register_from_options(db: str | None, actor: str | None, *, create: bool = False) -> Any:
    """Open the register the settings point at (command line > environment > config).

    Only the commands that make a register on purpose (``series add``, ``demo``,
    ``db init``) pass ``create=True``; any other command on a missing register stops
    with "no register at PATH" and how to make one, so a mistyped path stays a mistake.
    """
    from issuer.config import load_settings
    from issuer.register.store import open_register

    settings = load_settings(database=db, actor=actor)
    timeout = int(settings.section("register").get("busy_timeout_ms", 15000))
    register = open_register(
        settings.database, actor=settings.actor, busy_timeout_ms=timeout, create=create, key_file=settings.key_file
    )
    close_with_command(register)
    return register


def close_with_command(register: Any) -> None:
    """Close the register's connections when the command ends: a PostgreSQL session
    should end with a goodbye, not when the process or the garbage collector drops it."""
    try:
        from typer._click.globals import get_current_context
    except ImportError:  # pragma: no cover - older Typer uses the click package
        from click import get_current_context  # type: ignore[no-redef]
    context = get_current_context(silent=True)
    if context is not None:
        context.call_on_close(register.close)


class progress_bar:
    """A Rich progress bar on stderr, shown only for work big enough to take a while.

    ``with progress_bar(total, "Issuing") as advance: advance(n)``
    """

    def __init__(self, total: int, description: str, *, show_from: int = 20_000) -> None:
        self.total = total
        self.description = description
        self.enabled = total >= show_from
        self._progress: Any = None
        self._task: Any = None

    def __enter__(self) -> Any:
        if not self.enabled:
            return lambda _n: None
        from rich.progress import (
            BarColumn,
            MofNCompleteColumn,
            Progress,
            TextColumn,
            TimeRemainingColumn,
        )

        self._progress = Progress(
            TextColumn("{task.description}"),
            BarColumn(),
            MofNCompleteColumn(),
            TimeRemainingColumn(),
            console=err_console(),
            transient=True,
        )
        self._progress.start()
        self._task = self._progress.add_task(self.description, total=self.total)
        return lambda n: self._progress.advance(self._task, n)

    def __exit__(self, *exc: object) -> None:
        if self._progress is not None:
            self._progress.stop()
