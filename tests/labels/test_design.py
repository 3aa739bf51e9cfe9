"""The organisation on the label: header line, logo, fields in order, type sizes. The
worked examples in the shipped config are parsed and printed as they stand; zxing-cpp (the
reference decoder) still reads every symbol with a header and logo present, and a logo that
would reach into a symbol's quiet zone is refused."""

from __future__ import annotations

import tomllib
from importlib import resources
from pathlib import Path
from typing import Any

import pytest

from issuer.config import bundled_config_text
from issuer.errors import LabelError, LayoutError
from issuer.labels import LabelContent, Layout, layout_from_table, render_labels, render_sheet
from issuer.labels.plan import plan_cell

from .conftest import decode_image, decode_pdf, member_cards, page_text, rasterise, tool_tags

CONFIG_FOLDER = Path(str(resources.files("issuer.bundled_config")))


def example(name: str) -> dict[str, Any]:
    """The commented worked example ``[layouts.NAME]`` of the shipped config, uncommented."""
    lines = bundled_config_text().splitlines()
    start = lines.index(f"# [layouts.{name}]")
    block = []
    for line in lines[start + 1 :]:
        if line.strip() == "#":
            break
        block.append(line.removeprefix("# "))
    table: dict[str, Any] = tomllib.loads("\n".join(block))
    return table


def layout(name: str, **changes: Any) -> Layout:
    return layout_from_table(name, {**example(name), **changes}, CONFIG_FOLDER)


def test_member_card_example_is_id1_and_prints_header_logo_and_fields_in_order(
    tmp_path: Path,
) -> None:
    card = layout("member-card")
    # source: ISO/IEC 7810, ID-1 card 85.60 x 53.98 mm
    assert (card.label_width, card.label_height) == (85.6, 53.98)
    assert card.design.fields == ("holder", "code", "title")
    names = ["Ελένη Παπαδάκη", "Łukasz Dvořák", "Дмитрий Жуковцев", "Անի Սարգսյան"]
    cards = member_cards(len(names))
    # holder first, then the code, then the title (code_at = 1 line before the code)
    labels = [
        LabelContent(c.code, c.display, (name, "Member"), code_at=1) for c, name in zip(cards, names)
    ]
    out = tmp_path / "cards.pdf"
    result = render_sheet(labels, card, out, symbology="qr", text_beside=True)
    assert result.pages == len(names)
    texts = page_text(out)
    for text, name, c in zip(texts, names, cards):
        lines = [line for line in text.splitlines() if line.strip()]
        assert lines[0] == "Quillmere Tool Library & Makers' Co-op"
        assert lines[1:] == [name, c.display, "Member"]
    assert [f.text for f in decode_pdf(out)] == [c.display for c in cards]


@pytest.mark.parametrize("symbology", ["code128", "qr", "datamatrix"])
def test_every_symbol_decodes_with_header_and_logo(tmp_path: Path, symbology: str) -> None:
    tag = layout("tool-tag")
    tags = tool_tags(5)
    out = tmp_path / "tags.pdf"
    render_sheet(tags, tag, out, symbology=symbology)
    assert [f.text for f in decode_pdf(out)] == [t.display for t in tags]
    # the logo is drawn: dark pixels at the top-left, where the header band holds it
    page = rasterise(out)[0]
    px = 300 / 25.4
    corner = page.crop((int(1.5 * px), int(1.5 * px), int(5.5 * px), int(5.5 * px)))
    assert corner.getextrema()[0] < 64


def test_png_logo_and_svg_output(tmp_path: Path) -> None:
    from PIL import Image, ImageDraw

    logo = tmp_path / "logo.png"
    image = Image.new("RGBA", (60, 30), (255, 255, 255, 0))
    ImageDraw.Draw(image).ellipse((2, 2, 58, 28), fill=(0, 0, 0, 255))
    image.save(logo)
    tag = layout("tool-tag", logo=str(logo), logo_height=3)
    assert tag.design.logo_size() == pytest.approx((6.0, 3.0))
    label = tool_tags(1)[0]
    render_labels([label], tag, tmp_path / "tag.svg")
    svg = (tmp_path / "tag.svg").read_text("utf-8")
    assert "data:image/png;base64," in svg and "Quillmere Tool Library" in svg
    render_labels([label], tag, tmp_path / "tag.png")
    [found] = decode_image(Image.open(tmp_path / "tag.png"))
    assert found.text == label.display


def _between_symbol_and_quiet_zone(tag: Layout, symbology: str) -> tuple[float, float]:
    """A point left of the widest symbol's dark part and inside its quiet zone, from the
    arrangement the renderer plans for these labels."""
    plan = plan_cell(tag, symbology, columns=90, rows=1, code_chars=13, lines=0, void=False)
    symbol = plan.symbol_box(90, 1)
    quiet = plan.quiet_box(90, 1)
    assert quiet.x < symbol.x
    return (quiet.x + symbol.x) / 2, symbol.y + 0.5


def test_a_logo_in_the_quiet_zone_is_refused(tmp_path: Path) -> None:
    plain = layout_from_table(
        "plain", {k: v for k, v in example("tool-tag").items() if not k.startswith("logo")}
    )
    x, y = _between_symbol_and_quiet_zone(plain, "code128")
    tags = tool_tags(3)
    tag = layout("tool-tag", logo_x=max(x - 0.5, 1.5), logo_y=y, logo_height=1.0)
    out = tmp_path / "tags.pdf"
    with pytest.raises(LayoutError, match="overlap the symbol or its quiet zone"):
        render_sheet(tags, tag, out)
    assert not out.exists()


def test_logo_placement_is_checked(tmp_path: Path) -> None:
    tags = tool_tags(1)
    with pytest.raises(LayoutError, match="blank padding or past its edge"):
        render_sheet(tags, layout("tool-tag", logo_x=0.5, logo_y=0.5), tmp_path / "a.pdf")
    with pytest.raises(LayoutError, match="overlap the label's text"):
        render_sheet(tags, layout("tool-tag", logo_x=20, logo_y=19, logo_height=3), tmp_path / "b.pdf")
    # beside a QR code on the card, the bottom-right corner is free
    card = layout("member-card", logo_x=70, logo_y=38, logo_height=12)
    cards = member_cards(1)
    out = tmp_path / "card.pdf"
    render_sheet(cards, card, out, symbology="qr", text_beside=True)
    assert [f.text for f in decode_pdf(out)] == [cards[0].display]


@pytest.mark.parametrize(
    ("changes", "message"),
    [
        ({"code_pt": 30}, "at code_pt = 30"),
        ({"code_pt": 2}, "code_pt must be 4 to 72 points"),
        ({"fields": ["code", "colour"]}, "unknown field"),
        ({"logo_x": 3}, "both logo_x and logo_y"),
        ({"logo": "nowhere.svg"}, "does not exist"),
        ({"logo_side": "middle"}, "left or right"),
    ],
)
def test_bad_designs_are_refused(tmp_path: Path, changes: dict[str, Any], message: str) -> None:
    with pytest.raises(LabelError, match=message):
        render_sheet(tool_tags(1), layout("tool-tag", **changes), tmp_path / "x.pdf")
    assert not (tmp_path / "x.pdf").exists()
