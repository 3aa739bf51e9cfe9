"""Fuzzing the faces: random arguments to the CLI's commands and random files to every
reader. Whatever goes in, the answer is a result or one line with exit code 2, never a
traceback, and a refused command leaves the register exactly as it was.

The budget is fixed so CI stays quick (about 3,600 inputs in all, in-process, in about half
a minute: 600 command lines on SQLite and 200 on PostgreSQL, as many import/reconcile files,
2,000 reader files); ISSUER_LONG_TESTS=1 runs many more. Each run prints how many inputs it tried and how many tracebacks it saw.
"""

from __future__ import annotations

import json
import os
from collections import Counter
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.edges.helpers import fingerprint, run, tool, tools_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

LONG = os.environ.get("ISSUER_LONG_TESTS") == "1"
CLI_EXAMPLES = 3000 if LONG else 600
READER_EXAMPLES = 10000 if LONG else 2000

#: what the fuzz saw, reported at the end of each test
TALLY: Counter[str] = Counter()

# every character, surrogates and controls included, with the awkward ones made likely
_CHARS = st.characters(codec=None, categories=None)
_AWKWARD = st.sampled_from(["\x00", "\x1b[31m", "\ud800", "\r", "\n", "\t", "=", "+", "-", "@", "[/b]", "\u202e", "é", "'", '"', ","])
TEXT = st.one_of(
    st.text(_CHARS, max_size=40),
    st.lists(st.one_of(_AWKWARD, st.text(_CHARS, max_size=3)), max_size=8).map("".join),
    st.integers(0, 2500).map(lambda n: "x" * n),
)
NUMBER = st.one_of(
    st.integers(-5, 30),
    st.integers(10_000_001, 10**25),
    st.integers(-(10**25), -1),
    st.sampled_from(["99999999999999999999", "1e3", "", "0x10", " 7", "٣"]),
).map(str)
# what an environment variable can hold at all: no NUL, nothing unencodable
ENV_TEXT = TEXT.filter(lambda t: "\x00" not in t and not any("\ud800" <= c <= "\udfff" for c in t))
DATE = st.one_of(
    st.sampled_from([
        "0001-01-01T00:00:00+05:00", "9999-12-31T23:59:59-01:00", "0001-01-01", "9999-12-31",
        "2026-03-14T09:30:00Z", "2026-02-30", "1899-12-31T23:59:59+00:00", "2026-03-14T25:00",
    ]),
    TEXT,
)  # fmt: skip


def _file_name(text: str) -> str:
    """A fuzzed name kept inside the test folder (no separators, never . or ..)."""
    name = text.replace("/", "_")[:300]
    return name if name not in ("", ".", "..") else "empty"


@st.composite
def commands(draw: Any, folder: Path) -> list[str]:
    """One command line: a command the clerk might type, with fuzzed values."""
    text, number, date = draw(TEXT), draw(NUMBER), draw(DATE)
    out = str(folder / _file_name(draw(TEXT)))
    code = draw(st.sampled_from([tool(1), tool(2), tool(3), tool(999), text]))
    return draw(st.sampled_from([
        ["issue", "tools", "--holder", text],
        ["issue", "tools", "--note", text],
        ["issue", "tools", "--request-id", text],
        ["issue", "tools", "-n", number],
        ["issue", "tools", "--out", out],
        ["issue", text],
        ["log", "--last", number],
        ["log", "--since", date],
        ["log", "--actor", text],
        ["log", "--series", text],
        ["log", "verify", "--anchor", text],
        ["log", "verify", "--checkpoint", out, "--public-key", out],
        ["log", "check-receipt", out, "--public-key", out],
        ["log", "checkpoint", "--key", out],
        ["issue", "tools", "--receipt", out, "--key", out],
        ["labels", "--batch", number, "--out", out + ".pdf"],
        ["labels", code, "--out", out],
        ["labels", code, "--caption", text, "--out", str(folder / "c.svg"), "--force"],
        ["series", "add", text, "--scheme", "luhn", "--length", "6", "--prefix", "QZ"],
        ["series", "add", "fz", "--scheme", "luhn", "--length", number, "--prefix", "QZ"],
        ["series", "add", "fz", "--scheme", "luhn", "--length", "6", "--alphabet", "custom:" + text],
        ["series", "add", "fz", "--scheme", "luhn", "--length", "6", "--prefix", text],
        ["series", "add", "fz", "--scheme", "luhn", "--length", "6", "--prefix", "QZ", "--start", number],
        ["series", "change", "tools", "--title", text],
        ["check", code],
        ["history", code],
        ["void", code, "--reason", text],
        ["replace", code, "--reason", text],
        ["export", "tools", "--out", out],
        ["export", "tools", "--format", text],
        ["backup", out],
        ["issue", "tools"],
    ]))  # fmt: skip


def _tally(result: Any, refused_unchanged: bool | None) -> None:
    TALLY["inputs"] += 1
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        TALLY["tracebacks"] += 1
    if refused_unchanged is False:
        TALLY["refusals that changed the register"] += 1


def _report(name: str) -> None:
    print(f"\n{name}: {TALLY['inputs']} inputs tried, {TALLY['tracebacks']} tracebacks")


def _assert_clean(args: list[str], result: Any) -> None:
    shown = [a[:60] for a in args]
    assert result.exception is None or isinstance(result.exception, SystemExit), (shown, repr(result.exception))
    assert result.exit_code in (0, 1, 2), (shown, result.exit_code, result.output[-300:])
    if result.exit_code == 2:
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("issuer: "), (shown, result.stderr[-500:])


