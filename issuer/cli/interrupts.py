"""Ctrl-C tells the truth: after an interrupted act, the register is asked what
committed, and one line says so (batch number and how to get its codes), or that
nothing was done. Exit code 130, as for any interrupted command."""

from __future__ import annotations

import signal
import time
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import typer

from issuer.errors import redact


@contextmanager
def truthful_interrupt(
    opener: Callable[[], Any],
    actions: Iterable[str],
    tell: Callable[[Any], str],
    *,
    series: str | None = None,
) -> Iterator[Any]:
    """Open the register with ``opener`` and run an act with it; on Ctrl-C, look in
    the log for what the act committed and print ``tell(committed)`` (falsy when
    nothing was, also when Ctrl-C came before the register was even open)."""
    from issuer.register.acts import committed_since, mark

    register = before = None
    try:
        register = opener()
        before = mark(register)
        yield register
    except KeyboardInterrupt:
        previous = signal.signal(signal.SIGINT, signal.SIG_IGN)  # a second Ctrl-C must not cut the answer
        try:
            done = None if register is None or before is None else committed_since(register, before, actions, series=series)
            message = tell(done)
        except Exception as exc:  # noqa: BLE001 - the register may be out of reach now
            message = f"could not ask the register what was done ({exc}); see 'issuer log --last 5'"
        finally:
            signal.signal(signal.SIGINT, previous)
        typer.echo(redact(f"\nissuer: interrupted: {message}"), err=True)
        raise typer.Exit(130) from None


def written_since(path: Path | None, started: float) -> bool:
    """Whether ``path`` was (re)written after ``started`` (a ``time.time()``)."""
    if path is None:
        return False
    try:
        return path.stat().st_mtime >= started - 1
    except OSError:
        return False


def now() -> float:
    return time.time()


def batch_told(what: str, key: str, out: Path | None, started: float) -> Callable[[Any], str]:
    """The answer for an interrupted issue or import of series ``key``."""

    def tell(done: Any) -> str:
        if not done:
            return f"nothing was {what}"
        (batch, *_) = done.batches or (None,)
        told = (
            f"batch {batch} of series {key} was committed: its codes are {what}. Get them with "
            f"'issuer export {key} --batch {batch}' or 'issuer labels --batch {batch} --out FILE'"
        )
        if out is not None and written_since(out, started):
            told += f"; {out} holds them"
        elif out is not None:
            told += f"; {out} was not written: 'issuer export {key} --batch {batch} --out {out}' writes them"
        return told

    return tell
