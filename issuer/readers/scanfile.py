"""Reading lists of codes: a plain list (one code per line), a CSV export with a header, or
JSON Lines (one object per line).

Scanners, spreadsheets and older registers export codes in a few common shapes: one
code per line; or a table with a header, separated by commas, semicolons (spreadsheets
in many European locales), tabs or bars, with the code in one column and perhaps a
time, a location, a holder beside it. :func:`read_table` accepts all of them, keeps the
other columns, and refuses a file that is not a list of codes with one clear line:
empty, binary, not UTF-8 text, a line longer than :data:`MAX_LINE_BYTES` (so a stray
2 GB line is never read into memory whole), or a CSV without the named column.

The file is read in blocks; nothing here knows about series or the register.
"""

from __future__ import annotations

import csv
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from issuer.errors import InvalidFormat
from issuer.outputs import restore_cell

#: the longest line accepted, in bytes; a longer one means the file is not a list of codes
MAX_LINE_BYTES = 1 << 16
#: bytes read at a time
BLOCK_BYTES = 1 << 20

#: header names taken as the code column when ``--column`` is not given, in this order
CODE_COLUMN_NAMES = (
    "code", "barcode", "tag", "tag_code", "scan", "scanned", "scan_code", "data", "value",
    "number", "card", "card_number", "serial",
)  # fmt: skip
DELIMITERS = (",", ";", "\t", "|")
#: how a comment line starts, in every format
COMMENT_MARKS = ("#", "//")


def _name(path: Path) -> str:
    return str(path)


def header_key(name: str) -> str:
    """A header cell as compared: trimmed, lower case, spaces and dashes as ``_``."""
    return name.strip().strip("\ufeff").strip().lower().replace(" ", "_").replace("-", "_")


def _line_of(data: bytes, offset: int, first_line: int) -> int:
    return first_line + data.count(b"\n", 0, offset)


def read_lines(path: Path, *, max_line_bytes: int | None = None) -> Iterator[list[str]]:
    """The file's lines (without line ends), a block at a time, in order.

    Raises :class:`InvalidFormat` for a file that cannot be read, is empty, binary,
    UTF-16, not UTF-8, or has a line longer than ``max_line_bytes``
    (default :data:`MAX_LINE_BYTES`).
    """
    limit = MAX_LINE_BYTES if max_line_bytes is None else max_line_bytes
    name = _name(path)
    try:
        stream = open(path, "rb")  # noqa: SIM115 - closed below
    except IsADirectoryError:
        raise InvalidFormat(f"{name} is a folder, not a file") from None
    except OSError as exc:
        raise InvalidFormat(f"cannot read {name}: {exc.strerror}") from None
    with stream:
        carry = b""
        line = 1  # number of the first line in ``carry``
        first = True
        seen_bytes = False
        while True:
            try:
                block = stream.read(BLOCK_BYTES)
            except OSError as exc:
                raise InvalidFormat(f"cannot read {name}: {exc.strerror}") from None
            if first:
                if block.startswith((b"\xff\xfe", b"\xfe\xff")):
                    raise InvalidFormat(f"{name} is UTF-16 text; save it as UTF-8 (or plain CSV) and try again")
                if block.startswith(b"\xef\xbb\xbf"):
                    block = block[3:]
                first = False
            if not block:
                break
            seen_bytes = True
            nul = block.find(b"\0")
            if nul >= 0:
                at = _line_of(carry + block, len(carry) + nul, line)
                raise InvalidFormat(f"{name} looks binary, not a list of codes (a NUL byte on line {at})")
            data = carry + block
            cut = data.rfind(b"\n")
            if cut < 0:
                carry = data
                if len(carry) > limit:
                    raise InvalidFormat(f"{name}: line {line} is longer than {limit:,} bytes; not a list of codes")
                continue
            complete, carry = data[:cut], data[cut + 1:]
            lines = complete.split(b"\n")
            longest = max(map(len, lines))
            if longest > limit:
                at = line + next(i for i, part in enumerate(lines) if len(part) > limit)
                raise InvalidFormat(f"{name}: line {at} is longer than {limit:,} bytes; not a list of codes")
            if len(carry) > limit:
                raise InvalidFormat(
                    f"{name}: line {line + len(lines)} is longer than {limit:,} bytes; not a list of codes"
                )
            yield _decode(name, complete, line)
            line += len(lines)
        if carry:
            yield _decode(name, carry, line)
        if not seen_bytes:
            raise InvalidFormat(f"{name} is empty")


def _decode(name: str, data: bytes, first_line: int) -> list[str]:
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        at = _line_of(data, exc.start, first_line)
        raise InvalidFormat(
            f"{name} is not UTF-8 text (line {at}); save it as UTF-8 and try again"
        ) from None
    lines = text.split("\n")
    if "\r" in text:
        lines = [part.removesuffix("\r") for part in lines]
    return lines


