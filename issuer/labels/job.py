"""One print job, ready to draw: what each label shows, every symbol encoded, one cell plan
for all labels, and the drawing of the job onto any painter (PDF canvas or SVG drawing).

:func:`prepare` checks everything before a file is touched (an empty selection, a code that
cannot be a barcode, a label too small for its content), so a renderer never fails halfway.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

from issuer.errors import LabelError
from issuer.labels.barcodes import Symbol, check_symbology, encode, gs1_giai
from issuer.labels.design import LogoArt, load_logo
from issuer.labels.fonts import FontSet, font_set
from issuer.labels.layouts import Box, Layout
from issuer.labels.painters import Painter, draw_label
from issuer.labels.plan import CODE_FONT, HEADER_FONT, LINE_FONT, CellPlan, plan_cell

_PROGRESS_EVERY = 100


@dataclass(frozen=True)
class LabelContent:
    """What one label shows: the canonical ``code``, its grouped ``display`` form (the
    printed line, and what the barcode carries), optional caption ``lines`` (series title,
    holder, a short caption), whether it is marked VOID, and how many lines come before the
    code (``code_at``).

    The barcode carries the printed line character for character, so what a scanner types
    into any system equals what a person reads beneath the symbol; issuer's own reading
    rules read that form back as the code (separators are allowed anywhere). Only GS1
    content differs: it carries the canonical code inside the AI (8004) element string, and
    the GS1 human-readable line ``(8004) ...`` is printed with it."""

    code: str
    display: str
    lines: tuple[str, ...] = ()
    void: bool = False
    code_at: int = 0


@dataclass(frozen=True)
class Placement:
    """Where label ``index`` of the job went: page and cell (0-based), the cell, the
    symbol's dark part and the symbol with its quiet zone, in mm from the page's top-left."""

    index: int
    page: int
    row: int
    column: int
    cell: Box
    symbol: Box
    quiet: Box


@dataclass(frozen=True)
class Job:
    labels: tuple[LabelContent, ...]
    symbols: tuple[Symbol, ...]
    lines: tuple[tuple[str, ...], ...]
    plan: CellPlan
    fonts: FontSet
    displays: tuple[str, ...]
    header: str = ""
    logo: LogoArt | None = None


def prepare(
    labels: Sequence[LabelContent],
    layout: Layout,
    symbology: str,
    gs1_company_prefix: str | None = None,
    text_beside: bool = False,
    fonts: FontSet | None = None,
) -> Job:
    """Encode every symbol, check that the fonts draw every character, and fit one
    arrangement for all labels; raises before any output exists."""
    if not labels:
        raise LabelError("nothing to print: the selection is empty")
    fonts = fonts or font_set()
    symbology = check_symbology(symbology)
    design = layout.design
    header = fonts.check(design.header, HEADER_FONT, f"the header of layout {layout.name!r}")
    logo = load_logo(design.logo) if design.logo is not None else None
    symbols: list[Symbol] = []
    all_lines: list[tuple[str, ...]] = []
    displays: list[str] = []
    gs1 = gs1_company_prefix is not None
    code_em = 0.0
    for label in labels:
        whose = f"cannot print the label of {label.display}"
        display = fonts.check(label.display, CODE_FONT, whose)
        if gs1:
            data = gs1_giai(str(gs1_company_prefix), label.code)
            lines = (f"({data[:4]}) {data[4:]}", *label.lines)
        else:
            data, lines = display, tuple(label.lines)
        symbols.append(encode(symbology, data, gs1=gs1))
        displays.append(display)
        code_em = max(code_em, fonts.width(display, CODE_FONT, 1.0))
        all_lines.append(tuple(fonts.check(line, LINE_FONT, whose) for line in lines))
    plan = plan_cell(
        layout,
        symbology,
        columns=max(s.columns for s in symbols),
        rows=max(s.rows for s in symbols),
        code_chars=max(len(display) for display in displays),
        lines=max(len(lines) for lines in all_lines),
        void=any(label.void for label in labels),
        beside=text_beside,
        code_em=code_em,
    )
    return Job(
        tuple(labels), tuple(symbols), tuple(all_lines), plan, fonts, tuple(displays), header, logo
    )


def _shift(box: Box, dx: float, dy: float) -> Box:
    return Box(box.x + dx, box.y + dy, box.width, box.height)


def draw_job(
    painter: Painter,
    job: Job,
    layout: Layout,
    skip: int,
    new_page: Callable[[], None] | None,
    progress: Callable[[int], None] | None,
    outlines: bool = False,
) -> tuple[int, tuple[Placement, ...]]:
    """Draw every label; return (pages used, placements)."""
    plan = job.plan
    placements: list[Placement] = []
    page = 0
    if outlines:
        _outline(painter, layout)
    shown = zip(job.labels, job.symbols, job.lines, job.displays)
    for index, (label, symbol, lines, display) in enumerate(shown):
        on_page, row, column = layout.position(skip + index)
        if on_page != page:
            if new_page is not None:
                new_page()
            page = on_page
            if outlines:
                _outline(painter, layout)
        cell = layout.cell(row, column)
        symbol_box = _shift(plan.symbol_box(symbol.columns, symbol.rows), cell.x, cell.y)
        # a GS1 element string line goes first, so the code moves down one line with it
        code_at = label.code_at + (len(lines) - len(label.lines))
        draw_label(
            painter, plan, cell, symbol, symbol_box, display, lines, label.void, code_at,
            job.header, job.logo,
        )  # fmt: skip
        quiet = _shift(plan.quiet_box(symbol.columns, symbol.rows), cell.x, cell.y)
        placements.append(Placement(index, on_page, row, column, cell, symbol_box, quiet))
        if progress is not None and (index + 1) % _PROGRESS_EVERY == 0:
            progress(index + 1)
    if progress is not None and len(job.labels) % _PROGRESS_EVERY:
        progress(len(job.labels))
    return page + 1, tuple(placements)


OUTLINE_MM = 0.1
OUTLINE_GREY = 0.6


def _outline(painter: Painter, layout: Layout) -> None:
    """Thin grey outlines of every cell of the page: a test print on plain paper, held
    against a label sheet, shows whether the printer keeps to the layout."""
    for row in range(layout.rows):
        for column in range(layout.columns):
            painter.frame(layout.cell(row, column), OUTLINE_MM, OUTLINE_GREY)
