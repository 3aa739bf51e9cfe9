"""The tamper suite: every kind of single-row edit to every table, made behind the tool's
back with the triggers side-stepped (as the table's owner can), on SQLite and PostgreSQL.

Each edit is either refused by the database even so (a key or constraint), caught by
``issuer doctor``, or missed. A missed edit must not change what ``issuer check`` answers
for any code of the register (status, void reason, holder, replacement, series, display),
what ``stocktake status`` answers for a count (an open one reads its scans), nor the
service's list of tokens (role, active): those are the promises a desk relies on. The figures (caught / total, and caught / total
among the edits that change an answer) are printed with ``-s`` and asserted.

Each edit is undone after it is judged (the original row put back), so one register
serves the whole suite; the last step proves the register healthy again.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import Connection, create_engine, text
from sqlalchemy.exc import DBAPIError

from issuer.readers.scanfile import read_table
from issuer.register.anchors import current_anchor
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.desk import check_codes
from issuer.register.doctor import run_doctor
from issuer.register.importing import IMPORT_ROLES, import_codes
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code, restore_code, void_code
from issuer.register.models import Base
from issuer.register.places import place_codes
from issuer.register.printing import record_prints
from issuer.register.series import code_format, get_series
from issuer.register.stocktake import record_sightings
from issuer.register.store import Register, database_url, open_register
from tests.register.desks import LONG
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.sidestep import as_replica, sidestep

NOW = datetime(2026, 5, 4, 10, 0, tzinfo=UTC)

@dataclass
class Scene:
    url: str
    codes: dict[str, str]  # role in the story -> code
    inputs: list[str]  # what the desk is asked about
    opened: Register | None = None

    def desk(self) -> Register:
        """One open register serves every question (the doctor reads the schema level anew)."""
        if self.opened is None:
            self.opened = open_register(self.url, actor="desk", upgrade=False)
        return self.opened


def _clock() -> Iterator[datetime]:
    at = NOW
    while True:
        at += timedelta(seconds=7)
        yield at


def build(url: str, folder: Path) -> Scene:
    """The Quillmere register after a working week: every act the log knows, once."""
    ticks = _clock()
    register = open_register(url, actor="quartermaster", clock=lambda: next(ticks))
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T", group=(3, 4)))
    add_series(register, SeriesSpec(key="members", scheme="damm", length=6, prefix="M", mode="scattered"))
    tools = [i.code for i in issue_codes(register, "tools", 6, holder="workshop shelf B").codes]
    members = [i.code for i in issue_codes(register, "members", 3, holder="Ada Quill").codes]
    void_code(register, tools[0], reason="lost in the car park")
    current_anchor(register)  # the entries so far sealed into the tree; the rest stay unsealed
    new = replace_code(register, tools[1], reason="label peeled off").code
    void_code(register, tools[2], reason="mistake")
    restore_code(register, tools[2], reason="found again")
    record_prints(register, [tools[3]])
    place_codes(register, [tools[3]], "shelf B2")
    from issuer.register.stocktake import Sighting

    record_sightings(register, "tools", [Sighting(code=tools[4], at=NOW, where="aisle 3", status="issued")],
                     source="scan.csv", summary={})  # fmt: skip
    with register.reading() as session:
        shape = code_format(get_series(session, "tools"))
    imported = [shape.code_for_base(base) for base in (900_001, 900_002)]
    legacy = folder / "old-register.csv"
    legacy.write_text(f"code,holder,status,void_reason\n{imported[0]},Bea Loom,issued,\n{imported[1]},,voided,broken\n")
    import_codes(register, "tools", read_table(legacy, roles=IMPORT_ROLES))
    # a stock count with one scan file, and the service's token
    from issuer.register.counting import CountScope, open_count
    from issuer.register.scanfiles import add_scan_file
    from issuer.register.tokens import add_token
    from issuer.stocktake.counts import finish_count, read_scan_file

    open_count(register, "spring", "tools", CountScope(), zone="UTC")
    scans = folder / "shelf-b.txt"
    scans.write_text(f"{tools[3]}\n{tools[4]}\n")
    add_scan_file(register, "spring", read_scan_file(scans, zone="UTC", scanner="wand 2"))
    # a second count, of a range, closed with its frozen result
    open_count(register, "winter", "tools", CountScope("range", first=tools[3], last=tools[5]), zone="UTC")
    bench = folder / "bench.txt"
    bench.write_text(f"{tools[5]}\n{tools[4]}\n")
    add_scan_file(register, "winter", read_scan_file(bench, zone="UTC"))
    finish_count(register, "winter")
    add_token(register, "front-desk", "clerk")
    register.close()
    codes = {"voided": tools[0], "replaced": tools[1], "replacement": new, "restored": tools[2],
             "printed": tools[3], "seen": tools[4], "plain": tools[5], "member": members[1],
             "imported": imported[0], "imported voided": imported[1]}  # fmt: skip
    never = shape.code_for_base(4242)
    return Scene(url, codes, [*codes.values(), never, never[:-1] + ("0" if never[-1] != "0" else "1")])


def answers(scene: Scene) -> list[Any]:
    """What a desk is told: each code's check, each count's status, the service's tokens."""
    from issuer.register.tokens import list_tokens
    from issuer.stocktake.counts import count_status

    register = scene.desk()
    with register.reading() as session:
        checked: list[Any] = [a.as_dict() for a in check_codes(session, scene.inputs)]
    counts = [count_status(register, name).as_dict() for name in ("spring", "winter")]
    return checked + counts + [token.as_dict() for token in list_tokens(register)]


