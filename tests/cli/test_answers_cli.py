"""Answers people can read: stacked blocks on a narrow terminal, the log one line per
act, and the desk's line mode (help, empty lines, one series, cautions)."""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import pytest
from typer.testing import CliRunner

from issuer.cli.app import app
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import void_code
from issuer.register.store import Register

TOOLS = SeriesSpec(key="tools", scheme="damm", length=7, prefix="QTL", group=(4, 4), title="Tool tags")
CARDS = SeriesSpec(key="cards", scheme="luhn", length=8, prefix="QM", title="Member cards")
BOX = "┃│┏┗"


def _run(db_path: Path, *args: str, columns: int = 80, input: str | None = None) -> Any:
    return CliRunner().invoke(app, [*args, "--db", str(db_path)], input=input, env={"COLUMNS": str(columns)})


@pytest.fixture
def codes(register: Register) -> list[str]:
    add_series(register, TOOLS)
    add_series(register, CARDS)
    issued = [info.code for info in issue_codes(register, "tools", 3, holder="Quillmere workshop").codes]
    void_code(register, issued[2], reason="snapped in the bench vice")
    return issued


def _typo(code: str) -> str:
    return code[:-2] + code[-1] + code[-2]


def test_check_at_80_columns_is_blocks_and_at_120_a_table(db_path: Path, codes: list[str]) -> None:
    inputs = [codes[0], codes[2], _typo(codes[1]), "QTL-9"]
    narrow = _run(db_path, "check", *inputs, columns=80)
    assert narrow.exit_code == 1
    lines = narrow.stdout.splitlines()
    assert all(len(line) <= 80 for line in lines)
    assert not any(mark in narrow.stdout for mark in BOX)  # no table frame to wrap
    assert any(line.startswith("in use") and codes[0] in line for line in lines)  # a block heading
    assert any(line.split()[:2] == ["series", "tools"] for line in lines)
    assert sum(1 for line in lines if line.startswith("series ")) == 3  # every block but the non-code
    wide = _run(db_path, "check", *inputs, columns=200)
    assert "┏" in wide.stdout and "snapped in the bench vice" in wide.stdout
    # --json is the same whatever the width
    assert _run(db_path, "check", *inputs, "--json", columns=80).stdout == _run(
        db_path, "check", *inputs, "--json", columns=200).stdout


def test_demo_at_80_columns_answers_in_blocks(tmp_path: Path) -> None:
    demo = CliRunner().invoke(app, ["demo", "--db", str(tmp_path / "demo.sqlite")], env={"COLUMNS": "80"})
    assert demo.exit_code == 0, demo.output
    desk_part = demo.stdout.split("At the desk", 1)[1]
    assert "┃" not in desk_part and any(line.startswith("series ") for line in desk_part.splitlines())


def test_log_is_one_line_per_act(db_path: Path, codes: list[str], register: Register, tmp_path: Path) -> None:
    from issuer.register.lifecycle import replace_code

    replace_code(register, codes[1], reason="label faded")
    printed = _run(db_path, "labels", "--series", "tools", "--void-labels", "--out", str(tmp_path / "l.pdf"))
    assert printed.exit_code == 0, printed.output
    every = json.loads(_run(db_path, "log", "--json").stdout)
    actions = [entry["action"] for entry in every]
    assert actions.count("print") == 4 and actions.count("void") == 2  # the replacement's void too
    acts = _run(db_path, "log", columns=200)
    body = [line for line in acts.stdout.splitlines() if re.match(r"│ \d", line)]
    # series.add x2, issue, void, replace (its void and replace entries), print (4 labels)
    assert len(body) == 6, acts.stdout
    assert any("print" in line and "4 codes" in line for line in body)
    # codes in the act lines and their details are in display form, never compact
    shown = [f"QTL-{code[3:7]}-{code[7:]}" for code in codes]
    assert any("void" in line and shown[2] in line for line in body), acts.stdout
    assert not any(code in acts.stdout for code in codes)
    entries = _run(db_path, "log", "--entries", columns=200)
    assert len([line for line in entries.stdout.splitlines() if re.match(r"│ \d", line)]) == len(every)
    assert json.loads(_run(db_path, "log", "--json", "--entries").stdout) == every  # --json unchanged
    narrow = _run(db_path, "log", columns=80)
    assert all(len(line) <= 80 for line in narrow.stdout.splitlines()) and "┃" not in narrow.stdout


