"""Looking after a register: ``issuer db`` (status, upgrade, roles), ``issuer backup``
and ``issuer doctor``."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

from issuer.cli.common import (
    ActorOption,
    DbOption,
    JsonOption,
    command_set,
    console,
    err_console,
    open_existing_from_options,
    print_json,
    shown,
)

commands = command_set()

db_app = typer.Typer(
    help="The register's database: its status, schema upgrades, and the roles PostgreSQL enforces.",
    no_args_is_help=True,
)
commands.add_typer(db_app, name="db")



# --- issuer db ----------------------------------------------------------------------


@db_app.command("status")
def db_status(db: DbOption = None, as_json: JsonOption = False) -> None:
    """Which database, which schema level, how much it holds, and the log's head."""
    from issuer.register.admin import register_status

    register = open_existing_from_options(db)
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
    from issuer.register.sealing import default_key_file
    from issuer.register.store import database_url, key_path

    created, place = init_register(settings.database, actor=settings.actor, key_file=settings.key_file)
    key_file = key_path(settings.key_file) or default_key_file(database_url(settings.database))
    if as_json:
        print_json({"database": place, "created": created, "key_file": str(key_file)})
        return
    if created:
        console().print(f"Made a new register at {place}; next: 'issuer series add KEY ...'")
        console().print(
            f"Its key file is {shown(key_file)}: scattered series are sealed under it. Keep a copy apart "
            "from the register's backups; without it a scattered series can no longer issue."
        )
    else:
        console().print(f"There is a register at {place} already; nothing changed.")


@db_app.command("upgrade")
def db_upgrade(db: DbOption = None, as_json: JsonOption = False) -> None:
    """Bring an older register up to this issuer's schema ('db init' makes a new one)."""
    from issuer.register.admin import upgrade_register

    register = open_existing_from_options(db)
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

    register = open_existing_from_options(db)
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


@commands.command("backup")
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
    from issuer.register.backup import pg_dump_command, pg_restore_command, shell_line

    register = open_existing_from_options(db)
    if register.backend == "postgresql":
        dump = pg_dump_command(register, str(destination))
        restore = pg_restore_command(register, str(destination))
        has_password = register.engine.url.password is not None
        key_file = str(register.keyring.path)
        register.close()
        password_note = "The password is not printed: pg_dump and pg_restore read it from PGPASSWORD or ~/.pgpass."
        if as_json:
            print_json({"backend": "postgresql", "command": dump, "restore": restore,
                        "password": "PGPASSWORD or ~/.pgpass" if has_password else None, "key_file": key_file})
            return
        out = console()
        out.print("A PostgreSQL register is backed up with the server's own tool; run:")
        typer.echo(shell_line(dump))
        out.print("and restore it with:", style="dim")
        typer.echo(shell_line(restore))
        if has_password:
            out.print(password_note, style="dim")
        out.print("Keep the dump file private: it holds the register's personal data.")
        out.print(
            f"The dump holds the scatter keys sealed: keep a copy of the key file {shown(key_file)} apart "
            "from it (a register restored under another name needs register.key_file pointing at it)."
        )
        return
    result = _backup_with_progress(register, destination, force)
    key_file = register.keyring.path
    register.close()
    if result.key_file is None:  # said on stderr, with --json too: the copy cannot issue scattered codes
        err_console().print(
            f"Note: no key file at {shown(key_file)} to copy beside the backup; a scattered series "
            "restored from it cannot issue until its key file is put beside it (or named by register.key_file)."
        )
    if as_json:
        print_json(result.as_dict())
        return
    console().print(
        f"Backed up {result.source} to [bold]{result.destination}[/bold] "
        f"({result.size:,} bytes, owner-only, integrity checked); "
        f"log head {result.head_id}:{result.head_hash}"
    )
    if result.key_file:
        console().print(
            f"The register's key file is copied beside it ({shown(result.key_file)}): keep another copy "
            "apart from the backups; without it the scattered series can no longer issue."
        )


def _backup_with_progress(register: Any, destination: Path, force: bool) -> Any:
    from issuer.register.admin import sqlite_path
    from issuer.register.backup import backup_sqlite

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


@commands.command("doctor")
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

    register = open_existing_from_options(db)
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
