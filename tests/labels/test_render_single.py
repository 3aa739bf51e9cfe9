"""Single labels (PNG, SVG), GS1 content, bad input, and no half-written files."""

from __future__ import annotations

import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import pytest

from issuer.errors import LabelError, LayoutError, UnknownName
from issuer.labels import LabelContent, get_layout, render_labels, render_sheet

from .conftest import decode_image, decode_pdf, page_text, tool_tags

SVG = "{http://www.w3.org/2000/svg}"


@pytest.mark.parametrize("symbology", ["code128", "qr", "datamatrix"])
def test_png_single_label_decodes_at_its_size(tmp_path: Path, symbology: str) -> None:
    from PIL import Image

    label = tool_tags(1, start=125)[0]
    out = tmp_path / "tag.png"
    result = render_labels([label], get_layout("roll-50x25"), out, symbology=symbology, dpi=300)
    with Image.open(out) as image:
        # 50 x 25 mm at 300 dpi, and the file says 300 dpi so it prints at 50 x 25 mm
        # (pdfium rounds a part pixel up: within one pixel, 0.085 mm)
        assert abs(image.size[0] - 50 / 25.4 * 300) < 1
        assert abs(image.size[1] - 25 / 25.4 * 300) < 1
        assert round(image.info["dpi"][0]) == 300
        found = decode_image(image.convert("L"))
    assert [f.text for f in found] == [label.display]
    assert result.format == "png" and result.labels == 1


def _paint_svg(path: Path, px_per_pt: float = 300 / 72) -> Any:
    """Paint the SVG's filled rectangles (the symbol) into an image, reading the file's
    own geometry: reportlab's SVG flips y with one group transform, undone here."""
    from PIL import Image, ImageDraw

    root = ET.parse(path).getroot()
    _, _, width, height = (float(v) for v in root.attrib["viewBox"].split())
    image = Image.new("L", (round(width * px_per_pt), round(height * px_per_pt)), 255)
    draw = ImageDraw.Draw(image)
    group = root.find(f"{SVG}g")
    assert group is not None and "scale(1,-1)" in group.attrib["transform"]
    for rect in root.iter(f"{SVG}rect"):
        style = rect.attrib.get("style", "")
        if "fill: rgb(0%,0%,0%)" not in style:
            continue
        x, y = float(rect.attrib["x"]), float(rect.attrib["y"])
        w, h = float(rect.attrib["width"]), float(rect.attrib["height"])
        top = height - (y + h)
        draw.rectangle(
            (x * px_per_pt, top * px_per_pt, (x + w) * px_per_pt - 1, (top + h) * px_per_pt - 1),
            fill=0,
        )
    return image


@pytest.mark.parametrize("symbology", ["code128", "qr", "datamatrix"])
def test_svg_single_label(tmp_path: Path, symbology: str) -> None:
    tag = tool_tags(1, start=125)[0]
    label = LabelContent(tag.code, tag.display, ("Quillmere Tool Library",))
    out = tmp_path / "tag.svg"
    render_labels([label], get_layout("a4-3x8"), out, symbology=symbology)
    root = ET.parse(out).getroot()
    # sized in millimetres: one 70 x 37 mm label
    assert (root.attrib["width"], root.attrib["height"]) == ("70mm", "37mm")
    # the letters are glyph outlines; the title carries the text for search
    title = root.find(f"{SVG}title")
    assert title is not None and title.text == f"{label.display} \u00b7 Quillmere Tool Library"
    assert not list(root.iter(f"{SVG}text")) and len(list(root.iter(f"{SVG}path"))) >= 2
    assert [f.text for f in decode_image(_paint_svg(out))] == [label.display]


