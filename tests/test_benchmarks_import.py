"""The benchmarks are not collected by the test run, so a module moved elsewhere would break
them silently. Every `from issuer… import …` they hold (in their code and in the scripts they
hand to child processes as text) must still name something that exists."""

import importlib
import importlib.util
import re
from pathlib import Path

import pytest

BENCHMARKS = Path(__file__).resolve().parent / "benchmarks"
IMPORT = re.compile(r"from (issuer[\w.]*) import (?:\(([^)]*)\)|([\w, ]+))")


def _imports() -> list[tuple[str, str, str]]:
    found = []
    for path in sorted(BENCHMARKS.glob("*.py")):
        for module, grouped, names in IMPORT.findall(path.read_text("utf-8")):
            for name in (n.strip() for n in (grouped or names).replace("\n", ",").split(",")):
                if name and not name.startswith("#"):
                    found.append((path.name, module, name.split(" as ")[0]))
    return found


def test_the_benchmarks_import_something() -> None:
    assert len(_imports()) > 10


@pytest.mark.parametrize(("bench", "module", "name"), _imports())
def test_every_name_a_benchmark_imports_exists(bench: str, module: str, name: str) -> None:
    found = hasattr(importlib.import_module(module), name) or importlib.util.find_spec(f"{module}.{name}")
    assert found, f"{bench}: {module}.{name} is gone"
