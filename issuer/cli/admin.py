"""Looking after a register: ``issuer db`` (status, upgrade, roles), ``issuer backup``,
``issuer doctor``, and ``issuer log verify`` / ``issuer log anchor``."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

from issuer.cli.app import app
from issuer.cli.common import (
    ActorOption,
    DbOption,
    JsonOption,
    close_with_command,
    console,
    err_console,
    print_json,
)
from issuer.cli.logcmd import log_app

db_app = typer.Typer(
    help="The register's database: its status, schema upgrades, and the roles PostgreSQL enforces.",
    no_args_is_help=True,
)
app.add_typer(db_app, name="db")

TAMPER_NOTE = (
    "The chain shows edits made behind issuer's back; someone able to rewrite the whole "
    "log and its head can hide them: compare with an anchor written down elsewhere "
    "('issuer log anchor')."
)


def _open_existing(db: str | None) -> Any:
    """The register the settings point at, as it is: no upgrade, no new file."""
    from issuer.config import load_settings
    from issuer.register.admin import open_existing

    settings = load_settings(database=db)
    timeout = int(settings.section("register").get("busy_timeout_ms", 15000))
    register = open_existing(settings.database, actor=settings.actor, busy_timeout_ms=timeout)
    close_with_command(register)
    return register


# --- issuer db ----------------------------------------------------------------------


@db_app.command("status")
def db_status(db: DbOption = None, as_json: JsonOption = False) -> None:
    """Which database, which schema level, how much it holds, and the log's head."""
    from issuer.register.admin import register_status

    register = _open_existing(db)
    status = register_status(register)
    register.close()
    if as_json:
        print_json(status.as_dict())
        return
    from rich.table import Table

    table = Table(title="Register", show_header=False)
    table.add_column("", style="bold")
    table.add_column("", overflow="fold")
    level = status.revision or "none"
    verdict = "current" if status.current else f"needs {status.expected}: run 'issuer db upgrade'"
    for label, value in (
        ("database", status.database),
        ("backend", status.backend),
        ("schema", f"{level} ({verdict})"),
        ("series", f"{status.series:,}"),
        ("codes held", f"{status.codes:,}"),
        ("log entries", f"{status.log_entries:,}"),
        ("log head", f"{status.head_id}:{status.head_hash}" if status.head_hash else "-"),
    ):
        table.add_row(label, value)
    console().print(table)


@db_app.command("init")
def db_init(db: DbOption = None, actor: ActorOption = None, as_json: JsonOption = False) -> None:
    """Make a new, empty register on purpose (other commands never make one by accident).

    A SQLite file is created owner-only; a PostgreSQL database gets issuer's tables. A
    register already there is left untouched.
    """
    from issuer.config import load_settings
    from issuer.register.admin import init_register

    settings = load_settings(database=db, actor=actor)
    created, place = init_register(settings.database, actor=settings.actor)
    if as_json:
        print_json({"database": place, "created": created})
        return
    if created:
        console().print(f"Made a new register at {place}; next: 'issuer series add KEY ...'")
    else:
        console().print(f"There is a register at {place} already; nothing changed.")


@db_app.command("upgrade")
def db_upgrade(db: DbOption = None, as_json: JsonOption = False) -> None:
    """Bring an older register up to this issuer's schema ('db init' makes a new one)."""
    from issuer.register.admin import upgrade_register

    register = _open_existing(db)
    before, after = upgrade_register(register)
    register.close()
    if as_json:
        print_json({"before": before, "after": after, "changed": before != after})
        return
    if before == after:
        console().print(f"The register is at schema {after} already; nothing to do.")
    else:
        console().print(f"Upgraded the register from schema {before or 'none'} to {after}.")


