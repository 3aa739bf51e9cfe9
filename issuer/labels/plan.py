"""Where things go inside one label: barcode, quiet zones, human-readable code, lines.

One :class:`CellPlan` serves every label of a job, so all labels of a sheet share one
module size and one type size: a sheet looks even, and the renderer does no per-label
fitting. Positions are millimetres from the label's top-left corner.

Two arrangements: *stacked* (barcode on top, text beneath; always for Code 128) and
*beside* (a square 2D symbol on the left, text on its right; chosen for wide labels).
The quiet zone is reserved inside the label's printable area, which is itself inside
the label's blank padding, so a neighbouring label never reaches into it. A layout's
design may keep a header band at the top (organisation name, logo); symbol and text
share what is left. A logo placed elsewhere must stay clear of symbol, quiet zone and text.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from issuer.errors import LabelError, LayoutError
from issuer.labels.barcodes import MAX_MODULE_MM, MIN_MODULE_MM, QUIET_ZONE
from issuer.labels.layouts import Box, Layout

PT_PER_MM = 72.0 / 25.4
# font roles (issuer.labels.fonts): the code in fixed pitch, every character plain to copy
CODE_FONT = "code"
LINE_FONT = "text"
VOID_FONT = "bold"
HEADER_FONT = "bold"
VOID_WORD = "VOID"
MIN_HEADER_MM = 8.0  # narrower than this, a header line cannot show a name

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
    header_box: Box | None = None  # the header line, relative to the label
    header_anchor: str = "middle"
    header_pt: float = 0.0
    logo_box: Box | None = None  # the logo, relative to the label

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


def _code_pt(
    layout: Layout, width_mm: float, code_em: float, chars: int, height_cap_pt: float
) -> float:
    """The code's type size: the layout's ``code_pt``, or as large as fits (``code_em``:
    the widest code's width at 1 pt, in points)."""
    fixed = layout.design.code_pt
    if fixed is None:
        return min(CODE_PT_MAX, width_mm * PT_PER_MM / max(code_em, 1e-6), height_cap_pt)
    if code_em * fixed > width_mm * PT_PER_MM + 1e-6:
        raise _too_small(layout, f"a {chars}-character code at code_pt = {fixed:g}")
    return fixed


def _line_pt(layout: Layout, code_pt: float) -> float:
    text_pt = layout.design.text_pt
    return text_pt if text_pt is not None else min(LINE_PT_MAX, code_pt * 0.7)


def _overlaps(a: Box, b: Box) -> bool:
    return a.x < b.right and b.x < a.right and a.y < b.bottom and b.y < a.bottom


def _band(layout: Layout, content: Box) -> tuple[Box, dict[str, object]]:
    """Keep the design's header band at the top of ``content``: what is left for symbol and
    text, and where header and logo go."""
    design = layout.design
    found: dict[str, object] = {}
    if not design.has_band:
        return content, found
    header_h = LEADING * design.header_pt / PT_PER_MM if design.header else 0.0
    in_band = design.logo is not None and design.logo_x is None
    logo_w, logo_h = design.logo_size() if in_band else (0.0, 0.0)
    band = max(header_h, logo_h)
    logo: Box | None = None
    if in_band:
        x = content.x if design.logo_side == "left" else content.right - logo_w
        logo = Box(x, content.y + (band - logo_h) / 2, logo_w, logo_h)
        if logo_w > content.width:
            raise _too_small(layout, f"a logo {logo_w:.1f} mm wide")
        found["logo_box"] = logo
    if design.header:
        left, right = content.x, content.right
        if logo is not None and design.logo_side == "left":
            left = logo.right + GAP_MM
        elif logo is not None:
            right = logo.x - GAP_MM
        if right - left < MIN_HEADER_MM:
            raise _too_small(layout, "the header line beside the logo")
        found["header_box"] = Box(left, content.y + (band - header_h) / 2, right - left, header_h)
        found["header_anchor"] = "start" if logo is not None else "middle"
        found["header_pt"] = design.header_pt
    rest = Box(content.x, content.y + band + GAP_MM, content.width, content.height - band - GAP_MM)
    if rest.height <= 0:
        raise _too_small(layout, f"a {band:.1f} mm header band and a symbol")
    return rest, found


def _place_logo(layout: Layout, plan: CellPlan, content: Box) -> CellPlan:
    """Check a logo placed at ``logo_x``/``logo_y``: on the label's printable area, clear of
    the symbol with its quiet zone, and of the text."""
    design = layout.design
    if design.logo is None or design.logo_x is None or design.logo_y is None:
        return plan
    width, height = design.logo_size()
    logo = Box(design.logo_x, design.logo_y, width, height)
    where = (
        f"layout {layout.name!r}: the {width:.1f} x {height:.1f} mm logo at "
        f"{design.logo_x:g}, {design.logo_y:g} mm"
    )
    slack = 1e-6
    if not (
        content.contains(logo.x, logo.y, slack) and content.contains(logo.right, logo.bottom, slack)
    ):
        raise LayoutError(f"{where} reaches into the label's blank padding or past its edge")
    if _overlaps(logo, plan.quiet_box(plan.symbol_columns, plan.symbol_rows)):
        raise LayoutError(
            f"{where} would overlap the symbol or its quiet zone of {plan.quiet} modules, and "
            "a scanner could not read it; move or shrink the logo"
        )
    if _overlaps(logo, plan.text_box):
        raise LayoutError(f"{where} would overlap the label's text; move or shrink the logo")
    return replace(plan, logo_box=logo)


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
    code_em: float | None = None,
) -> CellPlan:
    """Fit the job's widest symbol (``columns`` x ``rows`` modules), its longest
    human-readable code and its most lines into one label of ``layout``.

    The code goes beneath the symbol; with ``beside`` a 2D symbol goes at the left and
    the text at its right when the label is wide enough for both.

    Raises :class:`LabelError` when the label is too small for the symbol at the
    symbology's smallest module, for legible type, or for a usable bar height.
    """
    printable = Box(0.0, 0.0, layout.label_width, layout.label_height).inset(layout.padding)
    content, band = _band(layout, printable)
    quiet = QUIET_ZONE[symbology]
    # without measured glyphs: a fixed-pitch face's advance of about 0.6 em per character
    em = code_em if code_em is not None else 0.6 * max(code_chars, 1)
    plan = None
    if beside and symbology != "code128":
        plan = _plan_beside(
            layout, content, symbology, columns, rows, quiet, em, code_chars, lines, void
        )
    if plan is None:
        plan = _plan_stacked(
            layout, content, symbology, columns, rows, quiet, em, code_chars, lines, void
        )
    return _place_logo(layout, replace(plan, **band), printable)  # type: ignore[arg-type]


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
    code_em: float,
    code_chars: int,
    lines: int,
    void: bool,
) -> CellPlan:
    code_pt = _code_pt(
        layout, content.width, code_em, code_chars, content.height * PT_PER_MM * 0.16
    )
    if code_pt < MIN_CODE_PT:
        raise _too_small(layout, f"a {code_chars}-character code in legible type")
    line_pt = _line_pt(layout, code_pt)
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
    code_em: float,
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
    try:
        code_pt = _code_pt(layout, text_w, code_em, code_chars, content.height * PT_PER_MM * 0.25)
    except LabelError:
        return None  # a fixed code size that fits only beneath the symbol
    if code_pt < max(MIN_CODE_PT, 6.0):
        return None
    line_pt = _line_pt(layout, code_pt)
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
