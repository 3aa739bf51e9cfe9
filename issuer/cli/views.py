"""Rich rendering of engine results, and a progress bar that appears only when needed."""

from __future__ import annotations

import time
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any, Self

from issuer.checking.neighbours import CLASS_TITLES, ERROR_WEIGHTS, ERROR_WEIGHTS_SOURCE

if TYPE_CHECKING:
    from rich.table import Table

    from issuer.checking.assess import Assessment
    from issuer.checking.sizing import SizingRow

BLOCKS = " \u258f\u258e\u258d\u258c\u258b\u258a\u2589\u2588"


def bar(share: float, width: int = 20) -> str:
    """A bar of eighth-blocks, ``share`` (0..1) of ``width`` cells filled."""
    share = min(max(share, 0.0), 1.0)
    eighths = round(share * width * 8)
    full, part = divmod(eighths, 8)
    text = "\u2588" * full + (BLOCKS[part] if part else "")
    return text.ljust(width)


def percent(share: float | None, digits: int = 2) -> str:
    """``0.9778`` -> ``'97.78 %'``; a rate just short of one never shows as 100 %."""
    if share is None:
        return "\u2014"
    text = f"{share * 100:.{digits}f} %"
    step = 10.0**-digits
    if share < 1 and text == f"{100:.{digits}f} %":
        text = f">{100 - step:.{digits}f} %"
    elif share > 0 and text == f"{0:.{digits}f} %":
        text = f"<{step:.{digits}f} %"
    return text


class LazyProgress:
    """A rich.progress bar on stderr that shows itself only once a run passes a second."""

    def __init__(self, description: str, *, delay: float = 1.0) -> None:
        self.description = description
        self.delay = delay
        self.started = time.monotonic()
        self._progress: Any = None
        self._task: Any = None

    def __call__(self, share: float) -> None:
        if self._progress is None:
            if time.monotonic() - self.started < self.delay:
                return
            from rich.console import Console
            from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

            console = Console(stderr=True)
            if not console.is_terminal:  # a log file or a pipe gets no bar
                self.delay = float("inf")
                return
            self._progress = Progress(
                TextColumn("{task.description}"),
                BarColumn(),
                TextColumn("{task.percentage:>3.0f}%"),
                TimeElapsedColumn(),
                console=console,
                transient=True,
            )
            self._progress.start()
            self._task = self._progress.add_task(self.description, total=1.0)
        self._progress.update(self._task, completed=min(share, 1.0))

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        if self._progress is not None:
            self._progress.stop()


def assessment_table(results: Sequence[Assessment]) -> Table:
    """Classes down, schemes across: a bar and the rate per cell."""
    from rich.table import Table

    first = results[0]
    sampled = any(not r.exhaustive for r in results)
    table = Table(
        title=f"Errors detected \u2014 body length {first.length}",
        caption=(
            "Weights: share of human errors by class, "
            + ERROR_WEIGHTS_SOURCE
            + "; renormalised over the classes measured."
            + (" Sampled rates show a 95 % Wilson interval." if sampled else "")
        ),
        caption_justify="left",
    )
    table.add_column("error class")
    table.add_column("weight", justify="right", no_wrap=True)
    width = 20 if len(results) == 1 else 10
    for r in results:
        how = "every code" if r.exhaustive else f"{r.samples:,} samples/class"
        table.add_column(f"{r.scheme}\n{r.alphabet} ({r.alphabet_size}), {how}", no_wrap=True)
    for key in first.results:
        cells = []
        for r in results:
            result = r.results.get(key)
            if result is None or result.rate is None:
                cells.append("n/a (decimal only)" if key == "phonetic" else "n/a")
                continue
            cell = f"{bar(result.rate, width)} {percent(result.rate)}"
            if result.low is not None and result.high is not None:
                cell += f"\n[dim]{percent(result.low)} \u2013 {percent(result.high)}[/dim]"
            cells.append(cell)
        table.add_row(CLASS_TITLES[key], f"{ERROR_WEIGHTS[key] * 100:.2f} %", *cells)
    table.add_section()
    table.add_row(
        "[bold]undetected, weighted[/bold]",
        "",
        *[f"[bold]{percent(r.undetected_weighted, 3)}[/bold]" for r in results],
    )
    return table


def sizing_table(scheme: str, alphabet: str, expect: int, rows: Sequence[SizingRow]) -> Table:
    from rich.table import Table

    table = Table(
        title=f"Sizing {scheme} over {alphabet} for {expect:,} codes",
        caption=(
            "first suggestion right: share of single substitutions and adjacent "
            "transpositions after which exactly one issued code lies one such error "
            "away, issued codes spread over the range as scattered issuance spreads them"
        ),
        caption_justify="left",
    )
    for name, justify in (
        ("body length", "right"),
        ("capacity", "right"),
        ("fill", "right"),
        ("first suggestion right", "left"),
        ("counted", "left"),
    ):
        table.add_column(name, justify=justify)  # type: ignore[arg-type]
    for row in rows:
        if not row.fits:
            right = "[red]does not fit[/red]"
        else:
            share = row.unique_correction or 0.0
            right = f"{bar(share, 16)} {percent(share, 1)}"
            if row.margin:
                right += f" \u00b1 {row.margin * 100:.2f} %"
        counted = "every error" if row.exhaustive else "sampled"
        table.add_row(str(row.length), f"{row.capacity:,}", percent(row.fill, 3), right, counted)
    return table


def schemes_table(rows: Sequence[dict[str, Any]]) -> Table:
    from rich.table import Table

    table = Table(title="Check-character schemes", caption_justify="left")
    for name in ("scheme", "method", "alphabet", "check", "single", "adjacent", "measured on"):
        table.add_column(name)
    for row in rows:
        measured = row["measured"]
        alphabet = f"{row['natural_alphabet']} ({row['alphabet_size']})"
        check = f"{row['check_length']}"
        if row["check_alphabet_size"] != row["alphabet_size"]:
            check += f" of {row['check_alphabet_size']}"
        table.add_row(
            row["name"],
            row["title"],
            alphabet,
            check,
            percent(measured["single"], 1),
            percent(measured["adjacent"], 1),
            f"length {measured['length']}, every code",
        )
    return table
