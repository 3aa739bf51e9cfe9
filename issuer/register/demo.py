"""The demo register of the Quillmere Tool Library & Makers' Co-op (fictional).

Three series: tool tags issued in order, member cards scattered, and alphanumeric
day passes. Everything here is invented.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.desk import DeskAnswer, check_codes
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code, void_code
from issuer.register.series import all_series, series_state
from issuer.register.store import Register

SERIES = (
    SeriesSpec(key="tools", title="Quillmere tool tags", scheme="damm", alphabet="digits",
               length=7, prefix="QTL", group=(4, 4), mode="sequential"),
    SeriesSpec(key="members", title="Quillmere member cards", scheme="verhoeff", alphabet="digits",
               length=9, prefix="QM", group=(5, 5), mode="scattered"),
    SeriesSpec(key="passes", title="Quillmere day passes", scheme="damm", alphabet="crockford32",
               length=6, prefix="DP", group=(4, 3), mode="scattered"),
)

#: invented holders; a real register stores only what its policy allows
HOLDERS = ("Demo member (workshop volunteer)", "Demo member (family plan)", "Demo member (student)")


@dataclass
class DemoReport:
    states: list[Any] = field(default_factory=list)
    issued: dict[str, list[str]] = field(default_factory=dict)
    voided: list[tuple[str, str]] = field(default_factory=list)
    replaced: list[tuple[str, str]] = field(default_factory=list)
    typed: list[tuple[str, str]] = field(default_factory=list)
    answers: list[DeskAnswer] = field(default_factory=list)


def _mistype(code: str, *, position: int, kind: str) -> str:
    """A person's typical slip on ``code`` at ``position`` (counted in the whole code)."""
    chars = list(code)
    if kind == "swap":
        chars[position], chars[position + 1] = chars[position + 1], chars[position]
    else:
        chars[position] = "7" if chars[position] != "7" else "1"
    return "".join(chars)


def _confusable(passes: list[Any]) -> tuple[str, str]:
    """A pass typed with a letter where the alphabet has a digit (O for 0, I or L for 1),
    which Crockford's Base32 reads as meant."""
    for info in passes:
        if "0" in info.display:
            return info.display.replace("0", "O", 1), "a pass typed with the letter O for zero"
        if "1" in info.display:
            return info.display.replace("1", "l", 1), "a pass typed with a small l for one"
    return passes[0].display.lower(), "a pass typed in lower case"


def run_demo(register: Register) -> DemoReport:
    report = DemoReport()
    for spec in SERIES:
        add_series(register, spec)
    tools = issue_codes(register, "tools", 12, note="spring intake")
    members = [
        issue_codes(register, "members", 1, holder=holder).codes[0] for holder in HOLDERS
    ]
    passes = issue_codes(register, "passes", 4, note="open workshop day")
    report.issued = {
        "tools": [info.display for info in tools.codes],
        "members": [info.display for info in members],
        "passes": [info.display for info in passes.codes],
    }
    lost = tools.codes[4]
    void_code(register, lost.code, reason="tag lost with the tool at a repair café")
    report.voided.append((lost.display, "tag lost"))
    damaged = members[1]
    new = replace_code(register, damaged.code, reason="card cracked")
    report.replaced.append((damaged.display, new.display))

    tool = tools.codes[2].display
    member = members[0].display
    typed = [
        (tool, "read off a tag"),
        (_mistype(tool, position=10, kind="swap"), "two digits swapped at the counter"),
        (_mistype(member, position=6, kind="substitute"), "one digit misheard on the phone"),
        (lost.display, "a tag that was voided"),
        (damaged.display.lower(), "an old card, typed in lower case"),
        _confusable(passes.codes),
        ("QTL-12-34", "too short"),
    ]
    report.typed = typed
    with register.reading() as session:
        report.answers = check_codes(session, [text for text, _ in typed], register.clock())
        report.states = [series_state(session, series) for series in all_series(session)]
    return report
