"""The root group loads commands on demand: its table of names, modules and summaries
must match the commands the modules really define, and `issuer --help` and
`issuer check` must not import the other command modules."""

from __future__ import annotations

import inspect
import json
import pkgutil
import subprocess
import sys
from importlib import import_module
from pathlib import Path

import pytest
import typer.main
from typer.testing import CliRunner

import issuer.cli
from issuer.cli.app import COMMANDS, app, load_command
from issuer.cli.common import Group


def _first_paragraph(text: str) -> str:
    return " ".join(inspect.cleandoc(text).split("\n\n")[0].split())


def _defined_commands() -> dict[str, str]:
    """Every top-level command any module under issuer.cli defines, with its module."""
    found: dict[str, str] = {}
    for info in pkgutil.iter_modules(issuer.cli.__path__):
        module = import_module(f"issuer.cli.{info.name}")
        commands = getattr(module, "commands", None)
        if not isinstance(commands, typer.Typer):
            continue
        built = typer.main.get_command(commands)
        names = list(built.commands) if isinstance(built, Group) else [built.name or ""]
        for name in names:
            assert name not in found, f"{name} is defined in {found.get(name)} and {info.name}"
            found[name] = info.name
    return found


def test_the_table_names_every_command_and_its_module() -> None:
    assert {name: entry.module for name, entry in COMMANDS.items()} == _defined_commands()


@pytest.mark.parametrize("name", list(COMMANDS))
def test_the_table_summary_is_the_command_s_own(name: str) -> None:
    command = load_command(name)
    assert _first_paragraph(command.help or "") == _first_paragraph(COMMANDS[name].summary)


def test_help_lists_every_command_with_its_summary() -> None:
    result = CliRunner().invoke(app, ["--help"], env={"COLUMNS": "400"})
    assert result.exit_code == 0, result.output
    for name, entry in COMMANDS.items():
        line = next((line for line in result.stdout.splitlines() if line.strip("│ ").startswith(f"{name} ")), "")
        assert entry.summary.split(". ")[0][:60] in line, f"{name}: {line!r}"


def test_an_unknown_command_is_one_line_with_a_suggestion() -> None:
    result = CliRunner().invoke(app, ["chek", "X"])
    assert result.exit_code == 2
    assert "Did you mean 'check'" in result.stderr and result.stderr.count("\n") == 1


PROBE = """
import json, sys
from issuer.cli.main import main
sys.argv = ["issuer", *sys.argv[1:]]
try:
    main()
except SystemExit:
    pass
print(json.dumps(sorted(m for m in sys.modules if m.startswith("issuer.cli."))), file=sys.stderr)
"""


def _loaded(tmp_path: Path, *words: str) -> set[str]:
    # outside the checkout, so the installed package answers
    run = subprocess.run(
        [sys.executable, "-c", PROBE, *words], cwd=tmp_path, capture_output=True, text=True, check=False,
        env={"ISSUER_DB": str(tmp_path / "none.sqlite"), "COLUMNS": "100", "PATH": "/usr/bin:/bin"},
        timeout=120,
    )  # fmt: skip
    return set(json.loads(run.stderr.strip().splitlines()[-1]))


def test_help_and_a_check_load_no_other_command_module(tmp_path: Path) -> None:
    modules = {f"issuer.cli.{entry.module}" for entry in COMMANDS.values()}
    assert _loaded(tmp_path, "--help") & modules == set()
    assert _loaded(tmp_path, "check", "--scheme", "luhn", "79927398713") & modules == {"issuer.cli.engine"}
