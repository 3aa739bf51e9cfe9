"""``issuer layouts``: presets and the user's own layouts, as a table or JSON."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest


def _run(*args: str) -> Any:
    from typer.testing import CliRunner

    from issuer.cli.app import app

    return CliRunner().invoke(app, ["layouts", *args], env={"COLUMNS": "120"})


def test_layouts_table_lists_presets() -> None:
    result = _run()
    assert result.exit_code == 0, result.output
    for name in ("a4-3x8", "letter-3x10", "roll-50x25"):
        assert name in result.stdout
    assert "210×297" in result.stdout and "70×37" in result.stdout
    assert "100 %" in result.stdout


def test_layouts_json_includes_user_layouts(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    config = tmp_path / "issuer.toml"
    config.write_text(
        '[layouts.bin-tags]\nunit = "in"\npage = "letter"\nrows = 5\ncolumns = 2\n'
        'label_width = 4\nlabel_height = 2\ndescription = "Quillmere parts bins"\n',
        encoding="utf-8",
    )
    monkeypatch.setenv("ISSUER_CONFIG", str(config))
    result = _run("--json")
    assert result.exit_code == 0, result.output
    rows = {row["name"]: row for row in json.loads(result.stdout)}
    assert rows["bin-tags"]["origin"] == "config"
    assert rows["bin-tags"]["label_width"] == pytest.approx(101.6)
    assert rows["bin-tags"]["labels_per_page"] == 10
    assert rows["a4-3x8"]["page_width"] == 210.0


def test_layout_clash_or_misfit_is_one_line(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    config = tmp_path / "issuer.toml"
    monkeypatch.setenv("ISSUER_CONFIG", str(config))
    for table, message in (
        ("[layouts.a4-3x8]\nrows = 1\n", "preset's name"),
        (
            (
                '[layouts.big]\npage = "a4"\nrows = 3\ncolumns = 3\n'
                "label_width = 80\nlabel_height = 20\n"
            ),
            "does not fit the page",
        ),
    ):
        config.write_text(table, encoding="utf-8")
        result = _run()
        assert result.exit_code == 2
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("issuer: ") and message in lines[0]
