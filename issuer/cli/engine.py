"""Engine commands that need no register: schemes, calc, check --scheme, assess."""

from __future__ import annotations

from typing import Annotated, Optional

import typer

from issuer.cli.app import app
from issuer.cli.common import JsonOption, print_json


@app.command("calc")
def calc(
    bodies: Annotated[Optional[list[str]], typer.Argument(help="Bodies to protect.", show_default=False)] = None,
    *,
    scheme: Annotated[str, typer.Option("--scheme", help="Check-character method, e.g. luhn, damm.")],
    alphabet: Annotated[
        Optional[str], typer.Option("--alphabet", help="Body alphabet (default: the scheme's own).")
    ] = None,
    as_json: JsonOption = False,
) -> None:
    """Append the check character(s) to each BODY and print the full code."""
    from issuer.schemes import get_scheme

    bound = get_scheme(scheme, alphabet)
    rows = []
    for text in bodies or []:
        body = bound.alphabet.canonical(text)
        check = bound.compute(body)
        rows.append({"body": body, "check": check, "code": body + check})
    if as_json:
        print_json(rows)
    else:
        for row in rows:
            typer.echo(row["code"])
