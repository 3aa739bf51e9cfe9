"""``issuer counter``: the acts on the answered code by single keys (issue, void, replace,
restore, reprint, history, holder, find, series), each a dialog and then one call on
:class:`~issuer.counter.desk.CounterDesk` run in a worker thread; the screen itself (layout,
opening the register after the first frame, the scan line, answers) is
:class:`~issuer.counter.shell.CounterShell`.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from rich.text import Text
from textual.binding import Binding
from textual.widgets import Input, Static

from issuer.counter.screens import AskScreen, ConfirmScreen, HistoryScreen, PickScreen
from issuer.counter.shell import CounterShell


class CounterApp(CounterShell):
    """The counter screen over one register, with its acts."""

    BINDINGS = [
        Binding("f2", "issue", "New code", priority=True),
        Binding("f3", "void", "Void", priority=True),
        Binding("f4", "replace", "Replace", priority=True),
        Binding("f5", "restore", "Restore", priority=True),
        Binding("f6", "reprint", "Reprint", priority=True),
        Binding("f7", "history", "History", priority=True),
        Binding("f8", "holder", "Holder", priority=True),
        Binding("f9", "find", "Find", priority=True),
        Binding("f10", "series", "Series", priority=True),
        Binding("ctrl+q", "quit", "Quit", priority=True),
        Binding("escape", "to_scan", "Back to the scan line", show=False),
    ]

    # -- acts on the answered code -------------------------------------------------------

    def _answered(self, *statuses: str) -> Any:
        answer = self.current
        if self._desk_or_say() is None:
            return None
        if answer is None or answer.code is None or answer.status not in statuses:
            wanted = " or ".join(s.replace("_", " ") for s in statuses)
            self.say(f"✗ scan a code that is {wanted} first", "bold yellow")
            return None
        return answer

    def action_to_scan(self) -> None:
        self.query_one("#scan", Input).focus()

    def action_issue(self) -> None:
        desk = self._desk_or_say()
        if desk is None:
            return
        if desk.series is None:
            self.say("✗ choose a series first (F10)", "bold yellow")
            return

        def issue(values: dict[str, str] | None) -> None:
            if values is None:
                return
            self.run_act(lambda: desk.issue(values["holder"] or None, values["note"] or None),
                         self._issued, "Issuing")  # fmt: skip

        self.push_screen(AskScreen(f"New code from series {desk.series}",
                                   [("holder", "Holder (optional; personal data)", False),
                                    ("note", "Note (optional)", False)]), issue)  # fmt: skip

    def _issued(self, info: Any) -> None:
        self.remember(info.code, f"+ issued {info.display}" + (f" to {info.holder}" if info.holder else ""))
        self.check(info.code)

    def _reasoned(self, title: str, question: str, act: Callable[[str], Any], then: Callable[[Any], None],
                  what: str, confirm: bool) -> None:  # fmt: skip
        def asked(values: dict[str, str] | None) -> None:
            if values is None:
                return
            reason = values["reason"]
            if not confirm:
                self.run_act(lambda: act(reason), then, what)
                return

            def confirmed(yes: bool | None) -> None:
                if yes:
                    self.run_act(lambda: act(reason), then, what)
                else:
                    self.say("Nothing was done.")

            self.push_screen(ConfirmScreen(question), confirmed)

        self.push_screen(AskScreen(title, [("reason", "Reason (goes into the log)", True)]), asked)

    def action_void(self) -> None:
        answer = self._answered("issued", "expired", "suspended")
        if answer is None:
            return
        self._reasoned(f"Void {answer.display}", f"Void {answer.display} for good? It is never issued again.",
                       lambda r: self.open_desk.void(answer.code, r), self._after("voided"), "Voiding", True)  # fmt: skip

    def action_replace(self) -> None:
        answer = self._answered("issued", "expired", "suspended")
        if answer is None:
            return

        def replaced(made: Any) -> None:
            self.remember(made.code, f"⇄ {answer.display} → {made.display}")
            self.query_one("#answer", Static).update(Text.assemble(
                ("⇄ replaced\n", "bold green"), ("old  ", ""), (f"{answer.display}", "bold red"),
                ("  voided\nnew  ", ""), (f"{made.display}", "bold green"), ("  issued", ""),
            ))  # fmt: skip
            self.current = None

        self._reasoned(f"Replace {answer.display}",
                       f"Void {answer.display} for good and issue its replacement?",
                       lambda r: self.open_desk.replace(answer.code, r), replaced, "Replacing", True)  # fmt: skip

    def action_restore(self) -> None:
        answer = self._answered("voided")
        if answer is None:
            return
        self._reasoned(f"Restore {answer.display}", "", lambda r: self.open_desk.restore(answer.code, r),
                       self._after("restored"), "Restoring", False)  # fmt: skip

    def action_reprint(self) -> None:
        answer = self._answered("issued", "expired")
        if answer is None:
            return

        def printed(outcome: Any) -> None:
            self.remember(answer.code, f"⎙ reprinted {answer.display}")
            self.say(f"⎙ reprinted {answer.display}: {outcome.path}", "bold green")

        self._reasoned(f"Reprint the label of {answer.display}", "",
                       lambda r: self.open_desk.reprint(answer.code, r), printed, "Drawing the label", False)  # fmt: skip

    def action_holder(self) -> None:
        answer = self._answered("issued", "expired", "suspended")
        if answer is None:
            return

        def asked(values: dict[str, str] | None) -> None:
            if values is not None:
                self.run_act(lambda: self.open_desk.set_holder(answer.code, values["holder"]),
                             self._after("holder changed"), "Saving")  # fmt: skip

        self.push_screen(AskScreen(f"Holder of {answer.display}", [("holder", "Holder (empty: none)", False)],
                                   "Personal data: store only what your policy allows."), asked)  # fmt: skip

    def _after(self, verb: str) -> Callable[[Any], None]:
        def show(record: Any) -> None:
            self.remember(record.code, f"• {verb} {record.display}")
            self.check(record.code)

        return show

    def action_history(self) -> None:
        answer = self._answered("issued", "voided", "expired", "suspended")
        if answer is None:
            return

        def shown(found: tuple[Any, list[Any]]) -> None:
            record, events = found
            body = Text()
            body.append(f"{record.display}  series {record.series}  {record.status}\n", style="bold")
            body.append(f"issued {record.issued_at:%Y-%m-%d %H:%M} by {record.issued_by}; "
                        f"printed {record.print_count} time(s)\n\n")  # fmt: skip
            for event in events:
                body.append(f"{event.at:%Y-%m-%d %H:%M}  {event.actor:<16} {event.action}\n")
            self.push_screen(HistoryScreen(body))

        self.run_act(lambda: self.open_desk.history(answer.code), shown, "Reading the history")

    def action_find(self) -> None:
        if self._desk_or_say() is None:
            return

        def asked(values: dict[str, str] | None) -> None:
            if values is not None:
                self.run_act(lambda: self.open_desk.find(values["text"]), found, "Searching")

        def found(rows: list[Any]) -> None:
            if not rows:
                self.say("No code's holder or note starts with that.")
                return
            choices = [(row.code, f"{row.display}  {row.series}  {row.holder or row.note or ''}") for row in rows]
            self.push_screen(PickScreen(f"{len(rows)} found", choices),
                             lambda code: self.check(code) if code else None)  # fmt: skip

        self.push_screen(AskScreen("Find by holder or note", [("text", "Starts with", True)]), asked)

    def action_series(self) -> None:
        if self._desk_or_say() is None:
            return

        def listed(keys: list[str]) -> None:
            self.push_screen(PickScreen("Series for new codes", [(key, key) for key in keys]), chosen)

        def chosen(key: str | None) -> None:
            if key:
                self.open_desk.series = key
                self.query_one("#title", Static).update(self._title())

        self.run_act(self.open_desk.series_keys, listed, "Reading the series")
