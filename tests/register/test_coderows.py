"""The one statement that writes an issue's code rows: the rows come out in the order the
codes were handed in, as text a lookup finds, with the batch's values on every row; on
SQLite and PostgreSQL."""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

import pytest
from sqlalchemy import select, text

from issuer.errors import DuplicateRow
from issuer.register.allotment import claim_series, open_batch
from issuer.register.coderows import write_codes
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.models import IssuedCode
from issuer.register.series import code_format, get_series
from issuer.register.store import Register, open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL")
UNTIL = datetime(2031, 5, 1, 12, 30, tzinfo=UTC)


@pytest.fixture
def anywhere(register_url: str) -> Any:  # noqa: F811
    opened = open_register(register_url, actor="workshop-desk")
    add_series(opened, TOOLS)
    yield opened
    opened.close()


def test_rows_follow_the_order_handed_in_with_the_batch_values_on_each(anywhere: Register) -> None:
    bases = [907, 12, 455, 3, 600]  # deliberately not in number (nor code) order

    def work(session: Any) -> list[str]:
        series = claim_series(session, len(bases), key="tools")
        shape = code_format(series.as_series)
        codes = [shape.code_for_base(base) for base in bases]
        batch = open_batch(session.connection(), series, kind="issue", count=len(bases),
                           request_id=None, at=datetime(2030, 1, 2, tzinfo=UTC), actor="workshop-desk")  # fmt: skip
        write_codes(session.connection(), series_id=series.id, batch_id=batch, codes=codes, bases=bases,
                    holder="Quillmere lending shelf", holder_key="quillmere lending shelf", valid_until=UNTIL)  # fmt: skip
        return codes

    codes = anywhere.write(work)
    with anywhere.reading() as session:
        rows = session.execute(
            select(IssuedCode.code, IssuedCode.base, IssuedCode.status, IssuedCode.holder, IssuedCode.holder_key,
                   IssuedCode.note, IssuedCode.print_count, IssuedCode.valid_until, IssuedCode.origin_at)
            .order_by(IssuedCode.id)
        ).all()  # fmt: skip
        assert [(row.code, row.base) for row in rows] == list(zip(codes, bases, strict=True))
        for row in rows:
            assert (
                row.status,
                row.holder,
                row.holder_key,
                row.note,
                row.print_count,
                row.origin_at,
            ) == ("issued", "Quillmere lending shelf", "quillmere lending shelf", None, 0, None)
            assert row.valid_until == UNTIL
            # stored as text: an equality lookup with a text value finds it
            found = session.scalars(
                select(IssuedCode.base).where(IssuedCode.code == row.code)
            ).one()
            assert found == row.base
        if session.get_bind().dialect.name == "sqlite":
            kinds = session.execute(
                text("SELECT DISTINCT typeof(code), typeof(base) FROM issued_code")
            ).all()
            assert kinds == [("text", "integer")]


def test_codes_of_unequal_width_are_refused_before_the_database_sees_them(
    anywhere: Register,
) -> None:
    def work(session: Any) -> None:
        series = claim_series(session, 3, key="tools")
        batch = open_batch(session.connection(), series, kind="issue", count=3, request_id=None,
                           at=datetime(2030, 1, 2, tzinfo=UTC), actor="workshop-desk")  # fmt: skip
        write_codes(session.connection(), series_id=series.id, batch_id=batch,
                    codes=["QTL00000011", "QTL0000002", "QTL000000033"], bases=[1, 2, 3])  # fmt: skip

    with pytest.raises(ValueError, match="same width"):
        anywhere.write(work)
    with anywhere.reading() as session:
        assert session.scalars(select(IssuedCode.id)).all() == []
        assert get_series(session, "tools").next_counter == 0


def test_a_code_issued_twice_is_refused_by_the_database_on_this_path(anywhere: Register) -> None:
    first = issue_codes(anywhere, "tools", 1).codes[0]

    def again(session: Any) -> None:
        series = claim_series(session, 1, key="tools")
        batch = open_batch(session.connection(), series, kind="issue", count=1, request_id=None,
                           at=datetime(2030, 1, 2, tzinfo=UTC), actor="workshop-desk")  # fmt: skip
        write_codes(
            session.connection(),
            series_id=series.id,
            batch_id=batch,
            codes=[first.code],
            bases=[first.base],
        )

    with pytest.raises(DuplicateRow):
        anywhere.write(again)
    with anywhere.reading() as session:
        assert session.scalars(select(IssuedCode.code)).all() == [first.code]


def test_a_code_holding_a_space_is_refused_before_the_database_sees_it(anywhere: Register) -> None:
    def work(session: Any) -> None:
        series = claim_series(session, 2, key="tools")
        batch = open_batch(session.connection(), series, kind="issue", count=2, request_id=None,
                           at=datetime(2030, 1, 2, tzinfo=UTC), actor="workshop-desk")  # fmt: skip
        write_codes(session.connection(), series_id=series.id, batch_id=batch,
                    codes=["QTL 0000011", "QTL00000022"], bases=[1, 2])  # fmt: skip

    with pytest.raises(ValueError, match="space"):
        anywhere.write(work)
    with anywhere.reading() as session:
        assert session.scalars(select(IssuedCode.id)).all() == []
