"""Choosing codes to print on labels, and recording that they were printed.

The register knows nothing of drawing labels: :func:`select_for_printing` returns plain
rows for a caller to draw, and only once the caller's file is complete does
:func:`record_prints` count the prints and log them — every code of a job in one
transaction, with one log entry per code, so a failed drawing logs nothing.

Selections come in three kinds: codes named one by one (as typed or scanned), a batch,
or a series, optionally from one of its codes to another. An in-order series runs by
base number; a scattered series by issue order, since its numbers have no useful
order of their own.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import PurePath
from typing import Any

from sqlalchemy import select, update
from sqlalchemy.orm import Session

from issuer.errors import Conflict, InvalidFormat, NotFound
from issuer.register.lifecycle import find_code, require_reason, shown_code
from issuer.register.log import NewEntry, append_entries
from issuer.register.models import SCATTERED, SUSPENDED, VOIDED, Batch, IssuedCode, Series, in_batch
from issuer.register.series import code_format, get_series
from issuer.register.store import Register

#: what to do with voided codes in a selection
VOID_REFUSE = "refuse"  # refuse the whole job, naming them
VOID_MARK = "mark"  # print them, marked VOID
VOID_OMIT = "omit"  # leave them out
VOID_CHOICES = (VOID_REFUSE, VOID_MARK, VOID_OMIT)

PRINT = "print"
REPRINT = "reprint"

#: codes per IN (...) list: well under every backend's parameter limit
_CHUNK = 500
#: voided codes named in a refusal before "and N more"
_NAME_AT_MOST = 5


@dataclass(frozen=True)
class PrintRow:
    """One code to print, with what a label may show about it."""

    code: str
    display: str
    series: str
    series_title: str
    holder: str | None
    note: str | None
    status: str
    batch: int
    print_count: int
    #: the series' holders are people: a printed holder is personal data
    holds_people: bool = False

    @property
    def void(self) -> bool:
        return self.status == VOIDED

    def as_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass(frozen=True)
class PrintSelection:
    """The rows to print, in label order, and what was asked for, in words."""

    rows: tuple[PrintRow, ...]
    description: str
    omitted_void: tuple[str, ...] = ()

    @property
    def codes(self) -> list[str]:
        return [row.code for row in self.rows]


_COLUMNS = (
    IssuedCode.code,
    IssuedCode.series_id,
    IssuedCode.holder,
    IssuedCode.note,
    IssuedCode.status,
    IssuedCode.batch_id,
    IssuedCode.print_count,
)


class _Rows:
    """Turns stored rows into :class:`PrintRow`, looking each series up once."""

    def __init__(self, session: Session) -> None:
        self.session = session
        self._series: dict[int, Series] = {}

    def series(self, series_id: int) -> Series:
        found = self._series.get(series_id)
        if found is None:
            found = self.session.get(Series, series_id)
            assert found is not None
            self._series[series_id] = found
        return found

    def make(self, row: Any) -> PrintRow:
        code, series_id, holder, note, status, batch_id, print_count = row
        series = self.series(series_id)
        return PrintRow(
            code=code,
            display=code_format(series).display(code),
            series=series.key,
            series_title=series.title,
            holder=holder,
            note=note,
            status=status,
            batch=batch_id,
            print_count=print_count,
            holds_people=series.holds_people,
        )

    def query(self, statement: Any) -> list[PrintRow]:
        return [self.make(row) for row in self.session.execute(statement)]


def _by_codes(session: Session, texts: Sequence[str]) -> tuple[list[PrintRow], str]:
    rows = _Rows(session)
    found: list[PrintRow] = []
    seen: dict[str, str] = {}
    for text in texts:
        code = find_code(session, text)
        if code.code in seen:
            raise InvalidFormat(
                f"{text.strip()!r} names {shown_code(session, code)} a second time (as {seen[code.code]!r}); "
                "name each code once"
            )
        seen[code.code] = text.strip()
        found.append(rows.make(tuple(getattr(code, c.key) for c in _COLUMNS)))
    return found, f"{len(found)} named code{'s' if len(found) != 1 else ''}"


def _by_batch(session: Session, batch_id: int) -> tuple[list[PrintRow], str]:
    batch = session.get(Batch, batch_id)
    if batch is None:
        raise NotFound(f"no batch {batch_id} in this register")
    statement = select(*_COLUMNS).where(in_batch(batch_id)).order_by(IssuedCode.id)
    rows = _Rows(session)
    key = rows.series(batch.series_id).key
    kind = "" if batch.kind == "issue" else f", a {batch.kind}"
    return rows.query(statement), f"batch {batch_id} of series {key}{kind}"


def _end_of_range(session: Session, series: Series, text: str, option: str) -> IssuedCode:
    try:
        code = find_code(session, text, series=series.key)
    except InvalidFormat as exc:
        raise InvalidFormat(f"{option} {exc.message}") from None
    if code.series_id != series.id:  # the same shape in two series: read as this one's, held by the other
        other = session.get(Series, code.series_id)
        assert other is not None
        raise InvalidFormat(f"{option} {text.strip()!r} belongs to series {other.key}, not {series.key}")
    return code


def _by_series(
    session: Session, key: str, first: str | None, last: str | None
) -> tuple[list[PrintRow], str]:
    series = get_series(session, key)
    scattered = series.mode == SCATTERED
    # in-order series run by base number; scattered ones by issue order
    order = IssuedCode.id if scattered else IssuedCode.base
    statement = select(*_COLUMNS).where(IssuedCode.series_id == series.id)
    shape = code_format(series)
    words = f"series {series.key}"
    low = high = None
    if first is not None:
        low = _end_of_range(session, series, first, "--from")
        statement = statement.where(order >= getattr(low, order.key))
        words += f" from {shape.display(low.code)}"
    if last is not None:
        high = _end_of_range(session, series, last, "--to")
        statement = statement.where(order <= getattr(high, order.key))
        words += f" to {shape.display(high.code)}"
    if low is not None and high is not None and getattr(low, order.key) > getattr(high, order.key):
        how = "in issue order" if scattered else "in number order"
        raise InvalidFormat(
            f"--from {shape.display(low.code)} comes after --to {shape.display(high.code)} "
            f"({how}); swap them"
        )
    return _Rows(session).query(statement.order_by(order)), words


def _named(codes: Sequence[str]) -> str:
    shown = ", ".join(codes[:_NAME_AT_MOST])
    more = len(codes) - _NAME_AT_MOST
    return shown + (f" and {more} more" if more > 0 else "")


class VoidedInSelection(Conflict):
    """A selection holds voided codes and nobody said what to do with them; each face
    adds the ways its own command offers (its options differ from command to command)."""


def select_for_printing(
    register: Register,
    *,
    codes: Sequence[str] = (),
    batch: int | None = None,
    series: str | None = None,
    first: str | None = None,
    last: str | None = None,
    void: str = VOID_REFUSE,
) -> PrintSelection:
    """The codes to print, in label order: ``codes`` named one by one (as typed or
    scanned; each must be in the register), or every code of ``batch`` (issue order),
    or every code of ``series`` — optionally from ``first`` to ``last``, both included:
    by base number for an in-order series, by issue order for a scattered one.

    Voided codes are refused, naming them, unless ``void`` is ``"mark"`` (print them
    marked VOID) or ``"omit"`` (leave them out). An empty selection is refused.
    """
    if (first is not None or last is not None) and series is None:
        raise InvalidFormat("a range (--from/--to) needs a series (--series)")
    modes = sum((bool(codes), batch is not None, series is not None))
    if modes != 1:
        raise InvalidFormat(
            "choose the codes one way: name codes, or give a batch, or give a series"
            + (" (none given)" if modes == 0 else "")
        )
    if void not in VOID_CHOICES:
        raise InvalidFormat(f"void must be one of {', '.join(VOID_CHOICES)}, not {void!r}")
    with register.reading() as session:
        if codes:
            rows, words = _by_codes(session, codes)
        elif batch is not None:
            rows, words = _by_batch(session, batch)
        else:
            assert series is not None
            rows, words = _by_series(session, series, first, last)
    suspended = [row.display for row in rows if row.status == SUSPENDED]
    if suspended and void != VOID_OMIT:
        raise Conflict(
            f"{len(suspended)} suspended code{'s' if len(suspended) != 1 else ''} in {words}: "
            f"{_named(suspended)}; a suspended code is not printed (reinstate it, or replace it "
            "for a new code), or leave it out (--without-void)"
        )
    rows = [row for row in rows if row.status != SUSPENDED]
    voided = [row.display for row in rows if row.void]
    omitted: tuple[str, ...] = tuple(suspended)
    if voided and void == VOID_REFUSE:
        raise VoidedInSelection(
            f"{len(voided)} voided code{'s' if len(voided) != 1 else ''} in {words}: "
            f"{_named(voided)}; voided codes are printed only when asked for, marked VOID"
        )
    if voided and void == VOID_OMIT:
        omitted += tuple(voided)
        rows = [row for row in rows if not row.void]
    if not rows:
        left_out = f" once its {len(omitted)} voided code(s) are left out" if omitted else ""
        raise NotFound(f"nothing to print: {words} holds no codes{left_out}")
    return PrintSelection(tuple(rows), words, omitted)


def _chunks(items: Sequence[Any]) -> Iterable[Sequence[Any]]:
    for start in range(0, len(items), _CHUNK):
        yield items[start : start + _CHUNK]


def record_prints(
    register: Register,
    codes: Sequence[str],
    *,
    reason: str | None = None,
    reprint: bool = False,
    layout: str | None = None,
    symbology: str | None = None,
    file: str | PurePath | None = None,
    void_labels: Iterable[str] = (),
    extra: Mapping[str, Any] | None = None,
    before_commit: Callable[[], None] | None = None,
) -> int:
    """Count one print of each canonical code in ``codes`` and log it ("print", or
    "reprint" with its ``reason``), all in one transaction; returns how many were logged.

    Call it only once the labels exist. The detail of each entry names the layout, the
    symbology and the file's name (never its folder). ``void_labels`` are the codes whose
    labels were printed marked VOID; any other code found voided (voided by another desk
    since it was selected) is refused, and nothing is recorded.

    ``before_commit`` runs once the entries are written, inside the transaction (e.g. handing
    the file to a printer): when it raises, nothing is counted or logged. It runs once even
    if the transaction is retried.
    """
    if not codes:
        raise InvalidFormat("no codes to record as printed")
    if len(set(codes)) != len(codes):
        raise InvalidFormat("a code is named twice; a print is recorded once per code")
    why = require_reason(reason) if reprint else (reason or "").strip() or None
    base_detail: dict[str, Any] = {
        key: value
        for key, value in (
            ("reason", why),
            ("layout", layout),
            ("symbology", symbology),
            ("file", PurePath(file).name if file is not None else None),
        )
        if value is not None
    }
    base_detail.update(extra or {})
    action = REPRINT if reprint else PRINT
    marked = frozenset(void_labels)
    done = [False]

    def work(session: Session) -> int:
        stored: dict[str, tuple[int, int, str]] = {}
        for chunk in _chunks(codes):
            statement = (
                select(IssuedCode.code, IssuedCode.id, IssuedCode.series_id, IssuedCode.status)
                .where(IssuedCode.code.in_(chunk))
                .with_for_update(key_share=True)
            )
            for code, row_id, series_id, status in session.execute(statement):
                stored[code] = (row_id, series_id, status)
        missing = [code for code in codes if code not in stored]
        if missing:
            raise NotFound(f"not in this register: {_named(missing)}")
        held_back = [code for code in codes if stored[code][2] == SUSPENDED]
        if held_back:
            raise Conflict(f"suspended meanwhile, so not printed: {_named(held_back)}; nothing was recorded")
        voided = [code for code in codes if stored[code][2] == VOIDED and code not in marked]
        if voided:
            raise Conflict(
                f"voided, yet not printed marked VOID (voided by another desk meanwhile?): "
                f"{_named(voided)}; nothing was recorded"
            )
        ids = [stored[code][0] for code in codes]
        for chunk in _chunks(ids):
            session.execute(
                update(IssuedCode)
                .where(IssuedCode.id.in_(chunk))
                .values(print_count=IssuedCode.print_count + 1)
                .execution_options(synchronize_session=False)
            )
        entries = []
        for code in codes:
            _, series_id, status = stored[code]
            detail = dict(base_detail)
            if code in marked:
                detail["void_label"] = True
            entries.append(NewEntry(action, series_id, code, None, detail))
        logged = append_entries(session, entries, actor=register.actor, at=register.clock())
        if before_commit is not None and not done[0]:
            before_commit()
            done[0] = True
        return logged

    return register.write(work)
