"""Render labels: a PDF sheet (many pages), or one label as PNG or SVG.

Everything is checked before a file is touched (:func:`issuer.labels.job.prepare`; here
also a bad start position). The
output is written to a temporary file in the target folder and moved into place at the
end, so a failure never leaves a half-written file behind.

Printing: the PDF's page is the layout's page and nothing is scaled; print it at 100 %
(actual size), never "fit to page". The PDF's metadata says so and gives the layout's
dimensions.
"""

from __future__ import annotations

import io
import os
import re
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from html import escape
from pathlib import Path
from typing import Any

from issuer.errors import LabelError
from issuer.labels.fonts import FontSet
from issuer.labels.job import Job, LabelContent, Placement, draw_job, prepare
from issuer.labels.layouts import Layout
from issuer.labels.painters import DrawingPainter, PdfPainter
from issuer.labels.plan import PT_PER_MM

FORMATS = ("pdf", "png", "svg")
PRINT_NOTE = "Print at 100 % scale (actual size); do not fit to page."


@dataclass(frozen=True)
class RenderResult:
    path: Path
    format: str
    layout: Layout  # for PNG/SVG: the one-label page
    symbology: str
    labels: int
    pages: int
    skip: int
    module_mm: float
    dpi: int | None
    placements: tuple[Placement, ...] = field(repr=False)


def output_format(out: str | os.PathLike[str]) -> str:
    suffix = Path(out).suffix.lower().lstrip(".")
    if suffix not in FORMATS:
        raise LabelError(
            f"cannot tell the format of {os.fspath(out)!r}: end it in .pdf, .png or .svg"
        )
    return suffix


@contextmanager
def _atomic(out: str | os.PathLike[str]) -> Iterator[Path]:
    """A temporary path beside ``out``, moved onto ``out`` only when the block succeeds
    (the caller decides whether ``out`` may be replaced; a register, a folder or a device
    never is: :mod:`issuer.outputs`)."""
    from issuer.outputs import staged_path

    with staged_path(out, force=True, what="label file") as temp:
        yield temp


def _pdf(
    target: Any,
    job: Job,
    layout: Layout,
    skip: int,
    title: str | None,
    progress: Callable[[int], None] | None,
    outlines: bool = False,
) -> tuple[int, tuple[Placement, ...]]:
    from reportlab.pdfgen.canvas import Canvas

    canvas = Canvas(
        target,
        pagesize=(layout.page_width * PT_PER_MM, layout.page_height * PT_PER_MM),
        # no built-in Type 1 font even as the page's unused default: every font is embedded
        initialFontName=job.fonts.face("text").name,
    )
    canvas.setTitle(title or f"issuer labels ({layout.name})")
    canvas.setSubject(f"{PRINT_NOTE} Layout {layout.name}: {layout.summary()}.")
    canvas.setKeywords(
        f"labels, {job.plan.symbology}, layout {layout.name}, print at 100 % scale, actual size, "
        f"page {layout.page_width:g} x {layout.page_height:g} mm, "
        f"label {layout.label_width:g} x {layout.label_height:g} mm"
    )
    canvas.setCreator("issuer")
    painter = PdfPainter(canvas, layout.page_height, job.fonts)
    pages, placements = draw_job(painter, job, layout, skip, painter.new_page, progress, outlines)
    canvas.showPage()
    canvas.save()
    return pages, placements


