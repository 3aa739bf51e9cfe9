"""Issuing a large batch at the speed of the storage.

A million codes go through no ORM object and no per-row Python work: counters are
mapped to base numbers a chunk at a time (the scattered permutation's FF1 rounds run
across the whole chunk; a scattered batch is then put in number order so that the
unique indexes are filled in order rather than at random), check characters are computed column-wise by the scheme's
bulk method, the code texts are assembled as one byte matrix, and each chunk's codes and
numbers reach the database as two values of one statement inside the caller's transaction.
Nothing holds the whole batch: each chunk is inserted, handed to an optional sink
(a CSV file, say) and dropped.

The rows (and the statement) are those of :func:`issuer.register.allotment.place_codes`:
:func:`issuer.register.coderows.write_codes`, once per chunk.
"""

from __future__ import annotations

import hashlib
import os
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from itertools import repeat
from pathlib import Path
from typing import TYPE_CHECKING, Any, Protocol, Self

from sqlalchemy import select
from sqlalchemy.orm import Session

from issuer.checking.codes import CodeFormat
from issuer.errors import Exhausted, RegisterError
from issuer.register.coderows import write_codes
from issuer.register.models import SCATTERED, Batch, IssuedCode, Series, import_batches, in_batch
from issuer.register.series import capacity, code_format, permutation
from issuer.register.standing import BatchTexts, search_key

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

#: counters mapped, checked, inserted and handed on per round
CHUNK = 50_000

# --- texts in bulk -----------------------------------------------------------------------


def _split_fixed(matrix: npt.NDArray[np.uint8]) -> list[str]:
    """Rows of an ASCII byte matrix as str, via one decode and one split (no per-row
    Python work)."""
    import numpy as np

    if matrix.shape[0] == 0:
        return []
    lines = np.empty((matrix.shape[0], matrix.shape[1] + 1), dtype=np.uint8)
    lines[:, :-1] = matrix
    lines[:, -1] = ord("\n")
    return lines.tobytes().decode("ascii").split("\n")[:-1]


def code_matrix(shape: CodeFormat, bases: npt.NDArray[np.int64]) -> npt.NDArray[np.uint8]:
    """The canonical codes of ``bases`` as an ``(n, total_width)`` ASCII byte matrix."""
    import numpy as np

    scheme = shape.scheme
    bodies = shape.bodies_for_bases(bases)
    prefix, suffix = shape.prefix.encode("ascii"), shape.suffix.encode("ascii")
    matrix = np.empty((bodies.shape[0], shape.total_width), dtype=np.uint8)
    at = len(prefix)
    if prefix:
        matrix[:, :at] = np.frombuffer(prefix, dtype=np.uint8)
    body_symbols = np.frombuffer(scheme.alphabet.symbols.encode("ascii"), dtype=np.uint8)
    matrix[:, at: at + shape.length] = body_symbols[bodies]
    at += shape.length
    if scheme.check_length:
        checks = scheme.compute_bulk(bodies)
        check_symbols = np.frombuffer(scheme.check_alphabet.symbols.encode("ascii"), dtype=np.uint8)
        matrix[:, at: at + scheme.check_length] = check_symbols[checks]
        at += scheme.check_length
    if suffix:
        matrix[:, at:] = np.frombuffer(suffix, dtype=np.uint8)
    return matrix


def code_texts(shape: CodeFormat, bases: npt.NDArray[np.int64]) -> list[str]:
    """Canonical codes for many base numbers; equal to ``shape.code_for_base`` each."""
    return _split_fixed(code_matrix(shape, bases))


def _display_columns(shape: CodeFormat) -> list[int]:
    """For each character of the display form, the code column it copies (or -k-1 for
    the k-th separator character)."""
    sep = list(range(-1, -len(shape.sep) - 1, -1))
    columns: list[int] = []
    parts: list[list[int]] = []
    at = 0
    if shape.prefix:
        parts.append(list(range(len(shape.prefix))))
        at = len(shape.prefix)
    sizes = shape.group or (shape.width,)
    for size in sizes:
        parts.append(list(range(at, at + size)))
        at += size
    if shape.suffix:
        parts.append(list(range(at, at + len(shape.suffix))))
    for index, part in enumerate(parts):
        if index:
            columns.extend(sep)
        columns.extend(part)
    return columns


