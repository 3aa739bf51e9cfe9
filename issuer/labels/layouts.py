"""Label layouts: where the labels sit on a page, in physical units.

A layout is a grid of equal labels on a page: ``rows`` x ``columns`` labels of
``label_width`` x ``label_height``, the first one ``margin_left`` from the left edge and
``margin_top`` from the top edge, neighbours ``gap_x`` / ``gap_y`` apart. Everything is
held in millimetres; the config may give millimetres or inches. Nothing is scaled to
the page: a sheet printed at 100 % (actual size) has exactly these dimensions.

Presets are named by what they are (paper, columns x rows, or roll and label size).
A user adds layouts as ``[layouts.NAME]`` tables in the config file; a user layout may
not take a preset's name (nothing is overridden silently).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

from issuer.errors import LayoutError, UnknownName
from issuer.labels.design import DESIGN_KEYS, Design, design_from_table

MM_PER_INCH = 25.4
# a layout is checked to this tolerance so that inch layouts converted to mm still fit
_FIT_TOLERANCE_MM = 0.005

# ISO 216 and the North American sizes, width x height in mm (portrait)
PAGE_SIZES: Mapping[str, tuple[float, float]] = MappingProxyType(
    {
        "a4": (210.0, 297.0),  # source: ISO 216, A4 210 x 297 mm
        "a5": (148.0, 210.0),  # source: ISO 216, A5 148 x 210 mm
        "a6": (105.0, 148.0),  # source: ISO 216, A6 105 x 148 mm
        "letter": (
            8.5 * MM_PER_INCH,
            11.0 * MM_PER_INCH,
        ),  # source: ANSI/ASME Y14.1 letter 8.5 x 11 in
        "legal": (
            8.5 * MM_PER_INCH,
            14.0 * MM_PER_INCH,
        ),  # source: ANSI/ASME Y14.1 legal 8.5 x 14 in
    }
)

_NAME_RE = re.compile(r"^[a-z0-9][a-z0-9._-]{0,39}$")


@dataclass(frozen=True)
class Box:
    """A rectangle on a page in millimetres, measured from the page's top-left corner."""

    x: float
    y: float
    width: float
    height: float

    @property
    def right(self) -> float:
        return self.x + self.width

    @property
    def bottom(self) -> float:
        return self.y + self.height

    def contains(self, x: float, y: float, slack: float = 0.0) -> bool:
        return (
            self.x - slack <= x <= self.right + slack and self.y - slack <= y <= self.bottom + slack
        )

    def inset(self, by: float) -> Box:
        return Box(self.x + by, self.y + by, self.width - 2 * by, self.height - 2 * by)


@dataclass(frozen=True)
class Layout:
    """A sheet (or roll) of equal labels, all dimensions in millimetres.

    ``padding`` is a blank border inside every label: nothing is printed there, so a
    label cut or placed slightly off still shows all of its barcode and text.
    """

    name: str
    page_width: float
    page_height: float
    rows: int
    columns: int
    label_width: float
    label_height: float
    margin_left: float
    margin_top: float
    gap_x: float = 0.0
    gap_y: float = 0.0
    padding: float = 1.5
    description: str = ""
    origin: str = "preset"
    design: Design = field(default_factory=Design)

    def __post_init__(self) -> None:
        where = f"layout {self.name!r}"
        for field_name in ("page_width", "page_height", "label_width", "label_height"):
            if not getattr(self, field_name) > 0:
                raise LayoutError(f"{where}: {field_name} must be greater than 0")
        for field_name in ("margin_left", "margin_top", "gap_x", "gap_y", "padding"):
            if getattr(self, field_name) < 0:
                raise LayoutError(f"{where}: {field_name} must not be negative")
        if self.rows < 1 or self.columns < 1:
            raise LayoutError(f"{where}: rows and columns must be at least 1")
        if 2 * self.padding >= min(self.label_width, self.label_height):
            raise LayoutError(f"{where}: padding {self.padding:g} mm leaves no room on the label")
        grid_w, grid_h = self.grid_width, self.grid_height
        if self.margin_left + grid_w > self.page_width + _FIT_TOLERANCE_MM:
            raise LayoutError(
                f"{where} does not fit the page: {self.columns} columns of {self.label_width:g} mm "
                f"with {self.gap_x:g} mm gaps from a {self.margin_left:g} mm margin need "
                f"{self.margin_left + grid_w:.2f} mm, the page is {self.page_width:g} mm wide"
            )
        if self.margin_top + grid_h > self.page_height + _FIT_TOLERANCE_MM:
            raise LayoutError(
                f"{where} does not fit the page: {self.rows} rows of {self.label_height:g} mm "
                f"with {self.gap_y:g} mm gaps from a {self.margin_top:g} mm margin need "
                f"{self.margin_top + grid_h:.2f} mm, the page is {self.page_height:g} mm tall"
            )

    # -- geometry --------------------------------------------------------------
    @property
    def grid_width(self) -> float:
        return self.columns * self.label_width + (self.columns - 1) * self.gap_x

    @property
    def grid_height(self) -> float:
        return self.rows * self.label_height + (self.rows - 1) * self.gap_y

    @property
    def per_page(self) -> int:
        return self.rows * self.columns

    def position(self, slot: int) -> tuple[int, int, int]:
        """(page, row, column) of the ``slot``-th cell counted from the first page's top-left,
        row by row."""
        page, within = divmod(slot, self.per_page)
        row, column = divmod(within, self.columns)
        return page, row, column

    def cell(self, row: int, column: int) -> Box:
        """The label at ``row``, ``column`` (0-based, from the top-left) on its page."""
        return Box(
            self.margin_left + column * (self.label_width + self.gap_x),
            self.margin_top + row * (self.label_height + self.gap_y),
            self.label_width,
            self.label_height,
        )

    def single(self) -> Layout:
        """One label of this layout on a page of its own size (PNG, SVG, one-label PDF)."""
        return Layout(
            name=self.name,
            page_width=self.label_width,
            page_height=self.label_height,
            rows=1,
            columns=1,
            label_width=self.label_width,
            label_height=self.label_height,
            margin_left=0.0,
            margin_top=0.0,
            padding=self.padding,
            description=self.description,
            origin=self.origin,
            design=self.design,
        )

    def summary(self) -> str:
        """One line of dimensions, as the PDF metadata and ``issuer layouts`` show them."""
        return (
            f"page {self.page_width:g} x {self.page_height:g} mm; {self.rows} rows x "
            f"{self.columns} columns of {self.label_width:g} x {self.label_height:g} mm labels; "
            f"margins left {self.margin_left:g} mm, top {self.margin_top:g} mm; "
            f"gaps {self.gap_x:g} mm across, {self.gap_y:g} mm down"
        )

    def to_dict(self) -> dict[str, Any]:
        data = asdict(self)
        for key, value in data.items():
            if isinstance(value, float):
                data[key] = round(value, 4)
        return data


