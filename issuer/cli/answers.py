"""How an answer to a typed or scanned code reads, in words, a symbol and a colour (the
colour is never the only signal). The line-mode desk and the counter screen both draw
answers with :func:`answer_text`."""

from __future__ import annotations

from typing import Any

from rich.text import Text

#: status -> (symbol, words, style)
LOOKS: dict[str, tuple[str, str, str]] = {
    "issued": ("✓", "in use", "bold green"),
    "voided": ("✗", "VOIDED: do not accept", "bold red"),
    "not_issued": ("✗", "never issued: do not accept this number", "bold yellow"),
    "bad_check": ("?", "typo: the check character does not match", "bold yellow"),
    "malformed": ("✗", "not a code", "bold magenta"),
    "expired": ("⌛", "EXPIRED", "bold red"),
    "suspended": ("‖", "SUSPENDED: held back", "bold red"),
}


def looks(status: str) -> tuple[str, str, str]:
    return LOOKS.get(status, ("•", status.replace("_", " "), "bold"))


def _when(value: Any) -> str:
    return f"{value:%Y-%m-%d %H:%M} UTC" if value is not None else ""


def answer_text(answer: Any, *, list_suggestions: bool = True) -> Text:
    """The answer as lines of text: headline first, then what a clerk needs to act.
    A screen that lists the suggestions as choices of its own passes ``list_suggestions=False``."""
    symbol, words, style = looks(answer.status)
    text = Text()
    text.append(f"{symbol} {words}", style=style)
    if answer.display:
        text.append(f"   {answer.display}", style="bold")
    if answer.series:
        text.append(f"   series {answer.series}")
    lines: list[str] = []
    if answer.holder and answer.status != "voided":
        lines.append(f"holder: {answer.holder}")
    if getattr(answer, "valid_until", None) is not None:
        lines.append(f"valid until {_when(answer.valid_until)}")
    if getattr(answer, "since", None) is not None:
        lines.append(f"suspended since {_when(answer.since)}")
    if answer.reason:
        lines.append(("reason: " if answer.status in ("voided", "suspended") else "") + answer.reason)
    if answer.replacement:
        lines.append(f"replaced by {answer.replacement}")
    if answer.suggestions:
        several = len(answer.suggestions) > 1
        lines.append("several issued codes are one slip away: ask the person to read it again"
                     if several else "did you mean:")  # fmt: skip
        if list_suggestions:
            for number, suggestion in enumerate(answer.suggestions, 1):
                lines.append(f"  {number}. {suggestion.display}  ({suggestion.description})")
        else:
            lines.append("(Tab, then ↑↓ and Enter: check one of the codes below)")
    for line in lines:
        text.append("\n" + line)
    return text
