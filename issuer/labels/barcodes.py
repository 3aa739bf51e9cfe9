"""Barcode symbols as modules: Code 128, QR Code and Data Matrix (ECC 200).

The symbols come from reportlab's barcode encoders (``reportlab.graphics.barcode``):
``code128.Code128`` for Code 128, ``qr.QrCodeWidget`` (its ``qrencoder``) for QR Code
and ``ecc200datamatrix.ECC200DataMatrix`` for Data Matrix. A :class:`Symbol` is the
encoded pattern in module units, so the renderer can scale it to a label and draw it
straight onto a PDF canvas or into an SVG drawing without a per-label widget.

Data Matrix: reportlab's class draws one fixed 44 x 44 symbol in C40 encodation and
pads C40 so that a value of 3k+1 characters decodes with a trailing NUL. Here the data
codewords are made in ASCII encodation (ISO/IEC 16022, 5.2.3) with the standard's
253-state padding, and the smallest square ECC 200 size that holds them is chosen;
reportlab's Reed-Solomon and module placement do the rest.

GS1 (optional): the code is carried as AI (8004), the Global Individual Asset Identifier
(GIAI: a GS1 Company Prefix followed by an individual asset reference), with FNC1 in
first position: Code 128 start code then FNC1 (GS1-128), Data Matrix codeword 232.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any

from issuer.errors import LabelError, UnknownName

SYMBOLOGIES: tuple[str, ...] = ("code128", "qr", "datamatrix")
GS1_SYMBOLOGIES: tuple[str, ...] = ("code128", "datamatrix")

# Quiet zones in modules on every side of the symbol (for Code 128: left and right).
QUIET_ZONE: Mapping[str, int] = MappingProxyType(
    {
        "code128": 10,  # source: ISO/IEC 15417 (Code 128), quiet zone at least 10X each side
        "qr": 4,  # source: ISO/IEC 18004 (QR Code), quiet zone 4X wide on all four sides
        "datamatrix": 1,  # source: ISO/IEC 16022 (Data Matrix), quiet zone at least 1X on all sides
    }
)

# Module (X-dimension) limits in mm the renderer keeps to when it fits a symbol to a label.
MIN_MODULE_MM: Mapping[str, float] = MappingProxyType(
    {
        # common practice: 7.5 mil (0.19 mm) is the smallest X usually printed for Code 128
        "code128": 0.19,
        "qr": 0.25,  # common practice: about 10 mil for 2D symbols on office and thermal printers
        "datamatrix": 0.25,  # common practice: as for QR
    }
)
MAX_MODULE_MM: Mapping[str, float] = MappingProxyType(
    {"code128": 0.5, "qr": 1.0, "datamatrix": 1.0}  # larger modules only waste label area
)

GIAI_AI = "8004"
# source: GS1 General Specifications, AI (8004) GIAI: N4+X..30 (up to 30 characters of
# GS1 AI encodable character set 82); the GS1 Company Prefix is 4 to 12 digits (from memory)
_GIAI_MAX = 30
_CSET82 = frozenset(
    "!\"%&'()*+,-./0123456789:;<=>?ABCDEFGHIJKLMNOPQRSTUVWXYZ_abcdefghijklmnopqrstuvwxyz"
)


@dataclass(frozen=True, slots=True)
class Symbol:
    """An encoded barcode in module units.

    ``runs`` are the dark rectangles ``(x, y, width, height)`` counted in modules from the
    symbol's top-left corner, quiet zone excluded. A linear symbol has ``rows == 1``: its
    bars span whatever height the label gives them.
    """

    symbology: str
    columns: int
    rows: int
    quiet: int
    runs: tuple[tuple[int, int, int, int], ...]
    data: str
    gs1: bool = False

    @property
    def linear(self) -> bool:
        return self.symbology == "code128"


def check_symbology(name: str) -> str:
    key = name.strip().lower()
    if key not in SYMBOLOGIES:
        raise UnknownName(f"unknown barcode {name!r} (known: {', '.join(SYMBOLOGIES)})")
    return key


def gs1_giai(company_prefix: str, reference: str) -> str:
    """The GS1 element string ``8004`` + GIAI for an asset ``reference`` (the issued code)
    under the user's GS1 Company Prefix. Raises :class:`LabelError` when it cannot be a
    valid GIAI."""
    if not (
        company_prefix.isascii() and company_prefix.isdigit() and 4 <= len(company_prefix) <= 12
    ):
        raise LabelError("a GS1 Company Prefix is 4 to 12 digits")
    giai = company_prefix + reference
    if len(giai) > _GIAI_MAX:
        raise LabelError(
            f"GIAI {giai} has {len(giai)} characters; AI (8004) allows at most {_GIAI_MAX}"
        )
    bad = sorted(set(reference) - _CSET82)
    if bad:
        raise LabelError(f"GIAI may not contain {''.join(bad)!r} (GS1 character set 82)")
    return GIAI_AI + giai


def encode(symbology: str, data: str, *, gs1: bool = False) -> Symbol:
    """Encode ``data`` (printable ASCII) as a symbol of ``symbology``.

    With ``gs1`` the data is a GS1 element string (see :func:`gs1_giai`) and FNC1 is put in
    first position.
    """
    key = check_symbology(symbology)
    if not data or not all(" " <= ch <= "~" for ch in data):
        raise LabelError(f"{data!r} cannot go into a barcode: printable ASCII only")
    if gs1 and key not in GS1_SYMBOLOGIES:
        raise LabelError(f"GS1 content is offered in {' and '.join(GS1_SYMBOLOGIES)} only")
    if key == "code128":
        return encode_code128(data, gs1=gs1)
    if key == "qr":
        return encode_qr(data)
    return encode_datamatrix(data, gs1=gs1)


# -- Code 128 -------------------------------------------------------------------------


def code128_runs(data: str, *, gs1: bool = False) -> tuple[int, tuple[tuple[int, int], ...]]:
    """Total modules and the bars ``(x, width)`` of the Code 128 symbol for ``data``.

    The fast path for sheets: the renderer draws these bars straight onto the canvas.
    """
    from reportlab.graphics.barcode.code128 import Code128

    barcode: Any = Code128("\xf1" + data if gs1 else data, quiet=0)
    barcode.validate()
    barcode.encode()
    pattern: str = barcode.decompose()
    bars: list[tuple[int, int]] = []
    x = 0
    # reportlab's pattern: a-z is a space, A-Z a bar, the letter's rank its width in modules
    for ch in pattern:
        width = ord(ch)
        if width >= 97:
            x += width - 96
        else:
            width -= 64
            bars.append((x, width))
            x += width
    return x, tuple(bars)


def encode_code128(data: str, *, gs1: bool = False) -> Symbol:
    columns, bars = code128_runs(data, gs1=gs1)
    runs = tuple((x, 0, width, 1) for x, width in bars)
    return Symbol("code128", columns, 1, QUIET_ZONE["code128"], runs, data, gs1)


# -- QR Code --------------------------------------------------------------------------

QR_LEVEL = "M"  # common practice: level M (about 15 % recovery) for labels that get scuffed


def encode_qr(data: str) -> Symbol:
    from reportlab.graphics.barcode.qr import QrCodeWidget

    widget: Any = QrCodeWidget(data, barLevel=QR_LEVEL)
    qr = widget.qr
    qr.make()
    matrix = [[bool(cell) for cell in row] for row in qr.modules]
    return _matrix_symbol("qr", matrix, data, False)


# -- Data Matrix ----------------------------------------------------------------------

# Square ECC 200 symbols that carry one Reed-Solomon block:
# (modules per side, data regions per side, data codewords, error correction codewords)
# source: ISO/IEC 16022:2006 Table 7 (ECC 200 symbol attributes), square sizes 10x10 to 44x44
_DM_SIZES: tuple[tuple[int, int, int, int], ...] = (
    (10, 1, 3, 5),
    (12, 1, 5, 7),
    (14, 1, 8, 10),
    (16, 1, 12, 12),
    (18, 1, 18, 14),
    (20, 1, 22, 18),
    (22, 1, 30, 20),
    (24, 1, 36, 24),
    (26, 1, 44, 28),
    (32, 2, 62, 36),
    (36, 2, 86, 42),
    (40, 2, 114, 48),
    (44, 2, 144, 56),
)
_DM_FNC1 = 232  # source: ISO/IEC 16022, 5.2.4.3: FNC1 codeword 232 (first position: GS1)
_DM_PAD = 129  # source: ISO/IEC 16022, 5.2.3: first pad codeword 129, then 253-state randomised


def datamatrix_codewords(data: str, *, gs1: bool = False) -> list[int]:
    """Data codewords in ASCII encodation: digit pairs as 130 + value, other characters as
    their code + 1 (ISO/IEC 16022, 5.2.3)."""
    words = [_DM_FNC1] if gs1 else []
    at = 0
    while at < len(data):
        pair = data[at : at + 2]
        if len(pair) == 2 and pair.isdigit() and pair.isascii():
            words.append(130 + int(pair))
            at += 2
        else:
            words.append(ord(data[at]) + 1)
            at += 1
    return words


def _dm_pad(words: list[int], capacity: int) -> list[int]:
    padded = list(words)
    if len(padded) < capacity:
        padded.append(_DM_PAD)
    while len(padded) < capacity:
        position = len(padded) + 1  # 1-based position in the data stream
        # source: ISO/IEC 16022, Annex B.1: 253-state randomising of pad codewords
        value = _DM_PAD + ((149 * position) % 253) + 1
        padded.append(value - 254 if value > 254 else value)
    return padded


def encode_datamatrix(data: str, *, gs1: bool = False) -> Symbol:
    from reportlab.graphics.barcode.ecc200datamatrix import ECC200DataMatrix

    words = datamatrix_codewords(data, gs1=gs1)
    for side, regions, data_words, ecc_words in _DM_SIZES:
        if len(words) <= data_words:
            break
    else:
        raise LabelError(f"{data!r} is too long for a Data Matrix symbol up to 44 x 44")
    dm: Any = ECC200DataMatrix(data)
    # reportlab's placement works on these attributes; set them to the chosen size
    dm.row_modules = dm.col_modules = side
    dm.row_regions = dm.col_regions = regions
    dm.cw_data, dm.cw_ecc = data_words, ecc_words
    dm.row_usable_modules = dm.col_usable_modules = side - 2 * regions
    stream = _dm_pad(words, data_words)
    stream += dm._get_reed_solomon_code(stream, ecc_words)
    usable = side - 2 * regions
    matrix = dm._create_matrix(list(stream))
    if (usable * usable) % 8 == 4:
        # source: ISO/IEC 16022, Annex F: an unfilled bottom-right 2x2 corner gets the
        # fixed pattern dark at (last, last) and (last-1, last-1)
        matrix[usable - 1][usable - 1] = 1
        matrix[usable - 2][usable - 2] = 1
    merged = dm._merge_data_regions(
        dm._wrap_data_regions_with_finders(dm._create_data_regions(matrix))
    )
    return _matrix_symbol("datamatrix", [[bool(v) for v in row] for row in merged], data, gs1)


def _matrix_symbol(symbology: str, matrix: list[list[bool]], data: str, gs1: bool) -> Symbol:
    """Dark runs, row by row from the top, of a 2D symbol's module matrix."""
    runs: list[tuple[int, int, int, int]] = []
    for y, row in enumerate(matrix):
        x, width = 0, len(row)
        while x < width:
            if row[x]:
                start = x
                while x < width and row[x]:
                    x += 1
                runs.append((start, y, x - start, 1))
            else:
                x += 1
    return Symbol(
        symbology, len(matrix[0]), len(matrix), QUIET_ZONE[symbology], tuple(runs), data, gs1
    )