@pytest.mark.parametrize("symbology", ["code128", "datamatrix"])
def test_gs1_giai_sheet(tmp_path: Path, symbology: str) -> None:
    labels = tool_tags(4)
    out = tmp_path / "gs1.pdf"
    render_sheet(
        labels, get_layout("a4-3x8"), out, symbology=symbology, gs1_company_prefix="9521234"
    )
    found = decode_pdf(out)
    # zxing-cpp reports GS1 content: AI (8004) then GS1 Company Prefix + the code
    assert sorted(f.text for f in found) == sorted(f"(8004)9521234{t.code}" for t in labels)
    assert all(f.content_type.endswith("GS1") for f in found)
    text = page_text(out)[0]
    assert f"(8004) 9521234{labels[0].code}" in text


def _nothing_written(folder: Path) -> bool:
    return list(folder.iterdir()) == []


@pytest.mark.parametrize(
    ("call", "error", "message"),
    [
        (lambda out: render_labels([], get_layout("a4-3x8"), out), LabelError, "empty"),
        (
            lambda out: render_labels(tool_tags(2), get_layout("a4-3x8"), out, skip=24),
            LabelError,
            "skip",
        ),
        (
            lambda out: render_labels(tool_tags(2), get_layout("a4-3x8"), out, symbology="pdf417"),
            UnknownName,
            "unknown barcode",
        ),
        (
            lambda out: render_labels(tool_tags(2), get_layout("a4-3x8"), out.with_suffix(".png")),
            LabelError,
            "one label",
        ),
        (
            lambda out: render_labels(tool_tags(1), get_layout("a4-3x8"), out.with_suffix(".jpg")),
            LabelError,
            ".pdf, .png or .svg",
        ),
        (
            lambda out: render_labels(
                # a Han character: in none of the bundled fonts (no fallback configured)
                [LabelContent("QTL00001255", "QTL-0000-1255", ("Bench \u4e2d",))],
                get_layout("a4-3x8"),
                out,
            ),
            LabelError,
            "QTL-0000-1255: U\\+4E2D CJK UNIFIED IDEOGRAPH-4E2D",
        ),
        (
            lambda out: render_labels(
                [LabelContent("QTL" + "0" * 60, "QTL-" + "0" * 60)], get_layout("roll-50x25"), out
            ),
            LabelError,
            "too small",
        ),
        (
            lambda out: render_labels(
                tool_tags(1),
                get_layout("roll-50x25"),
                out,
                symbology="qr",
                gs1_company_prefix="952",
            ),
            LabelError,
            "GS1",
        ),
        (lambda out: get_layout("a4-2x7"), UnknownName, "unknown layout"),
        (
            lambda out: get_layout(
                "skinny",
                {
                    "skinny": {
                        "page": "a4",
                        "rows": 2,
                        "columns": 4,
                        "label_width": 60,
                        "label_height": 30,
                    }
                },
            ),
            LayoutError,
            "does not fit the page",
        ),
    ],
)
def test_bad_input_is_refused_and_nothing_is_written(
    tmp_path: Path, call: Any, error: type[Exception], message: str
) -> None:
    with pytest.raises(error, match=message):
        call(tmp_path / "labels.pdf")
    assert _nothing_written(tmp_path)


def test_missing_folder_is_made_owner_only(tmp_path: Path) -> None:
    import stat

    render_labels(tool_tags(1), get_layout("a4-3x8"), tmp_path / "nowhere" / "tags.pdf")
    assert (tmp_path / "nowhere" / "tags.pdf").is_file()
    assert stat.S_IMODE((tmp_path / "nowhere").stat().st_mode) == 0o700


def test_failure_while_drawing_leaves_no_file(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """A failure half way (here: the progress callback stops the job) leaves neither the
    target nor the temporary file, and an existing file of that name untouched."""
    out = tmp_path / "tags.pdf"
    out.write_bytes(b"an earlier sheet")

    def stop(done: int) -> None:
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        render_labels(tool_tags(150), get_layout("a4-3x8"), out, progress=stop)
    assert [p.name for p in tmp_path.iterdir()] == ["tags.pdf"]
    assert out.read_bytes() == b"an earlier sheet"
