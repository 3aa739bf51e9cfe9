"""The wheel ships every package: a plain `pip install .` (not an editable one) installs only
the packages pyproject.toml names, so a new folder left off that list works in a checkout
and is missing for every user."""

import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_every_package_folder_is_named_in_pyproject() -> None:
    named = set(tomllib.loads((ROOT / "pyproject.toml").read_text("utf-8"))["tool"]["setuptools"]["packages"])
    folders = {
        ".".join(init.parent.relative_to(ROOT).parts)
        for init in (ROOT / "issuer").rglob("__init__.py")
    }
    assert folders - named == set(), "pyproject.toml [tool.setuptools] packages lacks these"