def display_texts(shape: CodeFormat, codes: Sequence[str]) -> list[str]:
    """The grouped display forms of canonical codes; equal to ``shape.display`` each."""
    import numpy as np

    if not codes:
        return []
    columns = _display_columns(shape)
    if columns == list(range(shape.total_width)):
        return list(codes)
    width = shape.total_width
    raw = np.frombuffer("".join(codes).encode("ascii"), dtype=np.uint8).reshape(-1, width)
    sep = np.frombuffer(shape.sep.encode("ascii"), dtype=np.uint8)
    source = np.empty((raw.shape[0], width + len(sep)), dtype=np.uint8)
    source[:, :width] = raw
    source[:, width:] = sep
    index = np.array([c if c >= 0 else width + (-c - 1) for c in columns], dtype=np.intp)
    return _split_fixed(source[:, index])


# --- where the chunks go -------------------------------------------------------------------


@dataclass(frozen=True)
class IssuedChunk:
    """Consecutive codes of one batch, in issue order."""

    series: str
    batch: int
    shape: CodeFormat = field(repr=False)
    codes: list[str] = field(repr=False)
    bases: list[int] = field(repr=False)
    holder: str | None = None

    def displays(self) -> list[str]:
        return display_texts(self.shape, self.codes)


class CodeSink(Protocol):
    """Receives a batch's codes while it is issued (inside its transaction)."""

    def restart(self) -> None:
        """Forget everything written so far: the transaction is being tried again."""

    def write(self, chunk: IssuedChunk) -> None:
        """Take the next codes of the batch."""


class CodesCsv:
    """A batch's codes as a CSV file, written whole or not at all.

    ``with CodesCsv(path) as sink: issue_codes(..., sink=sink)``: the target is checked
    when the object is made (an existing file without ``force``, the register, a folder
    are refused before anything is issued); the rows go to a hidden file beside it,
    which is moved into place only when the block ends without an error, and removed
    otherwise.
    """

    COLUMNS = ("code", "display", "base", "series", "batch", "holder")

    def __init__(self, path: Path | str, *, force: bool = False) -> None:
        from issuer.outputs import check_target

        self.path = check_target(path, force=force, what="--out")
        self.force = force
        self._temporary: Path | None = None
        self._note: Path | None = None
        self._stream: Any = None
        self._writer: Any = None
        self.rows = 0

    def __enter__(self) -> Self:
        from issuer.outputs import temporary_beside

        self._temporary, self._note = temporary_beside(self.path)
        self._stream = open(self._temporary, "w", newline="", encoding="utf-8")
        self.restart()
        return self

    def restart(self) -> None:
        from issuer.outputs import SafeCsvWriter

        self._stream.seek(0)
        self._stream.truncate()
        self._writer = SafeCsvWriter(self._stream)
        self._writer.writerow(self.COLUMNS)
        self.rows = 0

    def write(self, chunk: IssuedChunk) -> None:
        self._writer.writerows(
            zip(chunk.codes, chunk.displays(), chunk.bases, repeat(chunk.series), repeat(chunk.batch),
                repeat(chunk.holder or ""))
        )
        self.rows += len(chunk.codes)

    def __exit__(self, exc_type: object, *_: object) -> None:
        from issuer.outputs import OutputRefused, place

        assert self._temporary is not None
        temporary, note = self._temporary, self._note
        self._stream.flush()
        os.fsync(self._stream.fileno())
        self._stream.close()
        try:
            if exc_type is not None:
                temporary.unlink(missing_ok=True)
                return
            try:
                place(temporary, self.path, force=self.force)
            except (OSError, OutputRefused) as exc:
                # the batch has committed: keep its list where the clerk can find it
                why = exc.message if isinstance(exc, OutputRefused) else exc.strerror
                raise RegisterError(
                    f"the batch was issued, but its codes could not be written to {self.path} ({why}); "
                    f"they are in {temporary}"
                ) from None
        finally:
            if note is not None:
                note.unlink(missing_ok=True)


# --- the database side ---------------------------------------------------------------------


def imported_bases(session: Session, series: Series) -> npt.NDArray[np.int64]:
    """The sorted base numbers a series holds through import (the allocator skips them)."""
    import numpy as np

    if not series.imported_count:
        return np.empty(0, dtype=np.int64)
    imports = session.scalars(select(Batch.id).where(Batch.series_id == series.id, import_batches()))
    found = [base for batch in imports.all() for base in session.scalars(select(IssuedCode.base).where(in_batch(batch)))]
    return np.sort(np.asarray(found, dtype=np.int64))


def check_room(series: Series, count: int) -> None:
    """Refuse, issuing nothing, a batch larger than what the series has left."""
    left = capacity(series) - series.code_count
    if count > left:
        raise Exhausted(
            f"series {series.key} has {left} number{'s' if left != 1 else ''} left; "
            f"{count} asked for, nothing issued"
        )


