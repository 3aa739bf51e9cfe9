"""A register holding data at the migration before the leaner code rows upgrades on
SQLite and PostgreSQL: every code reads back the same issue time, issuer and status
through the API (now through its batch), the log still verifies, doctor stays clean, and
a batch's codes are still found by batch (a request-id replay, printing by batch, export
by batch).

The populated register is made with this release's acts, then taken down to the previous
revision by the migrations themselves (the downgrade fills the old columns from the
batches), so the old columns hold what a register of the previous release would."""

from __future__ import annotations

import csv
import io
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest
from sqlalchemy import text
from stdnum import luhn

from issuer.readers.scanfile import read_table
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.doctor import run_doctor
from issuer.register.driver import begin_immediate
from issuer.register.importing import IMPORT_ROLES, import_codes
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import code_record, find_code, replace_code, void_code
from issuer.register.log import head
from issuer.register.logverify import verify_chain
from issuer.register.migrate import alembic_config
from issuer.register.printing import VOID_MARK, select_for_printing
from issuer.register.store import SCHEMA_HEAD, Register, open_register
from issuer.register.transfer import export_codes
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.test_upgrade_text_salts import without_text_digests


def _before() -> str:
    from alembic.script import ScriptDirectory

    script = ScriptDirectory.from_config(alembic_config()).get_revision("leaner_rows")
    assert script is not None and isinstance(script.down_revision, str)
    return script.down_revision


class Clock:
    """Each act a minute after the last, so every batch has its own time."""

    def __init__(self) -> None:
        self.now = datetime(2026, 4, 1, 9, 0, tzinfo=UTC)

    def __call__(self) -> datetime:
        self.now += timedelta(minutes=1)
        return self.now


def _luhn(prefix: str, body: str) -> str:
    # source: python-stdnum's stdnum.luhn.calc_check_digit (ISO/IEC 7812-1 Annex B)
    return prefix + body + luhn.calc_check_digit(body)


def _records(register: Register) -> dict[str, tuple[datetime, str, str, int]]:
    with register.reading() as session:
        codes = [row[0] for row in session.execute(text("SELECT code FROM issued_code ORDER BY id"))]
        out = {}
        for code in codes:
            record = code_record(session, find_code(session, code))
            out[code] = (record.issued_at, record.issued_by, record.status, record.batch)
        return out


def test_a_populated_register_moves_to_lean_rows_and_reads_the_same(
    register_url: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch  # noqa: F811
) -> None:
    from alembic import command

    without_text_digests(monkeypatch)  # the entries that release wrote
    clock = Clock()
    desk = open_register(register_url, actor="desk-ann", clock=clock)
    add_series(desk, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="QTL"))
    add_series(desk, SeriesSpec(key="members", scheme="luhn", length=7, prefix="M", mode="scattered"))
    tools = [info.code for info in issue_codes(desk, "tools", 70, note="Spring intake").codes]  # a bulk batch
    issue_codes(desk, "members", 3, holder="Wren Halloway", request_id="desk-ann-0001")
    issue_codes(desk, "tools", 1)
    void_code(desk, tools[3], reason="tag snapped")
    replace_code(desk, tools[5], reason="tag worn")
    # an import whose file gives its own issue times and issuer for some rows
    legacy = tmp_path / "legacy.csv"
    with legacy.open("w", newline="", encoding="utf-8") as stream:
        writer = csv.writer(stream)
        writer.writerow(["code", "issued_at", "issued_by"])
        writer.writerow([_luhn("QTL", "900001"), "2019-04-01T08:00:00Z", "old-desk"])
        writer.writerow([_luhn("QTL", "900002"), "", ""])
        writer.writerow([_luhn("QTL", "900003"), "2019-05-02T10:30:00Z", ""])
    import_codes(desk, "tools", read_table(legacy, roles=IMPORT_ROLES))
    before = _records(desk)
    with desk.reading() as session:
        anchor = head(session)
    config = alembic_config()
    with desk.engine.connect() as connection:
        begin_immediate(connection)
        config.attributes["connection"] = connection
        command.downgrade(config, _before())
        connection.commit()
    with desk.engine.connect() as connection:
        columns = [row[0] for row in connection.execute(text("SELECT * FROM issued_code")).cursor.description]
        assert "issued_at" in columns and "issued_by" in columns and "origin_at" not in columns
        # the previous release's rows: every code carries its own time and issuer
        old = dict(connection.execute(text("SELECT code, issued_by FROM issued_code")).all())
        connection.rollback()
    assert old[_luhn("QTL", "900001")] == "old-desk" and old[tools[0]] == "desk-ann"
    desk.close()
    monkeypatch.undo()

    upgraded = open_register(register_url, actor="desk-ann", clock=clock)  # opening upgrades
    try:
        assert upgraded.schema_revision() == SCHEMA_HEAD
        after = _records(upgraded)
        assert after == before  # issued_at, issued_by, status and batch of every code
        assert after[_luhn("QTL", "900001")][:2] == (datetime(2019, 4, 1, 8, 0, tzinfo=UTC), "old-desk")
        assert after[_luhn("QTL", "900003")][1] == "desk-ann"  # no issuer in the file: the import's
        with upgraded.engine.connect() as connection:
            columns = [row[0] for row in connection.execute(text("SELECT * FROM issued_code")).cursor.description]
            assert "issued_at" not in columns and "issued_by" not in columns
            # only what an import brought of its own is kept on the code row
            own = connection.execute(text("SELECT count(*) FROM issued_code WHERE origin_at IS NOT NULL "
                                          "OR origin_by IS NOT NULL")).scalar_one()  # fmt: skip
            assert own == 2
            connection.rollback()
        with upgraded.reading() as session:
            report = verify_chain(session)
            assert report.intact and (report.head_id, report.head_hash) == anchor
        # a batch's codes are found by its id range
        assert len(select_for_printing(upgraded, batch=after[tools[0]][3], void=VOID_MARK).rows) == 70
        findings = {f.check: f for f in run_doctor(upgraded).findings}
        assert all(f.status != "problem" for f in findings.values()), findings
        replayed = issue_codes(upgraded, "members", 3, holder="Wren Halloway", request_id="desk-ann-0001")
        assert replayed.replayed and len(replayed.codes) == 3
        stream = io.StringIO()
        export_codes(upgraded, "tools", stream, fmt="csv", batch=after[tools[0]][3])
        assert len(stream.getvalue().splitlines()) == 71
        # new acts on the upgraded register
        fresh = issue_codes(upgraded, "tools", 2)
        void_code(upgraded, fresh.codes[0].code, reason="misprint")
        with upgraded.reading() as session:
            assert verify_chain(session).intact
            record = code_record(session, find_code(session, fresh.codes[1].code))
            assert (record.issued_by, record.issued_at) == ("desk-ann", clock.now - timedelta(minutes=1))
        findings = {f.check: f for f in run_doctor(upgraded).findings}
        assert all(f.status != "problem" for f in findings.values()), findings
    finally:
        upgraded.close()
