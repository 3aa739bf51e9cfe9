"""Drawing one label onto a surface: a reportlab PDF canvas or a reportlab Drawing (SVG).

Both painters take millimetres from the page's top-left corner and turn them into
PDF points from the bottom-left. The PDF painter draws every symbol as one filled path
straight on the canvas (no per-label Drawing or widget), which keeps big jobs fast.
Text is drawn by font role (:mod:`issuer.labels.fonts`), each run in the first face of
the role's chain that has its letters; the SVG painter draws the glyph outlines as paths.
"""

from __future__ import annotations

from typing import Any, Protocol

from issuer.labels.barcodes import Symbol
from issuer.labels.design import LogoArt
from issuer.labels.fonts import FontSet
from issuer.labels.glyphs import glyph_paths
from issuer.labels.layouts import Box
from issuer.labels.plan import (
    CODE_FONT,
    HEADER_FONT,
    LEADING,
    LINE_FONT,
    MIN_LINE_PT,
    PT_PER_MM,
    VOID_FONT,
    VOID_WORD,
    CellPlan,
)

ASCENT = 0.8  # baseline below the top of a text line, in ems (caps sit within it)


class Painter(Protocol):
    def symbol(self, symbol: Symbol, box: Box, module: float) -> None: ...

    def text(
        self, x: float, baseline: float, text: str, font: str, size: float, anchor: str
    ) -> None: ...

    def frame(self, box: Box, line_width: float, grey: float = 0.0) -> None: ...

    def text_width(self, text: str, font: str, size: float) -> float: ...

    def logo(self, art: LogoArt, box: Box) -> None: ...


class PdfPainter:
    """Draws on a ``reportlab.pdfgen.canvas.Canvas`` of page height ``page_height`` mm."""

    def __init__(self, canvas: Any, page_height: float, fonts: FontSet) -> None:
        self.canvas = canvas
        self.page_height = page_height
        self.fonts = fonts
        self._font: tuple[str, float] | None = None
        self._forms: set[str] = set()

    def new_page(self) -> None:
        self.canvas.showPage()
        self._font = None  # a new page starts from the canvas defaults

    def symbol(self, symbol: Symbol, box: Box, module: float) -> None:
        # One path of rectangles, filled once (PDF operators "re" and "f"), handed to the
        # page with Canvas.addLiteral: formatting the numbers here with Python's own float
        # formatting (to 0.001 pt, about 0.35 um) is most of what keeps 10,000 labels fast.
        # The rectangles are placed relative to the symbol's bottom-left corner (one "cm"
        # inside "q ... Q"): labels of one job then repeat the same numbers, which the
        # page's compression packs well.
        k = module * PT_PER_MM
        left, bottom = box.x * PT_PER_MM, (self.page_height - box.bottom) * PT_PER_MM
        origin = f"q 1 0 0 1 {left:.3f} {bottom:.3f} cm"
        if symbol.linear:
            height = f" {box.height * PT_PER_MM:.3f} re"
            ops = [f"{x * k:.3f} 0 {width * k:.3f}{height}" for x, _, width, _ in symbol.runs]
        else:
            top = symbol.rows
            ops = [
                f"{x * k:.3f} {(top - y - height) * k:.3f} {width * k:.3f} {height * k:.3f} re"
                for x, y, width, height in symbol.runs
            ]
        self.canvas.addLiteral(f"{origin}\n" + "\n".join(ops) + "\nf Q")

    def text(
        self, x: float, baseline: float, text: str, font: str, size: float, anchor: str
    ) -> None:
        canvas = self.canvas
        runs = self.fonts.runs(text, font)
        px, py = x * PT_PER_MM, (self.page_height - baseline) * PT_PER_MM
        if anchor == "middle":
            px -= self.fonts.width(text, font, size) / 2
        for face, run in runs:
            if self._font != (face.name, size):
                canvas.setFont(face.name, size)
                self._font = (face.name, size)
            canvas.drawString(px, py, run)
            px += canvas.stringWidth(run, face.name, size)

    def logo(self, art: LogoArt, box: Box) -> None:
        # drawn once per document as a form, then placed on every label by reference
        canvas = self.canvas
        w, h = box.width * PT_PER_MM, box.height * PT_PER_MM
        name = f"logo{abs(hash((art.path, round(w, 3), round(h, 3))))}"
        if name not in self._forms:
            canvas.beginForm(name, lowerx=0, lowery=0, upperx=w, uppery=h)
            _draw_logo_pdf(canvas, art, w, h)
            canvas.endForm()
            self._forms.add(name)
        canvas.saveState()
        canvas.translate(box.x * PT_PER_MM, (self.page_height - box.bottom) * PT_PER_MM)
        canvas.doForm(name)
        canvas.restoreState()

    def frame(self, box: Box, line_width: float, grey: float = 0.0) -> None:
        canvas = self.canvas
        canvas.saveState()
        canvas.setLineWidth(line_width * PT_PER_MM)
        canvas.setStrokeGray(grey)
        canvas.rect(
            box.x * PT_PER_MM,
            (self.page_height - box.bottom) * PT_PER_MM,
            box.width * PT_PER_MM,
            box.height * PT_PER_MM,
            stroke=1,
            fill=0,
        )
        canvas.restoreState()

    def text_width(self, text: str, font: str, size: float) -> float:
        return self.fonts.width(text, font, size) / PT_PER_MM


