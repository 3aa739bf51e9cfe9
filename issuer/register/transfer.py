"""Export: a series' codes streamed out as CSV, JSON or JSON Lines.

The rows come from a server-side cursor (``yield_per``) a few thousand at a time, and
the database itself writes the display form and the UTC timestamps as text, so a
million codes pass through Python as plain tuples and memory stays flat however large
the series grows. The series' FF1 key is never read. Holders are personal data: the
command that writes a file says so.

The columns are the ones :mod:`issuer.register.importing` reads back, so export ->
fresh register -> import -> export gives the same file.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Sequence
from datetime import datetime
from typing import IO, Any

from sqlalchemy import ColumnElement, Select, String, case, func, literal, select, type_coerce
from sqlalchemy.orm import Session, aliased

from issuer.errors import InvalidFormat, NotFound
from issuer.limits import json_safe
from issuer.register.driver import stream_rows
from issuer.register.models import (
    EXPIRED,
    ISSUED,
    SUSPENDED,
    VOIDED,
    Batch,
    IssuedCode,
    Series,
    code_issued_at,
    code_issued_by,
    in_batch,
)
from issuer.register.series import code_format, get_series
from issuer.register.store import Register

FORMATS = ("csv", "json", "jsonl")
STATUS_CHOICES = ("issued", "expired", "suspended", "voided", "all")
#: rows fetched from the server per round
FETCH_ROWS = 10_000

#: what an export holds, in this order
EXPORT_COLUMNS = (
    "code", "display", "status", "issued_at", "issued_by", "holder", "note",
    "voided_at", "voided_by", "void_reason", "replaces", "last_seen_at", "last_seen_where",
    "valid_until", "suspended_at", "suspend_reason",
)  # fmt: skip


def _text(expression: Any) -> ColumnElement[Any]:
    """``expression`` typed as text, so that ``+`` concatenates and nothing converts it."""
    return type_coerce(expression, String)


def _utc_text(column: Any, dialect: str) -> ColumnElement[Any]:
    """A timestamp as ``2026-03-14T09:30:00Z`` (fractions only when there are any),
    written by the database."""
    if dialect == "sqlite":
        # stored as 'YYYY-MM-DD HH:MM:SS.ffffff' in UTC; '.000000' occurs only as the fraction
        whole = _text(func.replace(_text(column), ".000000", ""))
        return _text(func.replace(whole, " ", "T")) + "Z"
    if dialect == "postgresql":
        utc = func.timezone("UTC", column)
        fraction = case((_text(func.to_char(utc, "US")) == "000000", ""), else_=_text(func.to_char(utc, ".US")))
        return _text(_text(func.to_char(utc, 'YYYY-MM-DD"T"HH24:MI:SS')) + fraction + "Z")
    raise InvalidFormat(f"export does not support the {dialect} backend")


def _display(series: Series) -> ColumnElement[Any]:
    """The grouped display form, cut from the canonical code by the database."""
    shape = code_format(series)
    parts: list[tuple[int, int]] = []
    at = 1
    if shape.prefix:
        parts.append((at, len(shape.prefix)))
        at += len(shape.prefix)
    for size in shape.group or (shape.width,):
        parts.append((at, size))
        at += size
    if shape.suffix:
        parts.append((at, len(shape.suffix)))
    if len(parts) == 1 or not shape.sep:
        return _text(IssuedCode.code)
    expression = _text(func.substr(IssuedCode.code, *parts[0]))
    for start, length in parts[1:]:
        expression = expression + literal(shape.sep, String) + _text(func.substr(IssuedCode.code, start, length))
    return _text(expression)


def _series_filter(series: Series, dialect: str) -> ColumnElement[bool]:
    """``series_id = ?``; on SQLite written so that the table is read in id order (a
    scan that streams) rather than through the (series, base) index and a sort of the
    whole series before the first row."""
    if dialect == "sqlite":
        return (IssuedCode.series_id + 0) == series.id
    return IssuedCode.series_id == series.id


def export_statement(
    series: Series, status: str, dialect: str, batch: int | None = None, now: datetime | None = None
) -> Select[Any]:
    """The export's rows; with ``now``, an issued code past its validity is written as
    expired (import reads it back as issued, with its validity)."""
    if status not in STATUS_CHOICES:
        raise InvalidFormat(f"--status must be one of {', '.join(STATUS_CHOICES)}, not {status!r}")
    replaced = aliased(IssuedCode)
    past = (IssuedCode.status == ISSUED) & (IssuedCode.valid_until < now) if now is not None else None
    shown_status = case((past, literal(EXPIRED, String)), else_=IssuedCode.status) if past is not None else IssuedCode.status
    statement = (
        select(
            IssuedCode.code,
            _display(series),
            shown_status,
            _utc_text(code_issued_at(), dialect),
            code_issued_by(),
            IssuedCode.holder,
            IssuedCode.note,
            _utc_text(IssuedCode.voided_at, dialect),
            IssuedCode.voided_by,
            IssuedCode.void_reason,
            replaced.code,
            _utc_text(IssuedCode.last_seen_at, dialect),
            IssuedCode.last_seen_where,
            _utc_text(IssuedCode.valid_until, dialect),
            _utc_text(IssuedCode.suspended_at, dialect),
            IssuedCode.suspend_reason,
        )
        .join(Batch, Batch.id == IssuedCode.batch_id)  # when and by whom: the batch says
        .outerjoin(replaced, replaced.id == IssuedCode.replaces_id)
        .where(_series_filter(series, dialect))
        .order_by(IssuedCode.id)
    )
    if status == "issued":
        statement = statement.where(IssuedCode.status == ISSUED)
        if past is not None:
            statement = statement.where(~past | IssuedCode.valid_until.is_(None))
    elif status == "expired":
        statement = statement.where(past if past is not None else IssuedCode.id.is_(None))
    elif status in (VOIDED, SUSPENDED):
        statement = statement.where(IssuedCode.status == status)
    if batch is not None:
        statement = statement.where(in_batch(batch))
    return statement


def _require_batch(session: Session, series: Series, batch: int | None) -> None:
    """A batch named for export must be one of the series' batches."""
    if batch is None:
        return
    found = session.get(Batch, batch)
    if found is None or found.series_id != series.id:
        raise NotFound(f"batch {batch} is not a batch of series {series.key} ('issuer log --series {series.key}' lists them)")


