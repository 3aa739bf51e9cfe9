"""Where a command's codes come from: CODE arguments, ``--file F``, or ``-`` (stdin).

Everything is read and vetted before any answer is printed, so a bad input stops the
command with one line on stderr and nothing half-written on stdout.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from typing import Annotated

import typer

from issuer.checking.verify import MAX_INPUT_LENGTH
from issuer.errors import InvalidFormat, InvalidLength, IssuerError

FileOption = Annotated[
    str | None,
    typer.Option(
        "--file",
        "-f",
        help="Read one item a line from this file ('-' reads standard input).",
        show_default=False,
    ),
]

STDIN = "-"


@dataclass(frozen=True)
class Inputs:
    """Either the texts given as arguments, or the raw bytes of a file or stdin."""

    texts: list[str] | None
    data: bytes | None
    source: str

    def lines(self) -> list[str]:
        """Every non-blank line (or argument), as text."""
        if self.texts is not None:
            return self.texts
        assert self.data is not None
        out = []
        for number, line in enumerate(self.data.split(b"\n"), start=1):
            if len(line) > MAX_INPUT_LENGTH + 1:
                raise InvalidLength(_too_long(number, len(line), self.source))
            text = line.decode("utf-8", "replace").strip()
            if text:
                out.append(text)
        return out


def _too_long(number: int, size: int, source: str) -> str:
    return (
        f"line {number} of {source} is {size:,} bytes long; an item has at most "
        f"{MAX_INPUT_LENGTH} characters"
    )


def _read_bytes(path: str) -> tuple[bytes, str]:
    if path == STDIN:
        return sys.stdin.buffer.read(), "standard input"
    try:
        with open(path, "rb") as handle:
            return handle.read(), path
    except OSError as exc:
        raise IssuerError(f"cannot read {path}: {exc.strerror or exc}") from None


def read_inputs(arguments: list[str] | None, file: str | None, *, what: str = "code") -> Inputs:
    """The command's inputs; raises a one-line :class:`IssuerError` when there are none,
    both kinds are given, a file cannot be read, or an item is absurdly long."""
    arguments = list(arguments or [])
    if arguments == [STDIN] and file is None:
        file, arguments = STDIN, []
    if arguments and file is not None:
        raise InvalidFormat(f"give {what}s as arguments or with --file, not both")
    if file is not None:
        data, source = _read_bytes(file)
        if not data.strip():
            raise InvalidLength(f"no {what}s in {source}: it is empty")
        return Inputs(None, data, source)
    if not arguments:
        raise InvalidLength(
            f"no {what}s given: pass them as arguments, with --file F, or '-' for standard input"
        )
    for number, text in enumerate(arguments, start=1):
        if len(text) > MAX_INPUT_LENGTH:
            raise InvalidLength(
                f"argument {number} is {len(text):,} characters long; a {what} has at most "
                f"{MAX_INPUT_LENGTH}"
            )
        if not text.strip():
            raise InvalidLength(f"argument {number} is empty")
    return Inputs(arguments, None, "arguments")


__all__ = ["FileOption", "Inputs", "read_inputs"]
