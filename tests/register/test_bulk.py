"""Bulk issuance: a large batch goes through the driver in chunks yet stores exactly
the rows, the log entry and the answer the one-by-one path would; codes stream to a
CSV written whole or not at all; on SQLite and PostgreSQL."""

from __future__ import annotations

import csv
import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from sqlalchemy import func, select
from stdnum import luhn, verhoeff

from issuer.checking.codes import CodeFormat
from issuer.checking.schemes import get_scheme
from issuer.errors import Exhausted
from issuer.register import bulk
from issuer.register.bulk import CodesCsv, code_texts, display_texts
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import BULK_FROM, codes_digest, issue_codes
from issuer.register.logverify import verify_chain
from issuer.register.models import IssuedCode, LogEntry
from issuer.register.series import get_series, permutation
from issuer.register.standing import BatchTexts, text_digest
from issuer.register.store import Register, open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", group=(4, 4))
MEMBERS = SeriesSpec(key="members", scheme="verhoeff", length=9, prefix="QM", group=(5, 5), mode="scattered")


def stored(register: Register, key: str) -> list[tuple[str, int, str, str | None, str | None]]:
    with register.reading() as session:
        series = get_series(session, key)
        rows = session.execute(
            select(IssuedCode.code, IssuedCode.base, IssuedCode.status, IssuedCode.holder, IssuedCode.note)
            .where(IssuedCode.series_id == series.id)
            .order_by(IssuedCode.id)
        )
        return [tuple(row) for row in rows]  # type: ignore[misc]


@pytest.fixture
def anywhere(register_url: str) -> Any:  # noqa: F811
    opened = open_register(register_url, actor="bulk-desk")
    yield opened
    opened.close()


