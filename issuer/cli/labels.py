"""Label commands: ``issuer layouts`` (the label sheets and rolls issuer knows)."""

from __future__ import annotations

from typing import Any

from issuer.cli.common import JsonOption, command_set, console, print_json

commands = command_set()


def _layout_rows() -> list[dict[str, Any]]:
    from issuer.config import load_settings
    from issuer.labels.layouts import available_layouts

    settings = load_settings()
    rows = []
    for layout in available_layouts(settings.section("layouts"), settings.folder).values():
        data = layout.to_dict()
        data["labels_per_page"] = layout.per_page
        rows.append(data)
    return rows


def _n(value: float) -> str:
    """A length to 0.001 mm, without trailing zeros."""
    return f"{value:.3f}".rstrip("0").rstrip(".")


@commands.command("layouts")
def layouts(as_json: JsonOption = False) -> None:
    """List the label layouts: built-in presets and your own layouts.NAME tables from the
    config file, with their physical dimensions (mm). Print label PDFs at 100 % scale
    (actual size), never "fit to page", or the labels will not line up."""
    rows = _layout_rows()
    if as_json:
        print_json(rows)
        return
    from rich import box
    from rich.markup import escape
    from rich.table import Table

    table = Table(
        title="Label layouts in mm (print at 100 % scale: actual size)",
        box=box.SIMPLE_HEAD,
        show_edge=False,
    )
    table.add_column("name", no_wrap=True)
    table.add_column("page", justify="right", no_wrap=True)
    table.add_column("grid", justify="right", no_wrap=True)
    table.add_column("label", justify="right", no_wrap=True)
    table.add_column("margin L/T", justify="right", no_wrap=True)
    table.add_column("gap X/Y", justify="right", no_wrap=True)
    table.add_column("from", no_wrap=True)
    for row in rows:
        table.add_row(
            escape(row["name"]),
            f"{_n(row['page_width'])}\u00d7{_n(row['page_height'])}",
            f"{row['columns']}\u00d7{row['rows']}",
            f"{_n(row['label_width'])}\u00d7{_n(row['label_height'])}",
            f"{_n(row['margin_left'])}/{_n(row['margin_top'])}",
            f"{_n(row['gap_x'])}/{_n(row['gap_y'])}",
            row["origin"],
        )
    out = console()
    out.print(table)
    out.print(
        "Grid is columns \u00d7 rows. Add your own layout as a [layouts.NAME] table in the "
        "config file; 'issuer layouts --json' shows every setting.",
        markup=False,
    )
