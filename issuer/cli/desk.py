"""Desk verification against the register: ``issuer check`` without ``--scheme`` and
the interactive ``issuer desk``."""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from typing import Any

from issuer.cli.app import app
from issuer.cli.common import DbOption, console, open_register_from_options, print_json, shown

STYLE = {
    "issued": "green",
    "voided": "red",
    "not_issued": "yellow",
    "bad_check": "yellow",
    "malformed": "magenta",
}
WORDS = {
    "issued": "in use",
    "voided": "VOIDED",
    "not_issued": "never issued",
    "bad_check": "typo (check fails)",
    "malformed": "not a code",
}


def _detail(answer: Any) -> str:
    parts = []
    if answer.status == "issued" and answer.holder:
        parts.append(f"holder: {shown(answer.holder)}")
    if answer.status == "voided":
        parts.append(f"reason: {shown(answer.reason)}")
        if answer.replacement:
            parts.append(f"replaced by {answer.replacement}")
    elif answer.reason and answer.status != "issued":
        parts.append(shown(answer.reason))
    for suggestion in answer.suggestions:
        parts.append(f"did you mean [bold]{suggestion.display}[/bold]? ({suggestion.description})")
    if getattr(answer, "advice", None):
        parts.append(f"[bold]{answer.advice}[/bold]")
    return "\n".join(parts)


def render_answers(answers: Sequence[Any]) -> None:
    from rich.table import Table

    table = Table()
    for column in ("input", "answer", "series", "code", "details"):
        table.add_column(column)
    for answer in answers:
        style = STYLE.get(answer.status, "")
        table.add_row(
            shown(answer.input),
            f"[{style}]{WORDS.get(answer.status, answer.status)}[/{style}]",
            answer.series or "",
            answer.display or "",
            _detail(answer),
        )
    console().print(table)


def check_against_register(
    inputs: Sequence[str], *, db: str | None, actor: str | None, as_json: bool, summary: bool
) -> int:
    """Answer each input from the register; return the exit code (0: all in use)."""
    from issuer.register.desk import check_codes

    register = open_register_from_options(db, actor)
    with register.reading() as session:
        answers = check_codes(session, list(inputs))
    all_issued = bool(answers) and all(answer.status == "issued" for answer in answers)
    if summary:
        counts = Counter(answer.status for answer in answers)
        if as_json:
            print_json({"total": len(answers), "counts": {s: counts.get(s, 0) for s in STYLE}})
        else:
            for status in STYLE:
                console().print(f"{WORDS[status]:>20}: {counts.get(status, 0):,}")
    elif as_json:
        print_json([answer.as_dict() for answer in answers])
    else:
        render_answers(answers)
    return 0 if all_issued else 1


@app.command("desk")
def desk(
    *,
    db: DbOption = None,
) -> None:
    """Keep a prompt open: type or scan code after code and see each answer at once.

    An empty line, 'q' or Ctrl-D ends it. A check character catches mistakes, not fraud.
    """
    from issuer.register.desk import check_codes

    register = open_register_from_options(db, None)
    out = console()
    out.print("Type or scan a code and press Enter; an empty line or q ends.")
    while True:
        try:
            text = input("code> ")
        except EOFError:
            break
        if text.strip().lower() in ("", "q", "quit", "exit"):
            break
        with register.reading() as session:
            (answer,) = check_codes(session, [text])
        style = STYLE.get(answer.status, "")
        headline = f"[{style}]{WORDS.get(answer.status, answer.status)}[/{style}]"
        if answer.display:
            headline += f"  {answer.display}"
        if answer.series:
            headline += f"  (series {answer.series})"
        out.print(headline)
        detail = _detail(answer)
        if detail:
            out.print(detail)
    register.close()


