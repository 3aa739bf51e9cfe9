"""A count's report on paper (reportlab): what was counted and when, the counts with a bar
chart of the classes, the lists a manager acts on (missing, found elsewhere, voided but
still present, typos with the code probably meant, other series), and room to sign.

Long lists are cut at :data:`MAX_ROWS` rows with a line saying how many more there are
(the CSV report has them all). Text is drawn with the bundled DejaVu faces the labels use
(:mod:`issuer.labels.fonts`), so places, holders and file names in any script the labels
print come out as written; reportlab's built-in fonts stop at Latin-1.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime
from typing import IO, Any

from issuer.register.counting import CountInfo
from issuer.register.scanfiles import FileInfo
from issuer.stocktake.results import COUNT_KEYS, MEANINGS

#: rows printed per list before "and N more"
MAX_ROWS = 500
#: a table cell's padding left and right, in points
_PADDING = 4
#: the classes drawn in the chart, in order, with their labels
CHART = (
    ("issued", "found"), ("elsewhere", "found elsewhere"), ("missing", "missing"), ("voided", "voided"),
    ("bad_check", "bad check"), ("not_issued", "not issued"), ("malformed", "malformed"),
    ("other_series", "other series"), ("out_of_scope", "out of scope"), ("duplicates", "duplicates"),
)  # fmt: skip


def _faces() -> tuple[str, str]:
    """The reportlab names of the bundled regular and bold faces (registered once)."""
    from issuer.labels.fonts import font_set

    fonts = font_set()
    return fonts.face("text").name, fonts.face("bold").name


def _when(moment: datetime | None) -> str:
    return f"{moment:%Y-%m-%d %H:%M} UTC" if moment is not None else "-"


def _chart(counts: dict[str, int], width: float) -> Any:
    from reportlab.graphics.charts.barcharts import HorizontalBarChart
    from reportlab.graphics.shapes import Drawing, String
    from reportlab.lib import colors

    regular, bold = _faces()
    labels = [label for _, label in CHART]
    values = [counts.get(key, 0) for key, _ in CHART]
    height = 16 * len(CHART) + 30
    drawing = Drawing(width, height)
    chart = HorizontalBarChart()
    chart.x, chart.y = 95, 10
    chart.width, chart.height = width - 160, height - 30
    chart.data = [list(reversed(values))]
    chart.categoryAxis.categoryNames = list(reversed(labels))
    chart.categoryAxis.labels.fontName, chart.categoryAxis.labels.fontSize = regular, 8
    chart.valueAxis.valueMin = 0
    chart.valueAxis.valueMax = max(1, max(values)) * 1.15
    chart.valueAxis.labels.fontName, chart.valueAxis.labels.fontSize = regular, 7
    chart.bars[0].fillColor = colors.HexColor("#4a6fa5")
    chart.barLabelFormat = "%d"
    chart.barLabels.fontName, chart.barLabels.fontSize = regular, 7
    chart.barLabels.nudge = 10
    drawing.add(chart)
    drawing.add(String(0, height - 8, "Scans and codes by class", fontName=bold, fontSize=9))
    return drawing


def _table(rows: list[list[str]], widths: Sequence[float]) -> Any:
    """A table of plain text (the header row bold); a cell too wide for its column wraps."""
    from xml.sax.saxutils import escape

    from reportlab.lib import colors
    from reportlab.lib.styles import ParagraphStyle
    from reportlab.pdfbase.pdfmetrics import stringWidth
    from reportlab.platypus import Paragraph, Table, TableStyle

    regular, bold = _faces()
    styles = (ParagraphStyle("count-head", fontName=bold, fontSize=8, leading=10),
              ParagraphStyle("count-cell", fontName=regular, fontSize=8, leading=10))  # fmt: skip
    room = [width - 2 * _PADDING for width in widths]

    def cell(text: str, column: int, font: str, style: Any) -> Any:
        # a Paragraph costs several times a plain string: only where the text must wrap
        return Paragraph(escape(text), style) if stringWidth(text, font, 8) > room[column] else text

    cells = [
        [cell(text, column, bold if number == 0 else regular, styles[number != 0]) for column, text in enumerate(row)]
        for number, row in enumerate(rows)
    ]
    table = Table(cells, colWidths=list(widths), repeatRows=1)
    table.setStyle(TableStyle([
        ("FONT", (0, 0), (-1, -1), regular, 8),
        ("FONT", (0, 0), (-1, 0), bold, 8),
        ("LEFTPADDING", (0, 0), (-1, -1), _PADDING),
        ("RIGHTPADDING", (0, 0), (-1, -1), _PADDING),
        ("LINEBELOW", (0, 0), (-1, 0), 0.5, colors.black),
        ("ROWBACKGROUNDS", (0, 1), (-1, -1), [colors.white, colors.HexColor("#f0f0f0")]),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
    ]))  # fmt: skip
    return table


def _where(entry: dict[str, Any]) -> str:
    file = entry.get("file")
    line = entry.get("line")
    return f"{file} line {line}" if file else f"line {line}" if line else ""


def _lists(result: dict[str, Any]) -> list[tuple[str, list[str], list[list[str]], list[float]]]:
    """(title, header, rows, column widths in points) of each list printed."""
    missing = [[e["display"] or e["code"], e.get("expected_place") or "", _when_text(e.get("last_seen_at")),
                e.get("last_seen_where") or "", e.get("perhaps") or ""] for e in result.get("missing", [])]  # fmt: skip
    elsewhere = [[e["display"] or e["code"], e.get("expected_place") or "", ", ".join(e.get("seen_at_places", [])),
                  _where(e)] for e in result.get("elsewhere", [])]  # fmt: skip
    voided = [[e["display"] or e["code"], e.get("reason") or "", e.get("replacement_display") or e.get("replacement") or "", _where(e)]
              for e in result.get("voided", [])]  # fmt: skip
    typos = []
    for kind in ("bad_check", "not_issued", "malformed"):
        for e in result.get(kind, []):
            options = e.get("likely") or []
            meant = f"{options[0]['display']} ({options[0]['description']})" if options else ""
            typos.append([e.get("scanned") or e.get("code") or "", kind.replace("_", " "), meant, _where(e)])
    others = [[e.get("scanned") or "", f"{e['series']}: {e.get('display') or e['code']} ({e['status']})", _where(e)]
              for e in result.get("other_series", [])]  # fmt: skip
    return [
        ("Missing: expected, not scanned", ["code", "expected place", "last seen", "where", "perhaps typed on"],
         missing, [95, 110, 90, 90, 95]),
        ("Found elsewhere", ["code", "expected at", "seen at", "scanned on"], elsewhere, [95, 130, 130, 125]),
        ("Voided but still present: pull them", ["code", "reason", "replaced by", "scanned on"], voided,
         [95, 170, 90, 125]),
        ("Typos and unreadable scans, with the code probably meant", ["scanned", "class", "probably meant", "scanned on"],
         typos, [100, 60, 200, 120]),
        ("Codes of other series", ["scanned", "series: code", "scanned on"], others, [120, 220, 140]),
    ]  # fmt: skip


def _when_text(text: str | None) -> str:
    return text.replace("T", " ").removesuffix("Z") + " UTC" if text else ""


def write_pdf(info: CountInfo, files: Sequence[FileInfo], result: dict[str, Any], stream: IO[bytes]) -> None:
    """Write the report of count ``info`` (its ``files`` and ``result``) as a PDF to ``stream``."""
    from xml.sax.saxutils import escape

    from reportlab.lib.pagesizes import A4
    from reportlab.lib.styles import ParagraphStyle, getSampleStyleSheet
    from reportlab.lib.units import mm
    from reportlab.platypus import Paragraph, SimpleDocTemplate, Spacer

    regular, bold = _faces()
    sample = getSampleStyleSheet()
    styles = {
        name: ParagraphStyle(f"count-{name}", parent=sample[name], fontName=regular if name == "BodyText" else bold)
        for name in ("Title", "Heading2", "Heading3", "BodyText")
    }
    body, heading = styles["BodyText"], styles["Heading2"]
    document = SimpleDocTemplate(
        stream, pagesize=A4, leftMargin=18 * mm, rightMargin=18 * mm, topMargin=16 * mm, bottomMargin=16 * mm,
        title=f"Stock count {info.name}", author=info.opened_by,
    )  # fmt: skip
    width = A4[0] - 36 * mm
    counts = result.get("counts", {})
    state = "closed" if info.state == "closed" else "open (provisional: scans may still be added)"
    story: list[Any] = [
        Paragraph(escape(f"Stock count {info.name}"), styles["Title"]),
        Paragraph(escape(f"Series {info.series}; scope: {result.get('scope', '')}; state: {state}"), body),
        Paragraph(escape(f"Opened {_when(info.opened_at)} by {info.opened_by}; closed {_when(info.closed_at)}"
                         + (f" by {info.closed_by}" if info.closed_by else "")), body),
        Paragraph(escape(f"Scan times written without a time zone were read in {result.get('zone', info.zone)}."), body),
        Spacer(1, 4 * mm),
    ]
    expected, found = result.get("expected", 0), result.get("found", 0)
    share = f" ({100 * found / expected:.1f} %)" if expected else ""
    story.append(Paragraph(escape(f"Found {found:,} of {expected:,} expected codes{share}; "
                                  f"{result.get('scans', 0):,} scans in {len(files)} files."), styles["Heading3"]))  # fmt: skip
    file_rows = [["file", "scanner", "scans", "blank", "comments", "added"]] + [
        [item.name, item.scanner or "", f"{item.scans:,}", str(item.blank_lines), str(item.comment_lines),
         f"{_when(item.added_at)} by {item.added_by}"] for item in files
    ]  # fmt: skip
    story += [_table(file_rows, [115, 70, 45, 35, 55, 170]), Spacer(1, 4 * mm)]
    count_rows = [["class", "count", "meaning"]] + [
        [key.replace("_", " "), f"{counts.get(key, 0):,}", MEANINGS[key]] for key in COUNT_KEYS
    ] + [["blank lines", f"{counts.get('blank_lines', 0):,}", "empty lines in the files"],
         ["comment lines", f"{counts.get('comment_lines', 0):,}", "lines starting with # or //"]]  # fmt: skip
    story += [_table(count_rows, [90, 60, 320]), Spacer(1, 4 * mm), _chart(counts, width)]
    for title, header, rows, widths in _lists(result):
        if not rows:
            continue
        story.append(Paragraph(escape(f"{title} ({len(rows):,})"), heading))
        story.append(_table([header, *rows[:MAX_ROWS]], widths))
        if len(rows) > MAX_ROWS:
            story.append(Paragraph(escape(f"... and {len(rows) - MAX_ROWS:,} more (the CSV report lists them all)"), body))
    story += [
        Spacer(1, 12 * mm),
        Paragraph("Counted by: ______________________________  Date: ______________", body),
        Spacer(1, 8 * mm),
        Paragraph("Checked and signed by: ______________________  Date: ______________", body),
    ]
    document.build(story)


__all__ = ["MAX_ROWS", "write_pdf"]
