"""ISO/IEC 7064 two-character pure systems (MOD 97-10, MOD 661-26, MOD 1271-36): the
standard's condition accepts a second, congruent check pair for some numbers (99 for 02
under MOD 97-10). The register writes every number with the computed pair: an import
refuses the alternative with one line naming the code to write instead, never registers
it as a second number, and a desk check reads it as the computed code."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import func, select
from stdnum.iso7064 import mod_97_10

from issuer.checking.schemes import get_scheme
from issuer.errors import InvalidFormat
from issuer.readers.scanfile import read_table
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.desk import check_codes
from issuer.register.importing import IMPORT_ROLES, import_codes
from issuer.register.models import IssuedCode
from issuer.register.series import code_format, get_series
from issuer.register.store import Register

# source: ISO/IEC 7064, clause 7 (pure systems): modulus M, radix r; the character set of
# each method (digits; letters A-Z; digits then letters)
METHODS = {
    "iso7064-97-10": (97, 10, "0123456789"),
    "iso7064-661-26": (661, 26, "ABCDEFGHIJKLMNOPQRSTUVWXYZ"),
    "iso7064-1271-36": (1271, 36, "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ"),
}


def _standard_accepts(method: str, text: str) -> bool:
    """The standard's check condition, written here from its definition: the string's
    characters, values weighted by r^i (i counted from the right, from 0), sum to 1 mod M."""
    modulus, radix, symbols = METHODS[method]
    # source: ISO/IEC 7064, pure system check condition: sum(a_i * r^(i-1)) == 1 (mod M)
    total = sum(symbols.index(ch) * pow(radix, i, modulus) for i, ch in enumerate(reversed(text)))
    return total % modulus == 1


def _pair(method: str, length: int) -> tuple[str, str, str]:
    """A body whose computed check pair has a congruent alternative: body, computed pair,
    alternative pair (the computed pair's value plus M, still two characters)."""
    modulus, radix, symbols = METHODS[method]
    scheme = get_scheme(method)
    for n in range(1, 100_000):
        body = "".join(symbols[(n // radix**k) % radix] for k in reversed(range(length)))
        computed = scheme.compute(body)
        value = symbols.index(computed[0]) * radix + symbols.index(computed[1])
        if value + modulus < radix * radix:
            twin = value + modulus
            return body, computed, symbols[twin // radix] + symbols[twin % radix]
    raise AssertionError("no body with an alternative pair")


@pytest.mark.parametrize("method", list(METHODS))
def test_the_alternative_pair_is_refused_on_import(register: Register, tmp_path: Path, method: str) -> None:
    add_series(register, SeriesSpec(key="legacy", scheme=method, length=6, prefix="QV"))
    body, computed, alternative = _pair(method, 6)
    # both pairs meet the standard's condition; the computed one is the one it computes
    assert _standard_accepts(method, body + computed) and _standard_accepts(method, body + alternative)
    if method == "iso7064-97-10":
        # source: python-stdnum stdnum.iso7064.mod_97_10 (ISO/IEC 7064 MOD 97-10)
        assert mod_97_10.calc_check_digits(body) == computed
        assert mod_97_10.is_valid(body + computed) and mod_97_10.is_valid(body + alternative)
    with register.reading() as session:
        shape = code_format(get_series(session, "legacy"))
    code, twin = f"QV{body}{computed}", f"QV{body}{alternative}"

    alone = tmp_path / "alone.csv"
    alone.write_text(f"code\n{twin}\n")
    with pytest.raises(InvalidFormat) as caught:
        import_codes(register, "legacy", read_table(alone, roles=IMPORT_ROLES))
    message = caught.value.message
    assert "\n" not in message and message.startswith("1 bad row in")
    assert f"line 2: {shape.display(twin)}: check pair {alternative} is an alternative" in message
    assert f"computed pair {computed}; write it as {shape.display(code)}" in message

    both = tmp_path / "both.csv"
    both.write_text(f"code\n{code}\n{twin}\n")
    with pytest.raises(InvalidFormat, match="line 3: "):
        import_codes(register, "legacy", read_table(both, roles=IMPORT_ROLES))
    with register.reading() as session:
        assert session.scalar(select(func.count()).select_from(IssuedCode)) == 0
    # --skip-bad takes the computed form only: one number, one code
    plan, result = import_codes(register, "legacy", read_table(both, roles=IMPORT_ROLES), skip_bad=True)
    assert result is not None and result.imported == 1 and [r.line for r in plan.rejected] == [3]
    with register.reading() as session:
        assert list(session.scalars(select(IssuedCode.code))) == [code]
        # at the desk the alternative still finds the number: the computed code answers
        (answer,) = check_codes(session, [twin])
    assert (answer.status, answer.code, answer.display) == ("issued", code, shape.display(code))
    # importing the alternative again, now that its number is held: the same clear line
    with pytest.raises(InvalidFormat, match=f"check pair {alternative} is an alternative"):
        import_codes(register, "legacy", read_table(alone, roles=IMPORT_ROLES))


def test_import_cli_refuses_the_alternative_in_one_line(cli: Any, tmp_path: Path) -> None:
    assert cli("series", "add", "coupons", "--scheme", "iso7064-97-10", "--length", "7",
               "--prefix", "QC").exit_code == 0  # fmt: skip
    body, computed, alternative = _pair("iso7064-97-10", 7)
    # source: python-stdnum stdnum.iso7064.mod_97_10 (ISO/IEC 7064 MOD 97-10)
    assert mod_97_10.calc_check_digits(body) == computed and mod_97_10.is_valid(body + alternative)
    path = tmp_path / "coupons.txt"
    path.write_text(f"QC{body}{alternative}\n")
    result = cli("import", "coupons", str(path))
    assert result.exit_code == 2 and "Traceback" not in result.output
    (line,) = result.stderr.strip().splitlines()
    assert f"QC-{body}{alternative}: check pair {alternative} is an alternative" in line
    assert f"write it as QC-{body}{computed}" in line
    assert cli("export", "coupons").stdout.count(body) == 0
