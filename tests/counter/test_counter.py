"""The counter screen driven headlessly by Textual's pilot; every act's effect is read
back through the library, never from the screen alone."""

from __future__ import annotations

import asyncio
from typing import Any

from tests.counter.conftest import make_app


def _code(desk: Any, n: int) -> Any:
    from issuer.register.series import code_format, get_series

    with desk.register.reading() as session:
        series = get_series(session, "tools")
        shape = code_format(series)
        code = shape.code_for_base(series.range_start + n)
    return code, shape.display(code)


def _record(desk: Any, code: str) -> Any:
    from issuer.register.lifecycle import code_history

    with desk.register.reading() as session:
        return code_history(session, code)[0]


async def _settle(app: Any, pilot: Any) -> None:
    await pilot.pause()
    await app.workers.wait_for_complete()
    await pilot.pause()


async def _scan(app: Any, pilot: Any, text: str) -> str:
    app.query_one("#scan").focus()
    await pilot.press(*text, "enter")
    await _settle(app, pilot)
    return str(app.query_one("#answer").render())


def _swap(code: str, prefix: int = 2) -> str:
    body = code[prefix:]
    for i in range(len(body) - 2, -1, -1):
        if body[i] != body[i + 1]:
            return code[:prefix] + body[:i] + body[i + 1] + body[i] + body[i + 2:]
    raise AssertionError("no swap possible")


def test_scan_issued_typo_voided_and_junk(desk: Any) -> None:
    from issuer.register.lifecycle import void_code

    issued, shown = _code(desk, 4)
    voided, _ = _code(desk, 7)
    void_code(desk.register, voided, reason="tag snapped")

    async def run() -> None:
        app = make_app(desk)
        async with app.run_test(size=(80, 24)) as pilot:
            answer = await _scan(app, pilot, shown)
            assert "✓ in use" in answer and shown in answer and "workshop shelf B" in answer
            assert app.focused is app.query_one("#scan")  # the scan line keeps the focus
            answer = await _scan(app, pilot, _swap(issued))
            assert "typo" in answer or "did you mean" in answer
            suggestions = app.query_one("#suggestions")
            assert suggestions.option_count >= 1
            wanted = [i for i in range(suggestions.option_count) if suggestions.get_option_at_index(i).id == issued]
            assert wanted, "the intended code is among the suggestions"
            suggestions.focus()
            suggestions.highlighted = wanted[0]
            await pilot.press("enter")
            await _settle(app, pilot)
            assert "✓ in use" in str(app.query_one("#answer").render())
            answer = await _scan(app, pilot, voided)
            assert "VOIDED" in answer and "tag snapped" in answer
            answer = await _scan(app, pilot, "hello?")
            assert "not a code" in answer
            assert app.query_one("#recent").option_count == 5

    asyncio.run(run())


def test_issue_void_replace_restore_reprint_history(desk: Any) -> None:
    async def run() -> None:
        app = make_app(desk)
        async with app.run_test(size=(80, 24)) as pilot:
            # F2: a new code with a holder
            await pilot.press("f2")
            await pilot.press(*"Quillmere bench 3", "enter", "enter")
            await _settle(app, pilot)
            new_code, new_display = _code(desk, 30)
            assert _record(desk, new_code).holder == "Quillmere bench 3"
            assert new_display in str(app.query_one("#answer").render())
            # F3: void it, with a reason and a last yes
            await pilot.press("f3", *"card reported lost", "enter")
            await pilot.pause()
            await pilot.press("y")
            await _settle(app, pilot)
            record = _record(desk, new_code)
            assert record.status == "voided" and record.void_reason == "card reported lost"
            # F5: restore it
            await pilot.press("f5", *"card found", "enter")
            await _settle(app, pilot)
            assert _record(desk, new_code).status == "issued"
            # F6: reprint its label into the label folder (logged as a reprint)
            await pilot.press("f6", *"label faded", "enter")
            await _settle(app, pilot)
            assert _record(desk, new_code).print_count == 1
            assert len(list(desk.label_folder.glob("*.pdf"))) == 1
            # F7: its history, then back
            await pilot.press("f7")
            await _settle(app, pilot)
            assert app.screen.__class__.__name__ == "HistoryScreen"
            await pilot.press("escape")
            # F4: replace it; old and new side by side
            await pilot.press("f4", *"tag damaged", "enter")
            await pilot.pause()
            await pilot.press("y")
            await _settle(app, pilot)
            old = _record(desk, new_code)
            assert old.status == "voided" and old.replaced_by is not None
            assert _record(desk, old.replaced_by).status == "issued"
            shown = str(app.query_one("#answer").render())
            assert "old" in shown and "new" in shown
            # declining the last question does nothing
            await _scan(app, pilot, _code(desk, 1)[1])
            await pilot.press("f3", *"mistake", "enter")
            await pilot.pause()
            await pilot.press("n")
            await _settle(app, pilot)
            assert _record(desk, _code(desk, 1)[0]).status == "issued"
            await pilot.press("ctrl+q")
        assert app.return_code in (0, None)

    asyncio.run(run())


