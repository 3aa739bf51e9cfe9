"""``issuer labels`` and ``issuer reprint`` through the command line: sheets proved by
decoding every barcode with zxing-cpp from the whole rasterised page, prints counted and
logged (and shown by ``issuer history``), and bad input refused with one line on stderr,
exit code 2, no file written and nothing logged."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import func, select

from issuer.labels import Layout, get_layout
from issuer.register.models import IssuedCode, LogEntry
from issuer.register.store import open_register

from ..labels.conftest import MM_PER_PT, decode_pdf, page_text, scanned

TOOLS_TITLE = "Quillmere Tool Library"


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    """An empty folder for label files (the register file lives in ``tmp_path``)."""
    path = tmp_path / "labels"
    path.mkdir()
    return path


def _ok(result: Any) -> Any:
    assert result.exit_code == 0, result.output
    return result


def _tools(cli: Any, count: int) -> tuple[int, list[str]]:
    """Invented Quillmere tool tags, issued in order (QTL + 7 digits + Luhn); returns the
    batch and its codes."""
    _ok(cli("series", "add", "tools", "--scheme", "luhn", "--length", "7", "--prefix", "QTL",
            "--group", "4,4", "--title", TOOLS_TITLE))  # fmt: skip
    data = json.loads(_ok(cli("issue", "tools", "-n", str(count), "--json")).stdout)
    return data["batch"], [entry["code"] for entry in data["codes"]]


def _cards(cli: Any, count: int) -> list[str]:
    """Invented Quillmere member cards, scattered (QMC + 9 digits + Luhn)."""
    _ok(cli("series", "add", "cards", "--scheme", "luhn", "--length", "9", "--prefix", "QMC",
            "--mode", "scattered", "--group", "5,5", "--title", "Quillmere Makers' Co-op"))  # fmt: skip
    data = json.loads(_ok(cli("issue", "cards", "-n", str(count), "--json")).stdout)
    return [entry["code"] for entry in data["codes"]]


def _state(db_path: Path) -> tuple[int, dict[str, int]]:
    """The number of log entries and every code's print count."""
    register = open_register(str(db_path), actor="reader")
    with register.reading() as session:
        entries = int(session.scalar(select(func.count()).select_from(LogEntry)) or 0)
        counts = dict(session.execute(select(IssuedCode.code, IssuedCode.print_count)).all())
    register.close()
    return entries, {str(code): int(n) for code, n in counts.items()}


def in_sheet_order(path: Path, layout: Layout | str) -> list[str]:
    """The codes read from the decoded symbols page by page, row by row, left to right —
    each symbol placed in the layout cell that holds its centre. A symbol carries its
    printed line (the display form); :func:`scanned` reads it as issuer reads a scan."""
    layout = get_layout(layout) if isinstance(layout, str) else layout
    placed = []
    for found in decode_pdf(path):
        cells = [
            (row, column)
            for row in range(layout.rows)
            for column in range(layout.columns)
            if layout.cell(row, column).contains(*found.centre)
        ]
        assert len(cells) == 1, f"{found.text} is not inside exactly one cell"
        placed.append((found.page, *cells[0], scanned(found.text)))
    return [text for *_, text in sorted(placed)]


def _refused(result: Any, words: str) -> None:
    """One clear line on stderr, exit code 2, no traceback."""
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("issuer: "), result.stderr
    assert words in lines[0], lines[0]
    assert "Traceback" not in result.output


# -- sheets that scan -----------------------------------------------------------------


def test_batch_sheet_over_two_pages(cli: Any, db_path: Path, folder: Path) -> None:
    batch, codes = _tools(cli, 30)
    out = folder / "batch.pdf"
    result = _ok(cli("labels", "--batch", str(batch), "--out", str(out), "--skip", "2"))
    said = " ".join(result.stdout.split())
    assert f"30 labels on 2 pages written to {out}" in said
    assert "100 % scale" in said
    # source: zxing-cpp, the reference decoder, reading each whole 300 dpi page
    assert in_sheet_order(out, "a4-3x8") == codes
    found = decode_pdf(out)
    # the first two cells of the first sheet stay empty
    first = get_layout("a4-3x8")
    assert not any(
        f.page == 0 and first.cell(0, c).contains(*f.centre) for f in found for c in (0, 1)
    )
    text = " ".join(page_text(out))
    assert "QTL-0000-0018" in text and TOOLS_TITLE in text
    # what a scanner types is the printed line, character for character
    assert sorted(f.text for f in found) == sorted(set(text.split()) & {f.text for f in found})
    assert "QTL-0000-0018" in {f.text for f in found}
    _, counts = _state(db_path)
    assert all(counts[code] == 1 for code in codes)
    assert sorted(p.name for p in folder.iterdir()) == ["batch.pdf"]


