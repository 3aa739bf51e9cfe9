"""What a scanner types equals what a person reads: every label's barcode carries its
printed line (the code's display form), and issuer reads that line back as the code."""

from __future__ import annotations

from pathlib import Path

import pytest

from issuer.checking.codes import CodeFormat, normalise_affix
from issuer.checking.schemes import get_scheme
from issuer.labels import LabelContent, get_layout, render_labels, render_sheet

from .conftest import decode_image, decode_pdf, page_text


def _shapes() -> list[CodeFormat]:
    """Invented Quillmere series: a tool tag series defined with prefix ``QT-`` (stored
    as ``QT``), a grouped member card with a suffix and a space separator, and an
    alphanumeric locker key with a dot separator."""
    return [
        CodeFormat(get_scheme("luhn"), length=6, prefix=normalise_affix("QT-")),
        CodeFormat(get_scheme("damm"), length=8, prefix="QMC", suffix="B", group=(3, 3, 3), sep=" "),
        CodeFormat(get_scheme("iso7064-37-36"), length=6, prefix="LK", group=(4, 3), sep="."),
    ]


@pytest.mark.parametrize("symbology", ["code128", "qr", "datamatrix"])
@pytest.mark.parametrize("shape", _shapes(), ids=["prefix-QT-", "space-suffix", "dot-base36"])
def test_png_label_scans_as_its_printed_line(
    tmp_path: Path, symbology: str, shape: CodeFormat
) -> None:
    from PIL import Image

    code = shape.code_for_base(10)
    printed = shape.display(code)
    assert printed != code  # the case in question: the display form differs from the code
    out = tmp_path / "tag.png"
    render_labels([LabelContent(code, printed)], get_layout("roll-50x25"), out,
                  symbology=symbology)  # fmt: skip
    with Image.open(out) as image:
        # source: zxing-cpp, the reference decoder, over the whole 300 dpi label image
        found = [f.text for f in decode_image(image.convert("L"))]
    assert found == [printed]
    # the same line is what the label prints (read from the PDF's text layer)
    sheet = tmp_path / "tag.pdf"
    render_sheet([LabelContent(code, printed)], get_layout("roll-50x25"), sheet,
                 symbology=symbology)  # fmt: skip
    # source: zxing-cpp, the reference decoder, over the whole PDF page
    assert [f.text for f in decode_pdf(sheet)] == [printed]
    assert printed in page_text(sheet)[0].splitlines()
    # and typed back into issuer, the scanned line reads as the code it was printed for
    assert shape.validate(found[0]).canonical == code


def test_the_qt_series_of_the_report() -> None:
    """The reported case: prefix ``QT-`` prints ``QT-`` + body + check under the symbol."""
    shape = _shapes()[0]
    code = shape.code_for_base(1)
    # source: ISO/IEC 7812-1 Annex B (Luhn): 0000010 -> the body 000001 has check digit 8
    assert code == "QT0000018" and shape.display(code) == "QT-0000018"