def _mm(value: float) -> float:
    return round(value * MM_PER_INCH, 6)


# Presets. The geometry of each is common practice for label stock of that shape.
PRESETS: Mapping[str, Layout] = MappingProxyType(
    {
        # common practice: A4 sheet of 24 labels 70 x 37 mm, edge to edge, 0.5 mm top margin
        "a4-3x8": Layout(
            name="a4-3x8",
            page_width=210.0,
            page_height=297.0,
            rows=8,
            columns=3,
            label_width=70.0,
            label_height=37.0,
            margin_left=0.0,
            margin_top=0.5,
            padding=2.0,
            description="A4 sheet, 3 columns x 8 rows of 70 x 37 mm labels",
        ),
        # common practice: US letter sheet of 30 labels 2 5/8 x 1 in, 3/16 in side
        # margins, 1/8 in between columns, 1/2 in top margin
        "letter-3x10": Layout(
            name="letter-3x10",
            page_width=_mm(8.5),
            page_height=_mm(11.0),
            rows=10,
            columns=3,
            label_width=_mm(2.625),
            label_height=_mm(1.0),
            margin_left=_mm(0.1875),
            margin_top=_mm(0.5),
            gap_x=_mm(0.125),
            padding=1.5,
            description="US letter sheet, 3 columns x 10 rows of 2 5/8 x 1 in labels",
        ),
        # common practice: thermal roll of single 50 x 25 mm labels, one label per page
        "roll-50x25": Layout(
            name="roll-50x25",
            page_width=50.0,
            page_height=25.0,
            rows=1,
            columns=1,
            label_width=50.0,
            label_height=25.0,
            margin_left=0.0,
            margin_top=0.0,
            padding=1.5,
            description="roll of single 50 x 25 mm labels (one label per page)",
        ),
    }
)

# -- user layouts from the config --------------------------------------------------

_LENGTH_RE = re.compile(r"^\s*([0-9]*\.?[0-9]+)\s*(mm|in|inch|inches|\")?\s*$")
_LENGTH_KEYS = (
    "page_width",
    "page_height",
    "label_width",
    "label_height",
    "margin_left",
    "margin_top",
    "gap_x",
    "gap_y",
    "padding",
)
_KNOWN_KEYS = frozenset(
    (*_LENGTH_KEYS, "unit", "page", "rows", "columns", "description", *DESIGN_KEYS)
)


def _length(name: str, key: str, value: Any, unit: str) -> float:
    """A length from the config in mm: a number in the table's unit, or text such as
    ``"2.625 in"`` or ``"70mm"``."""
    if isinstance(value, bool):
        raise LayoutError(f"layout {name!r}: {key} must be a length, not {value!r}")
    if isinstance(value, (int, float)):
        number, its_unit = float(value), unit
    elif isinstance(value, str) and (match := _LENGTH_RE.match(value)):
        number, its_unit = float(match.group(1)), match.group(2) or unit
    else:
        raise LayoutError(
            f"layout {name!r}: {key} = {value!r} is not a length (a number, or text like "
            "'70 mm' or '2.625 in')"
        )
    return number if its_unit == "mm" else _mm(number)


