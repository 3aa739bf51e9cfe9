"""How issuer reads a code that a person typed or a scanner sent: the rules, in one place.

Every path that takes a code from outside (check, desk, void, replace, restore, history,
reprint, labels, import, reconcile) reads it here, through :func:`read_code` (which series,
if any, a text is a code of) or :meth:`issuer.checking.codes.CodeFormat.parse` (one series),
which both apply the same rules in this order:

1. **Length.** A text longer than :data:`MAX_TYPED` characters is refused before anything
   else is done with it (no code is that long; a 10 MB line costs nothing).
2. **Characters that carry nothing are dropped:** spaces of every kind (NBSP included),
   hyphens and dashes of every script, ``_ . / :``, and the invisible format marks
   (zero-width space and joiners, word joiner, byte-order mark, soft hyphen, the
   left-to-right and right-to-left marks, embeddings and isolates).
3. **Characters that cannot be read are refused** with a line naming them and their
   position: control characters (NUL included), unpaired surrogates (undecodable bytes),
   private-use and unassigned code points, and any letter or symbol that is not, after
   rule 4, an ASCII letter, digit or printable sign.
4. **Compatibility forms become ASCII:** Unicode NFKC (full-width ``Ｑ１`` is ``Q1``,
   circled and super-script digits are digits), every script's decimal digits become
   0-9 (Arabic-Indic ``٣`` is ``3``, Devanagari ``७`` is ``7``), and Greek and Cyrillic
   capitals that look exactly like Latin ones (``А В Е К М Н О Р С Т Х``, ``Α Β Ε Ζ Η Ι
   Κ Μ Ν Ο Ρ Τ Υ Χ``) are read as those Latin letters. Case is folded to upper case.
5. **Confusable symbols fold where the alphabet lacks them**, position by position:
   ``O`` is read as ``0`` and ``I``/``L`` as ``1`` in a position whose alphabet has the
   digit but not the letter (every digit series, hexadecimal); ``0`` is read as ``O`` and
   ``1`` as ``I`` where the alphabet has the letter but not the digit (letter series).
   The alphabet's own published folding comes first (Crockford Base32: ``O``->0, ``I``
   and ``L``->1). The prefix and suffix compare with the same folding.
6. **Prefix and suffix may be left off** when what remains has exactly the series' width:
   ``0000013`` reads as ``WH0000013`` in a series with prefix ``WH``. Among several
   series, a whole code (prefix and suffix typed) is preferred; a text that fits only
   with its prefix or suffix supplied is accepted when exactly one series fits (or,
   when several do, exactly one whose check character matches).
7. **A code of another series is named as such** wherever one series was expected:
   ``QM-4395-7529 belongs to series members, not tools``.
8. **ISO/IEC 7064 two-character checks have one form.** A congruent second check pair
   the standard also satisfies (``99`` for ``02`` under MOD 97-10) is read as the pair
   the standard's procedure computes, so the same number never has two codes.

A check character catches mistakes, not fraud: reading folds only what people and
scanners really confuse, and what it folds is still verified by the check.

>>> typed_form("ｑｔ\u200b-0000\u00a0０13")
'QT000013'
>>> fold_symbols("I2O", "0123456789")
'120'
"""

from __future__ import annotations

import unicodedata
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, Protocol, TypeVar

from issuer.checking.alphabets import SEPARATORS
from issuer.errors import InvalidComponent, InvalidFormat, InvalidLength
from issuer.limits import MAX_CODE_CHARS

#: no code is longer than this many typed characters: the register's code limit
#: (:data:`issuer.limits.MAX_CODE_CHARS`) with room for a separator after each character
MAX_TYPED = 2 * MAX_CODE_CHARS

