"""Printing from the register through the Python API: which codes a selection picks and in
what order, what a print records (counts, one log entry per code, one transaction), and
that a failed job leaves neither a file nor a log entry. Sheets are proved by decoding
every barcode with zxing-cpp from the whole rasterised page."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import event, func, select

from issuer.errors import Conflict, InvalidCheck, InvalidFormat, LabelError, NotFound
from issuer.labels import get_layout
from issuer.labels.printjob import LabelOptions, label_contents, parse_lines, print_selection
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import IssueResult, issue_codes
from issuer.register.lifecycle import code_history, void_code
from issuer.register.logverify import verify_chain
from issuer.register.models import IssuedCode, LogEntry
from issuer.register.printing import (
    VOID_MARK,
    VOID_OMIT,
    record_prints,
    select_for_printing,
)

from ..labels.conftest import decode_pdf, page_text

TOOLS_TITLE = "Quillmere Tool Library"
CARDS_TITLE = "Quillmere Makers' Co-op"


def _tools(register: Any, count: int = 30) -> IssueResult:
    """Invented Quillmere tool tags, issued in order: QTL + 7 digits + Luhn."""
    add_series(
        register,
        SeriesSpec("tools", "luhn", 7, prefix="QTL", group=(4, 4), title=TOOLS_TITLE),
    )
    return issue_codes(register, "tools", count, note="workshop")


def _cards(register: Any, count: int = 6) -> IssueResult:
    """Invented Quillmere member cards, scattered: QMC + 9 digits + Luhn."""
    add_series(
        register,
        SeriesSpec(
            "cards", "luhn", 9, prefix="QMC", mode="scattered", group=(5, 5), title=CARDS_TITLE
        ),
    )
    return issue_codes(register, "cards", count, holder="R. Fennimore")


def _print_counts(register: Any, codes: list[str]) -> list[int]:
    with register.reading() as session:
        found = dict(
            session.execute(
                select(IssuedCode.code, IssuedCode.print_count).where(IssuedCode.code.in_(codes))
            ).all()
        )
    return [found[code] for code in codes]


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    """An empty folder for label files (the register file lives in ``tmp_path``)."""
    path = tmp_path / "labels"
    path.mkdir()
    return path


def _log_size(register: Any) -> int:
    with register.reading() as session:
        return int(session.scalar(select(func.count()).select_from(LogEntry)) or 0)


def in_sheet_order(path: Path, layout_name: str) -> list[str]:
    """Decoded texts read page by page, row by row, left to right — each symbol placed
    in the layout cell that holds its centre."""
    layout = get_layout(layout_name)
    placed = []
    for found in decode_pdf(path):
        cells = [
            (row, column)
            for row in range(layout.rows)
            for column in range(layout.columns)
            if layout.cell(row, column).contains(*found.centre)
        ]
        assert len(cells) == 1, f"{found.text} is not inside exactly one cell"
        placed.append((found.page, *cells[0], found.text))
    return [text for *_, text in sorted(placed)]


# -- selection -----------------------------------------------------------------------


def test_batch_in_issue_order(register: Any) -> None:
    batch = _tools(register, 12)
    chosen = select_for_printing(register, batch=batch.batch)
    assert chosen.codes == [info.code for info in batch.codes]
    first = chosen.rows[0]
    assert first.display == batch.codes[0].display == "QTL-0000-0018"
    assert (first.series, first.series_title, first.note) == ("tools", TOOLS_TITLE, "workshop")
    assert "batch" in chosen.description


def test_series_range_by_number_for_an_in_order_series(register: Any) -> None:
    codes = [info.code for info in _tools(register, 20).codes]
    # a second batch, so the range crosses batches
    more = [info.code for info in issue_codes(register, "tools", 3).codes]
    everything = codes + more
    # the ends as a person types them: grouped, lower case, spaces
    chosen = select_for_printing(
        register, series="tools", first=" qtl-0000-0059 ", last=everything[21].lower()
    )
    assert chosen.codes == everything[4:22]
    assert [row.code for row in select_for_printing(register, series="tools").rows] == everything
    only_to = select_for_printing(register, series="tools", last=everything[2])
    assert only_to.codes == everything[:3]


def test_series_range_by_issue_order_for_a_scattered_series(register: Any) -> None:
    issued = [info.code for info in _cards(register, 6).codes]
    # scattered numbers do not run in number order: the range follows issue order
    chosen = select_for_printing(register, series="cards", first=issued[1], last=issued[4])
    assert chosen.codes == issued[1:5]
    assert all(row.holder == "R. Fennimore" for row in chosen.rows)


def test_named_codes_keep_their_order_and_are_canonicalised(register: Any) -> None:
    codes = [info.code for info in _tools(register, 5).codes]
    typed = [codes[3].lower(), "QTL 0000 0018", codes[1]]
    chosen = select_for_printing(register, codes=typed)
    assert chosen.codes == [codes[3], codes[0], codes[1]]


def test_named_code_problems_are_clear(register: Any) -> None:
    codes = [info.code for info in _tools(register, 3).codes]
    # source: python-stdnum's Luhn as the reference for a valid tag never issued (base 900)
    from stdnum import luhn

    never = "QTL0000900" + luhn.calc_check_digit("0000900")
    with pytest.raises(NotFound, match="never issued"):
        select_for_printing(register, codes=[never])
    typo = codes[0][:-1] + str((int(codes[0][-1]) + 1) % 10)
    with pytest.raises(InvalidCheck):
        select_for_printing(register, codes=[typo])
    with pytest.raises(InvalidFormat, match="second time"):
        select_for_printing(register, codes=[codes[0], codes[0].lower()])


def test_exactly_one_way_of_choosing(register: Any) -> None:
    batch = _tools(register, 3)
    with pytest.raises(InvalidFormat, match="one way"):
        select_for_printing(register)
    with pytest.raises(InvalidFormat, match="one way"):
        select_for_printing(register, batch=batch.batch, series="tools")
    with pytest.raises(InvalidFormat, match="needs a series"):
        select_for_printing(register, batch=batch.batch, first=batch.codes[0].code)
    with pytest.raises(NotFound, match="no batch 99"):
        select_for_printing(register, batch=99)
    with pytest.raises(InvalidFormat, match="comes after"):
        select_for_printing(
            register, series="tools", first=batch.codes[2].code, last=batch.codes[0].code
        )


def test_range_end_from_another_series_is_refused(register: Any) -> None:
    _tools(register, 3)
    card = _cards(register, 1).codes[0].code
    with pytest.raises(InvalidFormat, match="--from QMC-.* belongs to series cards, not tools"):
        select_for_printing(register, series="tools", first=card)


def test_empty_selection(register: Any) -> None:
    add_series(register, SeriesSpec("passes", "luhn", 6, prefix="QDP"))
    with pytest.raises(NotFound, match="nothing to print"):
        select_for_printing(register, series="passes")


def test_voided_codes_refused_marked_or_left_out(register: Any) -> None:
    codes = [info.code for info in _tools(register, 8).codes]
    void_code(register, codes[2], reason="tag snapped off")
    void_code(register, codes[5], reason="lost")
    with pytest.raises(Conflict, match="2 voided codes") as refused:
        select_for_printing(register, series="tools")
    assert "QTL-0000-0034" in str(refused.value)  # the display form of codes[2]
    marked = select_for_printing(register, series="tools", void=VOID_MARK)
    assert [row.void for row in marked.rows] == [i in (2, 5) for i in range(8)]
    labels = label_contents(marked.rows)
    assert [label.void for label in labels] == [row.void for row in marked.rows]
    omitted = select_for_printing(register, series="tools", void=VOID_OMIT)
    assert omitted.codes == [c for i, c in enumerate(codes) if i not in (2, 5)]
    assert len(omitted.omitted_void) == 2
    with pytest.raises(NotFound, match="left out"):
        select_for_printing(register, codes=[codes[2]], void=VOID_OMIT)


# -- what goes on a label ----------------------------------------------------------------


def test_label_lines(register: Any) -> None:
    _cards(register, 2)
    rows = select_for_printing(register, series="cards").rows
    assert parse_lines("Holder, title") == ("holder", "title")
    assert parse_lines("none") == () == parse_lines("")
    with pytest.raises(InvalidFormat, match="unknown label line"):
        parse_lines("title,colour")
    label = label_contents(rows, ("holder", "title", "note"), caption="Return to the desk")[0]
    # the note is empty for these cards: no blank line for it
    assert label.lines == ("R. Fennimore", CARDS_TITLE, "Return to the desk")
    assert label.code == rows[0].code and label.display == rows[0].display


# -- recording prints ----------------------------------------------------------------


def test_record_prints_counts_and_logs_one_entry_per_code(register: Any) -> None:
    codes = [info.code for info in _tools(register, 4).codes]
    before = _log_size(register)
    assert record_prints(register, codes[:3], layout="a4-3x8", symbology="code128",
                         file="/srv/labels/sheet.pdf") == 3  # fmt: skip
    assert _print_counts(register, codes) == [1, 1, 1, 0]
    assert record_prints(register, [codes[0]], reason="label faded", reprint=True) == 1
    assert _print_counts(register, codes) == [2, 1, 1, 0]
    assert _log_size(register) == before + 4
    with register.reading() as session:
        record, events = code_history(session, codes[0])
        assert verify_chain(session).intact
    assert record.print_count == 2
    prints = [e.as_dict() for e in events if e.action in ("print", "reprint")]
    assert [(e["action"], e["actor"]) for e in prints] == [
        ("print", "test-clerk"),
        ("reprint", "test-clerk"),
    ]
    # the file's name only, never its folder
    assert prints[0]["detail"] == {"layout": "a4-3x8", "symbology": "code128", "file": "sheet.pdf"}
    assert prints[1]["detail"] == {"reason": "label faded"}


def test_reprint_needs_a_reason(register: Any) -> None:
    code = _tools(register, 1).codes[0].code
    before = _log_size(register)
    for reason in (None, "", "   "):
        with pytest.raises(InvalidFormat, match="reason"):
            record_prints(register, [code], reason=reason, reprint=True)
    assert _print_counts(register, [code]) == [0] and _log_size(register) == before


def test_a_code_voided_meanwhile_is_not_recorded(register: Any) -> None:
    codes = [info.code for info in _tools(register, 3).codes]
    void_code(register, codes[1], reason="lost")
    before = _log_size(register)
    with pytest.raises(Conflict, match="nothing was recorded"):
        record_prints(register, codes)
    assert _print_counts(register, codes) == [0, 0, 0] and _log_size(register) == before
    # printed marked VOID, it is recorded, and the entry says so
    record_prints(register, codes, void_labels=[codes[1]])
    with register.reading() as session:
        _, events = code_history(session, codes[1])
    assert events[-1].as_dict()["detail"] == {"void_label": True}


def test_a_large_job_is_one_transaction(register: Any) -> None:
    codes = [info.code for info in _tools(register, 1200).codes]
    commits: list[int] = []

    def count(_connection: Any) -> None:
        commits.append(1)

    event.listen(register.engine, "commit", count)
    try:
        assert record_prints(register, codes, layout="a4-3x8") == 1200
    finally:
        event.remove(register.engine, "commit", count)
    assert len(commits) == 1
    assert set(_print_counts(register, codes)) == {1}
    with register.reading() as session:
        assert verify_chain(session).intact


# -- whole jobs: draw, then record -----------------------------------------------------


def test_print_selection_sheet_decodes_in_order_and_records(register: Any, folder: Path) -> None:
    issued = _tools(register, 28).codes
    codes = [info.code for info in issued]
    selection = select_for_printing(register, series="tools")
    out = folder / "tools.pdf"
    outcome = print_selection(
        register, selection, out, LabelOptions(get_layout("a4-3x8"), lines=("title", "note"))
    )
    assert (outcome.labels, outcome.pages, outcome.logged) == (28, 2, 28)
    # source: zxing-cpp, the reference decoder, reading each whole 300 dpi page; each
    # barcode carries the printed line (the display form)
    assert in_sheet_order(out, "a4-3x8") == [info.display for info in issued]
    text = " ".join(page_text(out))
    assert "QTL-0000-0018" in text and TOOLS_TITLE in text and "workshop" in text
    assert set(_print_counts(register, codes)) == {1}
    assert sorted(p.name for p in folder.iterdir()) == ["tools.pdf"]


def test_failed_drawing_writes_nothing_and_logs_nothing(register: Any, folder: Path) -> None:
    codes = [info.code for info in _tools(register, 3).codes]
    selection = select_for_printing(register, codes=codes)
    before = _log_size(register)
    old = folder / "tags.pdf"
    old.write_bytes(b"an earlier sheet")
    # a 2 x 1 cm label cannot hold a Code 128 tag with its quiet zones
    tiny = get_layout(
        "tiny",
        {"tiny": {"page": "a4", "rows": 1, "columns": 1, "label_width": 20, "label_height": 10}},
    )
    with pytest.raises(LabelError, match="too small"):
        print_selection(register, selection, old, LabelOptions(tiny), force=True)
    with pytest.raises(LabelError, match="skip"):
        print_selection(register, selection, old, LabelOptions(get_layout("a4-3x8"), skip=24), force=True)
    assert old.read_bytes() == b"an earlier sheet"
    assert sorted(p.name for p in folder.iterdir()) == ["tags.pdf"]
    assert _log_size(register) == before and _print_counts(register, codes) == [0, 0, 0]


def test_failed_recording_leaves_no_new_file(register: Any, folder: Path) -> None:
    codes = [info.code for info in _tools(register, 3).codes]
    selection = select_for_printing(register, codes=codes)
    # another desk voids a code after the selection, while the labels are drawn
    void_code(register, codes[2], reason="reported stolen")
    before = _log_size(register)
    out = folder / "tags.pdf"
    with pytest.raises(Conflict, match="nothing was recorded"):
        print_selection(register, selection, out, LabelOptions(get_layout("a4-3x8")))
    assert list(folder.iterdir()) == []
    assert _log_size(register) == before and _print_counts(register, codes) == [0, 0, 0]


def test_reprint_of_one_png_label(register: Any, folder: Path) -> None:
    from ..labels.conftest import decode_image

    card = _cards(register, 2).codes[1]
    code = card.code
    selection = select_for_printing(register, codes=[code])
    out = folder / "card.png"
    with pytest.raises(InvalidFormat, match="reason"):
        print_selection(register, selection, out, LabelOptions(get_layout("roll-50x25")),
                        reprint=True)  # fmt: skip
    assert not out.exists()
    outcome = print_selection(
        register, selection, out, LabelOptions(get_layout("roll-50x25"), symbology="qr"),
        reason="card cracked", reprint=True,
    )  # fmt: skip
    assert outcome.format == "png" and outcome.logged == 1
    from PIL import Image

    with Image.open(out) as image:
        # source: zxing-cpp, the reference decoder, over the whole label image
        assert [f.text for f in decode_image(image)] == [card.display]
    with register.reading() as session:
        record, events = code_history(session, code)
    assert record.print_count == 1
    assert events[-1].action == "reprint" and events[-1].actor == "test-clerk"
    assert events[-1].as_dict()["detail"]["reason"] == "card cracked"