def _drawn(session: Session, series: Series, count: int) -> Iterator[npt.NDArray[np.int64]]:
    """The next ``count`` free base numbers in counter order, a chunk at a time; the
    series' counters move as the chunks are drawn."""
    import numpy as np

    skip = imported_bases(session, series)
    scatter = permutation(series) if series.mode == SCATTERED else None
    counter, end, left = series.next_counter, capacity(series), count
    while left:
        stop = min(counter + min(left, CHUNK), end)
        if stop <= counter:  # pragma: no cover - guarded by the capacity check
            raise Exhausted(f"series {series.key} ran out of numbers")
        counters = np.arange(counter, stop, dtype=np.int64)
        if scatter is not None:
            bases = scatter.bases_for_counters(counters)
        else:
            bases = counters + np.int64(series.range_start)
        if skip.size:
            bases = bases[~np.isin(bases, skip, assume_unique=True)]
        counter = stop
        series.next_counter = counter
        if bases.size:
            left -= int(bases.size)
            series.code_count += int(bases.size)
            yield bases


def allocate_chunks(session: Session, series: Series, count: int) -> Iterator[npt.NDArray[np.int64]]:
    """The next ``count`` free base numbers of a locked series, a chunk at a time; the
    series' counters move as they are drawn. The numbers are the ones
    :func:`issuer.register.allotment.plan_allocation` draws.

    An in-order series yields them in counter order, which is number order. A
    scattered series yields the whole batch in number order: every code of a batch is
    issued at the same instant, and inserting a million scattered numbers in counter
    (random) order would cost each unique index a random page per row — nearly twice
    the time of the same rows in order. The batch's codes, log digest, result and CSV
    all follow this order.
    """
    import numpy as np

    check_room(series, count)
    if series.mode != SCATTERED:
        yield from _drawn(session, series, count)
        return
    drawn = np.sort(np.concatenate(list(_drawn(session, series, count))))  # 8 bytes a number
    for at in range(0, drawn.size, CHUNK):
        yield drawn[at: at + CHUNK]


@dataclass
class BulkOutcome:
    """What a bulk issuance leaves behind besides its rows."""

    count: int = 0
    first: tuple[str, int] | None = None
    last: tuple[str, int] | None = None
    digest: Any = field(default_factory=hashlib.sha256)
    collected: list[tuple[str, str, int]] = field(default_factory=list)
    texts: BatchTexts = field(default_factory=BatchTexts)


def store_bulk(
    session: Session,
    *,
    series: Series,
    batch_id: int,
    count: int,
    holder: str | None,
    note: str | None,
    at: datetime,
    actor: str,
    collect: bool,
    sink: CodeSink | None = None,
    progress: Callable[[int], None] | None = None,
    valid_until: datetime | None = None,
) -> BulkOutcome:
    """Make and insert ``count`` codes for batch ``batch_id``, chunk by chunk (``series``
    as claimed; its counters move on as chunks are drawn)."""
    shape = code_format(series)
    holder_key, note_key = search_key(holder), search_key(note)
    connection = session.connection()
    outcome = BulkOutcome()
    # SQLite's page cache stays as it is: the codes go in number order, so each index page
    # is written in one run (a cache the batch's size measured no faster and doubled the peak)
    for bases_array in allocate_chunks(session, series, count):
        codes = code_texts(shape, bases_array)
        bases = bases_array.tolist()
        write_codes(
            connection, series_id=series.id, batch_id=batch_id, codes=codes, bases=bases, holder=holder,
            note=note, holder_key=holder_key, note_key=note_key, valid_until=valid_until,
            salts=outcome.texts.salted(len(codes), holder, note),  # None (no text): no work
        )  # fmt: skip
        outcome.digest.update(("\n".join(codes) + "\n").encode("ascii"))
        if outcome.first is None:
            outcome.first = (codes[0], bases[0])
        outcome.last = (codes[-1], bases[-1])
        outcome.count += len(codes)
        chunk = IssuedChunk(series.key, batch_id, shape, codes, bases, holder)
        if collect:
            outcome.collected.extend(zip(codes, chunk.displays(), bases))
        if sink is not None:
            sink.write(chunk)
        if progress is not None:
            progress(len(codes))
    return outcome


__all__ = [
    "CHUNK",
    "BulkOutcome",
    "CodeSink",
    "CodesCsv",
    "IssuedChunk",
    "allocate_chunks",
    "check_room",
    "code_texts",
    "display_texts",
    "imported_bases",
    "store_bulk",
]
