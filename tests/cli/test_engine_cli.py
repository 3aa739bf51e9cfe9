"""The engine commands (schemes, calc, check --scheme, assess) through Typer's runner:
answers against python-stdnum, JSON that is only JSON, exit codes, and bad input that
ends in one line on stderr with exit 2."""

from __future__ import annotations

import json
import random
from pathlib import Path
from typing import Any

import pytest
from stdnum import damm as std_damm
from stdnum import luhn as std_luhn
from stdnum import verhoeff as std_verhoeff
from stdnum.iso7064 import mod_11_2, mod_37_2, mod_97_10
from typer.testing import CliRunner

from issuer.checking.schemes import SCHEMES
from issuer.cli.app import app
from issuer.cli.common import CHECK_CAUTION

# source: J. Verhoeff, Error Detecting Decimal Codes, Mathematical Centre Tract 29, 1969,
# as tabulated in secondary sources (share of all errors, per class)
VERHOEFF_1969 = {"single": 0.7905, "adjacent": 0.1021, "jump": 0.0082, "twin": 0.0055,
                 "phonetic": 0.0049, "jump_twin": 0.0029}  # fmt: skip

TEN_MB = 10 * 1024 * 1024


def run(*args: str, input: str | bytes | None = None) -> Any:
    return CliRunner().invoke(app, list(args), input=input, env={"COLUMNS": "120"})


def one_line_error(result: Any) -> str:
    assert result.exit_code == 2, (result.exit_code, result.output[:500])
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("issuer: "), result.stderr[:500]
    assert "Traceback" not in result.output
    assert result.stdout == ""
    return str(lines[0])


def bodies(count: int, length: int, seed: int) -> list[str]:
    rng = random.Random(seed)
    return ["".join(rng.choice("0123456789") for _ in range(length)) for _ in range(count)]


# -- calc ------------------------------------------------------------------------------

STDNUM_CALC = {
    "luhn": std_luhn.calc_check_digit,  # source: python-stdnum (reference library)
    "verhoeff": std_verhoeff.calc_check_digit,
    "damm": std_damm.calc_check_digit,
    "iso7064-11-2": mod_11_2.calc_check_digit,
}


@pytest.mark.parametrize("name", sorted(STDNUM_CALC))
def test_calc_agrees_with_stdnum(name: str) -> None:
    given = bodies(50, 9, seed=len(name))
    result = run("calc", "--scheme", name, "--json", *given)
    assert result.exit_code == 0, result.output
    rows = json.loads(result.stdout)
    assert [row["body"] for row in rows] == given
    for row in rows:
        assert row["check"] == STDNUM_CALC[name](row["body"])
        assert row["code"] == row["body"] + row["check"]
    plain = run("calc", "--scheme", name, *given[:3])
    assert plain.stdout.split() == [row["code"] for row in rows[:3]]


def test_calc_from_a_file_in_bulk_and_from_stdin(tmp_path: Path) -> None:
    given = bodies(3_000, 9, seed=1) + ["12345", "0004-2"]
    path = tmp_path / "bodies.txt"
    path.write_text("\n".join(given) + "\n")
    result = run("calc", "--scheme", "verhoeff", "--file", str(path))
    assert result.exit_code == 0, result.output
    codes = result.stdout.split()
    assert len(codes) == len(given)
    for body, code in zip(given, codes):
        body = body.replace("-", "")
        # source: python-stdnum (reference library)
        assert code == body + std_verhoeff.calc_check_digit(body)
    piped = run("calc", "--scheme", "luhn", "-", input="7992739871\n\n")
    assert piped.stdout == "79927398713\n"  # source: python-stdnum luhn agrees
    assert std_luhn.calc_check_digit("7992739871") == "3"


def test_calc_with_an_alphabet() -> None:
    result = run("calc", "--scheme", "damm", "--alphabet", "hex", "--json", "c0ffee", "0A1B")
    assert result.exit_code == 0, result.output
    rows = json.loads(result.stdout)
    assert [row["body"] for row in rows] == ["C0FFEE", "0A1B"]
    check = run("check", "--scheme", "damm", "--alphabet", "hex", *[r["code"] for r in rows])
    assert check.exit_code == 0, check.output