#: Greek and Cyrillic capitals drawn exactly like a Latin capital (after upper-casing)
LOOKALIKES: Mapping[str, str] = MappingProxyType(
    {
        **dict(zip("АВЕКМНОРСТХІЈЅ", "ABEKMHOPCTXIJS")),  # Cyrillic
        **dict(zip("ΑΒΕΖΗΙΚΜΝΟΡΤΥΧ", "ABEZHIKMNOPTYX")),  # Greek
    }
)

#: symbol typed -> symbols it is confused with, tried where the alphabet lacks the typed one
CONFUSABLE: Mapping[str, str] = MappingProxyType({"O": "0", "I": "1", "L": "1", "0": "O", "1": "I"})

#: ASCII characters dropped from typed text: the separators and every ASCII space
_DROP_ASCII = str.maketrans("", "", "".join(ch for ch in SEPARATORS if ch.isascii()) + " \t\r\n\v\f")
_CONTROL_ASCII = frozenset(chr(c) for c in (*range(32), 127)) - frozenset("\t\r\n\v\f")
_REFUSED_CATEGORIES = {
    "Cc": "a control character",
    "Cs": "an undecodable byte",
    "Co": "a private-use character",
    "Cn": "an unassigned character",
}


def shown(text: str, limit: int = 40) -> str:
    """``text`` as safe to print on one line: quoted, escapes for what cannot be seen,
    cut to ``limit`` characters."""
    cut = text if len(text) <= limit else text[:limit]
    out = []
    for ch in cut:
        if ch.isprintable() and ch not in "\\'" and unicodedata.category(ch) not in ("Cf", "Zs", "Zl", "Zp") or ch == " ":
            out.append(ch)
        else:
            out.append(repr(ch)[1:-1] if ch in "\\'" or ord(ch) < 0x100 else f"\\u{ord(ch):04x}" if ord(ch) < 0x10000 else f"\\U{ord(ch):08x}")
    return "'" + "".join(out) + ("\u2026" if len(text) > limit else "") + "'"


def echo(text: str) -> str:
    """What was typed, as safe to show and to write as JSON: control characters and
    undecodable bytes as U+FFFD, cut after :data:`MAX_TYPED` characters."""
    cut = text[:MAX_TYPED]
    if not cut.isprintable():
        cut = "".join(
            "\ufffd" if unicodedata.category(ch) in ("Cc", "Cs") else ch for ch in cut
        )
    return cut + ("\u2026" if len(text) > MAX_TYPED else "")


def _refuse(ch: str, position: int, what: str) -> InvalidComponent:
    name = unicodedata.name(ch, "")
    named = f"U+{ord(ch):04X}" + (f" {name}" if name else "")
    return InvalidComponent(f"character {named} ({what}) at position {position} cannot be part of a code")


def _too_long(text: str) -> InvalidLength:
    return InvalidLength(f"{len(text):,} characters is too long for a code (at most {MAX_TYPED})")


def typed_form(text: str) -> str:
    """Rules 1-4: ``text`` without separators and invisible marks, compatibility forms
    as ASCII, upper case; raise :class:`InvalidFormat` for a character that cannot be read."""
    if len(text) > MAX_TYPED:
        raise _too_long(text)
    if text.isascii():
        for position, ch in enumerate(text, start=1):
            if ch in _CONTROL_ASCII:
                raise _refuse(ch, position, "a control character")
        return text.translate(_DROP_ASCII).upper()
    out: list[str] = []
    for position, ch in enumerate(text, start=1):
        if ch.isascii():
            if ch in _CONTROL_ASCII:
                raise _refuse(ch, position, "a control character")
            out.append(ch)
            continue
        category = unicodedata.category(ch)
        if ch in SEPARATORS or ch.isspace() or category in ("Zs", "Zl", "Zp", "Pd", "Cf"):
            continue
        if category in _REFUSED_CATEGORIES:
            raise _refuse(ch, position, _REFUSED_CATEGORIES[category])
        if category == "Nd":
            out.append(str(unicodedata.decimal(ch)))
            continue
        for part in unicodedata.normalize("NFKC", ch).upper():
            part = LOOKALIKES.get(part, part)
            if part.isascii() and part.isprintable():
                out.append(part)
            elif unicodedata.category(part) == "Nd":
                out.append(str(unicodedata.decimal(part)))
            elif part.isspace() or unicodedata.category(part) in ("Zs", "Pd", "Cf"):
                continue
            else:
                raise _refuse(ch, position, "not a letter or digit a code can hold")
    return "".join(out).translate(_DROP_ASCII).upper()


