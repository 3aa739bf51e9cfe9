"""Barcode symbols: encodings checked against worked examples and decoded by zxing-cpp."""

from __future__ import annotations

from typing import Any

import pytest

from issuer.errors import LabelError, UnknownName
from issuer.labels import QUIET_ZONE, encode, gs1_giai
from issuer.labels.barcodes import _DM_SIZES, datamatrix_codewords

from .conftest import decode_image


def test_quiet_zones_are_the_standards_minimums() -> None:
    assert QUIET_ZONE["code128"] == 10  # source: ISO/IEC 15417 (Code 128) quiet zone 10X
    assert QUIET_ZONE["qr"] == 4  # source: ISO/IEC 18004 quiet zone 4 modules
    assert QUIET_ZONE["datamatrix"] == 1  # source: ISO/IEC 16022 quiet zone 1 module


def test_datamatrix_ascii_codewords_worked_example() -> None:
    # source: ISO/IEC 16022, worked example "123456" in a 10 x 10 symbol: data codewords
    # 142 164 186, error correction 114 25 5 88 102 (from memory)
    from reportlab.graphics.barcode.ecc200datamatrix import ECC200DataMatrix

    words = datamatrix_codewords("123456")
    assert words == [142, 164, 186]
    assert ECC200DataMatrix("x")._get_reed_solomon_code(words, 5) == [114, 25, 5, 88, 102]
    assert encode("datamatrix", "123456").columns == 10


def test_code128_module_count() -> None:
    # common practice: every Code 128 symbol character is 11 modules, the stop 13; "QTL"
    # in set B then 8 digits as 4 set C pairs: start + 3 + code C + 4 + check + stop
    symbol = encode("code128", "QTL00000125")
    assert symbol.columns == 11 * (1 + 3 + 1 + 4 + 1) + 13
    assert symbol.rows == 1 and symbol.linear


def _paint(symbol: Any, module_px: int = 6) -> Any:
    """The symbol as an image with its own quiet zone and a margin of white around it."""
    from PIL import Image, ImageDraw

    margin = (symbol.quiet + 4) * module_px
    height = 60 if symbol.linear else symbol.rows * module_px
    image = Image.new("L", (symbol.columns * module_px + 2 * margin, height + 2 * margin), 255)
    draw = ImageDraw.Draw(image)
    for x, y, w, h in symbol.runs:
        top = margin + (0 if symbol.linear else y * module_px)
        bottom = margin + (height if symbol.linear else (y + h) * module_px)
        draw.rectangle(
            (margin + x * module_px, top, margin + (x + w) * module_px - 1, bottom - 1), fill=0
        )
    return image


@pytest.mark.parametrize("symbology", ["code128", "qr", "datamatrix"])
@pytest.mark.parametrize("data", ["QTL00000125", "QTL0000012", "QMC12345678904", "Q"])
def test_symbols_decode_with_zxing(symbology: str, data: str) -> None:
    found = decode_image(_paint(encode(symbology, data)))
    assert [f.text for f in found] == [data]


def test_every_datamatrix_size_decodes() -> None:
    # one payload per square ECC 200 size, each filling its symbol to the last codeword
    for side, _regions, data_words, _ecc in _DM_SIZES:
        data = "7" * (2 * data_words)  # digit pairs: one codeword each
        symbol = encode("datamatrix", data)
        assert (symbol.columns, symbol.rows) == (side, side)
        assert [f.text for f in decode_image(_paint(symbol, 4))] == [data]


def test_datamatrix_without_trailing_nul() -> None:
    # reportlab's own C40 padding makes a 3k+1 character value decode with a NUL at the end
    for data in ("QTL0000012", "ABCD", "QTL000001234"):
        assert [f.text for f in decode_image(_paint(encode("datamatrix", data)))] == [data]


def test_gs1_giai_element_string() -> None:
    # source: GS1 General Specifications, AI (8004) GIAI = GS1 Company Prefix + asset
    # reference, at most 30 characters; company prefix 952... is set aside by GS1 for
    # demonstrations and examples (from memory)
    assert gs1_giai("9521234", "QTL00000125") == "80049521234QTL00000125"
    with pytest.raises(LabelError, match="at most 30"):
        gs1_giai("952123456789", "QTL" + "0" * 16)
    with pytest.raises(LabelError, match="4 to 12 digits"):
        gs1_giai("95A", "QTL00000125")


@pytest.mark.parametrize("symbology", ["code128", "datamatrix"])
def test_gs1_symbols_decode_as_gs1(symbology: str) -> None:
    data = gs1_giai("9521234", "QTL00000125")
    found = decode_image(_paint(encode(symbology, data, gs1=True)))
    assert len(found) == 1
    # zxing-cpp reports GS1 content with the AI in brackets (human-readable form)
    assert found[0].text == "(8004)9521234QTL00000125"
    assert found[0].content_type.endswith("GS1")


def test_bad_barcode_requests() -> None:
    with pytest.raises(UnknownName, match="code128"):
        encode("ean13", "QTL00000125")
    with pytest.raises(LabelError, match="printable ASCII"):
        encode("qr", "QTL\u00e900125")
    with pytest.raises(LabelError, match="GS1"):
        encode("qr", "80049521234QTL00000125", gs1=True)