def _draw_logo_pdf(canvas: Any, art: LogoArt, w: float, h: float) -> None:
    if art.kind == "png":
        canvas.drawImage(art.path, 0, 0, w, h, mask="auto")
        return
    from reportlab.graphics import renderPDF

    renderPDF.draw(_scaled_svg(art, w, h), canvas, 0, 0)


def _scaled_svg(art: LogoArt, w: float, h: float) -> Any:
    """The SVG logo's drawing scaled to ``w`` x ``h`` points, as a Group."""
    from reportlab.graphics.shapes import Drawing, Group

    group = Group(*art.drawing.contents)
    group.transform = (w / art.width, 0, 0, h / art.height, 0, 0)
    drawing = Drawing(w, h)
    drawing.add(group)
    return drawing


class DrawingPainter:
    """Builds a ``reportlab.graphics.shapes.Drawing`` (for SVG)."""

    def __init__(self, page_width: float, page_height: float, fonts: FontSet) -> None:
        from reportlab.graphics.shapes import Drawing

        self.page_height = page_height
        self.fonts = fonts
        self.drawing = Drawing(page_width * PT_PER_MM, page_height * PT_PER_MM)

    def symbol(self, symbol: Symbol, box: Box, module: float) -> None:
        from reportlab.graphics.shapes import Rect
        from reportlab.lib.colors import black

        k = module * PT_PER_MM
        x0 = box.x * PT_PER_MM
        add = self.drawing.add
        top = (self.page_height - box.y) * PT_PER_MM
        for x, y, width, height in symbol.runs:
            if symbol.linear:
                bottom, tall = (self.page_height - box.bottom) * PT_PER_MM, box.height * PT_PER_MM
            else:
                bottom, tall = top - (y + height) * k, height * k
            add(
                Rect(
                    x0 + x * k,
                    bottom,
                    width * k,
                    tall,
                    fillColor=black,
                    strokeColor=None,
                    strokeWidth=0,
                )
            )

    def text(
        self, x: float, baseline: float, text: str, font: str, size: float, anchor: str
    ) -> None:
        px, py = x * PT_PER_MM, (self.page_height - baseline) * PT_PER_MM
        if anchor == "middle":
            px -= self.fonts.width(text, font, size) / 2
        for path in glyph_paths(self.fonts.runs(text, font), px, py, size):
            self.drawing.add(path)

    def logo(self, art: LogoArt, box: Box) -> None:
        from reportlab.graphics.shapes import Group, Image

        w, h = box.width * PT_PER_MM, box.height * PT_PER_MM
        x, y = box.x * PT_PER_MM, (self.page_height - box.bottom) * PT_PER_MM
        if art.kind == "png":
            self.drawing.add(Image(x, y, w, h, art.path))
            return
        group = Group(*_scaled_svg(art, w, h).contents)
        group.transform = (1, 0, 0, 1, x, y)
        self.drawing.add(group)

    def frame(self, box: Box, line_width: float, grey: float = 0.0) -> None:
        from reportlab.graphics.shapes import Rect
        from reportlab.lib.colors import Color

        self.drawing.add(
            Rect(
                box.x * PT_PER_MM,
                (self.page_height - box.bottom) * PT_PER_MM,
                box.width * PT_PER_MM,
                box.height * PT_PER_MM,
                fillColor=None,
                strokeColor=Color(grey, grey, grey),
                strokeWidth=line_width * PT_PER_MM,
            )
        )

    def text_width(self, text: str, font: str, size: float) -> float:
        return self.fonts.width(text, font, size) / PT_PER_MM


