"""PDF sheets proved by decoding: every page rasterised whole with pypdfium2 at 300 dpi,
every barcode read back with zxing-cpp (the reference decoder) and matched to the cell it
must sit in; text read back with pdfium's text extraction; page and cell geometry read
back from the PDF's own objects."""

from __future__ import annotations

from pathlib import Path

import pytest

from issuer.labels import LabelContent, RenderResult, get_layout, render_labels, render_sheet

from .conftest import MM_PER_PT, decode_pdf, member_cards, page_text, tool_tags

LAYOUTS = ["a4-3x8", "letter-3x10", "roll-50x25"]
SYMBOLOGIES = ["code128", "qr", "datamatrix"]


def _job(layout_name: str) -> tuple[list[LabelContent], int]:
    layout = get_layout(layout_name)
    if layout.per_page == 1:
        return tool_tags(3), 0
    # a partly used first sheet, running onto a second page
    skip = layout.columns + 1
    return tool_tags(layout.per_page - skip + 4), skip


def _assert_every_label_decodes_in_its_cell(
    result: RenderResult, labels: list[LabelContent]
) -> None:
    found = decode_pdf(result.path)
    # exactly one symbol per label, nothing else on the pages
    assert len(found) == len(labels)
    assert len(result.placements) == len(labels)
    layout = result.layout
    for spot, label in zip(result.placements, labels):
        # the cell the layout says this label goes in, counted from the first free cell
        page, row, column = layout.position(result.skip + spot.index)
        assert (spot.page, spot.row, spot.column) == (page, row, column)
        assert spot.cell == layout.cell(row, column)
        here = [f for f in found if f.page == page and spot.cell.contains(*f.centre)]
        assert [f.text for f in here] == [label.display], (
            f"label {spot.index} at {page}/{row}/{column}"
        )
        symbol = here[0]
        # zxing's corner points lie on the symbol's dark part, inside its quiet zone box
        slack = 0.3  # mm: about 3.5 pixels at 300 dpi
        assert spot.quiet.contains(symbol.left, symbol.top, slack)
        assert spot.quiet.contains(symbol.right, symbol.bottom, slack)
        assert abs(symbol.centre[0] - (spot.symbol.x + spot.symbol.width / 2)) < slack
        assert abs(symbol.centre[1] - (spot.symbol.y + spot.symbol.height / 2)) < slack
        # the quiet zone is inside the label's own cell, never in a neighbour's
        assert spot.cell.contains(spot.quiet.x, spot.quiet.y)
        assert spot.cell.contains(spot.quiet.right, spot.quiet.bottom)
    # in order: the decoded texts, read cell by cell, are the job's codes in sequence
    by_cell = sorted(
        found,
        key=lambda f: next(
            s.index for s in result.placements if s.page == f.page and s.cell.contains(*f.centre)
        ),
    )
    assert [f.text for f in by_cell] == [label.display for label in labels]


@pytest.mark.parametrize("layout_name", LAYOUTS)
@pytest.mark.parametrize("symbology", SYMBOLOGIES)
def test_sheet_decodes_label_by_label(tmp_path: Path, symbology: str, layout_name: str) -> None:
    labels, skip = _job(layout_name)
    out = tmp_path / f"{symbology}-{layout_name}.pdf"
    result = render_sheet(labels, get_layout(layout_name), out, symbology=symbology, skip=skip)
    assert result.pages == get_layout(layout_name).position(skip + len(labels) - 1)[0] + 1
    _assert_every_label_decodes_in_its_cell(result, labels)
    # the human-readable, grouped code is on the page beneath/beside its barcode
    texts = page_text(out)
    assert len(texts) == result.pages
    for spot, label in zip(result.placements, labels):
        assert label.display in texts[spot.page]
        for line in label.lines:
            assert line in texts[spot.page]


def test_member_cards_with_longer_codes(tmp_path: Path) -> None:
    labels = member_cards(10)
    result = render_sheet(labels, get_layout("letter-3x10"), tmp_path / "cards.pdf", symbology="qr")
    _assert_every_label_decodes_in_its_cell(result, labels)