def fold_symbols(text: str, symbols: str, folding: Mapping[str, str] | None = None) -> str:
    """Rule 5: each character of upper-case ``text`` as a symbol of ``symbols`` where a
    published folding or a confusion says so; others are left for the caller to refuse."""
    out = []
    for ch in text:
        if folding:
            ch = folding.get(ch, ch)
        if ch not in symbols:
            other = CONFUSABLE.get(ch)
            if other is not None and other in symbols:
                ch = other
        out.append(ch)
    return "".join(out)


def _skeleton(text: str) -> str:
    """A prefix or suffix compared loosely: the confusable letters as their digits."""
    return text.translate(_SKELETON)


_SKELETON = str.maketrans({"O": "0", "I": "1", "L": "1"})


class Layout(Protocol):
    """What splitting a text needs from a series' shape (a ``CodeFormat``)."""

    @property
    def prefix(self) -> str: ...
    @property
    def suffix(self) -> str: ...
    @property
    def width(self) -> int: ...


def split_typed(layout: Layout, cleaned: str) -> tuple[str, bool]:
    """Rule 6 for one series: the part between prefix and suffix of an already
    :func:`typed_form` text, and whether the prefix or suffix was left off (and supplied)."""
    prefix, suffix, width = layout.prefix, layout.suffix, layout.width
    if not cleaned:
        raise InvalidLength("the code is empty")
    head = _skeleton(cleaned[: len(prefix)]) == _skeleton(prefix)
    tail = not suffix or _skeleton(cleaned[len(cleaned) - len(suffix):]) == _skeleton(suffix)
    if head and tail and len(cleaned) - len(prefix) - len(suffix) == width:
        return cleaned[len(prefix): len(cleaned) - len(suffix)], False
    if prefix or suffix:
        # the prefix, the suffix, or both left off
        for has_prefix, has_suffix in ((False, True), (True, False), (False, False)):
            if (has_prefix and not prefix) or (has_suffix and not suffix):
                continue
            start = len(prefix) if has_prefix else 0
            end = len(cleaned) - (len(suffix) if has_suffix else 0)
            if end - start != width:
                continue
            if has_prefix and not head or has_suffix and not tail:
                continue
            return cleaned[start:end], True
    if prefix and not head:
        raise InvalidComponent(f"does not start with the prefix {prefix}")
    if suffix and not tail:
        raise InvalidComponent(f"does not end with the suffix {suffix}")
    middle = len(cleaned) - len(prefix) - len(suffix)
    raise InvalidLength(f"has {middle} characters between prefix and suffix, expected {width}")


# -- reading among series --------------------------------------------------------------


class Parsed(Protocol):
    @property
    def canonical(self) -> str: ...
    @property
    def completed(self) -> bool: ...


#: what a shape's ``parse`` gives and its ``check_matches`` takes back (a ``ParsedCode``)
P = TypeVar("P", bound=Parsed)


class Shape(Layout, Protocol[P]):
    """What :func:`read_code` needs from a series' shape (a ``CodeFormat``)."""

    def parse(self, text: str) -> P: ...
    def check_matches(self, parsed: P) -> bool: ...
    def display(self, canonical: str) -> str: ...


@dataclass(frozen=True)
class Reading:
    """``text`` read as a code of ``series``: its canonical and display forms, whether
    the check character matches, whether the prefix or suffix was supplied."""

    series: str
    canonical: str
    display: str
    valid: bool
    completed: bool = False


