"""What a label shows besides its symbol: the organisation's header line and logo, which
fields in which order, type sizes in points, and the print command for this stock.

A design belongs to a layout (``[layouts.NAME]`` in the config): a member card and a tool
tag are different stock with different faces. Lengths are physical (mm, or inches in an
inch layout); type sizes are points. The logo is a PNG or SVG file, scaled to the width
and/or height given, keeping its proportions; it sits in the header band at the top of the
label, or at ``logo_x``/``logo_y`` from the label's top-left corner, where it must stay clear
of the symbol, its quiet zone and the text (checked when a job is planned).
"""

from __future__ import annotations

import os
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any

from issuer.errors import LabelError, LayoutError

#: what a label's text block can show, in the order a layout's ``fields`` names them
FIELDS = ("code", "title", "holder", "note", "caption")
MIN_PT, MAX_PT = 4.0, 72.0
DEFAULT_HEADER_PT = 7.0
LOGO_SIDES = ("left", "right")
DESIGN_KEYS = frozenset(
    (
        "header",
        "header_pt",
        "logo",
        "logo_width",
        "logo_height",
        "logo_x",
        "logo_y",
        "logo_side",
        "fields",
        "code_pt",
        "text_pt",
        "print_command",
    )
)
DESIGN_LENGTHS = ("logo_width", "logo_height", "logo_x", "logo_y")


@dataclass(frozen=True)
class Design:
    """The face of one layout's labels; every part optional."""

    header: str = ""
    header_pt: float = DEFAULT_HEADER_PT
    logo: str | None = None  # absolute path of a .png or .svg file
    logo_width: float | None = None  # mm
    logo_height: float | None = None
    logo_x: float | None = None  # mm from the label's top-left; None: in the header band
    logo_y: float | None = None
    logo_side: str = "left"
    fields: tuple[str, ...] | None = None  # None: the command line's --lines decide
    code_pt: float | None = None  # None: as large as fits
    text_pt: float | None = None
    print_command: str | None = None

    @property
    def has_band(self) -> bool:
        """Whether the label keeps a header band at its top (a header, or a logo placed in it)."""
        return bool(self.header) or (self.logo is not None and self.logo_x is None)

    def logo_size(self) -> tuple[float, float]:
        """The logo's drawn width and height in mm, its proportions kept: fitted inside
        ``logo_width`` x ``logo_height`` when both are given."""
        assert self.logo is not None
        art = load_logo(self.logo)
        aspect = art.height / art.width
        width, height = self.logo_width, self.logo_height
        if width is not None and height is not None:
            if width * aspect <= height:
                return width, width * aspect
            return height / aspect, height
        if width is not None:
            return width, width * aspect
        assert height is not None
        return height / aspect, height


def _points(name: str, key: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise LayoutError(f"layout {name!r}: {key} must be a number of points")
    if not MIN_PT <= float(value) <= MAX_PT:
        raise LayoutError(f"layout {name!r}: {key} must be {MIN_PT:g} to {MAX_PT:g} points")
    return float(value)


def _fields(name: str, value: Any) -> tuple[str, ...]:
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise LayoutError(f'layout {name!r}: fields must be a list such as ["code", "holder"]')
    fields = tuple(v.strip().lower() for v in value)
    unknown = [v for v in fields if v not in FIELDS]
    if unknown:
        raise LayoutError(
            f"layout {name!r}: unknown field(s) {', '.join(unknown)} (known: {', '.join(FIELDS)})"
        )
    if len(set(fields)) != len(fields):
        raise LayoutError(f"layout {name!r}: a field is named twice")
    # the human-readable code is always on the label: first, unless placed elsewhere
    return fields if "code" in fields else ("code", *fields)


def design_from_table(
    name: str,
    table: Mapping[str, Any],
    length: Callable[[str, Any], float],
    base: Path | None = None,
) -> Design:
    """The design keys of one ``[layouts.NAME]`` table; ``length`` turns a config length
    into mm, ``base`` is the config file's folder (relative logo paths start there)."""
    values: dict[str, Any] = {}
    header = table.get("header", "")
    if not isinstance(header, str):
        raise LayoutError(f"layout {name!r}: header must be text")
    values["header"] = header.strip()
    for key in ("header_pt", "code_pt", "text_pt"):
        if key in table:
            values[key] = _points(name, key, table[key])
    for key in DESIGN_LENGTHS:
        if key in table:
            values[key] = length(key, table[key])
    if "fields" in table:
        values["fields"] = _fields(name, table["fields"])
    side = str(table.get("logo_side", "left")).lower()
    if side not in LOGO_SIDES:
        raise LayoutError(f"layout {name!r}: logo_side must be left or right")
    values["logo_side"] = side
    command = table.get("print_command")
    if command is not None:
        if not isinstance(command, str) or not command.strip():
            raise LayoutError(f"layout {name!r}: print_command must be a command line")
        values["print_command"] = command.strip()
    logo = table.get("logo")
    placed = [key for key in ("logo_x", "logo_y") if key in values]
    if logo is None:
        stray = [key for key in DESIGN_LENGTHS if key in values] + (
            ["logo_side"] if "logo_side" in table else []
        )
        if stray:
            raise LayoutError(f"layout {name!r}: {', '.join(stray)} given without a logo")
    else:
        if not isinstance(logo, str) or not logo.strip():
            raise LayoutError(f"layout {name!r}: logo must be the path of a .png or .svg file")
        path = Path(os.path.expanduser(logo.strip()))
        if not path.is_absolute() and base is not None:
            path = base / path
        values["logo"] = str(path)
        if "logo_width" not in values and "logo_height" not in values:
            raise LayoutError(f"layout {name!r}: give logo_width or logo_height (or both)")
        if len(placed) == 1:
            raise LayoutError(f"layout {name!r}: give both logo_x and logo_y, or neither")
    return Design(**values)


@dataclass(frozen=True)
class LogoArt:
    """A logo file read once: its kind, intrinsic size (any unit) and what draws it."""

    path: str
    kind: str  # "png" or "svg"
    width: float
    height: float
    drawing: Any = None  # svg: a reportlab Drawing


@lru_cache(maxsize=8)
def load_logo(path: str) -> LogoArt:
    """Read the logo at ``path`` (PNG or SVG); a file that is missing or unreadable is
    refused in one line."""
    suffix = Path(path).suffix.lower()
    if not os.path.isfile(path):
        raise LabelError(f"logo file {path!r} does not exist")
    if suffix == ".png":
        from PIL import Image, UnidentifiedImageError

        try:
            with Image.open(path) as image:
                if image.format != "PNG":
                    raise LabelError(f"logo file {path!r} is not a PNG image")
                width, height = image.size
        except (UnidentifiedImageError, OSError):
            raise LabelError(f"logo file {path!r} is not a readable PNG image") from None
        return LogoArt(path, "png", float(width), float(height))
    if suffix == ".svg":
        drawing = _read_svg(path)
        if drawing is None or not drawing.width or not drawing.height:
            raise LabelError(f"logo file {path!r} is not a readable SVG image with a size")
        return LogoArt(path, "svg", float(drawing.width), float(drawing.height), drawing)
    raise LabelError(f"logo file {path!r}: give a .png or .svg file")


def _read_svg(path: str) -> Any:
    import logging

    from svglib.svglib import svg2rlg

    # svglib reports what it skips through logging; a logo it cannot read is refused below
    logging.getLogger("svglib").setLevel(logging.ERROR)
    try:
        return svg2rlg(path)
    except Exception:  # noqa: BLE001 -- svglib raises many kinds (lxml, parsing) for a bad file
        return None
