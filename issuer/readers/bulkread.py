"""Many typed or scanned texts read as codes of one shape at once.

The answer for each text is exactly what :meth:`issuer.checking.codes.CodeFormat.parse` and the
scheme's check would say, but a million texts cost a few numpy passes rather than a
million parses: separators are dropped and case folded over one joined string, the
characters are mapped to values through the alphabets' lookup tables, and the check
characters are verified by the scheme's ``verify_bulk``. Whatever the fast path does
not accept (a wrong length, a stray character, non-ASCII text) is parsed one by one by
:meth:`CodeFormat.parse`, so its reason is the same one a clerk would see at the desk.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from issuer.checking.alphabets import SEPARATORS
from issuer.checking.codes import CodeFormat, normalise_text
from issuer.errors import InvalidFormat

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt

#: what a text is, read under a shape
MALFORMED, BAD_CHECK, VALID = 0, 1, 2

#: rows checked per numpy pass: bounds the temporary matrices (a row costs ~100 bytes)
BLOCK_ROWS = 1 << 16

_DROP_SEPARATORS = str.maketrans("", "", "".join(SEPARATORS))


@dataclass
class ReadCodes:
    """``canonical[i]`` is text ``i``'s canonical code (``None`` when malformed) and
    ``state[i]`` one of :data:`MALFORMED`, :data:`BAD_CHECK`, :data:`VALID`;
    ``reasons`` says what is wrong with each malformed text, by index. ``fixed`` holds
    the same canonical codes as one numpy array of fixed-width bytes (``b""`` when
    malformed; text when a code is not ASCII), for set work without Python strings.
    ``alternatives`` names, by index, each valid text whose check was a congruent
    alternative pair (ISO/IEC 7064 two-character methods), with the pair as typed: it
    reads as the code with the computed pair, and ``import`` refuses it."""

    canonical: list[str | None]
    state: npt.NDArray[np.int8]
    reasons: dict[int, str] = field(default_factory=dict)
    fixed: npt.NDArray[np.generic] | None = None
    alternatives: dict[int, str] = field(default_factory=dict)


def _cleaned(texts: Sequence[str]) -> list[str]:
    """``normalise_text`` of every text; ASCII texts without line breaks in one pass."""
    joined = "\n".join(texts)
    if joined.isascii() and joined.count("\n") == len(texts) - 1:
        return joined.translate(_DROP_SEPARATORS).upper().split("\n") if texts else []
    return [
        text.translate(_DROP_SEPARATORS).upper() if text.isascii() else normalise_text(text)
        for text in texts
    ]


def _rows_as_text(matrix: npt.NDArray[np.uint8]) -> list[str]:
    import numpy as np

    if matrix.shape[0] == 0:
        return []
    lines = np.empty((matrix.shape[0], matrix.shape[1] + 1), dtype=np.uint8)
    lines[:, :-1] = matrix
    lines[:, -1] = ord("\n")
    return lines.tobytes().decode("ascii").split("\n")[:-1]


def _read_block(
    shape: CodeFormat, raw: npt.NDArray[np.uint8]
) -> tuple[npt.NDArray[np.bool_], npt.NDArray[np.bool_], npt.NDArray[np.uint8], npt.NDArray[np.bool_]]:
    """For equal-width ASCII texts: which fit the shape, which of those pass the check,
    the fitting ones' canonical bytes, and which of those had an alternative check."""
    import numpy as np

    scheme = shape.scheme
    start, body_end = len(shape.prefix), len(shape.prefix) + shape.length
    check_end = body_end + scheme.check_length
    fits = np.ones(raw.shape[0], dtype=bool)
    if shape.prefix:
        prefix = np.frombuffer(shape.prefix.encode("ascii"), dtype=np.uint8)
        fits &= (raw[:, :start] == prefix).all(axis=1)
    if shape.suffix:
        suffix = np.frombuffer(shape.suffix.encode("ascii"), dtype=np.uint8)
        fits &= (raw[:, check_end:] == suffix).all(axis=1)
    body = scheme.alphabet.lookup_table()[raw[:, start:body_end]]
    check = scheme.check_alphabet.lookup_table()[raw[:, body_end:check_end]]
    fits &= (body >= 0).all(axis=1) & (check >= 0).all(axis=1)
    values = np.concatenate([body, check], axis=1)[fits].astype(np.int64)
    if scheme.check_length:
        valid = scheme.verify_bulk(values)
    else:
        valid = np.ones(values.shape[0], dtype=bool)
    alternative = np.zeros(values.shape[0], dtype=bool)
    if scheme.has_alternative_checks and valid.any():
        # a congruent alternative check reads as the computed one (one code per number)
        computed = scheme.compute_bulk(values[valid, : shape.length])
        alternative[valid] = (values[valid, shape.length:] != computed).any(axis=1)
        values[valid, shape.length:] = computed
    # the canonical text: prefix, folded symbols, suffix
    out = raw[fits].copy()
    body_symbols = np.frombuffer(scheme.alphabet.symbols.encode("ascii"), dtype=np.uint8)
    check_symbols = np.frombuffer(scheme.check_alphabet.symbols.encode("ascii"), dtype=np.uint8)
    out[:, start:body_end] = body_symbols[values[:, : shape.length]]
    out[:, body_end:check_end] = check_symbols[values[:, shape.length:]]
    return fits, valid, out, alternative


