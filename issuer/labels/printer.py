"""Direct printing: the finished PDF handed to the print command the config names.

The command is run without a shell (its words split like a shell's, quotes kept), with the
file's path added at its end or put where ``{file}`` stands. It runs only once the file is
complete and the print entries are written, inside their transaction: when it fails, the
transaction is rolled back and nothing is counted as printed. Its failure is one line.
"""

from __future__ import annotations

import os
import shlex
import subprocess
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from issuer.errors import LabelError
from issuer.labels.layouts import Layout

DEFAULT_TIMEOUT_S = 60.0
FILE_MARK = "{file}"


@dataclass(frozen=True)
class PrintCommand:
    """A print command: its words and how long it may take."""

    words: tuple[str, ...]
    timeout: float = DEFAULT_TIMEOUT_S

    @property
    def name(self) -> str:
        return os.path.basename(self.words[0])

    def argv(self, path: Path) -> list[str]:
        if any(FILE_MARK in word for word in self.words):
            return [word.replace(FILE_MARK, os.fspath(path)) for word in self.words]
        return [*self.words, os.fspath(path)]

    def send(self, path: Path) -> None:
        """Hand ``path`` to the command; a failure raises :class:`LabelError` in one line."""
        what = f"the print command {self.name!r}"
        try:
            done = subprocess.run(
                self.argv(path),
                stdin=subprocess.DEVNULL,
                capture_output=True,
                text=True,
                errors="replace",
                timeout=self.timeout,
                check=False,
            )
        except FileNotFoundError:
            raise LabelError(f"{what} was not found; nothing was counted as printed") from None
        except PermissionError:
            raise LabelError(f"{what} may not be run; nothing was counted as printed") from None
        except subprocess.TimeoutExpired:
            raise LabelError(
                f"{what} did not finish within {self.timeout:g} s; nothing was counted as printed"
            ) from None
        if done.returncode != 0:
            said = [
                line.strip() for line in (done.stderr or done.stdout).splitlines() if line.strip()
            ]
            detail = f": {said[-1][:200]}" if said else ""
            raise LabelError(
                f"{what} failed (exit status {done.returncode}){detail}; nothing was counted "
                "as printed"
            )


def print_command(layout: Layout, section: Mapping[str, Any]) -> PrintCommand:
    """The layout's ``print_command``, else the config's ``[printing] command``."""
    text = layout.design.print_command or section.get("command")
    if not text:
        raise LabelError(
            "--print needs a print command: set command under [printing] in the config file "
            f"(or print_command in layout {layout.name!r})"
        )
    if not isinstance(text, str):
        raise LabelError("[printing] command must be a command line such as 'lp -d labels'")
    try:
        words = tuple(shlex.split(text))
    except ValueError as exc:
        raise LabelError(f"the print command {text!r} cannot be read ({exc})") from None
    if not words:
        raise LabelError("the print command is empty")
    timeout = section.get("timeout_seconds", DEFAULT_TIMEOUT_S)
    if isinstance(timeout, bool) or not isinstance(timeout, (int, float)) or timeout <= 0:
        raise LabelError("[printing] timeout_seconds must be a number of seconds above 0")
    return PrintCommand(words, float(timeout))
