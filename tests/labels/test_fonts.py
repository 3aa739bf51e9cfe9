"""Fonts that carry names: the bundled DejaVu faces print names in many scripts, the PDF
embeds them as subsets, a configured fallback font adds what they lack, and a character no
font can draw is refused by name. Text is read back with pypdfium2 (the PDFium text layer)."""

from __future__ import annotations

import unicodedata
from pathlib import Path

import pytest

from issuer.errors import LabelError
from issuer.labels import LabelContent, get_layout, render_labels, render_sheet
from issuer.labels.fonts import bundled_font_path, fallbacks_from_config, font_set

from .conftest import decode_pdf, member_cards, page_text

# Invented Quillmere members, one script each (all names made up for the demo).
NAMES = {
    "Latin": "Łukasz Dvořák-Ştefănescu",
    "Greek": "Ελένη Παπαδάκη",
    "Cyrillic": "Дмитрий Жуковцев",
    "Armenian": "Անի Սարգսյան",
    "Georgian": "ნინო ბერიძე",
    "Canadian Syllabics": "ᐊᓂᕐᓂ ᑕᑯᓐᓇ",
}


def _han_font(path: Path) -> Path:
    """A tiny TrueType font built here, with one glyph (a square) for U+4E2D: a stand-in for
    the CJK font a user would name as a fallback."""
    from fontTools.fontBuilder import FontBuilder
    from fontTools.pens.ttGlyphPen import TTGlyphPen

    builder = FontBuilder(1000, isTTF=True)
    builder.setupGlyphOrder([".notdef", "uni4E2D"])
    builder.setupCharacterMap({0x4E2D: "uni4E2D"})
    pen = TTGlyphPen(None)
    pen.moveTo((100, 0))
    pen.lineTo((100, 800))
    pen.lineTo((900, 800))
    pen.lineTo((900, 0))
    pen.closePath()
    builder.setupGlyf({".notdef": TTGlyphPen(None).glyph(), "uni4E2D": pen.glyph()})
    builder.setupHorizontalMetrics({".notdef": (500, 0), "uni4E2D": (1000, 100)})
    builder.setupHorizontalHeader(ascent=800, descent=-200)
    builder.setupNameTable(
        {"familyName": "Quillmere Test Han", "styleName": "Regular", "psName": "QTestHan"}
    )
    builder.setupOS2(sTypoAscender=800, usWinAscent=800, usWinDescent=200)
    builder.setupPost()
    builder.save(str(path))
    return path


def test_names_in_six_scripts_print_and_read_back(tmp_path: Path) -> None:
    cards = member_cards(len(NAMES))
    labels = [
        LabelContent(card.code, card.display, (name, "Member"))
        for card, name in zip(cards, NAMES.values())
    ]
    out = tmp_path / "members.pdf"
    render_sheet(labels, get_layout("a4-3x8"), out, symbology="qr", text_beside=True)
    text = unicodedata.normalize("NFC", page_text(out)[0])
    for script, name in NAMES.items():
        assert name in text, script
    # every symbol still decodes beside the names
    assert sorted(f.text for f in decode_pdf(out)) == sorted(card.display for card in cards)
    data = out.read_bytes()
    # embedded TrueType subsets, never the built-in Type 1 fonts
    assert b"/FontFile2" in data and b"/Helvetica" not in data and b"/Courier" not in data
    # a subset: the whole sheet is far smaller than the one text face alone
    assert len(data) < bundled_font_path("DejaVuSans.ttf").stat().st_size / 3


def test_decomposed_letters_print_composed(tmp_path: Path) -> None:
    # "Dvořák" typed with combining marks (NFD) prints as the composed letters
    decomposed = unicodedata.normalize("NFD", "Dvořák")
    card = member_cards(1)[0]
    out = tmp_path / "nfd.pdf"
    render_sheet([LabelContent(card.code, card.display, (decomposed,))], get_layout("a4-3x8"), out)
    assert "Dvořák" in page_text(out)[0]


