"""The ``issuer`` console script. The root group loads only the command being run
(:class:`issuer.cli.app.LazyGroup`)."""

from __future__ import annotations

import sys


def main() -> None:
    try:
        from issuer.cli.app import app
    except KeyboardInterrupt:
        # Ctrl-C while the program was still loading: no command had begun to act
        sys.stderr.write("\nissuer: interrupted while starting; nothing was done\n")
        sys.exit(130)
    app(prog_name="issuer")
