"""``issuer serve`` and ``issuer tokens``: the register as an HTTP service, and the
bearer tokens its desks and other systems use."""

from __future__ import annotations

from typing import Annotated

import typer

from issuer.cli.common import (
    ActorOption,
    DbOption,
    JsonOption,
    command_set,
    console,
    open_register_from_options,
    print_json,
)

commands = command_set()

tokens_app = typer.Typer(help="Bearer tokens for the HTTP service: add, list, revoke.")
commands.add_typer(tokens_app, name="tokens")


@commands.command("serve")
def serve(
    *,
    host: Annotated[str, typer.Option("--host", help="Address to listen on. Keep the default and put a TLS reverse proxy in front for other machines.")] = "127.0.0.1",
    port: Annotated[int, typer.Option("--port", min=1, max=65535, help="Port to listen on.")] = 8000,
    quiet: Annotated[bool, typer.Option("--quiet", help="Log only warnings and errors.")] = False,
    db: DbOption = None,
) -> None:
    """Serve the register over HTTP: the JSON API (/api/v1) and the web desk page (/)."""
    import uvicorn

    from issuer.config import load_settings
    from issuer.service.app import create_app

    settings = load_settings(database=db)
    register = open_register_from_options(db, "service")
    if host not in ("127.0.0.1", "localhost", "::1"):
        console().print(
            f"Listening on {host}: plain HTTP. Put a TLS reverse proxy in front before other machines "
            "send tokens to it."
        )
    application = create_app(register, settings=settings)
    uvicorn.run(application, host=host, port=port, log_level="warning" if quiet else "info",
                proxy_headers=True, server_header=False)  # fmt: skip


@tokens_app.command("add")
def tokens_add(
    name: Annotated[str, typer.Argument(help="Who uses the token (a desk, a person, a system): the log's actor.")],
    *,
    role: Annotated[str, typer.Option("--role", help="clerk (issue, check, print, count) or admin (also void, replace, restore).")] = "clerk",
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Make a token. It is shown this once: only a slow hash of it is kept."""
    from issuer.register.tokens import add_token

    register = open_register_from_options(db, actor)
    info, secret = add_token(register, name, role)
    if as_json:
        print_json({**info.as_dict(), "token": secret})
        return
    out = console()
    out.print(f"Token {info.name!r} ({info.role}). Copy it now: it is not shown again.")
    typer.echo(secret)


@tokens_app.command("list")
def tokens_list(*, db: DbOption = None, as_json: JsonOption = False) -> None:
    """List the tokens (names, roles, when made and revoked; never the tokens themselves)."""
    from rich.table import Table

    from issuer.register.tokens import list_tokens

    register = open_register_from_options(db, None)
    tokens = list_tokens(register)
    if as_json:
        print_json([info.as_dict() for info in tokens])
        return
    if not tokens:
        console().print("No tokens yet: issuer tokens add NAME --role clerk")
        return
    table = Table("name", "role", "made", "by", "state")
    for info in tokens:
        state = "active" if info.active else f"revoked {info.revoked_at:%Y-%m-%d %H:%M}"
        table.add_row(info.name, info.role, f"{info.created_at:%Y-%m-%d %H:%M}", info.created_by, state)
    console().print(table)


@tokens_app.command("revoke")
def tokens_revoke(
    name: Annotated[str, typer.Argument(help="The token's name.")],
    *,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Revoke a token: the service refuses it from the next request on."""
    from issuer.register.tokens import revoke_token

    register = open_register_from_options(db, actor)
    info = revoke_token(register, name)
    if as_json:
        print_json(info.as_dict())
        return
    console().print(f"Revoked token {info.name!r}.")



