"""Checking typed codes against a scheme alone (no register): one text, or a whole file.

A text is cleaned the way the alphabet says (Unicode compatibility folding, separators
and spaces dropped, case and the alphabet's own folding rules), split into body and
check character(s), and verified. :func:`check_lines` does the same for every line of
a file at once: lines already made only of alphabet symbols go through the scheme's
bulk form grouped by length (numpy), and only the rest take the one-text path, so the
answers are the same either way.

>>> from issuer.checking.schemes import get_scheme
>>> check_text(get_scheme("luhn"), "7992-7398-713").valid
True
>>> check_text(get_scheme("luhn"), "79927398710").reason
'the check character does not match'
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from issuer.checking.schemes.base import Scheme
from issuer.errors import InvalidLength

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

#: Longest input taken as a code; anything longer is refused as not a code at all.
MAX_INPUT_LENGTH = 256

#: Why a text failed, as counted in summaries.
REASONS = {
    "check": "wrong check character",
    "symbols": "characters outside the alphabet",
    "length": "too short or too long for the scheme",
    "empty": "nothing but separators",
}

_CHUNK = 1 << 18  # rows per bulk step: bounds memory on big files


@dataclass(frozen=True)
class CodeCheck:
    """The answer for one input. ``code`` is the canonical text when it is made of the
    right symbols; ``kind`` is a key of :data:`REASONS` when invalid."""

    input: str
    valid: bool
    code: str | None = None
    reason: str | None = None
    kind: str | None = None

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"input": self.input, "valid": self.valid, "code": self.code}
        if not self.valid:
            out["reason"] = self.reason
        return out


def check_text(scheme: Scheme, text: str) -> CodeCheck:
    """Verify one typed code against ``scheme``; never raises for bad text."""
    if len(text) > MAX_INPUT_LENGTH:
        raise InvalidLength(
            f"an input of {len(text):,} characters is not a code (at most {MAX_INPUT_LENGTH})"
        )
    cleaned = scheme.alphabet.clean(text)
    if not cleaned:
        return CodeCheck(text, False, None, "there is nothing but separators", "empty")
    cut = len(cleaned) - scheme.check_length
    if cut < 1:
        return CodeCheck(
            text,
            False,
            None,
            f"too short: a code needs more than {scheme.check_length} character(s)",
            "length",
        )
    for position, ch in enumerate(cleaned, start=1):
        part = scheme.alphabet if position <= cut else scheme.check_alphabet
        if ch not in part.symbols:
            where = "check character" if position > cut else "character"
            return CodeCheck(
                text,
                False,
                None,
                f"{where} {ch!r} at position {position} is not in the {part.name} alphabet",
                "symbols",
            )
    body, check = cleaned[:cut], cleaned[cut:]
    try:
        scheme.require_body_length(len(body))
    except InvalidLength as exc:
        return CodeCheck(text, False, None, exc.message, "length")
    body_values = scheme.alphabet.values(body)
    if not scheme.verify_values(body_values, scheme.check_alphabet.values(check)):
        return CodeCheck(text, False, cleaned, "the check character does not match", "check")
    return CodeCheck(text, True, cleaned)


@dataclass
class LinesCheck:
    """Every non-blank line of a file checked. ``results`` is kept only when asked."""

    total: int = 0
    valid: int = 0
    kinds: Counter[str] = field(default_factory=Counter)
    results: list[CodeCheck] | None = None

    @property
    def invalid(self) -> int:
        return self.total - self.valid

    def to_dict(self) -> dict[str, Any]:
        return {
            "total": self.total,
            "valid": self.valid,
            "invalid": self.invalid,
            "reasons": {key: self.kinds.get(key, 0) for key in REASONS},
        }


def _line_bounds(raw: npt.NDArray[np.uint8]) -> tuple[Any, Any]:
    """Start and end offsets of each line, a trailing carriage return left out."""
    import numpy as np

    breaks = np.flatnonzero(raw == 10)
    starts = np.concatenate([[0], breaks + 1]).astype(np.int64)
    ends = np.concatenate([breaks, [raw.size]]).astype(np.int64)
    if starts[-1] == raw.size:  # the text ends with a newline: no last line
        starts, ends = starts[:-1], ends[:-1]
    has_cr = (ends > starts) & (raw[np.maximum(ends - 1, 0)] == 13)
    return starts, ends - has_cr


def _regular_block(raw: Any, starts: Any, width: int) -> Any:
    """The lines as an ``(n, width)`` view without copying, when they sit at equal
    strides in the file (every line the same length, the usual case); else ``None``."""
    import numpy as np

    if starts.size < 2:
        return None
    stride = int(starts[1] - starts[0])
    if stride < width or not (np.diff(starts) == stride).all():
        return None
    return np.lib.stride_tricks.as_strided(
        raw[int(starts[0]) :], shape=(starts.size, width), strides=(stride, 1), writeable=False
    )


def _verify_chunk(scheme: Scheme, rows: Any, chars: Any) -> tuple[Any, Any, Any]:
    """Rows made only of alphabet symbols, their values, and which of them verify."""
    import numpy as np

    c = scheme.check_length
    width = chars.shape[1]
    body_table = scheme.alphabet.lookup_table()
    if scheme.check_alphabet is scheme.alphabet:
        values = body_table[chars]
    else:
        check_table = scheme.check_alphabet.lookup_table()
        values = np.concatenate(
            [body_table[chars[:, : width - c]], check_table[chars[:, width - c :]]], axis=1
        )
    clean = (values >= 0).all(axis=1)
    if not clean.all():
        rows, values = rows[clean], values[clean]
    return rows, values, scheme.verify_bulk(values.astype(np.int64))


def _canonical_symbols(scheme: Scheme, values: Any) -> Any:
    """Canonical text bytes of a value matrix, body and check each in their alphabet."""
    import numpy as np

    c = scheme.check_length
    width = values.shape[1]
    body = np.frombuffer(scheme.alphabet.symbols.encode("ascii", "replace"), np.uint8)
    check = np.frombuffer(scheme.check_alphabet.symbols.encode("ascii", "replace"), np.uint8)
    return np.concatenate([body[values[:, : width - c]], check[values[:, width - c :]]], axis=1)


def check_lines(scheme: Scheme, data: bytes, *, keep_results: bool = False) -> LinesCheck:
    """Verify every non-blank line of ``data`` (UTF-8 text, one code a line).

    Raises :class:`~issuer.errors.InvalidLength` before checking anything when a line
    is longer than :data:`MAX_INPUT_LENGTH` (a binary file, a pasted document).
    """
    import numpy as np

    raw = np.frombuffer(data, dtype=np.uint8)
    starts, ends = _line_bounds(raw)
    lengths = ends - starts
    too_long = np.flatnonzero(lengths > MAX_INPUT_LENGTH)
    if too_long.size:
        line = int(too_long[0])
        raise InvalidLength(
            f"line {line + 1} is {int(lengths[line]):,} bytes long; a code has at most "
            f"{MAX_INPUT_LENGTH} characters"
        )
    status = np.zeros(starts.size, dtype=np.int8)  # 0 slow path, 1 valid, 2 bad check, 3 blank
    status[lengths == 0] = 3
    canonical: list[tuple[Any, Any]] = []
    c = scheme.check_length
    longest = scheme.max_body_length
    per_width = np.bincount(lengths)
    for width in np.flatnonzero(per_width).tolist():
        if width <= c or (longest is not None and width - c > longest):
            continue  # the one-text path says why, line by line
        rows_all = np.flatnonzero(lengths == width)
        block = _regular_block(raw, starts[rows_all], width)
        for at in range(0, rows_all.size, _CHUNK):
            rows = rows_all[at : at + _CHUNK]
            if block is not None:
                chars = block[at : at + _CHUNK]
            else:
                chars = raw[starts[rows, None] + np.arange(width)]
            fast, values, ok = _verify_chunk(scheme, rows, chars)
            status[fast] = np.where(ok, 1, 2)
            if keep_results:
                canonical.append((fast, _canonical_symbols(scheme, values)))
    result = LinesCheck(results=[] if keep_results else None)
    result.valid = int(np.count_nonzero(status == 1))
    result.kinds["check"] = int(np.count_nonzero(status == 2))
    result.total = result.valid + result.kinds["check"]
    slow = np.flatnonzero(status == 0)
    slow_answers: dict[int, CodeCheck] = {}
    for line in slow.tolist():
        text = data[int(starts[line]) : int(ends[line])].decode("utf-8", "replace")
        if not text.strip():
            status[line] = 3
            continue
        answer = check_text(scheme, text)
        slow_answers[line] = answer
        result.total += 1
        if answer.valid:
            result.valid += 1
        else:
            result.kinds[answer.kind or "symbols"] += 1
    if keep_results and result.results is not None:
        result.results.extend(_in_order(data, starts, ends, status, canonical, slow_answers))
    return result


def _in_order(
    data: bytes,
    starts: Any,
    ends: Any,
    status: Any,
    canonical: list[tuple[Any, Any]],
    slow_answers: dict[int, CodeCheck],
) -> list[CodeCheck]:
    """Answers in the file's line order, blank lines left out."""
    import numpy as np

    first, last = starts.tolist(), ends.tolist()
    texts: list[str] = [""] * len(first)
    for fast, matrix in canonical:
        width = matrix.shape[1]
        words = np.ascontiguousarray(matrix, dtype=np.uint8).view(f"S{width}").ravel().tolist()
        for line, word in zip(fast.tolist(), words):
            texts[line] = word.decode("ascii")
    mismatch = "the check character does not match"
    out: list[CodeCheck] = []
    for line, kind in enumerate(status.tolist()):
        if kind == 3:
            continue
        if kind == 0:
            out.append(slow_answers[line])
            continue
        original = data[first[line] : last[line]].decode("ascii")
        if kind == 1:
            out.append(CodeCheck(original, True, texts[line]))
        else:
            out.append(CodeCheck(original, False, texts[line], mismatch, "check"))
    return out


__all__ = ["MAX_INPUT_LENGTH", "REASONS", "CodeCheck", "LinesCheck", "check_lines", "check_text"]