def healthy(scene: Scene) -> tuple[bool, list[str]]:
    try:
        report = run_doctor(scene.desk())
    except Exception as exc:  # noqa: BLE001 - a doctor that cannot even run has found something
        return False, [f"doctor could not run: {exc}"]
    return report.healthy, [f.check for f in report.findings if f.status == "problem"]


# --- the edits ----------------------------------------------------------------------------


def _changed(value: Any, column: str, ids: list[int]) -> Any:
    """A different value of the same kind."""
    if isinstance(value, bool) or column == "holds_people":  # SQLite keeps a flag as 0/1
        return not value
    if column == "status":
        return "voided" if value == "issued" else "issued"
    if column in ("kind",):
        return "import" if value != "import" else "issue"
    if column in ("mode",):
        return "scattered" if value == "sequential" else "sequential"
    if column.endswith("_id") or column == "id":
        others = [i for i in ids if i != value]
        return others[0] if others else (value or 0) + 1
    if isinstance(value, int):
        return value + 1
    if isinstance(value, datetime):
        return value + timedelta(hours=1)
    if isinstance(value, str) and column.endswith("_at"):  # SQLite keeps times as text
        return (datetime.fromisoformat(value) + timedelta(hours=1)).strftime("%Y-%m-%d %H:%M:%S.%f")
    if isinstance(value, (bytes, memoryview)):
        data = bytearray(bytes(value))
        data[0] ^= 0x01
        return bytes(data)
    if value is None:  # a value of the column's own kind, so the database takes it
        if column.endswith("_at") or column == "valid_until":
            return NOW
        if column in ("scatter_key", "salt", "digest", "text_salt"):
            return b"tampered"
        if column in ("valid_for_days", "scope_first", "scope_last", "replaces_id", "replaced_by_id"):
            return 7
        return "tampered"
    if column in ("detail",):
        return value.replace("}", ', "x": 1}') if value != "{}" else '{"x": 1}'
    if column in ("hash", "prev_hash", "last_hash"):
        return ("f" if value[0] != "f" else "e") + value[1:]
    if column == "code":
        return value[:-1] + ("0" if value[-1] != "0" else "1")
    return value + "x" if value else "x"


def _first(connection: Connection, table: str) -> int:
    return int(connection.execute(text(f"SELECT min(id) FROM {table}")).scalar_one())