@dataclass
class Table:
    """Rows read from a list of codes, column by column.

    ``codes[i]`` was read on line ``lines[i]``; ``columns`` maps each other column of a
    CSV (its header as written) to its values; ``roles`` maps a role asked for
    (``"time"``, ``"holder"``, ...) to the header that plays it.
    """

    source: str
    header: list[str] = field(default_factory=list)
    code_column: str | None = None
    lines: list[int] = field(default_factory=list)
    codes: list[str] = field(default_factory=list)
    columns: dict[str, list[str]] = field(default_factory=dict)
    roles: dict[str, str] = field(default_factory=dict)
    #: lines holding nothing, and lines starting with ``#`` (``//`` in JSON Lines): counted
    #: alike in every format, never read as codes
    blank_lines: int = 0
    comment_lines: int = 0

    def __len__(self) -> int:
        return len(self.codes)

    def role(self, name: str) -> list[str] | None:
        """The values of the column playing ``name``, or None when the file has none."""
        header = self.roles.get(name)
        return None if header is None else self.columns[header]


def _delimiter(first: str) -> str | None:
    counts = {d: first.count(d) for d in DELIMITERS}
    best = max(counts, key=lambda d: counts[d])
    return best if counts[best] else None


def _find(keys: Sequence[str], wanted: Sequence[str]) -> int | None:
    for name in wanted:
        key = header_key(name)
        if key in keys:
            return keys.index(key)
    return None


def read_table(
    path: Path,
    *,
    column: str | None = None,
    roles: Mapping[str, Sequence[str]] | None = None,
    chosen: Mapping[str, str | None] | None = None,
    max_line_bytes: int | None = None,
) -> Table:
    """Read a plain list or a CSV with a header into a :class:`Table`.

    ``column`` names the code column (default: the first header in
    :data:`CODE_COLUMN_NAMES`, or the only column). ``roles`` maps a role to the header
    names that may play it; ``chosen`` names a header for a role outright (an error if
    the file lacks it). Blank lines and, in plain lists, lines starting with ``#`` are
    skipped.
    """
    name = _name(path)
    blocks = read_lines(path, max_line_bytes=max_line_bytes)
    table = Table(source=name)
    line = 1  # the number of the first line of ``block``
    for block in blocks:
        for index, text in enumerate(block):
            stripped = text.strip()
            if stripped and not stripped.startswith(COMMENT_MARKS):
                first_block = block[index:]
                line += index
                break
            if stripped:
                table.comment_lines += 1
            else:
                table.blank_lines += 1
        else:
            line += len(block)
            continue
        break
    else:
        raise InvalidFormat(f"{name} holds no codes")
    first = first_block[0]
    delimiter = _delimiter(first)
    first_key = header_key(first)
    plain = column is None and delimiter is None and first_key not in CODE_COLUMN_NAMES
    if first.lstrip().startswith(("{", "[")):
        header, rows = _json_rows(table, first_block, line, blocks)
        _fill(table, header, rows, column, roles or {}, chosen or {})
    elif plain:
        _read_plain(table, first_block, line, blocks)
    else:
        header, rows = _csv_rows(name, first_block, line, blocks, delimiter or ",")
        # cells our own CSV exports made safe for spreadsheets read back as written
        _fill(table, header, rows, column, roles or {}, chosen or {}, restore=True)
    if not table.codes:
        raise InvalidFormat(f"{name} holds no codes")
    return table


def _read_plain(table: Table, first_block: list[str], line: int, blocks: Iterator[list[str]]) -> None:
    codes, lines = table.codes, table.lines
    block, number = first_block, line
    while True:
        for text in block:
            stripped = text.strip()
            if not stripped:
                table.blank_lines += 1
            elif stripped.startswith(COMMENT_MARKS):
                table.comment_lines += 1
            else:
                codes.append(stripped)
                lines.append(number)
            number += 1
        next_block = next(blocks, None)
        if next_block is None:
            return
        block = next_block


def _chain(first_block: list[str], blocks: Iterator[list[str]]) -> Iterator[str]:
    yield from first_block
    for block in blocks:
        yield from block


def _csv_rows(
    name: str, first_block: list[str], line: int, blocks: Iterator[list[str]], delimiter: str
) -> tuple[list[str], Iterator[tuple[int, list[str]]]]:
    # each line keeps its end, so a quoted cell spanning lines (a two-line note) stays whole
    lines = (text + "\n" for text in _chain(first_block, blocks))
    reader = csv.reader(lines, delimiter=delimiter)
    try:
        header = next(reader)
    except csv.Error as exc:
        raise InvalidFormat(f"{name}: line {line}: {exc}") from None
    base = line - 1  # reader.line_num counts from the first line we handed it

    def rows() -> Iterator[tuple[int, list[str]]]:
        try:
            while True:
                first_line = base + reader.line_num + 1
                row = next(reader, None)
                if row is None:
                    return
                yield first_line, row
        except csv.Error as exc:
            raise InvalidFormat(f"{name}: line {base + reader.line_num}: {exc}") from None

    return header, rows()