def test_series_range_as_qr(cli: Any, folder: Path) -> None:
    _, codes = _tools(cli, 12)
    out = folder / "range.pdf"
    result = _ok(cli("labels", "--series", "tools", "--from", "qtl 0000 0034", "--to", codes[9],
                     "--barcode", "qr", "--out", str(out), "--json"))  # fmt: skip
    data = json.loads(result.stdout)  # only JSON on stdout
    assert data["codes"] == codes[2:10]
    assert (data["labels"], data["pages"], data["symbology"], data["layout"]) == (
        8,
        1,
        "qr",
        "a4-3x8",
    )
    assert data["actor"] == "test-clerk" and data["logged"] == 8
    # source: zxing-cpp, the reference decoder
    found = decode_pdf(out)
    assert all(f.format == "QR Code" for f in found)
    assert in_sheet_order(out, "a4-3x8") == codes[2:10]


def test_named_codes_as_data_matrix(cli: Any, folder: Path) -> None:
    _, codes = _tools(cli, 6)
    cards = _cards(cli, 3)
    wanted = [cards[2], codes[4], codes[0].lower()]
    out = folder / "mixed.pdf"
    _ok(cli("labels", *wanted, "--barcode", "datamatrix", "--lines", "title", "--out", str(out)))
    # source: zxing-cpp, the reference decoder
    assert in_sheet_order(out, "a4-3x8") == [cards[2], codes[4], codes[0]]
    assert all(f.format == "Data Matrix" for f in decode_pdf(out))


def test_scattered_series_prints_in_issue_order(cli: Any, folder: Path) -> None:
    cards = _cards(cli, 5)
    out = folder / "cards.pdf"
    _ok(cli("labels", "--series", "cards", "--from", cards[1], "--out", str(out), "--lines",
            "none", "--caption", "Return to the desk"))  # fmt: skip
    # source: zxing-cpp, the reference decoder
    assert in_sheet_order(out, "a4-3x8") == cards[1:]
    assert "Return to the desk" in page_text(out)[0]


