"""The options of a label job, shared by ``issuer labels`` and ``issuer reprint``: what
to write, the symbology, the layout and what goes on each label."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

# the defaults live with the print job; named here for --help
from issuer.labels.layouts import DEFAULT_SHEET_LAYOUT, DEFAULT_SINGLE_LAYOUT

OutOption = Annotated[
    Path | None,
    typer.Option(
        "--out",
        "-o",
        help="File to write: .pdf for a sheet of any number of labels, .png or .svg for "
        "exactly one label. Written whole or not at all. Needed unless --print or --proof.",
        show_default=False,
    ),
]
BarcodeOption = Annotated[
    str,
    typer.Option(
        "--barcode",
        help="Symbology: code128 (quiet zone 10 modules each side), qr (4 modules, "
        "ISO/IEC 18004) or datamatrix (ISO/IEC 16022).",
    ),
]
LayoutOption = Annotated[
    str | None,
    typer.Option(
        "--layout",
        help=f"Label layout ('issuer layouts' lists them; default {DEFAULT_SHEET_LAYOUT} "
        f"for a PDF, {DEFAULT_SINGLE_LAYOUT} for one PNG/SVG label).",
        show_default=False,
    ),
]
SkipOption = Annotated[
    int,
    typer.Option(
        "--skip",
        min=0,
        help="Cells already used on the first sheet: start after this many, counted row "
        "by row from the top-left (PDF only).",
    ),
]
LinesOption = Annotated[
    str | None,
    typer.Option(
        "--lines",
        help="The text lines in order, comma-separated, from title (the series' title), "
        "holder, note, caption and code (where the code goes; first if not named); or none. "
        "Default: the layout's fields, else title. The holder is personal data: print it "
        "only where your policy allows.",
        show_default=False,
    ),
]
CaptionOption = Annotated[
    str | None,
    typer.Option(
        "--caption",
        help="A short text on every label (e.g. 'Return to the desk').",
        show_default=False,
    ),
]
VoidLabelsOption = Annotated[
    bool,
    typer.Option(
        "--void-labels",
        help="Print voided codes too, each marked VOID (without this, a selection with a "
        "voided code is refused).",
    ),
]
GS1Option = Annotated[
    str | None,
    typer.Option(
        "--gs1-prefix",
        help="Your GS1 Company Prefix (4-12 digits): encode each code as GS1 AI (8004) "
        "GIAI, FNC1 first (code128 and datamatrix only). Use only a prefix GS1 gave you.",
        show_default=False,
    ),
]
OutlinesOption = Annotated[
    bool,
    typer.Option(
        "--outlines",
        help="Draw thin grey cell outlines: a test print on plain paper, to hold "
        "against a label sheet.",
    ),
]
BesideOption = Annotated[
    bool,
    typer.Option(
        "--text-beside",
        help="Put the text at the right of a QR/Data Matrix symbol on wide labels "
        "(default: beneath it).",
    ),
]
DpiOption = Annotated[
    int, typer.Option("--dpi", min=72, max=2400, help="Resolution of a PNG label.")
]
