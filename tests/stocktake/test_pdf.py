"""A count's PDF report prints places and names beyond Latin-1: it draws with the bundled
DejaVu faces the labels use (reportlab's built-in Helvetica has no Ł, no Greek), embeds
them, and its text layer (read back with pypdfium2) holds the names as written (an "&" in a
table cell too, not its markup escape)."""

from __future__ import annotations

import io
from datetime import UTC, datetime

from issuer.register.counting import CountInfo
from issuer.register.scanfiles import FileInfo
from issuer.stocktake.pdf import write_pdf

# Invented Quillmere places and people (all made up for the demo).
POLISH_BAY = "Warsztat Łąka – półka 3"
GREEK_BAY = "Εργαστήριο Β & ράφι 2"
CLERK = "Zoë Đurđević"


def _report() -> bytes:
    opened = datetime(2026, 3, 14, 9, 30, tzinfo=UTC)
    info = CountInfo(
        name="spring-łąka", series="tools", scope="where", scope_text=POLISH_BAY, scope_first=None,
        scope_last=None, zone="Europe/Warsaw", state="closed", opened_at=opened, opened_by=CLERK,
        closed_at=opened.replace(hour=17), closed_by=CLERK, files=1, scans=2,
    )  # fmt: skip
    files = [FileInfo("półka-3.txt", "skaner-północ", "0" * 64, "Europe/Warsaw", 2, 0, 0, opened, CLERK)]
    result = {
        "scope": f"place {POLISH_BAY}", "zone": "Europe/Warsaw", "expected": 2, "found": 1, "scans": 2,
        "counts": {"issued": 1, "missing": 1, "elsewhere": 1},
        "missing": [{"code": "QTL26000014", "display": "QTL-2600-0014", "expected_place": POLISH_BAY,
                     "last_seen_at": "2026-02-01T10:00:00Z", "last_seen_where": GREEK_BAY, "perhaps": ""}],
        "elsewhere": [{"code": "QTL26000022", "display": "QTL-2600-0022", "expected_place": GREEK_BAY,
                       "seen_at_places": [POLISH_BAY], "file": "półka-3.txt", "line": 2}],
    }  # fmt: skip
    stream = io.BytesIO()
    write_pdf(info, files, result, stream)
    return stream.getvalue()


def _text(pdf: bytes) -> str:
    import pypdfium2

    document = pypdfium2.PdfDocument(pdf)
    try:
        return "\n".join(page.get_textpage().get_text_range() for page in document)
    finally:
        document.close()


def test_names_beyond_latin_1_print_in_the_count_report() -> None:
    pdf = _report()
    text = _text(pdf)
    for name in (POLISH_BAY, GREEK_BAY, CLERK, "półka-3.txt", "skaner-północ"):
        assert name in text, name
    assert "&amp;" not in text
    # the bundled faces are embedded (as subsets); with the built-in Helvetica the letters
    # beyond Latin-1 above come out as boxes in the text layer
    assert b"DejaVuSans" in pdf and b"DejaVuSans-Bold" in pdf
