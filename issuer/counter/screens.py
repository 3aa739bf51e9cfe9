"""The counter's small screens: asking for a reason or a holder, confirming an act that
cannot be undone, a code's history, and holder search results."""

from __future__ import annotations

from typing import Any

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Input, Label, OptionList, Static
from textual.widgets.option_list import Option


class AskScreen(ModalScreen[dict[str, str] | None]):
    """Ask for one or more short texts; Enter in the last field answers, Esc cancels."""

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, title: str, fields: list[tuple[str, str, bool]], hint: str = "") -> None:
        super().__init__()
        self.title_text, self.fields, self.hint = title, fields, hint

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Label(self.title_text, classes="dialog-title")
            for name, label, _required in self.fields:
                yield Label(label)
                yield Input(id=f"ask-{name}", max_length=200)
            yield Static(self.hint or "Enter: go on   Esc: cancel", classes="dialog-hint", id="ask-hint")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        inputs = list(self.query(Input))
        index = inputs.index(event.input)
        if index < len(inputs) - 1:
            inputs[index + 1].focus()
            return
        values = {name: self.query_one(f"#ask-{name}", Input).value.strip() for name, _, _ in self.fields}
        missing = [label for name, label, required in self.fields if required and not values[name]]
        if missing:
            self.query_one("#ask-hint", Static).update(f"✗ {missing[0]} is needed (Esc to cancel)")
            return
        self.dismiss(values)

    def action_cancel(self) -> None:
        self.dismiss(None)


class ConfirmScreen(ModalScreen[bool]):
    """One last question before an act that cannot be undone: y goes on, anything else not."""

    BINDINGS = [Binding("y", "yes", "Yes"), Binding("n,escape", "no", "No")]

    def __init__(self, question: str) -> None:
        super().__init__()
        self.question = question

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog warning"):
            yield Label("⚠ This cannot be undone", classes="dialog-title")
            yield Static(self.question)
            yield Static("y: yes, do it   n or Esc: no", classes="dialog-hint")

    def action_yes(self) -> None:
        self.dismiss(True)

    def action_no(self) -> None:
        self.dismiss(False)


class HistoryScreen(ModalScreen[None]):
    """A code's record and every logged event about it, scrollable."""

    BINDINGS = [Binding("escape,q", "close", "Close")]

    def __init__(self, body: Any) -> None:
        super().__init__()
        self.body = body

    def compose(self) -> ComposeResult:
        with VerticalScroll(classes="dialog wide", id="history"):
            yield Static(self.body)
            yield Static("↑↓ PgUp PgDn: scroll   Esc: close", classes="dialog-hint")

    def action_close(self) -> None:
        self.dismiss(None)


class PickScreen(ModalScreen[str | None]):
    """Choose one of several codes (holder search results); Enter opens it, Esc closes."""

    BINDINGS = [Binding("escape", "close", "Close")]

    def __init__(self, title: str, choices: list[tuple[str, str]]) -> None:
        super().__init__()
        self.title_text, self.choices = title, choices

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog wide"):
            yield Label(self.title_text, classes="dialog-title")
            yield OptionList(*(Option(text, id=code) for code, text in self.choices), id="pick")
            yield Static("↑↓: choose   Enter: open   Esc: close", classes="dialog-hint")

    def on_mount(self) -> None:
        self.query_one(OptionList).focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(event.option.id)

    def action_close(self) -> None:
        self.dismiss(None)
