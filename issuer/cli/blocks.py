"""A table where it fits, stacked blocks where it does not: on a narrow terminal (an
80-column counter screen, a phone's shell) a wide table wraps one answer over twenty
lines, while a block per row (a heading, then one "label  value" line per field) reads
top to bottom."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any


class Rows:
    """Rows of named cells, shown by :meth:`print` as a table or as blocks."""

    def __init__(self, columns: Sequence[str], *, title: str | None = None, heading: Sequence[int] = (0,)) -> None:
        self.columns = list(columns)
        self.title = title
        #: which columns make a block's first line
        self.heading = list(heading)
        self.rows: list[list[str]] = []

    def add_row(self, *cells: str) -> None:
        self.rows.append(list(cells))

    def table(self) -> Any:
        from rich.table import Table

        table = Table(title=self.title)
        for column in self.columns:
            table.add_column(column)
        for row in self.rows:
            table.add_row(*row)
        return table

    def fits(self, console: Any) -> bool:
        """Whether the table reads as a table at this width: wrapping may add at most
        one line per row to what the rows take at their natural width (an 80-column
        terminal would otherwise spread one answer over twenty lines)."""
        from rich.measure import Measurement

        table = self.table()
        natural = Measurement.get(console, console.options.update_width(10_000), table).maximum
        if natural <= console.width:
            return True
        wide = len(console.render_lines(table, console.options.update_width(natural), pad=False))
        narrow = len(console.render_lines(self.table(), console.options, pad=False))
        return narrow - wide <= len(self.rows)

    def print(self, console: Any) -> None:
        if self.fits(console):
            console.print(self.table())
            return
        self.print_blocks(console)

    def print_blocks(self, console: Any) -> None:
        from rich.table import Table

        if self.title:
            console.print(f"[bold]{self.title}[/bold]")
        for row in self.rows:
            head = "  ".join(row[index] for index in self.heading if row[index])
            console.print(f"[bold]{head}[/bold]" if head else "")
            grid = Table.grid(padding=(0, 2))
            grid.add_column(style="dim", no_wrap=True)
            grid.add_column(overflow="fold")
            for index, (column, cell) in enumerate(zip(self.columns, row)):
                if index not in self.heading and cell:
                    grid.add_row(column, cell)
            if grid.row_count:
                console.print(grid)
            console.print()