def test_fallback_font_draws_what_the_bundled_faces_lack(tmp_path: Path) -> None:
    _han_font(tmp_path / "han.ttf")
    card = member_cards(1)[0]
    label = LabelContent(card.code, card.display, ("Bench \u4e2d",))
    with pytest.raises(LabelError, match="U\\+4E2D CJK UNIFIED IDEOGRAPH-4E2D"):
        render_sheet([label], get_layout("a4-3x8"), tmp_path / "refused.pdf")
    assert not (tmp_path / "refused.pdf").exists()
    fonts = font_set(fallbacks_from_config({"fonts": ["han.ttf"]}, base=tmp_path))
    out = tmp_path / "han.pdf"
    render_sheet([label], get_layout("a4-3x8"), out, fonts=fonts)
    assert "Bench \u4e2d" in page_text(out)[0]
    # the SVG and PNG of the same label use the same fonts
    render_labels([label], get_layout("roll-50x25"), tmp_path / "han.svg", fonts=fonts)
    render_labels([label], get_layout("roll-50x25"), tmp_path / "han.png", fonts=fonts)


@pytest.mark.parametrize(
    ("text", "named"),
    [
        ("Workshop \U0001f527", "U\\+1F527 WRENCH"),  # an emoji no configured font has
        ("Bench \u0007", "U\\+0007 \\(a control character\\)"),
        ("\u05d3\u05d5\u05d3", "U\\+05D3 HEBREW LETTER DALET.*right-to-left"),
    ],
)
def test_a_character_no_font_draws_is_refused_by_name(
    tmp_path: Path, text: str, named: str
) -> None:
    card = member_cards(1)[0]
    out = tmp_path / "x.pdf"
    with pytest.raises(LabelError, match=f"label of {card.display}: {named}"):
        render_sheet([LabelContent(card.code, card.display, (text,))], get_layout("a4-3x8"), out)
    assert list(tmp_path.iterdir()) == []


def test_a_missing_or_unusable_font_file_is_refused(tmp_path: Path) -> None:
    with pytest.raises(LabelError, match="does not exist"):
        font_set([tmp_path / "nowhere.ttf"])
    bad = tmp_path / "bad.ttf"
    bad.write_bytes(b"not a font")
    with pytest.raises(LabelError, match="cannot be embedded"):
        font_set([bad])
    with pytest.raises(LabelError, match="list of font file paths"):
        fallbacks_from_config({"fonts": [3]})


def test_the_fonts_ship_with_their_licence() -> None:
    # found through the installed package, never the repository's path
    for name in ("DejaVuSans.ttf", "DejaVuSans-Bold.ttf", "DejaVuSansMono-Bold.ttf"):
        assert bundled_font_path(name).is_file()
    licence = bundled_font_path("LICENSE-DejaVu.txt").read_text("utf-8")
    # source: the licence text in the fonts' own name table (entry 13)
    assert "Bitstream Vera Fonts Copyright" in licence and "Arev Fonts Copyright" in licence


@pytest.mark.skipif(not Path("/proc/self/fd").is_dir(), reason="needs /proc to list this process's open files")
def test_drawing_glyph_outlines_leaves_no_font_file_open() -> None:
    """SVG labels draw glyph outlines from a cached font; the cache must not hold the file
    open (an open file left at exit is a ResourceWarning)."""
    import os

    from issuer.labels.fonts import load_face
    from issuer.labels.glyphs import glyph_paths

    face = load_face(str(bundled_font_path("DejaVuSans.ttf")))
    assert len(glyph_paths([(face, "Werkstatt Süd")], 0.0, 0.0, 10.0)) == 1

    def open_files() -> set[str]:
        found = set()
        for fd in os.listdir("/proc/self/fd"):
            try:
                found.add(os.path.realpath(f"/proc/self/fd/{fd}"))
            except OSError:  # closed meanwhile
                continue
        return found

    assert os.path.realpath(face.path) not in open_files()