# -- check -------------------------------------------------------------------------------


def test_check_exit_codes_and_json() -> None:
    ok = run("check", "--scheme", "luhn", "79927398713")
    assert ok.exit_code == 0 and "valid" in ok.stdout
    result = run("check", "--scheme", "luhn", "--json", "79927398713", "79927398710", "12A4")
    assert result.exit_code == 1
    rows = json.loads(result.stdout)
    assert [row["input"] for row in rows] == ["79927398713", "79927398710", "12A4"]
    assert [row["valid"] for row in rows] == [True, False, False]
    assert "check character" in rows[1]["reason"]
    assert "'A'" in rows[2]["reason"] and "digits" in rows[2]["reason"]
    assert "reason" not in rows[0]


def test_check_summary() -> None:
    result = run("check", "--scheme", "luhn", "--summary", "79927398713", "79927398710", "5")
    assert result.exit_code == 1
    assert "3 codes checked" in result.stdout and "1 valid, 2 invalid" in result.stdout
    assert CHECK_CAUTION in result.stdout.replace("\n", " ")
    data = json.loads(run("check", "-s", "luhn", "--summary", "--json", "79927398713").stdout)
    assert data["total"] == 1 and data["valid"] == 1 and data["invalid"] == 0


TRICKY = [
    "79927398713",  # valid
    "7992-7398-713",  # separators
    "\uff17\uff19\uff19\uff12\uff17\uff13\uff19\uff18\uff17\uff11\uff13",  # full-width digits
    "79927398710",  # wrong check
    "  79927398713 ",  # spaces around
    "7992739871A",  # a letter
    "5",  # too short
    "---",  # nothing but separators
]


def test_file_and_arguments_give_the_same_answers(tmp_path: Path) -> None:
    path = tmp_path / "codes.txt"
    # CRLF line ends and a blank line, as a spreadsheet export might have
    path.write_bytes(("\r\n".join(TRICKY[:4]) + "\r\n\r\n" + "\n".join(TRICKY[4:])).encode())
    from_file = run("check", "--scheme", "luhn", "--json", "--file", str(path))
    from_args = run("check", "--scheme", "luhn", "--json", "--", *TRICKY)
    assert from_file.exit_code == from_args.exit_code == 1
    assert json.loads(from_file.stdout) == json.loads(from_args.stdout)
    valid = [row["valid"] for row in json.loads(from_file.stdout)]
    assert valid == [True, True, True, False, True, False, False, False]
    summary = json.loads(run("check", "-s", "luhn", "--summary", "--json", "-f", str(path)).stdout)
    assert summary["reasons"] == {"check": 1, "symbols": 1, "length": 1, "empty": 1}


STDNUM_VALID = {
    "luhn": std_luhn.is_valid,  # source: python-stdnum (reference library)
    "verhoeff": std_verhoeff.is_valid,
    "damm": std_damm.is_valid,
    "iso7064-11-2": mod_11_2.is_valid,
    "iso7064-97-10": mod_97_10.is_valid,
}


@pytest.mark.parametrize("name", sorted(STDNUM_VALID))
def test_bulk_check_agrees_with_stdnum(name: str, tmp_path: Path) -> None:
    rng = random.Random(name)
    codes = []
    for body in bodies(3_000, 9, seed=len(name) + 7):
        code = run_calc_one(name, body) if len(codes) < 20 else None
        codes.append(code or body + rng.choice("0123456789"))
    path = tmp_path / "codes.txt"
    path.write_text("\n".join(codes) + "\n")
    result = run("check", "--scheme", name, "--json", "--file", str(path))
    rows = json.loads(result.stdout)
    assert [row["valid"] for row in rows] == [STDNUM_VALID[name](c) for c in codes]
    assert any(row["valid"] for row in rows) and not all(row["valid"] for row in rows)


def run_calc_one(name: str, body: str) -> str:
    return str(json.loads(run("calc", "--scheme", name, "--json", body).stdout)[0]["code"])


