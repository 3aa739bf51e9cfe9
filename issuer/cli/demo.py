"""``issuer demo``: a demo register for the fictional Quillmere Tool Library."""

from __future__ import annotations

import tempfile
from pathlib import Path
from typing import Annotated

import typer

from issuer.cli.common import (
    CHECK_CAUTION,
    PERSONAL_DATA_CAUTION,
    SCATTER_CAUTION,
    command_set,
    console,
    fail,
    open_register_from_options,
)

commands = command_set()


@commands.command("demo")
def demo(
    *,
    db: Annotated[
        str | None,
        typer.Option("--db", help="Where to build the demo register (default: a new temporary folder). Must be empty or new."),
    ] = None,
) -> None:
    """Build a demo register (tool tags in order, member cards scattered, day passes),
    issue, void, replace, and check a few typed-in codes with typos."""
    from rich.rule import Rule
    from rich.table import Table

    from issuer.cli.desk import render_answers
    from issuer.register.demo import run_demo

    if db is None:
        db = str(Path(tempfile.mkdtemp(prefix="issuer-demo-")) / "quillmere.sqlite")
    elif Path(db).exists() and Path(db).stat().st_size > 0:
        fail(f"{db} exists already; the demo needs a new file")
    register = open_register_from_options(db, "demo-clerk", create=True)
    report = run_demo(register)
    out = console()
    out.print(Rule("Quillmere Tool Library & Makers' Co-op: demo register"))
    out.print(f"Register: {db}")
    table = Table(title="Series")
    table.add_column("series")
    table.add_column("codes look like", no_wrap=True)
    table.add_column("check", no_wrap=True)
    table.add_column("issued", no_wrap=True)
    table.add_column("in use", justify="right")
    table.add_column("voided", justify="right")
    for state in report.states:
        table.add_row(f"{state.key}\n[dim]{state.title}[/dim]", state.example, state.scheme,
                      "in order" if state.mode == "sequential" else "scattered",
                      str(state.issued), str(state.voided))
    out.print(table)
    for key, codes in report.issued.items():
        out.print(f"[bold]{key}[/bold] issued: " + ", ".join(codes))
    for code, why in report.voided:
        out.print(f"Voided {code} ({why})")
    for old, new in report.replaced:
        out.print(f"Replaced {old} with {new}")
    out.print(Rule("At the desk: codes as people typed them"))
    for (text, story), answer in zip(report.typed, report.answers):
        answer.input = f"{text}\n({story})"  # plain: typed input is shown escaped
    render_answers(report.answers)
    out.print(f"[dim]{CHECK_CAUTION}\n{SCATTER_CAUTION}\n{PERSONAL_DATA_CAUTION}[/dim]")
    example = report.issued["tools"][0]
    out.print(f"Try: issuer check --db {db} {example}\n  or: issuer desk --db {db}")
