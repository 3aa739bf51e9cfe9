"""Every path that reads a typed code reads it by the same rules (issuer.checking.reading):
desk check, void, replace, restore, history, reprint, import and reconcile; ISO/IEC 7064
two-character checks have one form; a refused row is one line, never a driver error."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import func, select

from issuer.checking.schemes import get_scheme
from issuer.errors import DuplicateRow, InvalidFormat
from issuer.readers.scanfile import read_table
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.desk import check_codes
from issuer.register.importing import IMPORT_ROLES, import_codes
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import code_history, replace_code, restore_code, void_code
from issuer.register.models import IssuedCode, Series
from issuer.register.store import Register
from issuer.stocktake.reconcile import read_scans, reconcile

TOOLS = SeriesSpec(key="tools", scheme="damm", length=7, prefix="QTL", group=(4, 4))
MEMBERS = SeriesSpec(key="members", scheme="verhoeff", length=9, prefix="QM", group=(5, 5), mode="scattered")
COUPONS = SeriesSpec(key="coupons", scheme="iso7064-97-10", length=7, prefix="C")


def sloppy(code: str, prefix: str) -> str:
    """How a person might type it: no prefix, lower case, O for 0, l for 1, odd spaces."""
    body = code[len(prefix):].replace("0", "o").replace("1", "l")
    return " " + body[:3] + "\u00a0-" + body[3:] + "\u200b"


def test_every_lifecycle_path_reads_a_sloppy_code(register: Register) -> None:
    add_series(register, TOOLS)
    add_series(register, MEMBERS)
    code = issue_codes(register, "tools", 12).codes[10].code
    typed = sloppy(code, "QTL")
    (answer,) = check_codes_in(register, [typed])
    assert (answer.status, answer.code, answer.series) == ("issued", code, "tools")
    assert void_code(register, typed, reason="lost").code == code
    assert restore_code(register, typed, reason="found").code == code
    new = replace_code(register, typed, reason="scratched")
    assert new.replaces == code
    with register.reading() as session:
        record, _events = code_history(session, typed)
    assert record.code == code


def check_codes_in(register: Register, texts: list[str]) -> list[Any]:
    with register.reading() as session:
        return check_codes(session, texts)


def test_another_series_code_is_named_in_reconcile_and_import(register: Register, tmp_path: Path) -> None:
    add_series(register, TOOLS)
    add_series(register, MEMBERS)
    tools = [info.code for info in issue_codes(register, "tools", 3).codes]
    card = issue_codes(register, "members").codes[0]
    path = tmp_path / "scan.txt"
    path.write_text("\n".join([*tools, card.code]) + "\n")
    recon = reconcile(register, "tools", read_scans(path))
    (line,) = [line for line in recon.lines() if line.scanned == card.code]
    assert (line.status, line.detail) == ("other_series", "belongs to series members (issued)")
    with pytest.raises(InvalidFormat, match=f"{card.display} belongs to series members, not tools"):
        import_codes(register, "tools", read_table(path, roles=IMPORT_ROLES))


def test_iso7064_alternative_pair_is_the_same_code_everywhere(register: Register, tmp_path: Path) -> None:
    add_series(register, COUPONS)
    issued = issue_codes(register, "coupons", 40).codes
    # source: ISO/IEC 7064 MOD 97-10: check values 00, 01, 02 have congruent twins 97, 98, 99
    twin = {"02": "99", "01": "98", "00": "97"}
    code = next(info.code for info in issued if info.code[-2:] in twin)
    alternative = code[:-2] + twin[code[-2:]]
    (answer,) = check_codes_in(register, [alternative])
    assert (answer.status, answer.code) == ("issued", code)
    # importing both forms of one number: the alternative is refused by line (one number,
    # one code), never registered as a second number
    add_series(register, SeriesSpec(key="legacy", scheme="iso7064-97-10", length=7, prefix="L"))
    scheme = get_scheme("iso7064-97-10")
    body = next(f"{n:07d}" for n in range(100, 10_000) if scheme.compute(f"{n:07d}") == "02")
    path = tmp_path / "legacy.csv"
    path.write_text(f"code\nL{body}02\nL{body}99\n")
    with pytest.raises(InvalidFormat) as caught:
        import_codes(register, "legacy", read_table(path, roles=IMPORT_ROLES))
    assert f"line 3: L-{body}99: check pair 99 is an alternative" in caught.value.message
    assert f"write it as L-{body}02" in caught.value.message and "line 2" not in caught.value.message
    with register.reading() as session:
        assert session.scalar(select(func.count()).select_from(IssuedCode).where(IssuedCode.code.like(f"L{body}%"))) == 0


def test_a_constraint_violation_is_one_line_naming_the_value(register: Register) -> None:
    add_series(register, TOOLS)

    def clash(session: Any) -> None:
        session.add(Series(**{column.key: getattr(first, column.key) for column in Series.__table__.columns
                              if column.key != "id"}))
        session.flush()

    with register.reading() as session:
        first = session.scalars(select(Series)).one()
        session.expunge(first)
    with pytest.raises(DuplicateRow) as caught:
        register.write(clash)
    assert "\n" not in caught.value.message
    assert caught.value.message.startswith("the register refused a row")
    assert "key" in caught.value.message