def _json_rows(
    table: Table, first_block: list[str], line: int, blocks: Iterator[list[str]]
) -> tuple[list[str], Iterator[tuple[int, list[str]]]]:
    """JSON Lines (one object per line), or a JSON array written one object per line
    (as ``issuer export --format json`` writes it); the first object's keys are the
    header."""
    import json

    name = table.source

    def objects() -> Iterator[tuple[int, dict[str, object]]]:
        for number, text in enumerate(_chain(first_block, blocks), start=line):
            text = text.strip()
            if not text:
                table.blank_lines += 1
                continue
            if text.startswith(COMMENT_MARKS):
                table.comment_lines += 1
                continue
            if text.startswith("["):
                text = text[1:].lstrip()
            if text.endswith("]"):
                text = text[:-1].rstrip()
            text = text.rstrip(",").rstrip()
            if not text:  # the brackets of a JSON array on lines of their own
                continue
            try:
                value = json.loads(text)
            except (ValueError, RecursionError):
                value = None
            if not isinstance(value, dict):
                raise InvalidFormat(f"{name}: line {number} is not one JSON object (write one object per line)")
            yield number, value

    stream = objects()
    first = next(stream, None)
    if first is None:
        raise InvalidFormat(f"{name} holds no codes")
    header = [str(key) for key in first[1]]

    def cells(number: int, value: dict[str, object]) -> list[str]:
        row = ["" if value.get(key) is None else str(value.get(key)) for key in header]
        for key, cell in zip(header, row):
            # JSON escapes can carry what UTF-8 text cannot: NUL and lone surrogates
            if "\0" in cell or any("\ud800" <= ch <= "\udfff" for ch in cell):
                raise InvalidFormat(
                    f"{name}: line {number}: {key!r} holds a NUL or an unpaired surrogate, not text"
                )
        return row

    for key in header:
        if "\0" in key or any("\ud800" <= ch <= "\udfff" for ch in key):
            raise InvalidFormat(f"{name}: line {first[0]}: a key holds a NUL or an unpaired surrogate")

    def rows() -> Iterator[tuple[int, list[str]]]:
        yield first[0], cells(*first)
        for number, value in stream:
            yield number, cells(number, value)

    return header, rows()


def _fill(
    table: Table,
    header: list[str],
    rows: Iterator[tuple[int, list[str]]],
    column: str | None,
    roles: Mapping[str, Sequence[str]],
    chosen: Mapping[str, str | None],
    *,
    restore: bool = False,
) -> None:
    name = table.source
    keys = [header_key(cell) for cell in header]
    table.header = [cell.strip().strip("\ufeff").strip() for cell in header]
    shown = ", ".join(header.replace("\n", " ") for header in table.header)
    if column is not None:
        code_at = _find(keys, [column])
        if code_at is None:
            raise InvalidFormat(f"{name} has no column {column!r} (its columns: {shown})")
    else:
        code_at = _find(keys, CODE_COLUMN_NAMES)
        if code_at is None and len(keys) == 1:
            code_at = 0
        if code_at is None:
            raise InvalidFormat(f"{name}: which column holds the codes? name it with --column (its columns: {shown})")
    table.code_column = table.header[code_at]
    others = [i for i in range(len(keys)) if i != code_at]
    for role, header_name in chosen.items():
        if header_name is None:
            continue
        at = _find(keys, [header_name])
        if at is None:
            raise InvalidFormat(f"{name} has no column {header_name!r} (its columns: {shown})")
        table.roles[role] = table.header[at]
    for role, names in roles.items():
        if role not in table.roles:
            at = _find([keys[i] for i in others], names)
            if at is not None:
                table.roles[role] = table.header[others[at]]
    values: list[list[str]] = [[] for _ in others]
    codes, lines = table.codes, table.lines
    width = len(keys)
    for number, row in rows:
        if not row or not any(cell.strip() for cell in row):
            table.blank_lines += 1
            continue
        if row[0].lstrip().startswith(COMMENT_MARKS):
            table.comment_lines += 1
            continue
        if len(row) < width:
            row = row + [""] * (width - len(row))
        codes.append(restore_cell(row[code_at].strip()) if restore else row[code_at].strip())
        lines.append(number)
        for slot, index in zip(values, others):
            slot.append(restore_cell(row[index].strip()) if restore else row[index].strip())
    table.columns = {table.header[index]: slot for slot, index in zip(values, others)}
