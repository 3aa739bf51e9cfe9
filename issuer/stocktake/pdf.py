"""A count's report on paper (reportlab): what was counted and when, the counts with a bar
chart of the classes, the lists a manager acts on (missing, found elsewhere, voided but
still present, typos with the code probably meant, other series), and room to sign.

Long lists are cut at :data:`MAX_ROWS` rows with a line saying how many more there are
(the CSV report has them all).
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
#: the classes drawn in the chart, in order, with their labels
CHART = (
    ("issued", "found"), ("elsewhere", "found elsewhere"), ("missing", "missing"), ("voided", "voided"),
    ("bad_check", "bad check"), ("not_issued", "not issued"), ("malformed", "malformed"),
    ("other_series", "other series"), ("out_of_scope", "out of scope"), ("duplicates", "duplicates"),
)  # fmt: skip


def _when(moment: datetime | None) -> str:
    return f"{moment:%Y-%m-%d %H:%M} UTC" if moment is not None else "-"


def _chart(counts: dict[str, int], width: float) -> Any:
    from reportlab.graphics.charts.barcharts import HorizontalBarChart
    from reportlab.graphics.shapes import Drawing, String
    from reportlab.lib import colors

    labels = [label for _, label in CHART]
    values = [counts.get(key, 0) for key, _ in CHART]
    height = 16 * len(CHART) + 30
    drawing = Drawing(width, height)
    chart = HorizontalBarChart()
    chart.x, chart.y = 95, 10
    chart.width, chart.height = width - 160, height - 30
    chart.data = [list(reversed(values))]
    chart.categoryAxis.categoryNames = list(reversed(labels))
    chart.categoryAxis.labels.fontSize = 8
    chart.valueAxis.valueMin = 0
    chart.valueAxis.valueMax = max(1, max(values)) * 1.15
    chart.valueAxis.labels.fontSize = 7
    chart.bars[0].fillColor = colors.HexColor("#4a6fa5")
    chart.barLabelFormat = "%d"
    chart.barLabels.fontSize = 7
    chart.barLabels.nudge = 10
    drawing.add(chart)
    drawing.add(String(0, height - 8, "Scans and codes by class", fontSize=9))
    return drawing


def _table(rows: list[list[str]], widths: Sequence[float]) -> Any:
    from reportlab.lib import colors
    from reportlab.platypus import Table, TableStyle

    table = Table(rows, colWidths=list(widths), repeatRows=1)
    table.setStyle(TableStyle([
        ("FONT", (0, 0), (-1, -1), "Helvetica", 8),
        ("FONT", (0, 0), (-1, 0), "Helvetica-Bold", 8),
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
    from reportlab.lib.styles import getSampleStyleSheet
    from reportlab.lib.units import mm
    from reportlab.platypus import Paragraph, SimpleDocTemplate, Spacer

    styles = getSampleStyleSheet()
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
    story += [_table(file_rows, [120, 70, 50, 40, 50, 160]), Spacer(1, 4 * mm)]
    count_rows = [["class", "count", "meaning"]] + [
        [key.replace("_", " "), f"{counts.get(key, 0):,}", MEANINGS[key]] for key in COUNT_KEYS
    ] + [["blank lines", f"{counts.get('blank_lines', 0):,}", "empty lines in the files"],
         ["comment lines", f"{counts.get('comment_lines', 0):,}", "lines starting with # or //"]]  # fmt: skip
    story += [_table(count_rows, [90, 60, 320]), Spacer(1, 4 * mm), _chart(counts, width)]
    for title, header, rows, widths in _lists(result):
        if not rows:
            continue
        story.append(Paragraph(escape(f"{title} ({len(rows):,})"), heading))
        shown = [[escape(cell) for cell in row] for row in rows[:MAX_ROWS]]
        story.append(_table([header, *shown], widths))
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