def _read_part(
    shape: CodeFormat, texts: Sequence[str], state: npt.NDArray[np.int8], fixed: npt.NDArray[np.bytes_],
    canonical: list[str | None], offset: int, alternatives: dict[int, str],
) -> None:
    """Read ``texts`` (rows ``offset``... of the whole) on the fast path: equal-width ASCII
    texts checked column-wise; the others stay malformed for the slow path."""
    import numpy as np

    cleaned = _cleaned(texts)
    width = shape.total_width
    count = len(cleaned)
    lengths = np.fromiter(map(len, cleaned), dtype=np.int64, count=count)
    ascii_ok = np.fromiter(map(str.isascii, cleaned), dtype=bool, count=count)
    fast = np.flatnonzero((lengths == width) & ascii_ok)
    if not fast.size:
        return
    chosen = [cleaned[i] for i in fast.tolist()] if fast.size < count else cleaned
    raw = np.frombuffer("".join(chosen).encode("ascii"), dtype=np.uint8).reshape(-1, width)
    fits, valid, out, alternative = _read_block(shape, raw)
    where = fast[fits]
    if alternative.any():
        body_end = len(shape.prefix) + shape.length
        check_end = body_end + shape.scheme.check_length
        for index in where[alternative].tolist():
            alternatives[offset + index] = cleaned[index][body_end:check_end]
    state[offset + where] = np.where(valid, VALID, BAD_CHECK).astype(np.int8)
    fixed[offset + where] = out.view(f"S{width}").ravel()
    for index, text in zip(where.tolist(), _rows_as_text(out)):
        scanned = texts[index]
        # a scan written in canonical form is its own canonical code: one string, not two
        canonical[offset + index] = scanned if scanned == text else text


def read_codes(shape: CodeFormat, texts: Sequence[str]) -> ReadCodes:
    """Read every text as a code of ``shape``; see :class:`ReadCodes`. The texts are read
    :data:`BLOCK_ROWS` at a time, so the working memory stays small however many."""
    import numpy as np

    count = len(texts)
    width = shape.total_width
    scheme = shape.scheme
    state = np.full(count, MALFORMED, dtype=np.int8)
    fixed = np.zeros(count, dtype=f"S{width}")
    canonical: list[str | None] = [None] * count
    alternatives: dict[int, str] = {}
    for at in range(0, count, BLOCK_ROWS):
        _read_part(shape, texts[at: at + BLOCK_ROWS], state, fixed, canonical, at, alternatives)
    reasons: dict[int, str] = {}
    slow: dict[int, str] = {}
    for index in np.flatnonzero(state == MALFORMED).tolist():
        try:
            parsed = shape.parse(texts[index])
        except InvalidFormat as exc:
            reasons[index] = exc.message
            continue
        canonical[index] = slow[index] = parsed.canonical
        ok = scheme.is_valid(parsed.body + parsed.check) if scheme.check_length else True
        state[index] = VALID if ok else BAD_CHECK
        if parsed.typed_check is not None:
            alternatives[index] = parsed.typed_check
    if slow:
        if all(code.isascii() and len(code) == width for code in slow.values()):
            for index, code in slow.items():
                fixed[index] = code.encode("ascii")
        else:  # a code outside ASCII: the array holds text instead
            fixed = np.array([code or "" for code in canonical], dtype=str)
    return ReadCodes(canonical, state, reasons, fixed, alternatives)


__all__ = ["BAD_CHECK", "MALFORMED", "VALID", "ReadCodes", "read_codes"]
