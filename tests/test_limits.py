"""Every field's limit, from the one table in issuer.limits."""

from __future__ import annotations

import re
from datetime import UTC, datetime

import pytest

from issuer import limits
from issuer.errors import InvalidFormat, OutOfLimits


def test_text_within_its_limit_passes_unchanged() -> None:
    assert limits.text("holder", "Quillmere Makers' Co-op, bench 4") == "Quillmere Makers' Co-op, bench 4"
    assert limits.text("holder", "Zoë Ångström") == "Zoë Ångström"
    assert limits.text("note", "line one\nline two\ttabbed") == "line one\nline two\ttabbed"
    assert limits.text("holder", None) is None


@pytest.mark.parametrize(
    ("field", "size"),
    [("holder", 200), ("actor", 120), ("request id", 200), ("title", 200), ("note", 2000), ("reason", 500)],
)
def test_one_character_too_many_is_refused_naming_field_and_limit(field: str, size: int) -> None:
    assert limits.text(field, "x" * size) == "x" * size
    with pytest.raises(OutOfLimits) as caught:
        limits.text(field, "x" * (size + 1))
    message = caught.value.message
    assert field in message and str(size) in message and "\n" not in message
    assert isinstance(caught.value, InvalidFormat)


@pytest.mark.parametrize(
    ("value", "what"),
    [
        ("\x1b[31mred", "U+001B"),
        ("nul\x00", "NUL"),
        ("lone \ud800 surrogate", "surrogate"),
        ("two\nlines", "U+000A"),
        ("bell\x07", "U+0007"),
        ("c1 \x9b control", "U+009B"),
        ("abc\u202eevil", "U+202E"),
    ],
)
def test_control_characters_are_refused_in_single_line_fields(value: str, what: str) -> None:
    with pytest.raises(OutOfLimits, match=re.escape(what)):
        limits.text("holder", value)


def test_multiline_fields_still_refuse_escapes_and_nul() -> None:
    with pytest.raises(OutOfLimits, match=r"U\+001B"):
        limits.text("note", "fine\n\x1b]0;title\x07")
    with pytest.raises(OutOfLimits, match="NUL"):
        limits.text("reason", "a\x00b")


def test_actor_and_request_id_cannot_be_empty() -> None:
    with pytest.raises(OutOfLimits, match="actor cannot be empty"):
        limits.text("actor", "")
    assert limits.text("title", "") == ""


def test_numbers_refuse_values_beyond_the_range() -> None:
    assert limits.number("count", 1) == 1
    with pytest.raises(OutOfLimits, match="--last must be from 1 to"):
        limits.number("entries", 99999999999999999999, label="--last")
    with pytest.raises(OutOfLimits, match="batch"):
        limits.number("batch", 2**31)
    with pytest.raises(OutOfLimits, match="count"):
        limits.number("count", 0)
    with pytest.raises(OutOfLimits, match="whole number"):
        limits.number("count", True)


@pytest.mark.parametrize(
    "text",
    [
        "0001-01-01T00:00:00+05:00",
        "9999-12-31T23:59:59-01:00",
        "0001-01-01",
        "9999-12-31",
        "1899-12-31T23:59:59Z",
    ],
)
def test_dates_at_the_calendar_edges_are_refused_not_overflowed(text: str) -> None:
    with pytest.raises(OutOfLimits, match="must lie between 1900-01-01 and 9999-12-30"):
        limits.moment("since", text)


def test_dates_in_range_come_back_as_utc() -> None:
    assert limits.moment("since", "2026-03-14T09:30:00+01:00") == datetime(2026, 3, 14, 8, 30, tzinfo=UTC)
    assert limits.moment("since", "2026-03-14") == datetime(2026, 3, 14, tzinfo=UTC)
    with pytest.raises(OutOfLimits, match="is not a date"):
        limits.moment("since", "14/03/2026")
    with pytest.raises(OutOfLimits, match="is not a date"):
        limits.moment("since", "2026-03-14\x00")


def test_file_names() -> None:
    assert limits.file_name("--out", "reports/stocktake.csv") == "reports/stocktake.csv"
    with pytest.raises(OutOfLimits, match="at most 255"):
        limits.file_name("backup file", "b" * 300 + ".sqlite")
    with pytest.raises(OutOfLimits, match="NUL"):
        limits.file_name("--out", "a\x00b")


def test_every_limit_is_described_once() -> None:
    names = [name for name, _rule in limits.describe()]
    assert "holder" in names and "dates" in names and "file names" in names
    # the register's columns are at least as wide as the limits (SQLite would not say)
    from issuer.register.models import Batch, IssuedCode, Series

    widths = {
        "holder": IssuedCode.__table__.c.holder.type.length,
        "actor": Batch.__table__.c.actor.type.length,
        "request id": Batch.__table__.c.request_id.type.length,
        "title": Series.__table__.c.title.type.length,
        "location": IssuedCode.__table__.c.last_seen_where.type.length,
        "prefix": Series.__table__.c.prefix.type.length,
        "suffix": Series.__table__.c.suffix.type.length,
        "separator": Series.__table__.c.separator.type.length,
        "code": IssuedCode.__table__.c.code.type.length,
    }
    for name, width in widths.items():
        assert limits.TEXT_LIMITS[name].max_chars <= width, name
