"""The demo register of the Quillmere Tool Library & Makers' Co-op (fictional).

Three series: tool tags issued in order, member cards scattered, and alphanumeric
day passes. Everything here is invented.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from issuer.register.desk import DeskAnswer, check_codes
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code, void_code
from issuer.register.series import SeriesSpec, add_series, all_series, series_state
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
        (passes.codes[0].display.replace("0", "O"), "a pass with the letter O for zero"),
        ("QTL-12-34", "too short"),
    ]
    report.typed = typed
    with register.reading() as session:
        report.answers = check_codes(session, [text for text, _ in typed])
        report.states = [series_state(session, series) for series in all_series(session)]
    return report
