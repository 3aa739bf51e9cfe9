"""How an answer to a typed or scanned code reads, in words, a symbol and a colour (the
colour is never the only signal). The line-mode desk (``issuer desk``) and the counter
screen both draw answers with :func:`answer_text`.

The answer is a Rich :class:`~rich.text.Text`, never markup: what a person typed or a
register holds is appended as plain text, so ``[bold]`` typed at the desk prints as
typed, and control or layout characters are written as escapes (:func:`printable`, the
same cleaning :func:`issuer.cli.common.shown` gives markup strings)."""

from __future__ import annotations

from typing import Any

from rich.text import Text

from issuer.limits import printable

#: status -> (symbol, words, style)
LOOKS: dict[str, tuple[str, str, str]] = {
    "issued": ("✓", "in use", "bold green"),
    "voided": ("✗", "VOIDED: do not accept", "bold red"),
    "not_issued": ("✗", "never issued", "bold yellow"),
    "bad_check": ("?", "typo: the check character does not match", "bold yellow"),
    "malformed": ("✗", "not a code", "bold magenta"),
    "expired": ("⌛", "EXPIRED", "bold red"),
    "suspended": ("‖", "SUSPENDED: held back", "bold red"),
}


#: said under every "never issued" answer
NEVER_ISSUED = "Do not accept this number: the register never issued it."


def looks(status: str) -> tuple[str, str, str]:
    return LOOKS.get(status, ("•", status.replace("_", " "), "bold"))


def _when(value: Any) -> str:
    return f"{value:%Y-%m-%d %H:%M} UTC" if value is not None else ""


def answer_text(answer: Any, *, list_suggestions: bool = True) -> Text:
    """The answer as lines of text: headline first (symbol, words, the code's display form
    or, when nothing read as a code, what was typed), then the advice when several issued
    codes are about equally likely, then what a clerk needs to act. A screen that lists the
    suggestions as choices of its own passes ``list_suggestions=False``."""
    symbol, words, style = looks(answer.status)
    text = Text()
    text.append(f"{symbol} {words}", style=style)
    if answer.display:
        text.append(f"   {answer.display}", style="bold")
    elif getattr(answer, "input", None):
        text.append(f"   {printable(str(answer.input))}")
    if answer.series:
        text.append(f"   series {answer.series}")
    lines: list[tuple[str, str]] = []
    advice = getattr(answer, "advice", None)
    if advice:
        lines.append((advice, "bold"))
    if answer.status == "not_issued":
        lines.append((NEVER_ISSUED, "bold"))
    if answer.holder and answer.status != "voided":
        lines.append((f"holder: {printable(answer.holder)}", ""))
    if getattr(answer, "valid_until", None) is not None:
        lines.append((f"valid until {_when(answer.valid_until)}", ""))
    if getattr(answer, "since", None) is not None:
        lines.append((f"suspended since {_when(answer.since)}", ""))
    if answer.reason:
        lead = "reason: " if answer.status in ("voided", "suspended") else ""
        lines.append((lead + printable(answer.reason), ""))
    if answer.replacement:
        lines.append((f"replaced by {answer.replacement}", ""))
    if answer.suggestions:
        if list_suggestions:
            lines.append(("did you mean:", ""))
            for number, suggestion in enumerate(answer.suggestions, 1):
                lines.append((f"  {number}. {suggestion.display}  ({printable(suggestion.description)})", ""))
        else:
            lines.append(("did you mean:", ""))
            lines.append(("(Tab, then ↑↓ and Enter: check one of the codes below)", ""))
    for line, line_style in lines:
        text.append("\n")
        text.append(line, style=line_style)
    return text