@dataclass(frozen=True)
class Read:
    """What :func:`read_code` made of a text: the readings, best first, or the problem.

    ``other_series`` names the series the text belongs to when one series was expected
    and the text is a code of another."""

    text: str
    readings: tuple[Reading, ...] = ()
    problem: str | None = None
    other_series: str | None = None
    ambiguous: bool = False
    notes: tuple[str, ...] = field(default=())

    def one(self) -> Reading:
        """The one reading, or :class:`InvalidFormat` saying why there is none."""
        if self.readings and not self.ambiguous:
            return self.readings[0]
        raise InvalidFormat(self.problem or "not a code")


def read_code(shapes: Sequence[tuple[str, Shape[Any]]], text: str, *, series: str | None = None) -> Read:
    """Read ``text`` as a code of one of ``shapes`` (series key, shape), by the rules above.

    With ``series``, only that series' reading is wanted; a code of another series is
    named as such (rule 7)."""
    try:
        cleaned = typed_form(text)
    except InvalidFormat as exc:
        return Read(text, problem=exc.message)
    if not cleaned:
        return Read(text, problem="empty input")
    whole: list[Reading] = []
    completed: list[Reading] = []
    problems: list[tuple[bool, str, str]] = []
    claimed = False  # the text carries some series' prefix and suffix but is not its code
    for key, shape in shapes:
        try:
            parsed = shape.parse(cleaned)
        except InvalidFormat as exc:
            carries = cleaned.startswith(shape.prefix) and cleaned.endswith(shape.suffix)
            problems.append((carries, key, exc.message))
            claimed = claimed or carries and bool(shape.prefix or shape.suffix)
            continue
        reading = Reading(key, parsed.canonical, shape.display(parsed.canonical),
                          shape.check_matches(parsed), parsed.completed)
        (completed if parsed.completed else whole).append(reading)
    if claimed:
        # a text carrying one series' prefix is not read as another's with its prefix left
        # off, unless the check character says it is
        completed = [r for r in completed if r.valid]
    wanted = [r for r in whole + completed if r.series == series] if series else []
    if series is not None:
        if wanted:
            return Read(text, tuple(wanted[:1]))
        others = _choose(text, whole, [r for r in completed if r.valid])
        if others.readings and not others.ambiguous:
            found = others.readings[0]
            return Read(text, problem=f"{found.display} belongs to series {found.series}, not {series}",
                        other_series=found.series)
        own = next((message for _, key, message in problems if key == series), "not a code of this series")
        return Read(text, problem=own)
    chosen = _choose(text, whole, completed)
    if chosen.readings:
        return chosen
    if len(shapes) == 0:
        return Read(text, problem="the register has no series yet")
    if len(problems) == 1:
        return Read(text, problem=problems[0][2])
    closest = [f"{key}: {message}" for carries, key, message in problems if carries]
    closest = closest or [f"{key}: {message}" for _, key, message in problems]
    return Read(text, problem="; ".join(closest))


def _choose(text: str, whole: list[Reading], completed: list[Reading]) -> Read:
    if whole:
        return Read(text, tuple(sorted(whole, key=lambda r: not r.valid)))
    if len(completed) <= 1:
        return Read(text, tuple(completed))
    valid = [r for r in completed if r.valid]
    if len(valid) == 1:
        return Read(text, (valid[0],))
    fitting = valid or completed
    names = ", ".join(r.series for r in fitting)
    return Read(
        text, tuple(fitting), ambiguous=True,
        problem=f"fits series {names} once a prefix or suffix is added: type the code whole",
    )


__all__ = [
    "CONFUSABLE",
    "LOOKALIKES",
    "MAX_TYPED",
    "Read",
    "Reading",
    "echo",
    "fold_symbols",
    "read_code",
    "shown",
    "split_typed",
    "typed_form",
]
