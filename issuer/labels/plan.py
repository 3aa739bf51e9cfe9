"""Where things go inside one label: barcode, quiet zones, human-readable code, lines.

One :class:`CellPlan` serves every label of a job, so all labels of a sheet share one
module size and one type size: a sheet looks even, and the renderer does no per-label
fitting. Positions are millimetres from the label's top-left corner.

Two arrangements: *stacked* (barcode on top, text beneath; always for Code 128) and
*beside* (a square 2D symbol on the left, text on its right; chosen for wide labels).
The quiet zone is reserved inside the label's printable area, which is itself inside
the label's blank padding, so a neighbouring label never reaches into it.
"""

from __future__ import annotations

from dataclasses import dataclass

from issuer.errors import LabelError
from issuer.labels.barcodes import MAX_MODULE_MM, MIN_MODULE_MM, QUIET_ZONE
from issuer.labels.layouts import Box, Layout

PT_PER_MM = 72.0 / 25.4
CODE_FONT = "Courier-Bold"  # fixed pitch: every character of the code is plain to copy
CODE_ADVANCE = 0.6  # Courier advance width per em (600/1000 units for every glyph)
LINE_FONT = "Helvetica"
VOID_FONT = "Helvetica-Bold"
VOID_WORD = "VOID"

CODE_PT_MAX = 12.0
LINE_PT_MAX = 8.0
MIN_CODE_PT = 5.0  # common practice: below about 5 pt a printed code is hard to copy by eye
MIN_LINE_PT = 4.0
MIN_BAR_HEIGHT_MM = (
    5.0  # common practice: shorter Code 128 bars are hard to hit with a hand scanner
)
GAP_MM = 1.0  # between barcode area and text
LEADING = 1.2


@dataclass(frozen=True)
class CellPlan:
    """The arrangement shared by every label of one job (millimetres, points for type)."""

    symbology: str
    module: float  # X-dimension in mm
    quiet: int  # modules
    symbol_columns: int  # widest symbol of the job, in modules
    symbol_rows: int
    bar_height: float  # linear symbols: bar height in mm; 2D: rows * module
    symbol_area: Box  # where symbol and quiet zones go, relative to the label
    text_box: Box  # where the text block goes
    text_anchor: str  # "middle" (stacked) or "start" (beside)
    code_pt: float
    line_pt: float
    void_pt: float
    arrangement: str
    padding: float  # the label's blank border, mm

    def symbol_box(self, columns: int, rows: int) -> Box:
        """The dark part of a symbol of ``columns`` x ``rows`` modules, centred in its area."""
        width = columns * self.module
        height = (
            self.bar_height if rows == 1 and self.symbology == "code128" else rows * self.module
        )
        area = self.symbol_area
        return Box(
            area.x + (area.width - width) / 2, area.y + (area.height - height) / 2, width, height
        )

    def quiet_box(self, columns: int, rows: int) -> Box:
        """The symbol with its quiet zone (for Code 128: left and right only)."""
        box = self.symbol_box(columns, rows)
        margin = self.quiet * self.module
        if self.symbology == "code128":
            return Box(box.x - margin, box.y, box.width + 2 * margin, box.height)
        return box.inset(-margin)

    def text_block_height(self, lines: int, void: bool) -> float:
        return _text_height(self.code_pt, self.line_pt, self.void_pt, lines, void)


def _text_height(code_pt: float, line_pt: float, void_pt: float, lines: int, void: bool) -> float:
    points = LEADING * (code_pt + lines * line_pt + (void_pt if void else 0.0))
    return points / PT_PER_MM


def _code_pt(width_mm: float, chars: int, height_cap_pt: float) -> float:
    return min(CODE_PT_MAX, width_mm * PT_PER_MM / (CODE_ADVANCE * max(chars, 1)), height_cap_pt)


