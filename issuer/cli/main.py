"""The ``issuer`` console script: load only the command being run, then run it."""

from __future__ import annotations

import sys


def main() -> None:
    try:
        _start()
    except KeyboardInterrupt:
        # Ctrl-C while the program was still loading: no command had begun to act
        sys.stderr.write("\nissuer: interrupted while starting; nothing was done\n")
        sys.exit(130)


def _start() -> None:
    from issuer.cli import _launch

    words = sys.argv[1:]
    if words and not words[0].startswith("-"):
        _launch.only_command = words[0]  # an unknown word loads every command
    from issuer.cli.app import app

    app(prog_name="issuer")