def test_acts_group_a_transaction_through_the_api(register: Register, codes: list[str]) -> None:
    from issuer.register.acts import group_acts
    from issuer.register.lifecycle import log_entries, replace_code

    replace_code(register, codes[1], reason="label faded")
    with register.reading() as session:
        events = log_entries(session)
    acts = group_acts(events)
    assert [act.action for act in acts] == ["series.add", "series.add", "issue", "void", "replace"]
    assert acts[-1].entries == 2 and acts[-1].first_id + 1 == acts[-1].last_id
    assert sum(act.entries for act in acts) == len(events)


def test_desk_line_mode(db_path: Path, codes: list[str]) -> None:
    typed = "help\n\n   \n?\n" + codes[0] + "\n\n" + _typo(codes[1]) + "\nq\n" + codes[0] + "\n"
    result = _run(db_path, "desk", input=typed)
    assert result.exit_code == 0, result.output
    lines = result.stdout.splitlines()
    assert "catches mistakes, not fraud" in lines[0]  # the caution comes first
    assert result.stdout.count("help or ?") == 2  # help, then ?
    assert "not a code" not in result.stdout  # help, ? and empty lines are no codes
    assert result.stdout.count("in use") == 1  # q ended it before the last line
    assert "typo: the check character does not match" in result.stdout and "did you mean" in result.stdout


def test_desk_ends_on_ctrl_d_with_a_newline(db_path: Path, codes: list[str]) -> None:
    result = _run(db_path, "desk", input=codes[0] + "\n")
    assert result.exit_code == 0 and result.stdout.endswith("code> \n")


def test_desk_never_issued_says_not_to_accept(db_path: Path, codes: list[str], register: Register) -> None:
    from issuer.register.series import code_format, get_series

    with register.reading() as session:
        unissued = code_format(get_series(session, "tools")).code_for_base(777)
    result = _run(db_path, "desk", input=unissued + "\n")
    assert "never issued" in result.stdout and "Do not accept this number" in result.stdout
    checked = _run(db_path, "check", unissued, columns=200)
    assert "Do not accept this number" in checked.stdout


def test_desk_for_one_series(db_path: Path, codes: list[str], register: Register) -> None:
    card = issue_codes(register, "cards").codes[0]
    result = _run(db_path, "desk", "--series", "tools", input=f"{card.code}\n{codes[0]}\nQTL-12\n")
    assert result.exit_code == 0
    assert "series tools" in result.stdout.splitlines()[1]
    assert "a code of series cards, not tools" in result.stdout
    assert "in use" in result.stdout
    last = result.stdout.rsplit("code> ", 2)[-2]  # the answer to QTL-12: about tools only
    assert "not a code" in last and "cards" not in last
    unknown = _run(db_path, "desk", "--series", "tool")
    assert unknown.exit_code == 2 and "did you mean 'tools'?" in unknown.stderr


def test_desk_draws_the_shared_answer(db_path: Path, codes: list[str]) -> None:
    """The line desk prints answer_text: typed markup and controls come out as typed
    (escaped), never as styling or terminal commands."""
    result = _run(db_path, "desk", input="[red]QTL-99[/red]\nQTL\u202e12\n" + codes[0] + "\n", columns=120)
    assert result.exit_code == 0, result.output
    assert "[red]QTL-99[/red]" in result.stdout  # the markup printed literally
    assert "\u202e" not in result.stdout  # a bidi override never reaches the terminal
    assert "✓ in use" in result.stdout and "holder: Quillmere workshop" in result.stdout


def test_answer_text_puts_the_advice_first() -> None:
    from issuer.cli.answers import NEVER_ISSUED, answer_text
    from issuer.register.desk import DeskAnswer, Suggestion

    answer = DeskAnswer("QTL-0000-0135", "not_issued", "QTL00000135", "QTL-0000-0135", "tools",
                        reason="a valid code that this register never issued")  # fmt: skip
    answer.suggestions = [
        Suggestion("QTL00000153", "QTL-0000-0153", "adjacent", "swap of 10th and 11th", 0.015),
        Suggestion("QTL00000136", "QTL-0000-0136", "single", "11th: 6 typed as 5", 0.011),
    ]
    answer.advice = "two issued codes are one slip away: ask the person to read it again"
    lines = answer_text(answer).plain.splitlines()
    assert lines[0].startswith("✗ never issued   QTL-0000-0135")
    assert lines[1] == answer.advice and lines[2] == NEVER_ISSUED
    assert lines[-3:] == ["did you mean:", "  1. QTL-0000-0153  (swap of 10th and 11th)",
                          "  2. QTL-0000-0136  (11th: 6 typed as 5)"]  # fmt: skip
    answer.holder, answer.status = "Ana\x1b[31m", "issued"
    assert "holder: Ana\\x1b[31m" in answer_text(answer).plain
