"""The counter's look at 80x24 and 120x40, fixed by SVG snapshots
(pytest-textual-snapshot; refresh with --snapshot-update after a deliberate change)."""

from __future__ import annotations

from typing import Any

import pytest

from tests.counter.conftest import make_app
from tests.counter.test_counter import _code, _settle, _swap


async def _still(pilot: Any) -> None:
    # a blinking cursor would make the picture differ from run to run
    pilot.app.query_one("#scan").cursor_blink = False
    await pilot.pause()


def _typing(text: str) -> Any:
    async def run_before(pilot: Any) -> None:
        await _still(pilot)
        await pilot.press(*text, "enter")
        await _settle(pilot.app, pilot)

    return run_before


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
def test_ready(snap_compare: Any, desk: Any, size: tuple[int, int]) -> None:
    assert snap_compare(make_app(desk), terminal_size=size, run_before=_still)


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
def test_in_use(snap_compare: Any, desk: Any, size: tuple[int, int]) -> None:
    assert snap_compare(make_app(desk), terminal_size=size, run_before=_typing(_code(desk, 4)[1]))


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
def test_typo_with_suggestions(snap_compare: Any, desk: Any, size: tuple[int, int]) -> None:
    assert snap_compare(make_app(desk), terminal_size=size, run_before=_typing(_swap(_code(desk, 12)[0])))


def test_void_asks_first(snap_compare: Any, desk: Any) -> None:
    async def run_before(pilot: Any) -> None:
        await _typing(_code(desk, 4)[1])(pilot)
        await pilot.press("f3", *"card reported lost", "enter")
        await pilot.pause()

    assert snap_compare(make_app(desk), terminal_size=(80, 24), run_before=run_before)