def test_in_order_bulk_batch_stores_every_row_and_one_log_entry(anywhere: Register, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(bulk, "CHUNK", 97)  # many chunks, a short last one
    add_series(anywhere, TOOLS)
    issue_codes(anywhere, "tools", 3)
    seen: list[int] = []
    result = issue_codes(anywhere, "tools", 1_000, holder="Quillmere workshop", note="new site", progress=seen.append)
    assert sum(seen) == 1_000 and len(seen) == 11
    rows = stored(anywhere, "tools")[3:]
    assert [row[1] for row in rows] == list(range(4, 1_004))
    for code, base, status, holder, note in rows:
        # source: python-stdnum's stdnum.luhn (ISO/IEC 7812-1 Annex B)
        assert code == "QTL" + f"{base:07d}" + luhn.calc_check_digit(f"{base:07d}")
        assert (status, holder, note) == ("issued", "Quillmere workshop", "new site")
    assert [info.code for info in result.codes] == [row[0] for row in rows]
    assert [info.display for info in result.codes][:1] == [f"QTL-{rows[0][0][3:7]}-{rows[0][0][7:]}"]
    with anywhere.reading() as session:
        entry = session.scalars(select(LogEntry).where(LogEntry.batch_id == result.batch)).one()
        detail = json.loads(entry.detail)
        # every code its own salt; the entry counts them and digests their texts' digests in order
        salts = [bytes(salt) for salt in session.scalars(
            select(IssuedCode.text_salt).where(IssuedCode.batch_id == result.batch).order_by(IssuedCode.id))]
        assert len(set(salts)) == 1_000 and {len(salt) for salt in salts} == {16}
        texts = BatchTexts()
        for salt in salts:
            texts.add(text_digest(salt, "Quillmere workshop", "new site"))
        assert detail == {"count": 1_000, "first": rows[0][0], "last": rows[-1][0],
                          "codes_sha256": codes_digest([row[0] for row in rows]), "valid_until": None,
                          "texts": texts.detail()}
        assert verify_chain(session).intact
        series = get_series(session, "tools")
        assert (series.next_counter, series.code_count) == (1_003, 1_003)


def test_scattered_bulk_batch_follows_the_permutation(anywhere: Register, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(bulk, "CHUNK", 250)
    add_series(anywhere, MEMBERS)
    result = issue_codes(anywhere, "members", 600, collect=False)
    with anywhere.reading() as session:
        scatter = permutation(get_series(session, "members"))
    rows = stored(anywhere, "members")
    # the batch holds the permutation's first 600 numbers, stored and listed in number order
    assert [row[1] for row in rows] == sorted(scatter.base_for_counter(k) for k in range(600))
    for code, base, *_ in rows:
        # source: python-stdnum's stdnum.verhoeff
        assert code == "QM" + f"{base:09d}" + verhoeff.calc_check_digit(f"{base:09d}")
    assert result.codes == []
    assert result.first is not None and result.last is not None
    assert (result.first.code, result.last.code) == (rows[0][0], rows[-1][0])
    assert result.protected is True


def test_codes_stream_to_a_csv_written_whole(register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    out = tmp_path / "batch.csv"
    with CodesCsv(out) as sink:
        result = issue_codes(register, "tools", 300, collect=False, sink=sink)
    with out.open(newline="") as stream:
        rows = list(csv.reader(stream))
    assert rows[0] == ["code", "display", "base", "series", "batch", "holder"]
    assert len(rows) == 301
    codes = [row[0] for row in stored(register, "tools")]
    assert [row[0] for row in rows[1:]] == codes
    assert rows[1][1:] == [f"QTL-{codes[0][3:7]}-{codes[0][7:]}", "1", "tools", str(result.batch), ""]
    # small batches reach the sink too
    small = tmp_path / "small.csv"
    with CodesCsv(small) as sink:
        issue_codes(register, "tools", 2, sink=sink)
    assert len(small.read_text().splitlines()) == 3


def test_an_exhausted_series_issues_nothing_and_writes_no_file(register: Register, tmp_path: Path) -> None:
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL", end=100))
    issue_codes(register, "tools", 90)
    out = tmp_path / "batch.csv"
    with (
        pytest.raises(Exhausted, match="has 10 numbers left; 100 asked for, nothing issued"),
        CodesCsv(out) as sink,
    ):
        issue_codes(register, "tools", 100, sink=sink)
    assert not out.exists() and not list(tmp_path.glob(".issuer-*"))
    with register.reading() as session:
        assert session.scalar(select(func.count()).select_from(IssuedCode)) == 90


def test_a_failure_mid_batch_rolls_the_whole_batch_back(register: Register, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(bulk, "CHUNK", 100)
    add_series(register, TOOLS)
    calls = 0

    def fail_on_third(count: int) -> None:
        nonlocal calls
        calls += 1
        if calls == 3:
            raise RuntimeError("power cut")

    with pytest.raises(RuntimeError):
        issue_codes(register, "tools", 500, progress=fail_on_third)
    assert stored(register, "tools") == []
    assert [info.base for info in issue_codes(register, "tools", 100).codes] == list(range(1, 101))


def test_request_id_replay_of_a_bulk_batch(register: Register, tmp_path: Path) -> None:
    add_series(register, MEMBERS)
    first = issue_codes(register, "members", 200, request_id="open-day-2026", collect=False)
    out = tmp_path / "again.csv"
    with CodesCsv(out) as sink:
        again = issue_codes(register, "members", 200, request_id="open-day-2026", collect=False, sink=sink)
    assert again.replayed and again.batch == first.batch
    assert (again.first, again.last) == (first.first, first.last)
    with out.open(newline="") as stream:
        assert [row[0] for row in csv.reader(stream)][1:] == [row[0] for row in stored(register, "members")]
    assert len(stored(register, "members")) == 200


@pytest.mark.parametrize(
    "shape",
    [
        CodeFormat(get_scheme("luhn"), 7, "QTL", "", (4, 4), "-"),
        CodeFormat(get_scheme("verhoeff"), 9, "QM", "", (5, 5), " "),
        CodeFormat(get_scheme("damm", "crockford32"), 6, "DP", "", (4, 3), "-"),
        CodeFormat(get_scheme("iso7064-97-10"), 6, "", "X", (), "-"),
        CodeFormat(get_scheme("luhn", "alnum"), 5, "", "", (3, 3), ""),
        CodeFormat(get_scheme("none"), 4, "Q", "", (), "-"),
    ],
    ids=["tools", "members", "passes", "two-checks-suffix", "no-sep", "no-check"],
)
def test_bulk_texts_equal_the_one_by_one_forms(shape: CodeFormat) -> None:
    rng = np.random.default_rng(7)
    bases = rng.integers(0, shape.capacity, size=BULK_FROM * 10, dtype=np.int64)
    codes = code_texts(shape, bases)
    assert codes == [shape.code_for_base(int(base)) for base in bases]
    assert display_texts(shape, codes) == [shape.display(code) for code in codes]
