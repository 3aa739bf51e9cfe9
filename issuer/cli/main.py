"""The ``issuer`` console script: load only the command being run, then run it."""

from __future__ import annotations

import sys


def main() -> None:
    from issuer.cli import _launch

    words = sys.argv[1:]
    if words and not words[0].startswith("-"):
        _launch.only_command = words[0]  # an unknown word loads every command
    from issuer.cli.app import app

    app(prog_name="issuer")