def plan_cell(
    layout: Layout,
    symbology: str,
    *,
    columns: int,
    rows: int,
    code_chars: int,
    lines: int,
    void: bool,
    beside: bool = False,
) -> CellPlan:
    """Fit the job's widest symbol (``columns`` x ``rows`` modules), its longest
    human-readable code and its most lines into one label of ``layout``.

    The code goes beneath the symbol; with ``beside`` a 2D symbol goes at the left and
    the text at its right when the label is wide enough for both.

    Raises :class:`LabelError` when the label is too small for the symbol at the
    symbology's smallest module, for legible type, or for a usable bar height.
    """
    content = Box(0.0, 0.0, layout.label_width, layout.label_height).inset(layout.padding)
    quiet = QUIET_ZONE[symbology]
    if beside and symbology != "code128":
        plan = _plan_beside(
            layout, content, symbology, columns, rows, quiet, code_chars, lines, void
        )
        if plan is not None:
            return plan
    return _plan_stacked(layout, content, symbology, columns, rows, quiet, code_chars, lines, void)


def _too_small(layout: Layout, what: str) -> LabelError:
    return LabelError(
        f"the {layout.label_width:g} x {layout.label_height:g} mm labels of layout "
        f"{layout.name!r} are too small for {what}"
    )


def _plan_stacked(
    layout: Layout,
    content: Box,
    symbology: str,
    columns: int,
    rows: int,
    quiet: int,
    code_chars: int,
    lines: int,
    void: bool,
) -> CellPlan:
    code_pt = _code_pt(content.width, code_chars, content.height * PT_PER_MM * 0.16)
    if code_pt < MIN_CODE_PT:
        raise _too_small(layout, f"a {code_chars}-character code in legible type")
    line_pt = min(LINE_PT_MAX, code_pt * 0.7)
    void_pt = code_pt * 1.25
    text_h = _text_height(code_pt, line_pt, void_pt, lines, void)
    area = Box(content.x, content.y, content.width, content.height - text_h - GAP_MM)
    linear = symbology == "code128"
    across = area.width / (columns + 2 * quiet)
    module = min(across, MAX_MODULE_MM[symbology])
    if not linear:
        module = min(module, area.height / (rows + 2 * quiet)) if area.height > 0 else 0.0
    if module < MIN_MODULE_MM[symbology]:
        raise _too_small(
            layout,
            f"a {columns}-module {symbology} symbol with its quiet zone at the smallest "
            f"module of {MIN_MODULE_MM[symbology]} mm"
            + (f" and {lines} text line(s)" if lines else ""),
        )
    bar_height = area.height if linear else rows * module
    if linear and bar_height < MIN_BAR_HEIGHT_MM:
        raise _too_small(
            layout, f"bars of at least {MIN_BAR_HEIGHT_MM:g} mm beside {lines} text line(s)"
        )
    text_box = Box(content.x, area.bottom + GAP_MM, content.width, text_h)
    return CellPlan(
        symbology,
        module,
        quiet,
        columns,
        rows,
        bar_height,
        area,
        text_box,
        "middle",
        code_pt,
        line_pt,
        void_pt,
        "stacked",
        layout.padding,
    )


def _plan_beside(
    layout: Layout,
    content: Box,
    symbology: str,
    columns: int,
    rows: int,
    quiet: int,
    code_chars: int,
    lines: int,
    void: bool,
) -> CellPlan | None:
    """A square symbol at the left, the text at its right, when the label is wide enough
    for that to give both a usable size."""
    span = max(columns, rows) + 2 * quiet
    module = min(content.height / span, MAX_MODULE_MM[symbology])
    side = span * module
    text_w = content.width - side - GAP_MM
    if module < MIN_MODULE_MM[symbology] or text_w < 0.3 * content.width:
        return None
    code_pt = _code_pt(text_w, code_chars, content.height * PT_PER_MM * 0.25)
    if code_pt < max(MIN_CODE_PT, 6.0):
        return None
    line_pt = min(LINE_PT_MAX, code_pt * 0.7)
    void_pt = code_pt * 1.25
    text_h = _text_height(code_pt, line_pt, void_pt, lines, void)
    if text_h > content.height:
        return None
    area = Box(content.x, content.y, side, content.height)
    text_box = Box(area.right + GAP_MM, content.y + (content.height - text_h) / 2, text_w, text_h)
    return CellPlan(
        symbology,
        module,
        quiet,
        columns,
        rows,
        rows * module,
        area,
        text_box,
        "start",
        code_pt,
        line_pt,
        void_pt,
        "beside",
        layout.padding,
    )