def test_user_layout_from_the_config(
    cli: Any, folder: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    config = tmp_path / "issuer.toml"
    config.write_text(
        '[layouts.bin-2x4]\npage = "a5"\nrows = 4\ncolumns = 2\nlabel_width = 70\n'
        'label_height = 40\ndescription = "Quillmere parts bins"\n',
        encoding="utf-8",
    )
    monkeypatch.setenv("ISSUER_CONFIG", str(config))
    _, codes = _tools(cli, 5)
    out = folder / "bins.pdf"
    _ok(cli("labels", "--series", "tools", "--layout", "bin-2x4", "--out", str(out)))
    import pypdfium2 as pdfium

    document = pdfium.PdfDocument(str(out))
    try:
        width, height = document[0].get_size()
    finally:
        document.close()
    # source: ISO 216, A5 is 148 x 210 mm
    assert abs(width * MM_PER_PT - 148) < 0.1 and abs(height * MM_PER_PT - 210) < 0.1
    from issuer.config import load_settings

    layout = get_layout("bin-2x4", load_settings().section("layouts"))
    # source: zxing-cpp, the reference decoder
    assert in_sheet_order(out, layout) == codes


def test_one_svg_label(cli: Any, folder: Path) -> None:
    _, codes = _tools(cli, 2)
    out = folder / "tag.svg"
    result = _ok(cli("labels", codes[1], "--out", str(out)))
    assert "1 label written to" in " ".join(result.stdout.split())
    assert out.read_text(encoding="utf-8").count("QTL-0000-0026") == 1
    # the default single-label layout is the 50 x 25 mm roll label
    assert 'width="50mm"' in out.read_text(encoding="utf-8")


# -- reprints and history ---------------------------------------------------------------


def test_reprint_counts_and_history_shows_who_and_why(
    cli: Any, db_path: Path, folder: Path
) -> None:
    batch, codes = _tools(cli, 4)
    _ok(cli("labels", "--batch", str(batch), "--out", str(folder / "first.pdf")))
    out = folder / "again.pdf"
    result = _ok(cli("reprint", codes[1], codes[3], "--out", str(out), "--reason",
                     "labels scorched at the forge", "--actor", "desk-2"))  # fmt: skip
    said = " ".join(result.stdout.split())
    assert "2 labels on 1 page written to" in said and "desk-2" in said
    # source: zxing-cpp, the reference decoder
    assert in_sheet_order(out, "a4-3x8") == [codes[1], codes[3]]
    _, counts = _state(db_path)
    assert [counts[code] for code in codes] == [1, 2, 1, 2]

    history = json.loads(_ok(cli("history", codes[1], "--json")).stdout)
    assert history["code"]["print_count"] == 2
    prints = [e for e in history["events"] if e["action"] in ("print", "reprint")]
    assert [(e["action"], e["actor"]) for e in prints] == [
        ("print", "test-clerk"),
        ("reprint", "desk-2"),
    ]
    assert prints[1]["detail"]["reason"] == "labels scorched at the forge"
    assert prints[1]["detail"]["file"] == "again.pdf"
    shown = " ".join(_ok(cli("history", codes[1])).stdout.split())
    assert "printed 2 time(s)" in shown and "reprint" in shown and "scorched" in shown
    # a code never reprinted shows its one print only
    other = json.loads(_ok(cli("history", codes[0], "--json")).stdout)
    assert [e["action"] for e in other["events"]] == ["issue", "print"]
    assert json.loads(_ok(cli("log", "verify", "--json")).stdout)["intact"] is True


@pytest.mark.parametrize("reason", [None, "", "   "])
def test_reprint_needs_a_reason(cli: Any, db_path: Path, folder: Path, reason: str | None) -> None:
    _, codes = _tools(cli, 1)
    before = _state(db_path)
    out = folder / "again.pdf"
    args = ["reprint", codes[0], "--out", str(out)]
    if reason is not None:
        args += ["--reason", reason]
    result = cli(*args)
    _refused(result, "reason")
    assert list(folder.iterdir()) == [] and _state(db_path) == before


# -- refusals: one line, exit 2, no file, nothing logged ------------------------------------


def test_voided_code_refused_unless_asked_for(cli: Any, db_path: Path, folder: Path) -> None:
    batch, codes = _tools(cli, 5)
    _ok(cli("void", codes[3], "--reason", "tag lost on a site visit"))
    before = _state(db_path)
    out = folder / "batch.pdf"
    _refused(cli("labels", "--batch", str(batch), "--out", str(out)), "QTL-0000-0042")
    _refused(cli("reprint", codes[3], "--out", str(out), "--reason", "faded"), "voided")
    assert list(folder.iterdir()) == [] and _state(db_path) == before

    _ok(cli("labels", "--batch", str(batch), "--out", str(out), "--void-labels"))
    # source: zxing-cpp, the reference decoder: the VOID label still carries its code
    assert in_sheet_order(out, "a4-3x8") == codes
    assert "VOID" in page_text(out)[0]
    history = json.loads(_ok(cli("history", codes[3], "--json")).stdout)
    assert history["events"][-1]["detail"]["void_label"] is True

    left_out = folder / "without.pdf"
    result = _ok(cli("labels", "--batch", str(batch), "--out", str(left_out), "--without-void"))
    assert "Left out 1 voided or suspended code" in " ".join(result.stdout.split())
    assert in_sheet_order(left_out, "a4-3x8") == codes[:3] + codes[4:]
    _refused(
        cli("labels", "--batch", str(batch), "--out", str(folder / "x.pdf"), "--void-labels",
            "--without-void"),
        "not both",
    )  # fmt: skip


BAD_LAYOUTS = {
    # 4 columns of 60 mm do not fit a 210 mm A4 page
    "too-wide": 'page = "a4"\nrows = 2\ncolumns = 4\nlabel_width = 60\nlabel_height = 30\n'
    "margin_left = 0\nmargin_top = 0\n",
    # a 20 x 10 mm label cannot hold a tag's Code 128 with its quiet zones
    "tiny": 'page = "a4"\nrows = 1\ncolumns = 1\nlabel_width = 20\nlabel_height = 10\n',
}


@pytest.mark.parametrize(
    ("args", "words"),
    [
        (["--series", "passes"], "nothing to print"),
        (["--series", "tools", "--layout", "a4-2x7"], "unknown layout"),
        (["--series", "tools", "--skip", "24"], "skip"),
        (["--series", "tools", "--barcode", "pdf417"], "pdf417"),
        (["--series", "tools", "--lines", "title,colour"], "colour"),
        (["--series", "tools", "--gs1-prefix", "12"], "Company Prefix"),
        (["--series", "nosuch"], "no series 'nosuch'"),
        (["--batch", "99"], "no batch 99"),
        (["QTL-0000-0019"], "check character"),
        ([], "one way"),
        (["--from", "QTL-0000-0018"], "needs a series"),
        (["--series", "tools", "--batch", "1"], "one way"),
    ],
)
def test_bad_selections_and_options(
    cli: Any, db_path: Path, folder: Path, args: list[str], words: str
) -> None:
    _tools(cli, 3)
    _ok(cli("series", "add", "passes", "--scheme", "luhn", "--length", "6", "--prefix", "QDP"))
    before = _state(db_path)
    _refused(cli("labels", *args, "--out", str(folder / "labels.pdf")), words)
    assert list(folder.iterdir()) == [] and _state(db_path) == before


@pytest.mark.parametrize(
    ("layout", "words"), [("too-wide", "does not fit the page"), ("tiny", "too small")]
)
def test_layout_that_does_not_fit(
    cli: Any,
    db_path: Path,
    folder: Path,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    layout: str,
    words: str,
) -> None:
    _tools(cli, 3)
    config = tmp_path / "issuer.toml"
    config.write_text(f"[layouts.{layout}]\n{BAD_LAYOUTS[layout]}", encoding="utf-8")
    monkeypatch.setenv("ISSUER_CONFIG", str(config))
    before = _state(db_path)
    out = folder / "labels.pdf"
    out.write_bytes(b"an earlier sheet")
    # --force: the drawing is what fails here, not the existing file
    _refused(cli("labels", "--series", "tools", "--layout", layout, "--out", str(out), "--force"), words)
    # the earlier file is untouched, no half-written file is left beside it
    assert out.read_bytes() == b"an earlier sheet"
    assert [p.name for p in folder.iterdir()] == ["labels.pdf"]
    assert _state(db_path) == before


def test_output_problems(cli: Any, db_path: Path, folder: Path) -> None:
    _tools(cli, 3)
    before = _state(db_path)
    _refused(cli("labels", "--series", "tools", "--out", str(folder / "tags.docx")), ".pdf")
    _refused(
        cli("labels", "--series", "tools", "--out", str(folder / "tags.png")), "holds one label"
    )
    (folder / "sheet.pdf").mkdir()
    _refused(cli("labels", "--series", "tools", "--out", str(folder / "sheet.pdf")), "is a folder")
    (folder / "device.pdf").symlink_to("/dev/null")
    _refused(cli("labels", "--series", "tools", "--out", str(folder / "device.pdf"), "--force"), "not a regular file")
    assert sorted(p.name for p in folder.iterdir()) == ["device.pdf", "sheet.pdf"] and _state(db_path) == before


def test_gs1_giai_on_request(cli: Any, folder: Path) -> None:
    _, codes = _tools(cli, 3)
    out = folder / "gs1.pdf"
    _ok(cli("labels", "--series", "tools", "--gs1-prefix", "9521234", "--out", str(out)))
    # source: zxing-cpp reports GS1 content as (AI) fields; AI 8004 is GIAI (GS1 General
    # Specifications); 9521234 is an invented company prefix
    assert in_sheet_order(out, "a4-3x8") == [f"(8004)9521234{code}" for code in codes]