def fit_line(
    painter: Painter, text: str, width: float, size: float, font: str = LINE_FONT
) -> tuple[str, float]:
    """Shrink a caption line to ``width`` mm, down to the smallest legible size; beyond
    that, cut it and end it with an ellipsis (the label shows that it was cut)."""
    measured = painter.text_width(text, font, size)
    if measured <= width:
        return text, size
    size = max(MIN_LINE_PT, size * width / measured)
    while text and painter.text_width(text, font, size) > width:
        text = text[:-2] + "\u2026" if len(text) > 1 else ""
    return text, size


def _draw_head(
    painter: Painter, plan: CellPlan, cell: Box, header: str, logo: LogoArt | None
) -> None:
    """The design's logo and header line."""
    if logo is not None and plan.logo_box is not None:
        box = plan.logo_box
        painter.logo(logo, Box(cell.x + box.x, cell.y + box.y, box.width, box.height))
    if header and plan.header_box is not None:
        box = plan.header_box
        text, size = fit_line(painter, header, box.width, plan.header_pt, HEADER_FONT)
        x = cell.x + box.x + (box.width / 2 if plan.header_anchor == "middle" else 0.0)
        baseline = cell.y + box.y + ASCENT * plan.header_pt / PT_PER_MM
        painter.text(x, baseline, text, HEADER_FONT, size, plan.header_anchor)


def draw_label(
    painter: Painter,
    plan: CellPlan,
    cell: Box,
    symbol: Symbol,
    symbol_box: Box,
    display: str,
    lines: tuple[str, ...],
    void: bool,
    code_at: int = 0,
    header: str = "",
    logo: LogoArt | None = None,
) -> None:
    """One label in ``cell``: header and logo, symbol, then (VOID,) the text lines with the
    code after the first ``code_at`` of them."""
    _draw_head(painter, plan, cell, header, logo)
    code_at = min(code_at, len(lines))
    painter.symbol(symbol, symbol_box, plan.module)
    box = plan.text_box
    if plan.text_anchor == "middle":
        x = cell.x + box.x + box.width / 2
    else:
        x = cell.x + box.x
    cursor = cell.y + box.y
    if void:
        size = plan.void_pt
        painter.text(
            x, cursor + ASCENT * size / PT_PER_MM, VOID_WORD, VOID_FONT, size, plan.text_anchor
        )
        cursor += LEADING * size / PT_PER_MM
        # a frame in the label's blank padding: the middle half of it, clear of the symbol
        painter.frame(cell.inset(plan.padding / 2), plan.padding / 2)
    for index in range(len(lines) + 1):
        if index == code_at:
            size = plan.code_pt
            baseline = cursor + ASCENT * size / PT_PER_MM
            painter.text(x, baseline, display, CODE_FONT, size, plan.text_anchor)
            cursor += LEADING * size / PT_PER_MM
        if index < len(lines):
            text, fitted = fit_line(painter, lines[index], box.width, plan.line_pt)
            baseline = cursor + ASCENT * plan.line_pt / PT_PER_MM
            painter.text(x, baseline, text, LINE_FONT, fitted, plan.text_anchor)
            cursor += LEADING * plan.line_pt / PT_PER_MM
