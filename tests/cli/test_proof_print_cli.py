"""``--proof`` and ``--print`` of ``issuer labels``: a proof is a PNG at 100 % scale and
records nothing; ``--print`` hands the complete PDF to the configured print command (here a
small stand-in script that keeps a copy), and a failing command counts nothing."""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Any

import pytest

from issuer.config import bundled_config_text

from ..labels.conftest import decode_image, decode_pdf, page_text, scanned
from .test_printing_cli import _ok, _state, _tools

# a stand-in print command: copies the file it is given to the path in argv[1]; exits with
# the status in argv[2], saying why on stderr
STAND_IN = """\
import shutil, sys
destination, status, source = sys.argv[1], int(sys.argv[2]), sys.argv[3]
if status:
    sys.stderr.write("label printer: out of labels\\n")
    sys.exit(status)
shutil.copyfile(source, destination)
"""


@pytest.fixture
def printer(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Any:
    """Write a config whose print command is the stand-in; returns where copies land."""
    script = tmp_path / "stand_in_lp.py"
    script.write_text(STAND_IN, encoding="utf-8")
    received = tmp_path / "received.pdf"

    def configure(status: int = 0, extra: str = "") -> Path:
        config = tmp_path / "issuer.toml"
        command = f"{sys.executable} {script} {received} {status} {{file}}"
        config.write_text(f"[printing]\ncommand = {json.dumps(command)}\n{extra}", "utf-8")
        monkeypatch.setenv("ISSUER_CONFIG", str(config))
        return received

    return configure


def test_print_hands_the_complete_file_to_the_command(
    cli: Any, db_path: Path, tmp_path: Path, printer: Any
) -> None:
    received = printer()
    _, codes = _tools(cli, 30)
    out = tmp_path / "tags.pdf"
    result = _ok(cli("labels", "--series", "tools", "--out", str(out), "--print", "--json"))
    data = json.loads(result.stdout)
    assert data["printed_with"] == Path(sys.executable).name and data["logged"] == 30
    # the printer got the whole file: the same bytes as the kept PDF, every symbol on it
    assert received.read_bytes() == out.read_bytes()
    assert received.read_bytes().rstrip().endswith(b"%%EOF")
    assert sorted(scanned(f.text) for f in decode_pdf(received)) == sorted(codes)
    entries, counts = _state(db_path)
    assert set(counts.values()) == {1}
    history = json.loads(_ok(cli("history", codes[0], "--json")).stdout)
    assert history["events"][-1]["detail"]["printed_with"] == Path(sys.executable).name


def test_print_without_out_keeps_no_file(
    cli: Any, db_path: Path, tmp_path: Path, printer: Any
) -> None:
    received = printer()
    _, codes = _tools(cli, 3)
    before = set(tmp_path.iterdir())
    result = _ok(cli("labels", "--series", "tools", "--print"))
    assert "sent to the printer" in result.stdout
    assert sorted(scanned(f.text) for f in decode_pdf(received)) == sorted(codes)
    assert set(tmp_path.iterdir()) - before == {received}
    assert set(_state(db_path)[1].values()) == {1}


def test_a_failing_print_command_counts_nothing(
    cli: Any, db_path: Path, tmp_path: Path, printer: Any
) -> None:
    received = printer(status=3)
    _tools(cli, 5)
    before = _state(db_path)
    out = tmp_path / "tags.pdf"
    result = cli("labels", "--series", "tools", "--out", str(out), "--print")
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "failed (exit status 3): label printer: out of labels" in lines[0]
    assert "nothing was counted as printed" in lines[0]
    assert _state(db_path) == before
    assert not out.exists() and not received.exists()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_print_needs_a_command(cli: Any, db_path: Path) -> None:
    _tools(cli, 2)
    before = _state(db_path)
    result = cli("labels", "--series", "tools", "--print")
    assert result.exit_code == 2 and "[printing]" in result.stderr
    assert _state(db_path) == before


def test_proof_of_the_first_label_records_nothing(cli: Any, db_path: Path, tmp_path: Path) -> None:
    from PIL import Image

    _, codes = _tools(cli, 40)
    before = _state(db_path)
    proof = tmp_path / "proof.png"
    result = _ok(cli("labels", "--series", "tools", "--proof", str(proof), "--json"))
    assert json.loads(result.stdout)["recorded"] == 0
    with Image.open(proof) as image:
        # 100 % scale: one 70 x 37 mm label of a4-3x8 at the recorded 300 dpi
        assert image.info["dpi"] == pytest.approx((300, 300), abs=0.01)
        assert image.size == pytest.approx((70 / 25.4 * 300, 37 / 25.4 * 300), abs=1)
        assert [scanned(f.text) for f in decode_image(image)] == [codes[0]]
    assert _state(db_path) == before


def test_proof_of_a_page_with_outlines(cli: Any, db_path: Path, tmp_path: Path) -> None:
    from PIL import Image

    _, codes = _tools(cli, 40)
    proof = tmp_path / "page.png"
    _ok(cli("labels", "--series", "tools", "--proof", str(proof), "--outlines", "--skip", "2",
            "--dpi", "200"))  # fmt: skip
    with Image.open(proof) as image:
        # an A4 page at 200 dpi: the first sheet, 22 labels after two used cells
        assert image.size == pytest.approx((210 / 25.4 * 200, 297 / 25.4 * 200), abs=1)
        assert sorted(scanned(f.text) for f in decode_image(image, dpi=200)) == sorted(codes[:22])
    assert set(_state(db_path)[1].values()) == {0}


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--proof", "p.png", "--out", "x.pdf"], "preview only"),
        (["--proof", "p.pdf"], "a proof is a PNG"),
        ([], "--out"),
    ],
)
def test_proof_and_out_mistakes(cli: Any, tmp_path: Path, args: list[str], message: str) -> None:
    _tools(cli, 2)
    result = cli(
        "labels", "--series", "tools", *[str(tmp_path / a) if "." in a else a for a in args]
    )
    assert result.exit_code == 2 and message in result.stderr
    assert not [p for p in tmp_path.iterdir() if p.suffix in (".png", ".pdf")]