def render_sheet(
    labels: Sequence[LabelContent],
    layout: Layout,
    out: str | os.PathLike[str],
    *,
    symbology: str = "code128",
    skip: int = 0,
    gs1_company_prefix: str | None = None,
    title: str | None = None,
    outlines: bool = False,
    text_beside: bool = False,
    fonts: FontSet | None = None,
    progress: Callable[[int], None] | None = None,
) -> RenderResult:
    """Render ``labels`` in order onto sheets of ``layout`` as one PDF at ``out``.

    ``skip`` leaves that many cells of the first page empty (a partly used sheet),
    counted row by row from the top-left. ``text_beside`` puts the text at the right of
    a 2D symbol on wide labels (default: beneath it). ``outlines`` adds thin grey cell outlines (for a
    test print on plain paper). ``progress`` is called with the number of labels drawn
    so far (every 100 labels and at the end).
    """
    _check_skip(layout, skip)
    job = prepare(labels, layout, symbology, gs1_company_prefix, text_beside, fonts)
    with _atomic(out) as temp:
        pages, placements = _pdf(str(temp), job, layout, skip, title, progress, outlines)
    return RenderResult(
        Path(out),
        "pdf",
        layout,
        job.plan.symbology,
        len(labels),
        pages,
        skip,
        job.plan.module,
        None,
        placements,
    )


def _single(
    label: LabelContent,
    layout: Layout,
    symbology: str,
    gs1: str | None,
    beside: bool,
    fonts: FontSet | None,
) -> tuple[Job, Layout]:
    single = layout.single()
    return prepare([label], single, symbology, gs1, beside, fonts), single


def render_png(
    label: LabelContent,
    layout: Layout,
    out: str | os.PathLike[str],
    *,
    symbology: str = "code128",
    dpi: int = 300,
    gs1_company_prefix: str | None = None,
    text_beside: bool = False,
    fonts: FontSet | None = None,
) -> RenderResult:
    """One label of ``layout``'s label size as a PNG at ``dpi`` (the file records its dpi,
    so it prints at the label's size): the label is drawn as a one-page PDF and rasterised
    with pdfium."""
    _check_dpi(dpi)
    job, single = _single(label, layout, symbology, gs1_company_prefix, text_beside, fonts)
    buffer = io.BytesIO()
    _, placements = _pdf(buffer, job, single, 0, None, None)
    _rasterise_first_page(buffer.getvalue(), out, dpi)
    return RenderResult(
        Path(out), "png", single, job.plan.symbology, 1, 1, 0, job.plan.module, dpi, placements
    )


def render_page_png(
    labels: Sequence[LabelContent],
    layout: Layout,
    out: str | os.PathLike[str],
    *,
    symbology: str = "code128",
    skip: int = 0,
    dpi: int = 150,
    gs1_company_prefix: str | None = None,
    outlines: bool = True,
    text_beside: bool = False,
    fonts: FontSet | None = None,
) -> RenderResult:
    """The first sheet of a job as a PNG of the page's size at ``dpi`` (a proof of the page:
    the labels that fit on it after ``skip`` used cells, with cell ``outlines``)."""
    _check_dpi(dpi)
    _check_skip(layout, skip)
    first = list(labels[: layout.per_page - skip])
    job = prepare(first, layout, symbology, gs1_company_prefix, text_beside, fonts)
    buffer = io.BytesIO()
    _, placements = _pdf(buffer, job, layout, skip, None, None, outlines)
    _rasterise_first_page(buffer.getvalue(), out, dpi)
    return RenderResult(
        Path(out), "png", layout, job.plan.symbology, len(first), 1, skip, job.plan.module, dpi,
        placements,
    )  # fmt: skip


def _check_skip(layout: Layout, skip: int) -> None:
    if not 0 <= skip < layout.per_page:
        raise LabelError(
            f"the start position (skip) must be 0 to {layout.per_page - 1} for layout "
            f"{layout.name!r} ({layout.per_page} labels a sheet)"
        )


def _check_dpi(dpi: int) -> None:
    if not 72 <= dpi <= 2400:
        raise LabelError("dpi must be between 72 and 2400")


def _rasterise_first_page(pdf: bytes, out: str | os.PathLike[str], dpi: int) -> None:
    """Page one of ``pdf`` as a greyscale PNG at ``dpi``; the file records its dpi, so it
    shows and prints at 100 % scale."""
    import pypdfium2 as pdfium

    with _atomic(out) as temp:
        document = pdfium.PdfDocument(pdf)
        try:
            bitmap = document[0].render(scale=dpi / 72.0, grayscale=True)
            bitmap.to_pil().save(temp, format="PNG", dpi=(dpi, dpi))
        finally:
            document.close()


