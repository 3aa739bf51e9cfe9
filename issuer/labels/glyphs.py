"""Glyph outlines as reportlab paths: SVG labels draw their letters as shapes, so a viewer
or cutter without issuer's fonts shows exactly what the PDF shows.

The advance of every glyph is reportlab's width for that character (the one the PDF uses),
so a line measures the same in every format.
"""

from __future__ import annotations

from collections.abc import Sequence
from functools import lru_cache
from typing import Any

from issuer.labels.fonts import Face


@lru_cache(maxsize=16)
def _font(path: str) -> Any:
    """The font file's tables, read lazily from its bytes in memory: a lazy font opened by
    name would hold its file open for as long as the cache lives (until exit)."""
    from io import BytesIO

    from fontTools.ttLib import TTFont

    with open(path, "rb") as handle:
        data = handle.read()
    return TTFont(BytesIO(data), fontNumber=0, lazy=True)


def _pen(path: Any, glyphs: Any, scale: float, x: float, y: float) -> Any:
    """A fontTools pen that writes one glyph, scaled and moved, into a reportlab ``Path``."""
    from fontTools.pens.basePen import BasePen

    class _ToPath(BasePen):  # type: ignore[misc]
        def _moveTo(self, p: tuple[float, float]) -> None:
            path.moveTo(x + p[0] * scale, y + p[1] * scale)

        def _lineTo(self, p: tuple[float, float]) -> None:
            path.lineTo(x + p[0] * scale, y + p[1] * scale)

        def _curveToOne(
            self, p1: tuple[float, float], p2: tuple[float, float], p3: tuple[float, float]
        ) -> None:
            path.curveTo(
                *(x + p1[0] * scale, y + p1[1] * scale),
                *(x + p2[0] * scale, y + p2[1] * scale),
                *(x + p3[0] * scale, y + p3[1] * scale),
            )

        def _closePath(self) -> None:
            path.closePath()

    return _ToPath(glyphs)  # the glyph set resolves composite glyphs (accented letters)


def glyph_paths(
    runs: Sequence[tuple[Face, str]], x: float, baseline: float, size: float
) -> list[Any]:
    """One filled path per run of text starting at ``x`` (points), on ``baseline``."""
    from reportlab.graphics.shapes import Path
    from reportlab.lib.colors import black
    from reportlab.pdfbase.pdfmetrics import stringWidth
    from reportlab.pdfgen.canvas import FILL_NON_ZERO

    paths = []
    for face, text in runs:
        font = _font(face.path)
        cmap = font.getBestCmap()
        glyphs = font.getGlyphSet()
        scale = size / font["head"].unitsPerEm
        path = Path(fillColor=black, strokeColor=None, strokeWidth=0, fillMode=FILL_NON_ZERO)
        for char in text:
            name = cmap.get(ord(char))
            if name is not None:
                glyphs[name].draw(_pen(path, glyphs, scale, x, baseline))
            x += stringWidth(char, face.name, size)
        paths.append(path)
    return paths