def layout_from_table(name: str, table: Mapping[str, Any], base: Path | None = None) -> Layout:
    """A user layout from one ``[layouts.NAME]`` table of the config (``base``: the config
    file's folder, where a relative logo path starts)."""
    if not isinstance(table, Mapping):
        raise LayoutError(f"layout {name!r} must be a table ([layouts.{name}])")
    unknown = sorted(set(table) - _KNOWN_KEYS)
    if unknown:
        raise LayoutError(
            f"layout {name!r}: unknown setting(s) {', '.join(unknown)} "
            f"(known: {', '.join(sorted(_KNOWN_KEYS))})"
        )
    unit = str(table.get("unit", "mm")).lower()
    unit = {"inch": "in", "inches": "in", '"': "in"}.get(unit, unit)
    if unit not in ("mm", "in"):
        raise LayoutError(f"layout {name!r}: unit must be 'mm' or 'in', not {unit!r}")
    dims = {key: _length(name, key, table[key], unit) for key in _LENGTH_KEYS if key in table}
    page = table.get("page")
    if page is not None:
        if "page_width" in dims or "page_height" in dims:
            raise LayoutError(f"layout {name!r}: give either page or page_width/page_height")
        size = PAGE_SIZES.get(str(page).lower())
        if size is None:
            raise LayoutError(
                f"layout {name!r}: unknown page {page!r} (known: {', '.join(PAGE_SIZES)})"
            )
        dims["page_width"], dims["page_height"] = size
    for key in ("page_width", "page_height", "label_width", "label_height"):
        if key not in dims:
            hint = " (or page = 'a4', 'letter', ...)" if key.startswith("page") else ""
            raise LayoutError(f"layout {name!r}: {key} is missing{hint}")
    counts: dict[str, int] = {}
    for key in ("rows", "columns"):
        value = table.get(key)
        if not isinstance(value, int) or isinstance(value, bool):
            raise LayoutError(f"layout {name!r}: {key} must be a whole number")
        counts[key] = value
    gap_x, gap_y = dims.get("gap_x", 0.0), dims.get("gap_y", 0.0)
    grid_w = counts["columns"] * dims["label_width"] + (counts["columns"] - 1) * gap_x
    grid_h = counts["rows"] * dims["label_height"] + (counts["rows"] - 1) * gap_y
    # an omitted margin centres the grid on the page
    margin_left = dims.get("margin_left", max(0.0, (dims["page_width"] - grid_w) / 2))
    margin_top = dims.get("margin_top", max(0.0, (dims["page_height"] - grid_h) / 2))
    return Layout(
        name=name,
        page_width=dims["page_width"],
        page_height=dims["page_height"],
        rows=counts["rows"],
        columns=counts["columns"],
        label_width=dims["label_width"],
        label_height=dims["label_height"],
        margin_left=margin_left,
        margin_top=margin_top,
        gap_x=gap_x,
        gap_y=gap_y,
        padding=dims.get("padding", 1.5),
        description=str(table.get("description", "")),
        origin="config",
        design=design_from_table(
            name, table, lambda key, value: _length(name, key, value, unit), base
        ),
    )


def user_layouts(tables: Mapping[str, Any] | None, base: Path | None = None) -> dict[str, Layout]:
    """The ``[layouts.*]`` tables of the config (``settings.section("layouts")``)."""
    found: dict[str, Layout] = {}
    for raw_name, table in (tables or {}).items():
        name = str(raw_name).strip().lower()
        if not _NAME_RE.match(name):
            raise LayoutError(
                f"layout name {raw_name!r} must be lower-case letters, digits, '.', '_' or '-'"
            )
        if name in PRESETS:
            raise LayoutError(
                f"layout {raw_name!r} in the config has a built-in preset's name; "
                "give your layout another name"
            )
        if name in found:
            raise LayoutError(f"layout {raw_name!r} is defined twice in the config")
        found[name] = layout_from_table(name, table, base)
    return found


def available_layouts(
    tables: Mapping[str, Any] | None = None, base: Path | None = None
) -> dict[str, Layout]:
    """Presets first, then the user's layouts, by name."""
    return {**PRESETS, **user_layouts(tables, base)}


def get_layout(
    name: str, tables: Mapping[str, Any] | None = None, base: Path | None = None
) -> Layout:
    """The layout called ``name`` among the presets and the user's ``[layouts.*]`` tables.

    Raises :class:`~issuer.errors.UnknownName` naming the known layouts, or
    :class:`~issuer.errors.LayoutError` when the config's layouts are badly described.
    """
    known = available_layouts(tables, base)
    layout = known.get(name.strip().lower())
    if layout is None:
        raise UnknownName(f"unknown layout {name!r} (known: {', '.join(known)})")
    return layout


#: the layout a job uses when none is named: a sheet for a PDF, one roll label otherwise
DEFAULT_SHEET_LAYOUT = "a4-3x8"
DEFAULT_SINGLE_LAYOUT = "roll-50x25"


def default_layout(kind: str) -> str:
    return DEFAULT_SHEET_LAYOUT if kind == "pdf" else DEFAULT_SINGLE_LAYOUT