def _rows(connection: Connection, scene: Scene) -> dict[str, list[tuple[str, dict[str, Any]]]]:
    """Per table, the rows worth editing: (label, primary-key values)."""
    codes = scene.codes
    pick = dict(codes) if LONG else {k: codes[k] for k in ("voided", "replacement", "imported voided")}
    ids = {label: connection.execute(text("SELECT id FROM issued_code WHERE code = :c"), {"c": code}).scalar_one()
           for label, code in pick.items()}  # fmt: skip
    batches = [int(b) for (b,) in connection.execute(text("SELECT id FROM batch ORDER BY id"))]
    entries = [int(e) for (e,) in connection.execute(text("SELECT id FROM log_entry ORDER BY id"))]
    chosen_entries = entries if LONG else [entries[len(entries) // 2]]
    leaves = [int(p) for (p,) in connection.execute(text("SELECT position FROM log_leaf ORDER BY position"))]
    return {
        "series": [(key, {"id": sid}) for key, sid in connection.execute(text("SELECT key, id FROM series"))
                   if LONG or key == "members"],
        "batch": [(f"batch {b}", {"id": b}) for b in (batches if LONG else [batches[0]])],
        "issued_code": [(label, {"id": i}) for label, i in ids.items()],
        "log_entry": [(f"entry {e}", {"id": e}) for e in chosen_entries],
        "log_chain": [(f"chain {c}", {"chain": c}) for (c,) in connection.execute(text("SELECT chain FROM log_chain"))
                      if LONG or c != 0],
        "log_leaf": [(f"leaf {p}", {"position": p}) for p in leaves if LONG or p in (leaves[len(leaves) // 2], leaves[-1])],
        "log_tree": [("tree", {"id": 1})],
        "stock_count": [(name, {"id": i}) for name, i in connection.execute(text("SELECT name, id FROM stock_count"))],
        "stock_count_file": [(name, {"id": i}) for name, i in connection.execute(text("SELECT name, id FROM stock_count_file"))],
        "stock_count_scan": [("line 1", {"id": _first(connection, "stock_count_scan")})],
        "access_token": [("front-desk", {"id": _first(connection, "access_token")})],
        "alembic_version": [("version", {"version_num": connection.execute(
            text("SELECT version_num FROM alembic_version")).scalar_one()})],
    }


@dataclass
class Edit:
    table: str
    row: str
    kind: str  # update COLUMN | delete | insert
    statement: str
    params: dict[str, Any]
    undo: str
    undo_params: dict[str, Any]

    @property
    def name(self) -> str:
        return f"{self.table}[{self.row}] {self.kind}"


def _where(key: dict[str, Any], prefix: str = "k_") -> tuple[str, dict[str, Any]]:
    return " AND ".join(f"{c} = :{prefix}{c}" for c in key), {f"{prefix}{c}": v for c, v in key.items()}


def edits(scene: Scene) -> list[Edit]:
    engine = create_engine(database_url(scene.url))
    found: list[Edit] = []
    with engine.connect() as connection:
        for table, rows in _rows(connection, scene).items():
            columns = [c.name for c in Base.metadata.tables[table].columns] if table != "alembic_version" else ["version_num"]
            ids = [int(i) for (i,) in connection.execute(text(f"SELECT id FROM {table}"))] if "id" in columns else []
            for label, key in rows:
                where, kp = _where(key)
                original = dict(connection.execute(text(f"SELECT * FROM {table} WHERE {where}"), kp).one()._mapping)
                for column in columns:
                    new = _changed(original[column], column, ids)
                    new_key = {c: (new if c == column else v) for c, v in key.items()}
                    new_where, nkp = _where(new_key, "n_")
                    found.append(Edit(table, label, f"update {column}",
                                      f"UPDATE {table} SET {column} = :v WHERE {where}", {"v": new, **kp},
                                      f"UPDATE {table} SET {column} = :v WHERE {new_where}",
                                      {"v": original[column], **nkp}))  # fmt: skip
                names = ", ".join(original)
                marks = ", ".join(f":o_{c}" for c in original)
                found.append(Edit(table, label, "delete", f"DELETE FROM {table} WHERE {where}", kp,
                                  f"INSERT INTO {table} ({names}) VALUES ({marks})",
                                  {f"o_{c}": v for c, v in original.items()}))  # fmt: skip
                if "id" in original:  # a forged copy of the row under a new id (unique columns varied)
                    copy = dict(original)
                    copy["id"] = max(ids) + 100
                    for unique in ("code", "key", "hash", "request_id"):
                        if unique in copy and copy[unique] is not None:
                            copy[unique] = _changed(copy[unique], unique, [])
                    if table == "issued_code":
                        copy["base"] = int(copy["base"]) + 500_000
                    found.append(Edit(table, label, "insert",
                                      f"INSERT INTO {table} ({names}) VALUES ({marks})",
                                      {f"o_{c}": v for c, v in copy.items()},
                                      f"DELETE FROM {table} WHERE id = :k_id", {"k_id": copy["id"]}))  # fmt: skip
    engine.dispose()
    return found


@dataclass
class Outcome:
    edit: Edit
    result: str  # refused | caught | missed
    changes_answers: bool
    checks: list[str]


def judge(scene: Scene, edit: Edit, before: list[dict[str, Any]], how: Any = sidestep) -> Outcome:
    engine = scene.desk().engine  # the tamperer's connection: plain SQL, no tool in between
    try:
        with engine.begin() as connection:
            how(connection, edit.statement, edit.params)
    except DBAPIError:
        return Outcome(edit, "refused", False, [])
    try:
        changed = answers(scene) != before
    except Exception:  # noqa: BLE001 - the desk cannot answer at all: an answer changed
        changed = True
    ok, checks = healthy(scene)
    with engine.begin() as connection:
        sidestep(connection, edit.undo, edit.undo_params)
    return Outcome(edit, "missed" if ok else "caught", changed, checks)


@pytest.fixture
def scene(register_url: str, tmp_path: Path) -> Iterator[Scene]:  # noqa: F811
    made = build(register_url, tmp_path)
    yield made
    made.desk().close()


def _report(scene: Scene, outcomes: list[Outcome], how: str) -> list[str]:
    """Print the figures; the names of the missed edits that change a check answer."""
    total = len(outcomes)
    caught = sum(o.result != "missed" for o in outcomes)
    answering = [o for o in outcomes if o.changes_answers]
    missed = [o for o in outcomes if o.result == "missed"]
    backend = scene.url.split(":", 1)[0] if "://" in scene.url else "sqlite"
    print(f"\ntamper suite ({backend}, {how}): {caught}/{total} single-row edits refused or caught by doctor; "
          f"{sum(o.result != 'missed' for o in answering)}/{len(answering)} of those that change an answer; "
          f"missed: {[o.edit.name for o in missed]}")  # fmt: skip
    return [o.edit.name for o in answering if o.result == "missed"]


def test_every_single_row_edit_is_refused_or_caught_when_it_changes_an_answer(scene: Scene) -> None:
    assert healthy(scene) == (True, [])
    before = answers(scene)
    found = edits(scene)
    # every table of the register is edited (a new table must join the suite)
    assert {e.table for e in found} == set(Base.metadata.tables) | {"alembic_version"}
    outcomes = [judge(scene, edit, before) for edit in found]
    assert _report(scene, outcomes, "triggers disabled") == []
    if "://" in scene.url:  # a superuser's replica mode: only ALWAYS triggers still fire
        replica = [judge(scene, edit, before, how=as_replica) for edit in found]
        # replica mode also silences the foreign keys (their triggers are not ALWAYS): a series,
        # count or file row can go missing; each such edit must still be caught or change no answer
        assert _report(scene, replica, "session_replication_role = replica") == []
    assert healthy(scene) == (True, []), "an edit was not undone"
    assert answers(scene) == before