@db_app.command("roles")
def db_roles(
    *,
    apply: Annotated[
        bool,
        typer.Option("--apply", help="Run the SQL (as the register's owner or a superuser) instead of printing it."),
    ] = False,
    clerk: Annotated[
        str, typer.Option("--clerk", help="Name of the clerk group role: issue, check, reprint, reconcile.")
    ] = "issuer_clerk",
    admin: Annotated[
        str,
        typer.Option("--admin", help="Name of the admin group role: also series, void, replace, restore, import."),
    ] = "issuer_admin",
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Print (or --apply) the PostgreSQL roles: a clerk, an admin, and an append-only log.

    Grants are per column, and a trigger refuses UPDATE, DELETE and TRUNCATE on the log
    to every role, the table's owner included. Make people members of a group role:
    CREATE ROLE alice LOGIN; GRANT issuer_clerk TO alice;
    """
    from issuer.register.admin import apply_statements, roles_script
    from issuer.register.roles import render_script

    register = _open_existing(db)
    statements = roles_script(register, clerk=clerk, admin=admin)
    if apply:
        apply_statements(register, statements)
    register.close()
    if as_json:
        print_json({"applied": apply, "clerk": clerk, "admin": admin, "statements": statements})
        return
    if apply:
        console().print(
            f"Roles {clerk} (clerk) and {admin} (admin) are set up; the log is append-only."
        )
        return
    typer.echo(render_script(statements), nl=False)


# --- issuer backup ------------------------------------------------------------------


@app.command("backup")
def backup(
    destination: Annotated[Path, typer.Argument(help="The backup file to write (owner-only).", dir_okay=False)],
    *,
    force: Annotated[bool, typer.Option("--force", help="Overwrite DEST if it exists.")] = False,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Copy the register while desks keep working (SQLite's online backup).

    The copy is checked, owner-only, and appears only when complete. For a PostgreSQL
    register this prints the pg_dump command to use instead.
    """
    from issuer.register import admin

    register = _open_existing(db)
    if register.backend == "postgresql":
        dump = admin.pg_dump_command(register, str(destination))
        restore = admin.pg_restore_command(register, str(destination))
        has_password = register.engine.url.password is not None
        register.close()
        password_note = "The password is not printed: pg_dump and pg_restore read it from PGPASSWORD or ~/.pgpass."
        if as_json:
            print_json({"backend": "postgresql", "command": dump, "restore": restore,
                        "password": "PGPASSWORD or ~/.pgpass" if has_password else None})
            return
        out = console()
        out.print("A PostgreSQL register is backed up with the server's own tool; run:")
        typer.echo(admin.shell_line(dump))
        out.print("and restore it with:", style="dim")
        typer.echo(admin.shell_line(restore))
        if has_password:
            out.print(password_note, style="dim")
        out.print("Keep the dump file private: it holds the register's personal data and keys.")
        return
    result = _backup_with_progress(register, destination, force)
    register.close()
    if as_json:
        print_json(result.as_dict())
        return
    console().print(
        f"Backed up {result.source} to [bold]{result.destination}[/bold] "
        f"({result.size:,} bytes, owner-only, integrity checked); "
        f"log head {result.head_id}:{result.head_hash}"
    )


def _backup_with_progress(register: Any, destination: Path, force: bool) -> Any:
    from issuer.register.admin import backup_sqlite, sqlite_path

    path = sqlite_path(register)
    big = path is not None and path.stat().st_size > 64 * 1024 * 1024
    if not big:
        return backup_sqlite(register, destination, force=force)
    from rich.progress import BarColumn, Progress, TextColumn

    with Progress(TextColumn("Backing up"), BarColumn(), console=err_console(), transient=True) as bar:
        task = bar.add_task("backup", total=None)
        return backup_sqlite(
            register, destination, force=force,
            progress=lambda done, total: bar.update(task, completed=done, total=total),
        )


# --- issuer doctor ------------------------------------------------------------------

_STATUS_STYLE = {"ok": "green", "warn": "yellow", "problem": "bold red", "skipped": "dim"}


@app.command("doctor")
def doctor(
    db: DbOption = None,
    as_json: JsonOption = False,
    fix: Annotated[
        bool, typer.Option("--fix", help="Remove temporary files that stopped processes left behind.")
    ] = False,
) -> None:
    """Check the register is whole; exit 1 when anything disagrees.

    Integrity, schema level, log chain, counters against the codes held, batches whole
    and logged, file and folder permissions or the log's append-only trigger, and
    temporary files left by stopped processes (--fix removes them). --json for scripts.
    """
    from issuer.register.doctor import run_doctor

    register = _open_existing(db)
    if as_json:
        report = run_doctor(register, fix=fix)
    else:
        with err_console().status("Checking the register") as status:
            report = run_doctor(register, lambda stage: status.update(f"Checking: {stage}"), fix=fix)
    register.close()
    if as_json:
        print_json(report.as_dict())
    else:
        _render_doctor(report)
    if not report.healthy:
        raise typer.Exit(1)


def _render_doctor(report: Any) -> None:
    from rich.table import Table

    table = Table(title=f"Register health: {report.database}")
    table.add_column("check", style="bold")
    table.add_column("result")
    table.add_column("findings")
    for finding in report.findings:
        lines = [finding.summary, *(f"  {detail}" for detail in finding.details)]
        style = _STATUS_STYLE.get(finding.status, "")
        table.add_row(finding.check, f"[{style}]{finding.status}[/]", "\n".join(lines))
    out = console()
    out.print(table)
    if report.healthy:
        out.print("[green]The register is whole.[/]")
    else:
        out.print("[bold red]The register disagrees with itself; see the problems above.[/]")


# --- issuer log verify / anchor -----------------------------------------------------


@log_app.command("verify")
def log_verify(
    *,
    anchor: Annotated[
        list[str] | None,
        typer.Option(
            "--anchor",
            help="An anchor written down earlier (ID:HASH from 'issuer log anchor'): check the "
            "entry is still in the chain, unchanged. Repeat for several.",
        ),
    ] = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Recompute the log's hash chain and name the first entry edited behind issuer's back.

    Reports the first entry altered, deleted or inserted. Exit 1 when the chain or an
    anchor does not hold. Someone able to rewrite the whole chain and its head can hide
    an edit: check against an anchor written down elsewhere ('issuer log anchor').
    """
    from issuer.register.admin import parse_anchor, verify_log

    anchors = [parse_anchor(value) for value in anchor or []]
    register = _open_existing(db)
    if as_json:
        report, checks = verify_log(register, anchors)
    else:
        with err_console().status("Recomputing the log's hash chain"):
            report, checks = verify_log(register, anchors)
    register.close()
    broken = report.problem is not None or any(not check.holds for check in checks)
    if as_json:
        print_json({
            "intact": report.intact,
            "entries": report.entries,
            "head": {"id": report.head_id, "hash": report.head_hash},
            "problem": None if report.problem is None else {
                "entry": report.problem.entry_id, "problem": report.problem.problem,
            },
            "anchors": [
                {"anchor": str(check.anchor), "holds": check.holds, "problem": check.problem}
                for check in checks
            ],
        })
    else:
        out = console()
        if report.problem is None:
            out.print(
                f"[green]Log intact[/]: {report.entries:,} entries, head "
                f"{report.head_id}:{report.head_hash}"
            )
        else:
            out.print(
                f"[bold red]Log broken at entry {report.problem.entry_id}[/]: {report.problem.problem}"
            )
        for check in checks:
            if check.holds:
                out.print(f"[green]Anchor holds[/]: {check.anchor.entry_id} is unchanged")
            else:
                out.print(f"[bold red]Anchor fails[/]: {check.problem}")
        out.print(TAMPER_NOTE, style="dim")
    if broken:
        raise typer.Exit(1)


@log_app.command("anchor")
def log_anchor(db: DbOption = None, as_json: JsonOption = False) -> None:
    """Print the log's newest entry as ID:HASH, to write down or publish elsewhere.

    Later, 'issuer log verify --anchor ID:HASH' shows whether the log up to it changed.
    """
    from issuer.register.admin import current_anchor

    register = _open_existing(db)
    anchor, at = current_anchor(register)
    register.close()
    if as_json:
        print_json({"id": anchor.entry_id, "hash": anchor.hash, "at": at, "anchor": str(anchor)})
        return
    if anchor.entry_id == 0:
        console().print("The log is empty; there is nothing to anchor yet.")
        return
    typer.echo(str(anchor))
    when = f" (entry of {at:%Y-%m-%d %H:%M:%S} UTC)" if at is not None else ""
    err_console().print(
        f"Write this down or publish it somewhere the register cannot reach{when}; "
        "check it later with: issuer log verify --anchor ID:HASH",
        style="dim",
    )
