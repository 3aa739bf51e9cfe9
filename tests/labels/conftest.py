"""Helpers for the label tests: invented Quillmere codes, PDF rasterising (pypdfium2) and
barcode decoding with zxing-cpp, the reference decoder, over whole pages."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest

from issuer.checking.codes import CodeFormat
from issuer.checking.schemes import get_scheme
from issuer.labels import LabelContent

DPI = 300
MM_PER_PX = 25.4 / DPI
MM_PER_PT = 25.4 / 72


def tool_tags(count: int, start: int = 12) -> list[LabelContent]:
    """Invented Quillmere tool tags, issued in order: QTL + 7 digits + Luhn check digit,
    shown as QTL-0000-0125. The check digits come from issuer's own Luhn scheme."""
    shape = CodeFormat(get_scheme("luhn"), length=7, prefix="QTL", group=(4, 4))
    labels = []
    for n in range(start, start + count):
        code = shape.code_for_base(n)
        lines = ("Quillmere Tool Library", "Workshop bench") if n % 3 == 0 else ()
        labels.append(LabelContent(code, shape.display(code), lines))
    return labels


def member_cards(count: int) -> list[LabelContent]:
    """Invented Quillmere member cards (QMC + 9 digits + Luhn), scattered numbers."""
    shape = CodeFormat(get_scheme("luhn"), length=9, prefix="QMC", group=(5, 5))
    bases = [(n * 7_919_113 + 40_123) % 10**9 for n in range(1, count + 1)]
    return [
        LabelContent(code, shape.display(code), ("Quillmere Makers' Co-op", "Member"))
        for code in (shape.code_for_base(b) for b in bases)
    ]


@dataclass(frozen=True)
class Found:
    """One barcode zxing-cpp found on a page: its text and centre/extent in mm from the
    page's top-left corner."""

    page: int
    text: str
    format: str
    content_type: str
    centre: tuple[float, float]
    left: float
    top: float
    right: float
    bottom: float


def rasterise(path: Path, dpi: int = DPI) -> list[Any]:
    import pypdfium2 as pdfium

    document = pdfium.PdfDocument(str(path))
    try:
        return [
            document[i].render(scale=dpi / 72, grayscale=True).to_pil()
            for i in range(len(document))
        ]
    finally:
        document.close()


def decode_image(image: Any, page: int = 0, dpi: int = DPI) -> list[Found]:
    import zxingcpp

    scale = 25.4 / dpi
    found = []
    for result in zxingcpp.read_barcodes(image):
        pos = result.position
        xs = [p.x * scale for p in (pos.top_left, pos.top_right, pos.bottom_right, pos.bottom_left)]
        ys = [p.y * scale for p in (pos.top_left, pos.top_right, pos.bottom_right, pos.bottom_left)]
        found.append(
            Found(
                page,
                result.text,
                str(result.format),
                str(result.content_type),
                (sum(xs) / 4, sum(ys) / 4),
                min(xs),
                min(ys),
                max(xs),
                max(ys),
            )
        )
    return found


def decode_pdf(path: Path) -> list[Found]:
    """Every barcode on every page, each page decoded whole (never cropped)."""
    found: list[Found] = []
    for number, image in enumerate(rasterise(path)):
        found.extend(decode_image(image, number))
    return found


def page_text(path: Path) -> list[str]:
    import pypdfium2 as pdfium

    document = pdfium.PdfDocument(str(path))
    try:
        return [document[i].get_textpage().get_text_range() for i in range(len(document))]
    finally:
        document.close()


@pytest.fixture
def make_tags() -> Callable[..., list[LabelContent]]:
    return tool_tags


def scanned(text: str) -> str:
    """The code issuer reads from a decoded symbol: the barcode carries the printed line
    (display form, separators and all), and the reading rules drop the separators."""
    from issuer.checking.reading import typed_form

    return typed_form(text)
