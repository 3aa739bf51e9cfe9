"""Desk verification against the register: ``issuer check`` without ``--scheme`` and
the interactive ``issuer desk``."""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from typing import Annotated, Any

import typer

from issuer.cli.answers import NEVER_ISSUED, answer_text
from issuer.cli.common import (
    CHECK_CAUTION,
    DbOption,
    command_set,
    console,
    open_register_from_options,
    print_json,
    shown,
)

commands = command_set()

STYLE = {
    "issued": "green",
    "expired": "yellow",
    "suspended": "yellow",
    "voided": "red",
    "not_issued": "yellow",
    "bad_check": "yellow",
    "malformed": "magenta",
}
WORDS = {
    "issued": "in use",
    "expired": "EXPIRED",
    "suspended": "SUSPENDED",
    "voided": "VOIDED",
    "not_issued": "never issued",
    "bad_check": "typo (check fails)",
    "malformed": "not a code",
}


def _detail(answer: Any) -> str:
    parts = []
    if answer.status in ("issued", "expired", "suspended") and answer.holder:
        parts.append(f"holder: {shown(answer.holder)}")
    if answer.status == "suspended":
        since = f" since {answer.since:%Y-%m-%d %H:%M} UTC" if answer.since else ""
        parts.append(f"suspended{since}: {shown(answer.reason)}")
        return "\n".join(parts)
    if answer.status == "voided":
        parts.append(f"reason: {shown(answer.reason)}")
        if answer.replacement:
            parts.append(f"replaced by {answer.replacement}")
    elif answer.reason and answer.status != "issued":
        parts.append(shown(answer.reason))
    if answer.status == "not_issued":
        parts.append(f"[bold]{NEVER_ISSUED}[/bold]")
    if getattr(answer, "advice", None):  # first, as answer_text says it: read it again
        parts.append(f"[bold]{answer.advice}[/bold]")
    for suggestion in answer.suggestions:
        parts.append(f"did you mean [bold]{suggestion.display}[/bold]? ({shown(suggestion.description)})")
    return "\n".join(parts)


def render_answers(answers: Sequence[Any]) -> None:
    """A table, or on a narrow terminal one block per answer."""
    from issuer.cli.blocks import Rows

    rows = Rows(("input", "answer", "series", "code", "details"), heading=(1, 0))
    for answer in answers:
        style = STYLE.get(answer.status, "")
        rows.add_row(
            shown(answer.input),
            f"[{style}]{WORDS.get(answer.status, answer.status)}[/{style}]",
            answer.series or "",
            answer.display or "",
            _detail(answer),
        )
    rows.print(console())


def check_against_register(
    inputs: Sequence[str], *, db: str | None, actor: str | None, as_json: bool, summary: bool
) -> int:
    """Answer each input from the register; return the exit code (0: all in use)."""
    from issuer.register.desk import check_codes

    register = open_register_from_options(db, actor)
    with register.reading() as session:
        answers = check_codes(session, list(inputs), register.clock())
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


DESK_HELP = (
    "  CODE        type or scan a code: the answer comes at once\n"
    "  help or ?   show these commands\n"
    "  q or Ctrl-D end the desk\n"
    "  Empty lines are ignored."
)


@commands.command("desk")
def desk(
    *,
    series: Annotated[
        str | None, typer.Option("--series", help="Answer for this series only (a code of another series is named, not answered).")
    ] = None,
    db: DbOption = None,
) -> None:
    """Keep a prompt open: type or scan code after code and see each answer at once.

    'help' or '?' lists the commands; empty lines are ignored; 'q' or Ctrl-D ends. A check
    character catches mistakes, not fraud.
    """
    from issuer.register.desk import check_codes

    register = open_register_from_options(db, None)
    out = console()
    shape = _series_shape(register, series) if series is not None else None
    out.print(CHECK_CAUTION, style="bold")
    only = f" of series {series}" if series is not None else ""
    out.print(f"Type or scan a code{only} and press Enter; 'help' or '?' for commands, 'q' or Ctrl-D ends.")
    while True:
        try:
            text = input("code> ")
        except (EOFError, KeyboardInterrupt):
            typer.echo()  # the shell's prompt starts on a line of its own
            break
        except UnicodeDecodeError:  # bytes that are not text: say so and read on
            out.print("[magenta]not a code[/magenta]  that line is not UTF-8 text")
            continue
        word = text.strip().lower()
        if not word:
            continue
        if word in ("q", "quit", "exit"):
            break
        if word in ("help", "?", "h"):
            out.print(DESK_HELP)
            out.print(CHECK_CAUTION, style="dim")
            continue
        with register.reading() as session:
            (answer,) = check_codes(session, [text], register.clock())
            if series is not None and answer.series is None:  # not a code: say why for this series
                (answer,) = check_codes(session, [text], register.clock(), series=series)
        _show_desk_answer(out, answer, series, shape)
    register.close()


def _series_shape(register: Any, key: str) -> Any:
    """The one series a desk answers for (an unknown key stops it, naming the nearest)."""
    from issuer.register.series import code_format, get_series

    with register.reading() as session:
        return code_format(get_series(session, key))


def _show_desk_answer(out: Any, answer: Any, only: str | None, shape: Any) -> None:
    if only is not None and answer.series and answer.series != only:
        out.print(f"[magenta]not this desk's series[/magenta]  {answer.display or shown(answer.input)}: "
                  f"a code of series {answer.series}, not {only}; this desk answers for {only} only")
        return
    if shape is not None:  # suggestions from other series do not belong at this desk
        answer.suggestions = [s for s in answer.suggestions if shape.matches_shape(s.code)]
    out.print(answer_text(answer))