def test_page_size_and_cells_match_the_layout(tmp_path: Path) -> None:
    import pypdfium2 as pdfium
    from pypdfium2 import raw

    for name in LAYOUTS:
        layout = get_layout(name)
        labels = tool_tags(2)
        out = tmp_path / f"{name}.pdf"
        result = render_sheet(labels, layout, out, outlines=True)
        document = pdfium.PdfDocument(str(out))
        page = document[0]
        width, height = page.get_size()
        assert abs(width * MM_PER_PT - layout.page_width) < 0.1
        assert abs(height * MM_PER_PT - layout.page_height) < 0.1
        boxes = []
        for obj in page.get_objects():
            if obj.type == raw.FPDF_PAGEOBJ_PATH:
                left, bottom, right, top = (v * MM_PER_PT for v in obj.get_bounds())
                boxes.append((left, layout.page_height - top, right, layout.page_height - bottom))
        # the cell outlines: stroked paths the size of a label (pdfium's bounds include
        # the stroke, the same amount on every side of every outline)
        outlines = [b for b in boxes if abs((b[2] - b[0]) - layout.label_width) < 0.5]
        outlines = [b for b in outlines if abs((b[3] - b[1]) - layout.label_height) < 0.5]
        assert len(outlines) == layout.per_page
        stroke = (outlines[0][2] - outlines[0][0] - layout.label_width) / 2
        assert 0 <= stroke <= 0.1 + 1e-3  # at most the outline's own line width
        for row in range(layout.rows):
            for column in range(layout.columns):
                cell = layout.cell(row, column)
                assert any(
                    abs(b[0] + stroke - cell.x) < 0.1
                    and abs(b[1] + stroke - cell.y) < 0.1
                    and abs(b[2] - stroke - cell.right) < 0.1
                    and abs(b[3] - stroke - cell.bottom) < 0.1
                    for b in outlines
                ), (name, row, column)
        # the filled symbol paths are exactly where the renderer says the symbols are
        for spot in result.placements:
            s = spot.symbol
            assert any(
                abs(b[0] - s.x) < 0.01
                and abs(b[1] - s.y) < 0.01
                and abs(b[2] - s.right) < 0.01
                and abs(b[3] - s.bottom) < 0.01
                for b in boxes
            )
        document.close()


def test_metadata_says_print_at_actual_size(tmp_path: Path) -> None:
    import pypdfium2 as pdfium

    out = tmp_path / "tags.pdf"
    render_sheet(tool_tags(3), get_layout("a4-3x8"), out, title="Quillmere tool tags")
    document = pdfium.PdfDocument(str(out))
    meta = document.get_metadata_dict()
    document.close()
    assert meta["Title"] == "Quillmere tool tags"
    assert "100 %" in meta["Subject"] and "actual size" in meta["Subject"]
    assert "210 x 297 mm" in meta["Subject"] and "70 x 37 mm" in meta["Subject"]
    assert "actual size" in meta["Keywords"]


def test_void_label_is_marked_and_still_scans(tmp_path: Path) -> None:
    labels = tool_tags(3)
    labels[1] = LabelContent(labels[1].code, labels[1].display, ("Retired: cracked casing",), True)
    for symbology in SYMBOLOGIES:
        out = tmp_path / f"void-{symbology}.pdf"
        result = render_sheet(labels, get_layout("a4-3x8"), out, symbology=symbology)
        _assert_every_label_decodes_in_its_cell(result, labels)
        text = page_text(out)[0]
        assert text.count("VOID") == 1
        assert "Retired: cracked casing" in text


def test_progress_is_reported(tmp_path: Path) -> None:
    seen: list[int] = []
    render_labels(tool_tags(250), get_layout("a4-3x8"), tmp_path / "many.pdf", progress=seen.append)
    assert seen == [100, 200, 250]


def test_long_caption_is_shrunk_or_cut_to_fit(tmp_path: Path) -> None:
    tag = tool_tags(1)[0]
    long_line = "Quillmere Tool Library - mitre saw, left-hand bay, second shelf from the floor"
    label = LabelContent(tag.code, tag.display, (long_line,))
    out = tmp_path / "long.pdf"
    result = render_sheet([label], get_layout("roll-50x25"), out)
    _assert_every_label_decodes_in_its_cell(result, [label])
    text = page_text(out)[0]
    assert tag.display in text
    assert "Quillmere Tool" in text


@pytest.mark.parametrize("symbology", ["qr", "datamatrix"])
def test_text_beside_a_2d_symbol(tmp_path: Path, symbology: str) -> None:
    import pypdfium2 as pdfium
    from pypdfium2 import raw

    labels = tool_tags(4)
    out = tmp_path / "beside.pdf"
    layout = get_layout("a4-3x8")
    result = render_sheet(labels, layout, out, symbology=symbology, text_beside=True)
    _assert_every_label_decodes_in_its_cell(result, labels)
    document = pdfium.PdfDocument(str(out))
    texts = [o for o in document[0].get_objects() if o.type == raw.FPDF_PAGEOBJ_TEXT]
    for spot in result.placements:
        here = [
            o.get_bounds()
            for o in texts
            if spot.cell.contains(
                o.get_bounds()[0] * MM_PER_PT, layout.page_height - o.get_bounds()[3] * MM_PER_PT
            )
        ]
        assert here
        # every text line starts right of the symbol's quiet zone
        assert all(b[0] * MM_PER_PT >= spot.quiet.right for b in here)
    document.close()
