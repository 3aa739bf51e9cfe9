"""Benchmark: 10,000 Code 128 labels into one PDF, issuer's renderer against a minimal
reportlab script drawing the same barcodes and text on the same grid, side by side.

Run: .venv/bin/python tests/benchmarks/bench_labels.py [COUNT] [ROUNDS]
Target (issue 4): issuer within 1.5x of the minimal script.

The codes are invented Quillmere tool tags (prefix QTL, Luhn check digit).
"""

from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path

from reportlab.graphics.barcode.code128 import Code128
from reportlab.pdfgen.canvas import Canvas

from issuer.checking.codes import CodeFormat
from issuer.checking.schemes import get_scheme
from issuer.labels import LabelContent, Placement, get_layout, render_sheet
from issuer.labels.fonts import font_set
from issuer.labels.plan import PT_PER_MM

# the same embedded TrueType face issuer draws codes with: a hand-written script that
# prints any name needs one too (the PDF's built-in Courier covers Western Europe only)
CODE_FACE = font_set().face("code").name


def minimal_script(
    labels: list[LabelContent], path: Path, module_mm: float, placements: tuple[Placement, ...]
) -> None:
    """What someone would write by hand: reportlab's Code128 flowable drawn at each cell's
    barcode position, the grouped code centred beneath, a new page every 24 labels."""
    layout = get_layout("a4-3x8")
    canvas = Canvas(
        str(path), pagesize=(layout.page_width * PT_PER_MM, layout.page_height * PT_PER_MM)
    )
    page_h = layout.page_height
    page = 0
    first = placements[0]
    bar_h = first.symbol.height * PT_PER_MM
    size = 12.0
    for label, spot in zip(labels, placements):
        if spot.page != page:
            canvas.showPage()
            page = spot.page
        barcode = Code128(label.code, barWidth=module_mm * PT_PER_MM, barHeight=bar_h, quiet=0)
        barcode.drawOn(canvas, spot.symbol.x * PT_PER_MM, (page_h - spot.symbol.bottom) * PT_PER_MM)
        canvas.setFont(CODE_FACE, size)
        centre = spot.cell.x + spot.cell.width / 2
        canvas.drawCentredString(
            centre * PT_PER_MM, (page_h - spot.symbol.bottom - 5) * PT_PER_MM, label.display
        )
    canvas.showPage()
    canvas.save()


def main() -> None:
    count = int(sys.argv[1]) if len(sys.argv) > 1 else 10_000
    rounds = int(sys.argv[2]) if len(sys.argv) > 2 else 3
    shape = CodeFormat(get_scheme("luhn"), length=7, prefix="QTL", group=(4, 4))
    labels = [
        LabelContent(code, shape.display(code))
        for code in (shape.code_for_base(n) for n in range(count))
    ]
    layout = get_layout("a4-3x8")
    ours: list[float] = []
    theirs: list[float] = []
    with tempfile.TemporaryDirectory() as folder:
        out = Path(folder) / "issuer.pdf"
        base = Path(folder) / "minimal.pdf"
        result = render_sheet(labels[:24], layout, out)  # warm-up, and the geometry to copy
        for _ in range(rounds):
            start = time.perf_counter()
            result = render_sheet(labels, layout, out)
            ours.append(time.perf_counter() - start)
            start = time.perf_counter()
            minimal_script(labels, base, result.module_mm, result.placements)
            theirs.append(time.perf_counter() - start)
        sizes = out.stat().st_size, base.stat().st_size
    best_ours, best_theirs = min(ours), min(theirs)
    print(f"labels: {count}, pages: {result.pages}, rounds: {rounds}")
    print(
        f"issuer render_sheet : best {best_ours:.2f} s, "
        f"median {statistics.median(ours):.2f} s, {sizes[0]:,} bytes"
    )
    print(
        f"minimal reportlab   : best {best_theirs:.2f} s, "
        f"median {statistics.median(theirs):.2f} s, {sizes[1]:,} bytes"
    )
    print(
        f"ratio issuer/minimal: best {best_ours / best_theirs:.2f}, median "
        f"{statistics.median(ours) / statistics.median(theirs):.2f} (target <= 1.5)"
    )


if __name__ == "__main__":
    main()