def test_member_card_layout_from_the_config_example(
    cli: Any, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # the worked example, uncommented, in a user's config with the demo logo beside it
    lines = bundled_config_text().splitlines()
    start = lines.index("# [layouts.member-card]")
    block = []
    for line in lines[start:]:
        if line.strip() == "#":
            break
        block.append(line.removeprefix("# "))
    config = tmp_path / "issuer.toml"
    config.write_text("\n".join(block) + "\n", "utf-8")
    from importlib import resources

    logo = resources.files("issuer.bundled_config").joinpath("quillmere-logo.svg")
    (tmp_path / "quillmere-logo.svg").write_bytes(logo.read_bytes())
    monkeypatch.setenv("ISSUER_CONFIG", str(config))
    _ok(cli("series", "add", "members", "--scheme", "luhn", "--length", "9", "--prefix", "QMC",
            "--mode", "scattered", "--group", "5,5", "--title", "Member"))  # fmt: skip
    issued = json.loads(_ok(cli("issue", "members", "--holder", "Ελένη Παπαδάκη", "--json")).stdout)
    code = issued["codes"][0]["code"]
    out = tmp_path / "card.pdf"
    _ok(cli("labels", code, "--layout", "member-card", "--barcode", "qr", "--text-beside",
            "--out", str(out)))  # fmt: skip
    text = [line for line in page_text(out)[0].splitlines() if line.strip()]
    assert text[0] == "Quillmere Tool Library & Makers' Co-op"
    assert text[1] == "Ελένη Παπαδάκη" and text[3] == "Member"
    assert [scanned(f.text) for f in decode_pdf(out)] == [code]
