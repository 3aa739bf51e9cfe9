"""Fonts that carry names: the bundled DejaVu family first, then the user's fallbacks.

Every text on a label has a role: ``text`` (caption lines, holder), ``bold`` (header,
VOID) and ``code`` (the human-readable code, fixed pitch). Each role starts with its
bundled DejaVu face (Latin, Greek, Cyrillic, Armenian, Georgian and more) and goes on with
the TTF/OTF files the config names under ``[labels] fonts``, in order. Each character is
drawn with the first face of the chain that has a glyph for it; a character that none has
is refused before anything is drawn, never printed as an empty box.

reportlab embeds each TrueType face as a subset holding only the glyphs used, so a PDF
stays small; PNG labels are rasterised from that PDF, and SVG labels draw the same glyph
outlines as paths, so every format shows the same letters.
"""

from __future__ import annotations

import hashlib
import os
import unicodedata
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Any

from issuer.errors import LabelError

#: the bundled faces by role (files in issuer/labels/fontfiles, with their licence)
BUNDLED = {
    "text": ("DejaVuSans.ttf",),
    "bold": ("DejaVuSans-Bold.ttf",),
    # a code's rare letter the fixed-pitch face lacks comes from the bold face
    "code": ("DejaVuSansMono-Bold.ttf", "DejaVuSans-Bold.ttf"),
}
ROLES = tuple(BUNDLED)
# bidirectional classes of right-to-left letters: drawn left to right they would read backwards
_RTL = frozenset(("R", "AL"))
FONT_SUFFIXES = (".ttf", ".otf", ".ttc")
# characters that lay out nothing and need no glyph of their own
_INVISIBLE = frozenset("\u200b\u200c\u200d\u2060\ufeff")


def bundled_font_path(name: str) -> Path:
    """The path of a bundled font file, found through the installed package."""
    return Path(str(resources.files("issuer.labels").joinpath("fontfiles", name)))


@dataclass(frozen=True)
class Face:
    """One registered TrueType face: its reportlab name, file and the characters it draws."""

    name: str
    path: str
    chars: frozenset[int] = field(repr=False)

    def has(self, char: str) -> bool:
        return ord(char) in self.chars


@lru_cache(maxsize=64)
def load_face(path: str) -> Face:
    """Register the TrueType/OpenType file at ``path`` with reportlab (once per process)."""
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFError, TTFont

    resolved = os.path.abspath(path)
    if not os.path.isfile(resolved):
        raise LabelError(f"font file {path!r} does not exist")
    if not resolved.lower().endswith(FONT_SUFFIXES):
        raise LabelError(f"font file {path!r}: give a .ttf, .otf or .ttc file")
    digest = hashlib.sha1(resolved.encode("utf-8")).hexdigest()[:10]
    name = f"issuer-{Path(resolved).stem[:40]}-{digest}"
    try:
        font = TTFont(name, resolved, subfontIndex=0)
    except TTFError as exc:
        raise LabelError(
            f"font file {path!r} cannot be embedded ({exc}); a TrueType-outline font is "
            "needed (an OpenType font with PostScript/CFF outlines is not)"
        ) from None
    except OSError as exc:
        raise LabelError(f"font file {path!r} cannot be read ({exc.strerror})") from None
    pdfmetrics.registerFont(font)
    return Face(name, resolved, frozenset(font.face.charToGlyph))


def char_name(char: str) -> str:
    """``U+0416 CYRILLIC CAPITAL LETTER ZHE`` (control characters by their code point)."""
    name = unicodedata.name(char, "")
    return f"U+{ord(char):04X} {name}" if name else f"U+{ord(char):04X} (a control character)"


@dataclass(frozen=True)
class FontSet:
    """The face chain of each role; measures and splits text into runs of one face."""

    chains: dict[str, tuple[Face, ...]]
    fallbacks: tuple[str, ...] = ()

    def face(self, role: str) -> Face:
        return self.chains[role][0]

    def missing(self, text: str, role: str) -> str | None:
        """The first character of ``text`` that no face of ``role`` draws, or None."""
        chain = self.chains[role]
        for char in text:
            if char in _INVISIBLE or char == " ":
                continue
            if not any(face.has(char) for face in chain):
                return char
        return None

    def check(self, text: str, role: str, what: str) -> str:
        """``text`` in its composed form (NFC), or a refusal naming the first character no
        configured font can draw; ``what`` says whose text it is."""
        text = unicodedata.normalize("NFC", text)
        for char in text:
            if unicodedata.bidirectional(char) in _RTL:
                raise LabelError(
                    f"{what}: {char_name(char)} ({char!r}) is right-to-left text, which labels "
                    "cannot lay out yet"
                )
        lacking = self.missing(text, role)
        if lacking is not None:
            where = (
                "the fonts configured under [labels] fonts"
                if self.fallbacks
                else "the bundled DejaVu fonts; name a font that has it under [labels] fonts"
            )
            raise LabelError(f"{what}: {char_name(lacking)} ({lacking!r}) is in none of {where}")
        return text

    def runs(self, text: str, role: str) -> list[tuple[Face, str]]:
        """``text`` split into runs, each drawn with the first face of the chain that has
        all of its characters (spaces stay with the run they are in)."""
        chain = self.chains[role]
        runs: list[tuple[Face, str]] = []
        for char in text:
            if char == " " or char in _INVISIBLE:
                face = runs[-1][0] if runs else chain[0]
            else:
                face = next((f for f in chain if f.has(char)), chain[0])
            if runs and runs[-1][0] is face:
                runs[-1] = (face, runs[-1][1] + char)
            else:
                runs.append((face, char))
        return runs

    def width(self, text: str, role: str, size: float) -> float:
        """Width of ``text`` at ``size`` points, in points."""
        from reportlab.pdfbase.pdfmetrics import stringWidth

        return float(sum(stringWidth(run, face.name, size) for face, run in self.runs(text, role)))


@lru_cache(maxsize=16)
def _font_set(fallbacks: tuple[str, ...]) -> FontSet:
    extra = tuple(load_face(path) for path in fallbacks)
    chains = {
        role: (*(load_face(str(bundled_font_path(name))) for name in names), *extra)
        for role, names in BUNDLED.items()
    }
    return FontSet(chains, fallbacks)


def font_set(fallbacks: Iterable[str | os.PathLike[str]] = ()) -> FontSet:
    """The bundled faces followed by ``fallbacks`` (font files, in order)."""
    return _font_set(tuple(os.fspath(path) for path in fallbacks))


def fallbacks_from_config(section: dict[str, Any], base: Path | None = None) -> tuple[str, ...]:
    """The ``fonts`` list of the config's ``[labels]`` table; relative paths are taken from
    the config file's folder ``base``."""
    value = section.get("fonts", [])
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, Sequence) or not all(isinstance(v, str) for v in value):
        raise LabelError("[labels] fonts must be a list of font file paths")
    found = []
    for item in value:
        path = Path(os.path.expanduser(item))
        if not path.is_absolute() and base is not None:
            path = base / path
        found.append(str(path))
    return tuple(found)
