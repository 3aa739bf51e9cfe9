"""Drawing one label onto a surface: a reportlab PDF canvas or a reportlab Drawing (SVG).

Both painters take millimetres from the page's top-left corner and turn them into
PDF points from the bottom-left. The PDF painter draws every symbol as one filled path
straight on the canvas (no per-label Drawing or widget), which keeps big jobs fast.
"""

from __future__ import annotations

from typing import Any, Protocol

from issuer.labels.barcodes import Symbol
from issuer.labels.layouts import Box
from issuer.labels.plan import (
    CODE_FONT,
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


class PdfPainter:
    """Draws on a ``reportlab.pdfgen.canvas.Canvas`` of page height ``page_height`` mm."""

    def __init__(self, canvas: Any, page_height: float) -> None:
        from reportlab.pdfbase.pdfmetrics import stringWidth

        self.canvas = canvas
        self.page_height = page_height
        self._font: tuple[str, float] | None = None
        self._string_width = stringWidth

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
        if self._font != (font, size):
            canvas.setFont(font, size)
            self._font = (font, size)
        px, py = x * PT_PER_MM, (self.page_height - baseline) * PT_PER_MM
        if anchor == "middle":
            canvas.drawCentredString(px, py, text)
        else:
            canvas.drawString(px, py, text)

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
        return float(self._string_width(text, font, size)) / PT_PER_MM


class DrawingPainter:
    """Builds a ``reportlab.graphics.shapes.Drawing`` (for SVG)."""

    def __init__(self, page_width: float, page_height: float) -> None:
        from reportlab.graphics.shapes import Drawing
        from reportlab.pdfbase.pdfmetrics import stringWidth

        self.page_height = page_height
        self.drawing = Drawing(page_width * PT_PER_MM, page_height * PT_PER_MM)
        self._string_width = stringWidth

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
        from reportlab.graphics.shapes import String

        self.drawing.add(
            String(
                x * PT_PER_MM,
                (self.page_height - baseline) * PT_PER_MM,
                text,
                fontName=font,
                fontSize=size,
                textAnchor=anchor,
            )
        )

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
        return float(self._string_width(text, font, size)) / PT_PER_MM


def fit_line(painter: Painter, text: str, width: float, size: float) -> tuple[str, float]:
    """Shrink a caption line to ``width`` mm, down to the smallest legible size; beyond
    that, cut it and end it with an ellipsis (the label shows that it was cut)."""
    measured = painter.text_width(text, LINE_FONT, size)
    if measured <= width:
        return text, size
    size = max(MIN_LINE_PT, size * width / measured)
    while text and painter.text_width(text, LINE_FONT, size) > width:
        text = text[:-2] + "\u2026" if len(text) > 1 else ""
    return text, size


def draw_label(
    painter: Painter,
    plan: CellPlan,
    cell: Box,
    symbol: Symbol,
    symbol_box: Box,
    display: str,
    lines: tuple[str, ...],
    void: bool,
) -> None:
    """One label in ``cell``: symbol, then (VOID,) the code, then the caption lines."""
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
    size = plan.code_pt
    painter.text(x, cursor + ASCENT * size / PT_PER_MM, display, CODE_FONT, size, plan.text_anchor)
    cursor += LEADING * size / PT_PER_MM
    for line in lines:
        text, fitted = fit_line(painter, line, box.width, plan.line_pt)
        painter.text(
            x, cursor + ASCENT * plan.line_pt / PT_PER_MM, text, LINE_FONT, fitted, plan.text_anchor
        )
        cursor += LEADING * plan.line_pt / PT_PER_MM