def test_fuzz_the_cli(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    tools_register(register_url, issued=3)
    folder = tmp_path / "outputs"
    folder.mkdir()
    TALLY.clear()

    @settings(max_examples=CLI_EXAMPLES // (3 if "://" in register_url else 1), deadline=None, database=None,
              suppress_health_check=list(HealthCheck))
    @given(args=commands(folder), env_actor=st.one_of(st.none(), ENV_TEXT))
    def one(args: list[str], env_actor: str | None) -> None:
        if args[0] == "backup" and "://" in register_url:
            return  # a PostgreSQL register prints the pg_dump command: nothing to fuzz
        env = {} if env_actor is None else {"ISSUER_ACTOR": env_actor}
        before = fingerprint(register_url)
        result = run(register_url, *args, env=env)
        unchanged = fingerprint(register_url) == before if result.exit_code == 2 else None
        _tally(result, unchanged)
        _assert_clean(args, result)
        assert unchanged is not False, ([a[:60] for a in args], "a refusal changed the register")

    one()
    _report(f"CLI fuzz ({register_url.split(':')[0] if '://' in register_url else 'sqlite'})")
    assert TALLY["tracebacks"] == 0


# --- the file readers -----------------------------------------------------------------


def _cell(text: str) -> str:
    return '"' + text.replace('"', '""') + '"'


@st.composite
def files(draw: Any) -> bytes:
    """A file someone hands in: random bytes, a CSV, JSON Lines, or a plain list, with
    fuzzed cells, dates and encodings."""
    kind = draw(st.sampled_from(["bytes", "csv", "jsonl", "plain", "config"]))
    if kind == "bytes":
        return bytes(draw(st.binary(max_size=300)))
    if kind == "config":
        key = draw(st.sampled_from(["actor", "database", "busy_timeout_ms"]))
        value = draw(st.one_of(TEXT.map(json.dumps), NUMBER, st.sampled_from(["true", "[1]", "{a=1}"])))
        return f"[register]\n{key} = {value}\n".encode("utf-8", "surrogatepass")
    rows = draw(st.lists(st.tuples(st.sampled_from([tool(1), tool(5), tool(40), "QTL"]) | TEXT, TEXT, DATE), max_size=5))
    if kind == "csv":
        delimiter = draw(st.sampled_from([",", ";", "\t", "|"]))
        lines = [delimiter.join(["code", "holder", "issued_at"])]
        lines += [delimiter.join(_cell(cell) for cell in row) for row in rows]
        text = draw(st.sampled_from(["\n", "\r\n"])).join(lines)
    elif kind == "jsonl":
        text = "\n".join(json.dumps({"code": c, "note": n, "scanned_at": d}) for c, n, d in rows) or "{}"
    else:
        text = "\n".join(row[0] for row in rows)
    return text.encode("utf-8", draw(st.sampled_from(["surrogatepass", "replace"])))


@pytest.fixture(scope="module")
def reader_folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return tmp_path_factory.mktemp("fuzz")


@settings(max_examples=READER_EXAMPLES, deadline=None, database=None, suppress_health_check=list(HealthCheck))
@given(data=files())
def test_fuzz_every_reader(data: bytes, reader_folder: Path) -> None:
    from issuer.config import load_settings
    from issuer.errors import IssuerError
    from issuer.readers.scanfile import read_table

    path = reader_folder / "input"  # one file, written anew for each example
    path.write_bytes(data)
    for read in (
        lambda: read_table(path),
        lambda: read_table(path, column="holder", roles={"time": ("issued_at", "scanned_at")}),
    ):
        try:
            table = read()
        except IssuerError as exc:
            assert "\n" not in exc.message
        else:
            for value in [*table.codes, *(v for column in table.columns.values() for v in column)]:
                value.encode("utf-8")  # never a lone surrogate or other text that cannot be written
    os.environ["ISSUER_CONFIG"] = str(path)
    try:
        load_settings()
    except IssuerError as exc:
        assert "\n" not in exc.message
    finally:
        os.environ.pop("ISSUER_CONFIG")


def test_fuzz_import_and_reconcile_files(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    """Fuzzed files through the commands that read them: refused whole, or taken whole."""
    tools_register(register_url, issued=5)
    TALLY.clear()

    @settings(max_examples=CLI_EXAMPLES // (3 if "://" in register_url else 1), deadline=None, database=None,
              suppress_health_check=list(HealthCheck))
    @given(data=files(), command=st.sampled_from(["import", "reconcile", "check", "skip-bad"]))
    def one(data: bytes, command: str) -> None:
        path = tmp_path / "input.csv"
        path.write_bytes(data)
        args = {
            "import": ["import", "tools", str(path)],
            "skip-bad": ["import", "tools", str(path), "--skip-bad", "--rejects", str(tmp_path / "rej.csv"), "--force"],
            "reconcile": ["reconcile", "tools", str(path), "--record"],
            "check": ["check", "--file", str(path)],
        }[command]
        before = fingerprint(register_url)
        result = run(register_url, *args)
        unchanged = fingerprint(register_url) == before if result.exit_code == 2 else None
        _tally(result, unchanged)
        _assert_clean(args, result)
        assert unchanged is not False, (command, data[:200], "a refusal changed the register")

    one()
    _report("file fuzz through the CLI")
    assert TALLY["tracebacks"] == 0