def test_bulk_check_mod_37_2_against_stdnum(tmp_path: Path) -> None:
    rng = random.Random(37)
    symbols = "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ"
    codes = ["".join(rng.choice(symbols) for _ in range(8)) + rng.choice(symbols + "*")
             for _ in range(2_000)]  # fmt: skip
    codes += [body + mod_37_2.calc_check_digit(body) for body in ("QUILL0042", "MAKER7")]
    path = tmp_path / "passes.txt"
    path.write_text("\n".join(codes))
    rows = json.loads(run("check", "-s", "iso7064-37-2", "--json", "-f", str(path)).stdout)
    # source: python-stdnum (reference library)
    assert [row["valid"] for row in rows] == [mod_37_2.is_valid(c) for c in codes]


def test_too_long_for_the_scheme_is_an_invalid_code() -> None:
    result = run("check", "--scheme", "mod11", "--json", "12345678901234")
    assert result.exit_code == 1
    assert "at most 9" in json.loads(result.stdout)[0]["reason"]


def test_without_scheme_check_asks_the_register(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path
) -> None:
    import issuer.cli.desk

    calls = []

    def fake(inputs: Any, *, db: Any, actor: Any, as_json: bool, summary: bool) -> int:
        calls.append((list(inputs), db, actor, as_json, summary))
        return 1

    monkeypatch.setattr(issuer.cli.desk, "check_against_register", fake)
    result = run("check", "QTL-0004-1237", "--db", "reg.sqlite", "--actor", "ines", "--json")
    assert result.exit_code == 1
    assert calls == [(["QTL-0004-1237"], "reg.sqlite", "ines", True, False)]
    path = tmp_path / "scan.txt"
    path.write_text("QM-1\n\nQM-2\n")
    result = run("check", "--file", str(path), "--summary")
    assert calls[-1] == (["QM-1", "QM-2"], None, None, False, True)
    one_line_error(run("check", "--alphabet", "hex", "12"))


# -- schemes and assess -------------------------------------------------------------------


def test_schemes_lists_every_scheme_with_measured_rates() -> None:
    result = run("schemes", "--json")
    assert result.exit_code == 0, result.output
    rows = {row["name"]: row for row in json.loads(result.stdout)}
    assert set(rows) == set(SCHEMES)
    # common practice: Luhn misses only 09 <-> 90 among adjacent transpositions
    assert rows["luhn"]["measured"]["single"] == 1.0
    assert rows["luhn"]["measured"]["adjacent"] == pytest.approx(88 / 90)
    assert rows["verhoeff"]["measured"]["adjacent"] == 1.0  # source: Verhoeff 1969
    assert rows["none"]["check_length"] == 0
    table = run("schemes")
    for name in SCHEMES:
        assert name in table.stdout
    assert CHECK_CAUTION in table.stdout.replace("\n", " ")


def test_assess_json_shape() -> None:
    result = run("assess", "--alphabet", "digits", "--length", "4", "--scheme", "luhn",
                 "--scheme", "damm", "--json")  # fmt: skip
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)  # stdout is nothing but JSON
    assert [s["scheme"] for s in data["schemes"]] == ["luhn", "damm"]
    for entry in data["schemes"]:
        assert {
            "scheme",
            "alphabet",
            "length",
            "exhaustive",
            "rates",
            "undetected_weighted",
        } <= set(entry)
        assert set(entry["rates"]) == set(VERHOEFF_1969)
        assert entry["exhaustive"] is True and entry["length"] == 4
    assert data["weights"] == VERHOEFF_1969
    assert "omission" in data["omission_insertion"]
    assert "sizing" not in data


def test_assess_with_expect_gives_sizing() -> None:
    result = run("assess", "-s", "verhoeff", "-n", "3", "--expect", "200", "--json")
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    sizing = data["sizing"]
    assert [row["length"] for row in sizing] == [3, 4, 5, 6]
    assert sizing == data["schemes"][0]["sizing"]
    assert sizing[0]["fill"] == pytest.approx(0.2)
    for row in sizing:
        assert {"length", "fill", "unique_correction"} <= set(row)
        assert 0 < row["unique_correction"] <= 1
    two = json.loads(run("assess", "-s", "luhn", "-s", "damm", "-n", "3", "--expect", "50",
                         "--json").stdout)  # fmt: skip
    assert "sizing" not in two and all("sizing" in s for s in two["schemes"])


