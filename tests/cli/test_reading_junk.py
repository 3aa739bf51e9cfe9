"""Every entry point that reads a typed or scanned code, fed junk: bytes that are not
UTF-8, NUL, a 10 MB line, a character of every Unicode category. Each answer is one
line (or the desk's own answer), never a traceback, and the register is unchanged."""

from __future__ import annotations

import hashlib
import json
import sqlite3
from pathlib import Path
from typing import Any

import pytest

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.store import Register

TOOLS = SeriesSpec(key="tools", scheme="damm", length=7, prefix="QTL", group=(4, 4))

#: one character of each Unicode general category
CATEGORIES = {
    "Lu": "\u00c4", "Ll": "\u00df", "Lt": "\u01c5", "Lm": "\u02b0", "Lo": "\u4e2d",
    "Mn": "\u0301", "Mc": "\u0903", "Me": "\u20dd", "Nd": "\u0663", "Nl": "\u216b", "No": "\u00bd",
    "Pc": "\u203f", "Pd": "\u2014", "Ps": "(", "Pe": ")", "Pi": "\u00ab", "Pf": "\u00bb", "Po": "!",
    "Sm": "+", "Sc": "\u20ac", "Sk": "^", "So": "\u00a9", "Zs": "\u3000", "Zl": "\u2028", "Zp": "\u2029",
    "Cc": "\x07", "Cf": "\u200d", "Cs": "\udc80", "Co": "\ue000", "Cn": "\u0378",
}  # fmt: skip


def junk(code: str) -> list[str]:
    """Texts that name no code: each category's character in place of a real code's
    middle character, NUL, undecodable bytes (as Python hands them over: lone
    surrogates), 10 MB of digits."""
    middle = len(code) // 2
    assert code[middle] != "3"  # the Nd sample reads as 3: it must change the code
    texts = [code[:middle] + ch + code[middle + 1:] for ch in CATEGORIES.values()]
    texts += ["\x00", code + "\x00", "\udcff\udcfe" + code, "7" * 10_000_000, "", "\u200b", "-- --"]
    return texts


def state(db: Path) -> str:
    """A digest of every row of every table: equal means nothing changed."""
    connection = sqlite3.connect(db)
    try:
        tables = [row[0] for row in connection.execute("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")]
        digest = hashlib.sha256()
        for table in tables:
            for row in connection.execute(f"SELECT * FROM {table} ORDER BY 1"):
                digest.update(repr(row).encode("utf-8", "backslashreplace"))
        return digest.hexdigest()
    finally:
        connection.close()


def clean_failure(result: Any, *, allowed: tuple[int, ...] = (2,)) -> None:
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    assert result.exit_code in allowed, (result.exit_code, result.output[:500])
    assert "Traceback" not in result.output
    if result.exit_code == 2:
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1, result.stderr[:500]
        assert len(lines[0]) < 3000, lines[0][:500]  # an import names up to ten bad lines


@pytest.fixture
def held(register: Register) -> str:
    add_series(register, TOOLS)
    return issue_codes(register, "tools", 3).codes[0].code


def test_every_code_argument_refuses_junk_in_one_line(cli: Any, held: str, db_path: Path, tmp_path: Path) -> None:
    before = state(db_path)
    out = str(tmp_path / "labels.pdf")
    for text in junk(held):
        clean_failure(cli("void", text, "--reason", "test"))
        clean_failure(cli("replace", text, "--reason", "test"))
        clean_failure(cli("restore", text, "--reason", "test"))
        clean_failure(cli("history", text))
        clean_failure(cli("reprint", text, "--reason", "test", "--out", out))
        clean_failure(cli("labels", text, "--out", out))
        assert not Path(out).exists()
    assert state(db_path) == before


def test_check_and_desk_answer_junk_without_a_traceback(cli: Any, held: str, db_path: Path) -> None:
    before = state(db_path)
    texts = junk(held)
    for text in texts:
        result = cli("check", text, "--json")
        clean_failure(result, allowed=(1, 2))
        if result.exit_code == 1:
            (answer,) = json.loads(result.stdout)
            assert answer["status"] in ("malformed", "bad_check", "not_issued")
            assert "\n" not in (answer["reason"] or "")
        clean_failure(cli("check", text), allowed=(1, 2))
    lines = "\n".join(text for text in texts if "\n" not in text and "\u2028" not in text and len(text) < 1000)
    # undecodable bytes reach the desk as they would from a scanner: raw, on stdin
    result = cli("desk", input=(lines + "\nq\n").encode("utf-8", "surrogateescape"))
    assert result.exit_code == 0, result.output[-500:]
    assert "Traceback" not in result.output
    assert state(db_path) == before


def test_import_and_reconcile_refuse_junk_files_in_one_line(cli: Any, held: str, db_path: Path, tmp_path: Path) -> None:
    before = state(db_path)
    files = {
        "bytes.csv": b"code\n" + held.encode() + b"\xff\xfe\x80\n",
        "nul.csv": b"code\n" + held.encode() + b"\x00\n",
        "long.txt": b"7" * 10_000_000 + b"\n",
        "categories.txt": "\n".join(t for t in junk(held)[:len(CATEGORIES)] if "\udc80" not in t).encode("utf-8"),
    }
    for name, data in files.items():
        path = tmp_path / name
        path.write_bytes(data)
        clean_failure(cli("import", "tools", str(path)))
        result = cli("reconcile", "tools", str(path), "--json")
        clean_failure(result, allowed=(1, 2))
    assert state(db_path) == before


def test_check_reads_a_sloppy_code_and_answers_in_both_forms(cli: Any, held: str) -> None:
    typed = held[3:7] + " " + held[7:].replace("0", "O").replace("1", "l")  # prefix left off, O for 0, l for 1
    result = cli("check", typed, "--json")
    assert result.exit_code == 0, result.output
    (answer,) = json.loads(result.stdout)
    assert (answer["status"], answer["code"]) == ("issued", held)
    assert answer["display"].replace("-", "") == held and "-" in answer["display"]
    table = cli("check", typed)
    assert answer["display"] in table.stdout and held not in table.stdout


def test_close_candidates_are_said_in_words_at_the_cli(cli: Any, held: str) -> None:
    # three in-order codes: a typo of the middle one's check is one slip from its neighbours too
    codes = [held[:-1] + str(d) for d in range(10)]
    typo = next(c for c in codes if c != held)
    result = cli("check", typo, "--json")
    (answer,) = json.loads(result.stdout)
    assert answer["suggestions"], answer
    assert {"code", "display", "error", "description", "likelihood"} <= set(answer["suggestions"][0])
    likelihoods = [s["likelihood"] for s in answer["suggestions"]]
    assert likelihoods == sorted(likelihoods, reverse=True)
    close = len(likelihoods) > 1 and likelihoods[1] >= 0.5 * likelihoods[0]
    assert (answer["advice"] is not None) == close
    if close:
        assert "ask the person to read it again" in cli("check", typo).stdout
