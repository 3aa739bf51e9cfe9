"""Layouts: presets' physical dimensions, user layouts in mm or inches, fitting the page."""

from __future__ import annotations

import pytest

from issuer.errors import LayoutError, UnknownName
from issuer.labels import PRESETS, Layout, available_layouts, get_layout, user_layouts


def test_a4_preset_is_an_a4_sheet_of_24() -> None:
    layout = get_layout("a4-3x8")
    # source: ISO 216, A4 is 210 x 297 mm
    assert (layout.page_width, layout.page_height) == (210.0, 297.0)
    assert (layout.columns, layout.rows, layout.per_page) == (3, 8, 24)
    assert (layout.label_width, layout.label_height) == (70.0, 37.0)
    # the grid sits on the page: 3 x 70 = 210 across, 8 x 37 + 2 x 0.5 = 297 down
    assert layout.margin_left + layout.grid_width == pytest.approx(210.0)
    assert 2 * layout.margin_top + layout.grid_height == pytest.approx(297.0)


def test_letter_preset_in_inches() -> None:
    layout = get_layout("letter-3x10")
    # source: ANSI/ASME Y14.1, US letter is 8.5 x 11 in (215.9 x 279.4 mm)
    assert layout.page_width == pytest.approx(215.9)
    assert layout.page_height == pytest.approx(279.4)
    # common practice: 30-up letter labels are 2 5/8 x 1 in, 3/16 in side margins,
    # 1/8 in between columns, 1/2 in top margin
    assert layout.label_width == pytest.approx(66.675)
    assert layout.label_height == pytest.approx(25.4)
    assert 2 * layout.margin_left + layout.grid_width == pytest.approx(215.9)
    assert 2 * layout.margin_top + layout.grid_height == pytest.approx(279.4)


def test_roll_preset_is_one_label_per_page() -> None:
    layout = get_layout("roll-50x25")
    assert (layout.page_width, layout.page_height, layout.per_page) == (50.0, 25.0, 1)
    assert layout.cell(0, 0).width == 50.0


def test_cell_positions_row_by_row() -> None:
    layout = get_layout("letter-3x10")
    assert layout.position(0) == (0, 0, 0)
    assert layout.position(4) == (0, 1, 1)
    assert layout.position(31) == (1, 0, 1)
    cell = layout.cell(1, 2)
    assert cell.x == pytest.approx(0.1875 * 25.4 + 2 * (2.625 + 0.125) * 25.4)
    assert cell.y == pytest.approx(0.5 * 25.4 + 25.4)


def test_unknown_layout_names_the_known_ones() -> None:
    with pytest.raises(UnknownName, match="a4-3x8"):
        get_layout("a4-99x99")


def test_layout_that_does_not_fit_the_page_is_refused() -> None:
    with pytest.raises(LayoutError, match="does not fit the page"):
        Layout("wide", 210, 297, 8, 3, 75, 37, 0, 0)
    with pytest.raises(LayoutError, match="does not fit the page"):
        user_layouts(
            {"tall": {"page": "a4", "rows": 9, "columns": 3, "label_width": 70, "label_height": 37}}
        )


def test_user_layout_in_inches_and_mixed_units() -> None:
    found = user_layouts(
        {
            "shelf-2x4": {
                "unit": "in",
                "page": "letter",
                "rows": 4,
                "columns": 2,
                "label_width": 4,
                "label_height": "60 mm",
                "gap_y": "0.25in",
                "description": "shelf-edge tags",
            }
        }
    )
    layout = found["shelf-2x4"]
    assert layout.label_width == pytest.approx(101.6)
    assert layout.label_height == pytest.approx(60.0)
    assert layout.gap_y == pytest.approx(6.35)
    assert layout.origin == "config"
    # margins left out: the grid is centred on the page
    assert layout.margin_left == pytest.approx((215.9 - 2 * 101.6) / 2)
    assert layout.margin_top == pytest.approx((279.4 - 4 * 60 - 3 * 6.35) / 2)
    assert set(available_layouts({"shelf-2x4": {**_SHELF}})) == {*PRESETS, "shelf-2x4"}


_SHELF = {"page": "a4", "rows": 2, "columns": 2, "label_width": 90, "label_height": 50}


def test_user_layout_cannot_take_a_preset_name() -> None:
    with pytest.raises(LayoutError, match="preset"):
        get_layout("a4-3x8", {"a4-3x8": dict(_SHELF)})
    with pytest.raises(LayoutError, match="preset"):
        user_layouts({"ROLL-50x25": dict(_SHELF)})


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"unit": "cm"}, "unit must be"),
        ({"label_width": "wide"}, "not a length"),
        ({"rows": 2.5}, "whole number"),
        ({"page": "tabloid-ish"}, "unknown page"),
        ({"colour": "red"}, "unknown setting"),
        ({"label_width": -3}, "greater than 0"),
        ({"padding": 30}, "padding"),
    ],
)
def test_badly_described_user_layouts(change: dict[str, object], message: str) -> None:
    with pytest.raises(LayoutError, match=message):
        user_layouts({"mine": {**_SHELF, **change}})


def test_missing_dimension_is_named() -> None:
    table = {k: v for k, v in _SHELF.items() if k != "label_height"}
    with pytest.raises(LayoutError, match="label_height is missing"):
        user_layouts({"mine": table})