def render_svg(
    label: LabelContent,
    layout: Layout,
    out: str | os.PathLike[str],
    *,
    symbology: str = "code128",
    gs1_company_prefix: str | None = None,
    text_beside: bool = False,
    fonts: FontSet | None = None,
) -> RenderResult:
    """One label as SVG (reportlab's SVG renderer), sized in millimetres. Its letters are
    glyph outlines of issuer's fonts; its title holds the label's text, for search."""
    job, single = _single(label, layout, symbology, gs1_company_prefix, text_beside, fonts)
    from reportlab.graphics import renderSVG

    painter = DrawingPainter(single.page_width, single.page_height, job.fonts)
    _, placements = draw_job(painter, job, single, 0, None, None)
    text = renderSVG.drawToString(painter.drawing)
    words = [job.header] if job.header else []
    words += [*job.lines[0][: label.code_at], job.displays[0], *job.lines[0][label.code_at :]]
    text = _svg_physical_size(text, single, " \u00b7 ".join(words))
    with _atomic(out) as temp:
        temp.write_text(text, encoding="utf-8")
    return RenderResult(
        Path(out), "svg", single, job.plan.symbology, 1, 1, 0, job.plan.module, None, placements
    )


def _svg_physical_size(text: str, layout: Layout, title: str) -> str:
    """Give the SVG's width and height in mm (the viewBox stays in points) and its title."""
    head, sep, rest = text.partition("<svg ")
    tag, close, body = rest.partition(">")
    tag = re.sub(r'\bwidth="[^"]*"', f'width="{layout.page_width:g}mm"', tag, count=1)
    tag = re.sub(r'\bheight="[^"]*"', f'height="{layout.page_height:g}mm"', tag, count=1)
    body = body.replace("<title>...</title>", f"<title>{escape(title, quote=False)}</title>", 1)
    return head + sep + tag + close + body


def render_labels(
    labels: Sequence[LabelContent],
    layout: Layout,
    out: str | os.PathLike[str],
    *,
    symbology: str = "code128",
    skip: int = 0,
    gs1_company_prefix: str | None = None,
    dpi: int = 300,
    title: str | None = None,
    outlines: bool = False,
    text_beside: bool = False,
    fonts: FontSet | None = None,
    progress: Callable[[int], None] | None = None,
) -> RenderResult:
    """Render to ``out`` in the format its suffix names: ``.pdf`` a sheet of any number of
    labels; ``.png`` or ``.svg`` exactly one label."""
    kind = output_format(out)
    if kind == "pdf":
        return render_sheet(
            labels,
            layout,
            out,
            symbology=symbology,
            skip=skip,
            gs1_company_prefix=gs1_company_prefix,
            title=title,
            outlines=outlines,
            text_beside=text_beside,
            fonts=fonts,
            progress=progress,
        )
    if not labels:
        raise LabelError("nothing to print: the selection is empty")
    if len(labels) != 1:
        raise LabelError(
            f"a {kind.upper()} holds one label and {len(labels)} were selected; "
            "write a .pdf instead"
        )
    if skip:
        raise LabelError("a start position (skip) applies to PDF sheets only")
    if kind == "png":
        result = render_png(
            labels[0],
            layout,
            out,
            symbology=symbology,
            dpi=dpi,
            gs1_company_prefix=gs1_company_prefix,
            text_beside=text_beside,
            fonts=fonts,
        )
    else:
        result = render_svg(
            labels[0],
            layout,
            out,
            symbology=symbology,
            gs1_company_prefix=gs1_company_prefix,
            text_beside=text_beside,
            fonts=fonts,
        )
    if progress is not None:
        progress(1)
    return result
