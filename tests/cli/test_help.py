"""Every command, subcommand, option and argument explains itself in --help. Walks the
whole app, so commands added later are held to it too."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import pytest
import typer.main
from typer.testing import CliRunner

from issuer.cli.app import app
from issuer.cli.common import Context, Group


def _walk(command: Any, path: tuple[str, ...] = ()) -> Iterator[tuple[tuple[str, ...], Any]]:
    """Through Click's own interface (list_commands/get_command), so the root group's
    lazily loaded commands are walked too."""
    yield path, command
    if isinstance(command, Group):
        context = Context(command)
        for name in sorted(command.list_commands(context)):
            yield from _walk(command.get_command(context, name), (*path, name))


COMMANDS = list(_walk(typer.main.get_command(app)))
IDS = [" ".join(path) or "issuer" for path, _ in COMMANDS]


def test_the_walk_finds_the_engine_commands() -> None:
    names = {path for path, _ in COMMANDS}
    assert {("schemes",), ("calc",), ("check",), ("assess",)} <= names


@pytest.mark.parametrize(("path", "command"), COMMANDS, ids=IDS)
def test_command_and_its_parameters_have_help(path: tuple[str, ...], command: Any) -> None:
    text = (command.help or command.short_help or "").strip()
    assert text, f"'issuer {' '.join(path)}' has no help text"
    for param in command.params:
        if getattr(param, "hidden", False):
            continue
        described = (getattr(param, "help", None) or "").strip()
        assert described, f"'issuer {' '.join(path)}': {param.name} has no help"


@pytest.mark.parametrize(("path", "command"), COMMANDS, ids=IDS)
def test_help_renders(path: tuple[str, ...], command: Any) -> None:
    result = CliRunner().invoke(app, [*path, "--help"], env={"COLUMNS": "120"})
    assert result.exit_code == 0, result.output
    assert "Usage" in result.stdout
