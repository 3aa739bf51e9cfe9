"""The counter screen's shell: one input line that keeps the focus, an answer panel, a strip
of recent answers, and the worker threads every act runs in (the acts: :mod:`issuer.counter.app`).

Every act is one call on :class:`~issuer.counter.desk.CounterDesk` (the same library call
the command line makes), run in a worker thread so the screen never freezes.

The screen comes first, the register second: given an ``opener`` instead of a desk, the
screen draws and focuses its scan line at once, then opens the register (and with it
the database library) in a worker. Lines typed or scanned meanwhile wait in order and
are answered as soon as the register is open; a register that cannot be opened ends
the screen with one line (:attr:`CounterShell.failure`) for the command to print.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from rich.text import Text
from textual import work
from textual.app import App, ComposeResult
from textual.widgets import Footer, Input, OptionList, Static
from textual.widgets.option_list import Option

from issuer.cli.answers import answer_text, looks
from issuer.counter.desk import CounterDesk
from issuer.errors import IssuerError

#: answers and acts kept in the recent strip
RECENT = 20
#: after this long an unfinished act says that it is waiting
SLOW_S = 0.4
#: an act that takes longer than this says what it is doing (a quick answer redraws only once)
BUSY_S = 0.15

CAUTION = "A check character catches mistakes, not fraud."


class CounterShell(App[None]):
    """The counter screen over one register: layout, opening, the scan line, answers and
    the workers acts run in. The acts themselves (and their keys) are :class:`~issuer.counter.app.CounterApp`."""

    CSS_PATH = "counter.tcss"
    ENABLE_COMMAND_PALETTE = False  # the footer's room goes to the acts
    TITLE = "issuer counter"

    def __init__(
        self,
        desk: CounterDesk | None = None,
        *,
        where: str = "",
        opener: Callable[[], CounterDesk] | None = None,
        series: str | None = None,
    ) -> None:
        super().__init__()
        if (desk is None) == (opener is None):
            raise ValueError("give the counter a desk or an opener, not both")
        self.desk: CounterDesk | None = desk
        self.where, self.opener = where, opener
        self.series = desk.series if desk is not None else series  # named in the title before opening
        self.current: Any = None  # the answer on show
        self.recent: list[tuple[str, str]] = []  # (code or input, line)
        self.busy = 0
        self.waiting: list[str] = []  # lines typed before the register was open, in order
        self.failure: str | None = None  # why the register could not be opened

    # -- layout -----------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        yield Static(self._title(), id="title")
        yield Static("", id="banner")
        yield Input(placeholder="Scan or type a code, then Enter", id="scan", max_length=200)
        with self._box():
            first = "Ready." if self.desk is not None else "Opening the register…"
            yield Static(Text(f"{first} {CAUTION}"), id="answer")
        yield OptionList(id="suggestions")
        yield Static("", id="status")
        yield OptionList(id="recent")
        yield Footer()

    def _box(self) -> Any:
        from textual.containers import VerticalScroll

        return VerticalScroll(id="answer-box")

    def _title(self) -> str:
        series = (self.desk.series if self.desk is not None else self.series) or "no series chosen (F10)"
        return f"issuer counter · {self.where} · series {series}"

    def on_mount(self) -> None:
        self.query_one("#answer-box").border_title = "answer"
        self.query_one("#recent", OptionList).border_title = "recent"
        self.query_one("#scan", Input).focus()
        if self.desk is None:
            self.query_one("#status", Static).update("⋯ Opening the register… (scans are kept and answered)")
            self.call_after_refresh(self._open)  # the first frame goes out before the work begins

    # -- opening the register after the first frame ------------------------------------

    @work(thread=True, group="open", exit_on_error=False)
    def _open(self) -> None:
        assert self.opener is not None
        try:
            desk = self.opener()
        except IssuerError as exc:
            self._call_if_running(self._not_opened, exc.message)
            return
        except Exception as exc:  # the command prints one line, never a traceback
            self._call_if_running(self._not_opened, f"cannot open the register ({type(exc).__name__}: {exc})")
            return
        desk.on_reconnect = self.reconnecting
        try:
            self.call_from_thread(self._opened, desk)
        except RuntimeError:  # the clerk left before the register was open
            desk.register.close()

    def _call_if_running(self, fn: Callable[..., None], *args: Any) -> None:
        try:
            self.call_from_thread(fn, *args)
        except RuntimeError:  # the screen already closed
            if fn == self._not_opened:
                self.failure = args[0]

    def _opened(self, desk: CounterDesk) -> None:
        self.desk = desk
        self.query_one("#title", Static).update(self._title())
        self.query_one("#status", Static).update("")
        waiting, self.waiting = self.waiting, []
        if waiting:
            self._check_in_order(waiting)
        else:
            self.say(f"Ready. {CAUTION}", "")

    def _not_opened(self, message: str) -> None:
        self.failure = message
        self.exit(return_code=2)

    @property
    def open_desk(self) -> CounterDesk:
        """The desk, for acts that only start once the register is open."""
        assert self.desk is not None, "the register is not open yet"
        return self.desk

    def _desk_or_say(self) -> CounterDesk | None:
        """The desk, or None (and a line saying so) while the register is still opening."""
        if self.desk is None:
            self.say("⋯ the register is still opening: try again in a moment", "bold yellow")
        return self.desk

    # -- the scan line ----------------------------------------------------------------

    def on_input_submitted(self, event: Input.Submitted) -> None:
        if event.input.id != "scan":
            return
        text = event.value
        event.input.value = ""
        if not text.strip():
            return
        self.check(text)

    def check(self, text: str) -> None:
        if self.desk is None:
            self.waiting.append(text)
            self.query_one("#status", Static).update(
                f"⋯ Opening the register… {len(self.waiting)} scan(s) waiting to be answered")
            return
        desk = self.desk
        self.run_act(lambda: desk.check(text), self.show_answer, "Checking")

    def _check_in_order(self, texts: list[str]) -> None:
        """Answer lines that waited for the register, one worker, in the order typed."""
        desk = self.desk
        assert desk is not None

        def answer_all() -> list[Any]:
            answers: list[Any] = []
            for text in texts:
                try:
                    answers.append(desk.check(text))
                except IssuerError as exc:
                    answers.append(exc)
            return answers

        def show_all(answers: list[Any]) -> None:
            for answered in answers:
                if isinstance(answered, IssuerError):
                    self.say(f"✗ {answered.message}", "bold red")
                else:
                    self.show_answer(answered)

        self.run_act(answer_all, show_all, "Checking")

    def show_answer(self, answered: Any) -> None:
        answer, record = answered.answer, answered.record
        self.current = answer
        text = answer_text(answer, list_suggestions=False)
        if record is not None:
            text.append(f"\nissued {record.issued_at:%Y-%m-%d %H:%M} UTC by {record.issued_by}"
                        f" · batch {record.batch} · printed {record.print_count}×")  # fmt: skip
            if record.last_seen_at is not None:
                where = f" at {record.last_seen_where}" if record.last_seen_where else ""
                text.append(f"\nlast seen {record.last_seen_at:%Y-%m-%d %H:%M} UTC{where}")
        self.query_one("#answer", Static).update(text)
        suggestions = self.query_one("#suggestions", OptionList)
        if suggestions.option_count:
            suggestions.clear_options()
        if answer.suggestions:
            suggestions.add_options(
                Option(f"{n}. {s.display}  ({s.description})", id=s.code)
                for n, s in enumerate(answer.suggestions, 1)
            )
            suggestions.add_class("shown")
        elif suggestions.has_class("shown"):
            suggestions.remove_class("shown")
        symbol, words, _ = looks(answer.status)
        self.remember(answer.code or answer.input, f"{symbol} {answer.display or answer.input}  {words}")
        self.query_one("#scan", Input).focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        if event.option.id:
            self.check(event.option.id.split("#", 1)[0])

    def remember(self, key: str, line: str) -> None:
        self.recent.insert(0, (key, line))
        del self.recent[RECENT:]
        strip = self.query_one("#recent", OptionList)
        strip.clear_options()
        strip.add_options(Option(text, id=f"{code}#{n}") for n, (code, text) in enumerate(self.recent))

    def say(self, line: str, style: str = "bold") -> None:
        self.query_one("#answer", Static).update(Text(line, style=style))

    # -- running work off the screen's thread ------------------------------------------

    def run_act(self, work_fn: Callable[[], Any], then: Callable[[Any], None], what: str) -> None:
        self.busy += 1
        status = self.query_one("#status", Static)
        timers = [
            self.set_timer(BUSY_S, lambda: status.update(f"⋯ {what}…")),
            self.set_timer(SLOW_S, lambda: status.update(f"⋯ {what}: waiting for another desk…")),
        ]
        self._worker(work_fn, then, timers)

    @work(thread=True, group="register")
    def _worker(self, work_fn: Callable[[], Any], then: Callable[[Any], None], timers: list[Any]) -> None:
        try:
            result = work_fn()
        except IssuerError as exc:
            # bound now: ``exc`` is unset once the except block ends (call_from_thread happens to
            # run the lambda before that, but nothing should rest on it)
            refused = f"✗ {exc.message}"
            self.call_from_thread(self._done, timers, lambda: self.say(refused, "bold red"))
            return
        except Exception as exc:  # a face never shows a traceback to the clerk
            message = f"✗ the act failed unexpectedly ({type(exc).__name__}); nothing more was done"
            self.call_from_thread(self._done, timers, lambda: self.say(message, "bold red"))
            return
        self.call_from_thread(self._done, timers, lambda: then(result))

    def _done(self, timers: list[Any], show: Callable[[], None]) -> None:
        for timer in timers:
            timer.stop()
        self.busy -= 1
        if self.busy == 0:  # another act still running keeps its line
            self._quietly("#status", "")
        banner = self.query_one("#banner", Static)
        if banner.has_class("shown"):
            banner.remove_class("shown")
        show()

    def _quietly(self, selector: str, text: str) -> None:
        """Set a one-line widget's text, redrawing only when it changes."""
        widget = self.query_one(selector, Static)
        if str(widget.render()) != text:
            widget.update(text)

    def reconnecting(self, attempt: int) -> None:
        """Called from a worker when the database connection dropped and is being retried."""

        def show() -> None:
            banner = self.query_one("#banner", Static)
            banner.update(f"⚠ connection to the register lost: trying again ({attempt})…")
            banner.add_class("shown")

        self.call_from_thread(show)
