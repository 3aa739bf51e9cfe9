"""What ``issuer doctor`` checks around a register file: the folder it lives in, and the
temporaries that a killed process left behind (:mod:`issuer.outputs`).

Each check answers ``(status, summary, details)``; :mod:`issuer.register.doctor` turns
that into a finding.
"""

from __future__ import annotations

import stat
from pathlib import Path

from issuer.outputs import leftovers, remove_leftovers

Answer = tuple[str, str, list[str]]


def check_folder(path: Path | None) -> Answer:
    """The register's folder: nobody else may write in it (they could swap the register
    or its journals), and nobody else should enter it (the README asks for a private one)."""
    if path is None:
        return "skipped", "no register file (in memory or on a server)", []
    folder = path.resolve().parent
    mode = stat.S_IMODE(folder.stat().st_mode)
    if mode & 0o022:
        return (
            "problem",
            f"others can write in the register's folder {folder} (mode {mode:o}): chmod 700 it",
            [],
        )
    if mode & 0o055:
        return "warn", f"others can enter the register's folder {folder} (mode {mode:o}): chmod 700 it", []
    return "ok", f"the register's folder is owner-only (mode {mode:o})", []


def check_leftovers(path: Path | None, *, fix: bool = False) -> Answer:
    """Temporaries of output files whose process is gone (a batch's codes, a half-drawn
    label sheet): reported, and removed with ``fix``."""
    folders = [path.resolve().parent] if path is not None else []
    found = leftovers(folders)
    if not found:
        return "ok", "no temporaries left behind by a stopped process", []
    details = [f"{item.path} ({item.size:,} bytes, process {item.pid})" for item in found]
    if fix:
        removed = remove_leftovers(found)
        return "ok", f"removed {removed} temporary file(s) left behind by stopped processes", details
    return (
        "warn",
        f"{len(found)} temporary file(s) left behind by stopped processes: 'issuer doctor --fix' removes them",
        details,
    )


__all__ = ["check_folder", "check_leftovers"]