def test_assess_sampled_shape_off_decimal() -> None:
    result = run("assess", "-s", "damm", "-a", "alnum", "-n", "6", "--samples", "2000", "--json")
    entry = json.loads(result.stdout)["schemes"][0]
    assert entry["exhaustive"] is False and entry["rates"]["phonetic"] is None
    assert entry["intervals"]["single"][1] == 1.0


def test_assess_table() -> None:
    result = run("assess", "-s", "luhn", "-n", "4", "--expect", "300")
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert "undetected, weighted" in out and "\u2588" in out and "79.05 %" in out
    assert "Sizing luhn" in out and "caught structurally" in out
    assert CHECK_CAUTION in out.replace("\n", " ")


# -- bad input: one line, exit 2, never a traceback -----------------------------------------


def test_unknown_scheme() -> None:
    for args in (("calc", "-s", "lunh", "123"), ("check", "-s", "lunh", "123"),
                 ("assess", "-s", "lunh", "-n", "4")):  # fmt: skip
        assert "lunh" in one_line_error(run(*args))


def test_characters_outside_the_alphabet() -> None:
    message = one_line_error(run("calc", "--scheme", "luhn", "12A4"))
    assert "'A'" in message and "argument 1" in message


def test_unsupported_alphabet_and_length() -> None:
    one_line_error(run("calc", "--scheme", "verhoeff", "--alphabet", "letters", "ABC"))
    one_line_error(run("assess", "-s", "mod11", "-n", "12"))
    one_line_error(run("assess", "-s", "luhn", "-n", "0"))
    one_line_error(run("calc", "--scheme", "luhn", "--alphabet", "klingon", "1"))


def test_empty_input(tmp_path: Path) -> None:
    one_line_error(run("calc", "--scheme", "luhn"))
    one_line_error(run("calc", "--scheme", "luhn", ""))
    one_line_error(run("check", "--scheme", "luhn"))
    empty = tmp_path / "empty.txt"
    empty.write_text("")
    one_line_error(run("check", "--scheme", "luhn", "--file", str(empty)))
    blank = tmp_path / "blank.txt"
    blank.write_text("\n  \n\r\n")
    one_line_error(run("check", "--scheme", "luhn", "--file", str(blank)))
    one_line_error(run("check", "--scheme", "luhn", "-", input=""))


def test_a_ten_megabyte_line(tmp_path: Path) -> None:
    huge = tmp_path / "huge.txt"
    huge.write_bytes(b"79927398713\n" + b"7" * TEN_MB + b"\n")
    assert "line 2" in one_line_error(run("check", "--scheme", "luhn", "--file", str(huge)))
    assert "line 2" in one_line_error(run("calc", "--scheme", "luhn", "--file", str(huge)))
    one_line_error(run("calc", "--scheme", "luhn", "7" * TEN_MB))
    one_line_error(run("check", "--scheme", "luhn", "7" * TEN_MB))


def test_unreadable_files(tmp_path: Path) -> None:
    assert "cannot read" in one_line_error(
        run("check", "--scheme", "luhn", "--file", str(tmp_path / "missing.txt"))
    )
    one_line_error(run("calc", "--scheme", "luhn", "--file", str(tmp_path)))
    one_line_error(run("check", "-s", "luhn", "--file", str(tmp_path), "79927398713"))


def test_checking_a_few_codes_never_loads_numpy() -> None:
    import subprocess
    import sys

    code = (
        "import sys\n"
        "from issuer.cli.app import app\n"
        "try:\n"
        "    app(['check', '-s', 'damm', '5724'], prog_name='issuer')\n"
        "except SystemExit as exit:\n"
        "    assert exit.code == 0, exit.code\n"
        "assert 'numpy' not in sys.modules\n"
    )
    done = subprocess.run([sys.executable, "-c", code], check=False, capture_output=True, text=True)
    # source: H. M. Damm's worked example, body 572 -> check 4 (as widely reproduced)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "5724  valid"