def test_an_act_the_register_refuses_is_one_line_on_the_screen(desk: Any) -> None:
    from issuer.register.lifecycle import void_code

    code, shown = _code(desk, 5)

    async def run() -> None:
        app = make_app(desk)
        async with app.run_test(size=(80, 24)) as pilot:
            assert "✓ in use" in await _scan(app, pilot, shown)
            # another desk voids it while this screen still shows it in use
            void_code(desk.register, code, reason="tag snapped at the other desk")
            await pilot.press("f3", *"card reported lost", "enter")
            await pilot.pause()
            await pilot.press("y")
            await _settle(app, pilot)
            answer = str(app.query_one("#answer").render())
            assert answer.startswith("✗ ") and len(answer.splitlines()) == 1
            await pilot.press("ctrl+q")
        assert app.return_code in (0, None)

    asyncio.run(run())
    assert _record(desk, code).void_reason == "tag snapped at the other desk"


def test_two_counters_at_once_lose_nothing(desk: Any) -> None:
    from issuer.register.series import get_series
    from issuer.register.transfer import export_session_rows

    per_desk = 8

    async def one(app: Any) -> None:
        async with app.run_test(size=(80, 24)) as pilot:
            for n in range(per_desk):
                await pilot.press("f2", *f"member {n}", "enter", "enter")
                await _settle(app, pilot)

    async def run() -> None:
        await asyncio.gather(one(make_app(desk)), one(make_app(desk)))

    asyncio.run(run())
    with desk.register.reading() as session:
        rows = export_session_rows(session, get_series(session, "tools"))
    codes = [row[0] for row in rows]
    assert len(codes) == 30 + 2 * per_desk and len(set(codes)) == len(codes)


def test_scans_before_the_register_opens_are_answered_once_it_opens(desk: Any) -> None:
    """The screen draws before the register is open; a wedge scanner firing at once is
    not lost: its lines wait, in order, and are answered when the register opens."""
    import threading

    from issuer.counter.app import CounterApp

    release = threading.Event()

    def opener() -> Any:
        assert release.wait(30), "the test never let the register open"
        return desk

    first, first_shown = _code(desk, 3)
    second, second_shown = _code(desk, 9)

    async def run() -> None:
        app = CounterApp(opener=opener, where="Quillmere test register", series="tools")
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            assert app.desk is None and app.focused is app.query_one("#scan")
            assert "Opening the register" in str(app.query_one("#answer").render())
            await pilot.press(*first_shown, "enter")
            await pilot.press(*"drill bit 3", "enter")
            await pilot.press(*second, "enter")
            await pilot.pause()
            assert app.waiting == [first_shown, "drill bit 3", second]
            assert "3 scan(s) waiting" in str(app.query_one("#status").render())
            assert app.recent == []  # nothing answered yet
            # an act needs the register: it says so and does nothing
            await pilot.press("f2")
            await pilot.pause()
            assert "still opening" in str(app.query_one("#answer").render())
            release.set()
            await _settle(app, pilot)
            await _settle(app, pilot)
            assert app.desk is desk and app.waiting == []
            # answered once each, in the order scanned (the strip shows the newest first)
            assert [key for key, _ in app.recent] == [second, "drill bit 3", first]
            assert app.recent[0][1] == f"✓ {second_shown}  in use"
            assert "not a code" in app.recent[1][1]
            assert "✓ in use" in str(app.query_one("#answer").render())
            assert app.focused is app.query_one("#scan")

    asyncio.run(run())


def test_a_register_that_cannot_open_ends_the_screen_with_one_line(tmp_path: Any) -> None:
    from issuer.config import load_settings
    from issuer.counter.app import CounterApp
    from issuer.counter.desk import open_desk

    settings = load_settings(database=str(tmp_path / "no-such-register.sqlite"), actor="test-clerk")

    async def run() -> Any:
        app = CounterApp(opener=lambda: open_desk(settings, series="tools"), where="nowhere")
        async with app.run_test(size=(80, 24)) as pilot:
            for _ in range(50):
                await pilot.pause(0.05)
                if app.failure is not None:
                    break
        return app

    app = asyncio.run(run())
    assert app.failure is not None and "no register" in app.failure
    assert app.return_code == 2
    assert not (tmp_path / "no-such-register.sqlite").exists()  # a mistyped path makes nothing


def test_an_unknown_series_is_one_line_from_the_command(cli: Any, register: Any) -> None:
    from issuer.register.defining import SeriesSpec, add_series

    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="QT"))
    result = cli("counter", "--series", "hammers")
    assert result.exit_code == 2
    assert "hammers" in result.output and "Traceback" not in result.output