def count_codes(register: Register, key: str, status: str = "all", *, batch: int | None = None) -> int:
    """How many codes an export of ``key`` with ``status`` (and ``batch``) would hold."""
    with register.reading() as session:
        series = get_series(session, key)
        _require_batch(session, series, batch)
        statement = select(func.count()).select_from(IssuedCode).where(IssuedCode.series_id == series.id)
        if status != "all":
            inner = export_statement(series, status, session.get_bind().dialect.name, batch, register.clock())
            statement = select(func.count()).select_from(inner.subquery())
        elif batch is not None:
            statement = statement.where(in_batch(batch))
        return int(session.scalar(statement) or 0)


class _Writer:
    """Writes rows in one of the formats; ``close`` ends the document."""

    def __init__(self, stream: IO[str], fmt: str) -> None:
        if fmt not in FORMATS:
            raise InvalidFormat(f"--format must be one of {', '.join(FORMATS)}, not {fmt!r}")
        self.stream, self.fmt, self.first = stream, fmt, True
        if fmt == "csv":
            from issuer.outputs import SafeCsvWriter

            self.csv = SafeCsvWriter(stream)
            self.csv.writerow(EXPORT_COLUMNS)
        elif fmt == "json":
            stream.write("[")

    def rows(self, rows: Sequence[Any]) -> None:
        if self.fmt == "csv":
            self.csv.writerows(rows)
            return
        dumps, names = json.dumps, EXPORT_COLUMNS
        # C1 controls and lone surrogates as \u escapes: the same JSON, safe on any terminal
        lines = [json_safe(dumps(dict(zip(names, row)), ensure_ascii=False)) for row in rows]
        if self.fmt == "jsonl":
            self.stream.write("\n".join(lines) + "\n")
        else:
            lead = "\n" if self.first else ",\n"
            self.stream.write(lead + ",\n".join(lines))
        self.first = False

    def close(self) -> None:
        if self.fmt == "json":
            self.stream.write("\n]\n" if not self.first else "]\n")


def export_codes(
    register: Register,
    key: str,
    stream: IO[str],
    *,
    fmt: str = "csv",
    status: str = "all",
    batch: int | None = None,
    progress: Callable[[int], None] | None = None,
) -> int:
    """Write series ``key``'s codes (only batch ``batch``'s, if given) to ``stream`` in
    issue order; returns how many."""
    writer = _Writer(stream, fmt)
    written = 0
    with register.reading() as session:
        series = get_series(session, key)
        _require_batch(session, series, batch)
        statement = export_statement(series, status, session.get_bind().dialect.name, batch, register.clock())
        for part in stream_rows(session, statement, FETCH_ROWS):  # no ORM or Core work per row
            writer.rows(part)
            written += len(part)
            if progress is not None:
                progress(len(part))
    writer.close()
    return written


def export_session_rows(
    session: Session, series: Series, status: str = "all", now: datetime | None = None
) -> list[tuple[Any, ...]]:
    """Every exported row of a series as tuples (for tests and small series)."""
    statement = export_statement(series, status, session.get_bind().dialect.name, now=now)
    return [tuple(row) for row in session.execute(statement)]


__all__ = [
    "EXPORT_COLUMNS",
    "FORMATS",
    "STATUS_CHOICES",
    "count_codes",
    "export_codes",
    "export_session_rows",
]
