"""What an interrupted act left behind, read from the log through the Python API."""

from __future__ import annotations

from typing import Any

import pytest

from issuer.register.acts import committed_since, mark
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import void_code
from issuer.register.store import Register

TOOLS = SeriesSpec(key="tools", scheme="luhn", length=7, prefix="QTL")
CARDS = SeriesSpec(key="cards", scheme="damm", length=8, prefix="QM")


def test_nothing_committed_after_a_rolled_back_act(register: Register) -> None:
    add_series(register, TOOLS)
    before = mark(register)
    with pytest.raises(KeyboardInterrupt), register.writing() as session:
        session.execute(__import__("sqlalchemy").text("SELECT 1"))
        raise KeyboardInterrupt
    done = committed_since(register, before, ("issue",))
    assert not done and done.batches == ()


def test_the_batch_an_act_committed_is_found(register: Register) -> None:
    add_series(register, TOOLS)
    add_series(register, CARDS)
    issue_codes(register, "tools", 2)
    before = mark(register)
    result = issue_codes(register, "tools", 3)
    issue_codes(register, "cards", 1)  # another series: not this act's
    void_code(register, result.codes[0].code, reason="lost")  # another action
    done = committed_since(register, before, ("issue",), series="tools")
    assert done and done.batches == (result.batch,) and done.series == ("tools",)
    assert done.entries == 1


def test_only_the_actor_who_marked_counts(register: Register) -> None:
    from dataclasses import replace

    add_series(register, TOOLS)
    before = mark(register)
    other: Any = replace(register, actor="desk-2")
    issue_codes(other, "tools", 1)
    assert not committed_since(register, before, ("issue",))
