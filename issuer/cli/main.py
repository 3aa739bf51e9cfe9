"""The ``issuer`` console script. The root group loads only the command being run
(:class:`issuer.cli.app.LazyGroup`)."""

from __future__ import annotations


def main() -> None:
    from issuer.cli.app import app

    app(prog_name="issuer")
