"""Import: numbers issued outside the register brought under its protection.

Each row is checked against the series' shape and check scheme, its base number must
lie in the series' range, and it may appear neither twice in the file nor already in
the register; a code of another series is named as such. Original issue dates,
holders, notes, void details and replacement links are kept where the file has them
(the columns :mod:`issuer.register.transfer` exports). The imported codes form one
batch of kind ``import`` and raise the series' ``imported_count``, so the allocator
skips them for ever, in order and scattered alike.

All or nothing: :func:`plan_import` reads and checks every row without writing; one
bad row refuses the whole file, naming each bad line, unless the caller chooses to
skip bad rows (the plan lists each one and why). :func:`apply_import` writes a plan
in one transaction and checks the register again inside it.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from sqlalchemy.orm import Session

from issuer import limits
from issuer.checking.reading import read_code
from issuer.errors import Conflict, InvalidFormat, OutOfLimits
from issuer.readers.bulkread import BAD_CHECK, MALFORMED, read_codes
from issuer.readers.scanfile import Table
from issuer.register.allotment import NEXT_CODE_ID, close_batch
from issuer.register.driver import bind_value, execute_many, insert_many
from issuer.register.log import NewEntry, append_entries, rows_digest, timestamp_text
from issuer.register.models import EXPIRED, ISSUED, SUSPENDED, VOIDED, Batch, IssuedCode
from issuer.register.series import all_series, code_format, get_series
from issuer.register.standing import BatchTexts, new_salts, search_key, text_digest
from issuer.register.stocktake import series_codes
from issuer.register.store import Register

#: header names read for each field of an imported code
IMPORT_ROLES: dict[str, tuple[str, ...]] = {
    "status": ("status",),
    "issued_at": ("issued_at", "issued", "issue_date", "date_issued"),
    "issued_by": ("issued_by",),
    "holder": ("holder", "issued_to"),
    "note": ("note", "notes", "comment"),
    "voided_at": ("voided_at",),
    "voided_by": ("voided_by",),
    "void_reason": ("void_reason",),
    "replaces": ("replaces",),
    "last_seen_at": ("last_seen_at",),
    "last_seen_where": ("last_seen_where",),
    "expected_where": ("expected_where", "expected_place", "place", "home", "location", "shelf"),
    "valid_until": ("valid_until",),
    "suspended_at": ("suspended_at",),
    "suspend_reason": ("suspend_reason",),
}
#: each text column and the field whose limit it keeps (see issuer.limits)
FIELDS = {
    "holder": "holder", "note": "note", "issued_by": "actor", "voided_by": "actor",
    "void_reason": "reason", "last_seen_where": "location", "expected_where": "location",
}  # fmt: skip
#: bad lines named in a refusal before "and N more"
NAMED_IN_REFUSAL = 10

#: ``origin_at``/``origin_by``: the file's issued_at/issued_by; empty where it gave none (the
#: import batch's time and actor stand for them)
ROW_COLUMNS = (
    "series_id", "code", "base", "status", "batch_id", "holder", "note", "origin_at", "origin_by",
    "void_reason", "voided_at", "voided_by", "print_count", "last_seen_at", "last_seen_where", "expected_where",
    "holder_key", "note_key", "valid_until", "suspended_at", "suspended_by", "suspend_reason", "text_salt",
)  # fmt: skip


@dataclass(frozen=True)
class Rejected:
    line: int
    text: str
    reason: str


@dataclass(frozen=True)
class ImportRow:
    line: int
    code: str
    base: int
    status: str
    issued_at: datetime | None
    issued_by: str | None
    holder: str | None
    note: str | None
    voided_at: datetime | None
    voided_by: str | None
    void_reason: str | None
    replaces: str | None
    last_seen_at: datetime | None
    last_seen_where: str | None
    #: where the item belongs (a place column of the file)
    expected_where: str | None = None
    valid_until: datetime | None = None
    suspended_at: datetime | None = None
    suspend_reason: str | None = None


@dataclass
class ImportPlan:
    series: str
    source: str
    rows: list[ImportRow] = field(default_factory=list)
    rejected: list[Rejected] = field(default_factory=list)
    read: int = 0
    ignored_columns: list[str] = field(default_factory=list)

    def refusal(self) -> str:
        """The one-line refusal naming the bad lines."""
        named = "; ".join(f"line {r.line}: {r.reason}" for r in self.rejected[:NAMED_IN_REFUSAL])
        more = len(self.rejected) - NAMED_IN_REFUSAL
        tail = f"; and {more} more" if more > 0 else ""
        rows = "row" if len(self.rejected) == 1 else "rows"
        return (
            f"{len(self.rejected)} bad {rows} in {self.source}, nothing imported: {named}{tail} "
            "(--skip-bad imports the rest and --rejects FILE lists them)"
        )


def _time(text: str, what: str) -> datetime:
    try:
        return limits.moment(what, text)
    except OutOfLimits as exc:
        raise ValueError(exc.message) from None


def plan_import(register: Register, key: str, table: Table) -> ImportPlan:
    """Check every row of ``table`` for series ``key``; write nothing."""
    plan = ImportPlan(series=key, source=table.source, read=len(table))
    roles = {role: table.role(role) for role in IMPORT_ROLES}
    plan.ignored_columns = [name for name in table.columns if name not in table.roles.values()
                            and name.strip().lower() != "display"]
    now = register.clock()
    with register.reading() as session:
        series = get_series(session, key)
        shape = code_format(series)
        others = [(other.key, code_format(other)) for other in all_series(session) if other.id != series.id]
        held = series_codes(session, series)
    read = read_codes(shape, table.codes)
    states = read.state.tolist()
    in_file: dict[str, int] = {}
    decode = shape.scheme.alphabet.decode_number
    start, body_end = len(shape.prefix), len(shape.prefix) + shape.length

    def cell(role: str, index: int) -> str | None:
        values = roles[role]
        return (values[index] or None) if values is not None else None

    for index, (line, text, code, state) in enumerate(zip(table.lines, table.codes, read.canonical, states)):
        try:
            if state == MALFORMED:
                other = read_code([(key, shape), *others], text, series=key)
                if other.other_series is not None:
                    raise ValueError(other.problem)
                raise ValueError(f"{text!r} {read.reasons.get(index, 'is not a code of this series')}")
            assert code is not None
            shown = shape.display(code)
            if state == BAD_CHECK:
                raise ValueError(f"{shown}: the check character does not match")
            if index in read.alternatives:
                raise ValueError(_alternative(shape, code, read.alternatives[index]))
            if code in in_file:
                raise ValueError(f"{shown} is a duplicate of line {in_file[code]}")
            if code in held:
                raise ValueError(f"{shown} is in the register already ({held[code]})")
            base = decode(code[start:body_end])
            if not series.range_start <= base <= series.range_end:
                raise ValueError(
                    f"{shown} lies outside the series' range {series.range_start}..{series.range_end}"
                )
            row = _row(line, code, base, index, cell, now)
        except ValueError as exc:
            plan.rejected.append(Rejected(line, text, str(exc)))
            continue
        in_file[code] = line
        plan.rows.append(row)
    _check_replacements(plan, shape, held)
    return plan


def _alternative(shape: Any, code: str, typed_check: str) -> str:
    """Why a code written with a congruent alternative check pair is refused: one number
    is one code, written with the pair the standard computes."""
    at = len(shape.prefix) + shape.length
    computed = code[at: at + shape.scheme.check_length]
    typed = code[:at] + typed_check + code[at + len(typed_check):]
    return (
        f"{shape.display(typed)}: check pair {typed_check} is an alternative the method also "
        f"accepts, but the register writes each number with its computed pair {computed}; "
        f"write it as {shape.display(code)}"
    )


def _row(line: int, code: str, base: int, index: int, cell: Callable[[str, int], str | None], now: datetime) -> ImportRow:
    status = (cell("status", index) or ISSUED).lower()
    if status == EXPIRED:  # an export's word for an issued code past its validity
        status = ISSUED
    if status not in (ISSUED, VOIDED, SUSPENDED):
        raise ValueError(f"status must be issued, expired, suspended or voided, not {status!r}")
    issued_at = _time(text, "issued_at") if (text := cell("issued_at", index)) else None
    if issued_at is not None and issued_at > now:
        raise ValueError(f"issued_at {text} is in the future")
    voided_at = _time(text, "voided_at") if (text := cell("voided_at", index)) else None
    if voided_at is not None and status != VOIDED:
        raise ValueError("voided_at is given but the status is not voided")
    if voided_at is not None and issued_at is not None and voided_at < issued_at:
        raise ValueError("voided_at is before issued_at")
    seen_at = _time(text, "last_seen_at") if (text := cell("last_seen_at", index)) else None
    valid_until = _time(text, "valid_until") if (text := cell("valid_until", index)) else None
    values = {name: cell(name, index) for name in FIELDS}
    for name, field_name in FIELDS.items():
        try:
            limits.text(field_name, values[name])
        except OutOfLimits as exc:
            raise ValueError(f"{name}: {exc.message}") from None
    return ImportRow(
        line=line, code=code, base=base, status=status, issued_at=issued_at,
        issued_by=values["issued_by"], holder=values["holder"], note=values["note"],
        voided_at=voided_at, voided_by=values["voided_by"],
        void_reason=values["void_reason"] if status == VOIDED else None,
        replaces=cell("replaces", index), last_seen_at=seen_at, last_seen_where=values["last_seen_where"],
        expected_where=" ".join(values["expected_where"].split()) if values["expected_where"] else None,
        valid_until=valid_until,
        suspended_at=(_time(text, "suspended_at") if (text := cell("suspended_at", index)) else now)
        if status == SUSPENDED else None,
        suspend_reason=cell("suspend_reason", index) if status == SUSPENDED else None,
    )  # fmt: skip


def _check_replacements(plan: ImportPlan, shape: Any, held: dict[str, str]) -> None:
    """A ``replaces`` cell must name a code of the file or of the register."""
    if not any(row.replaces for row in plan.rows):
        return
    codes = {row.code for row in plan.rows}
    kept = []
    for row in plan.rows:
        if row.replaces:
            try:
                old = shape.parse(row.replaces).canonical
            except InvalidFormat as exc:
                plan.rejected.append(
                    Rejected(row.line, row.code, f"replaces {row.replaces!r}: {exc.message}")
                )
                continue
            if old not in codes and old not in held:
                plan.rejected.append(
                    Rejected(row.line, row.code,
                             f"replaces {shape.display(old)}, which is neither in the file nor in the register")
                )
                continue
            row = ImportRow(**{**row.__dict__, "replaces": old})
        kept.append(row)
    plan.rows = kept
    plan.rejected.sort(key=lambda rejected: rejected.line)


@dataclass(frozen=True)
class ImportResult:
    series: str
    batch: int
    imported: int
    voided: int
    first: str
    last: str


def apply_import(
    register: Register, plan: ImportPlan, *, progress: Callable[[int], None] | None = None
) -> ImportResult:
    """Write a plan in one transaction: the rows, the links, the series' counts, the log."""
    if not plan.rows:
        raise InvalidFormat(f"{plan.source}: no rows to import")

    def work(session: Session) -> ImportResult:
        series = get_series(session, plan.series, lock=True)
        held = series_codes(session, series)
        clash = next((row for row in plan.rows if row.code in held), None)
        if clash is not None:
            raise Conflict(
                f"line {clash.line}: {code_format(series).display(clash.code)} entered the register meanwhile; "
                "nothing imported"
            )
        now = register.clock()
        batch = Batch(series_id=series.id, kind="import", count=len(plan.rows), created_at=now,
                      actor=register.actor, code_id_from=NEXT_CODE_ID)
        session.add(batch)
        session.flush()
        table = IssuedCode.__table__.c

        def bind(column: str, value: Any) -> Any:
            return None if value is None else bind_value(session, table[column], value)  # type: ignore[arg-type]

        # a salt for each code the file gives a holder or note, its digest into the batch's
        salts = new_salts(sum(row.holder is not None or row.note is not None for row in plan.rows))
        texts = BatchTexts()

        def salt_for(row: ImportRow) -> bytes | None:
            if row.holder is None and row.note is None:
                return None
            salt = next(salts)
            texts.add(text_digest(salt, row.holder, row.note))
            return salt

        for at in range(0, len(plan.rows), 10_000):
            chunk = plan.rows[at: at + 10_000]
            insert_many(session, "issued_code", ROW_COLUMNS, [
                (series.id, row.code, row.base, row.status, batch.id, row.holder, row.note,
                 bind("origin_at", row.issued_at), row.issued_by,
                 row.void_reason, bind("voided_at", row.voided_at or now) if row.status == VOIDED else None,
                 (row.voided_by or register.actor) if row.status == VOIDED else None, 0,
                 bind("last_seen_at", row.last_seen_at), row.last_seen_where, row.expected_where,
                 search_key(row.holder), search_key(row.note), bind("valid_until", row.valid_until),
                 bind("suspended_at", row.suspended_at), register.actor if row.status == SUSPENDED else None,
                 row.suspend_reason, salt_for(row))
                for row in chunk
            ])  # fmt: skip
            if progress is not None:
                progress(len(chunk))
        close_batch(session.connection(), batch.id)
        links = [(row.replaces, row.code) for row in plan.rows if row.replaces]
        if links:
            execute_many(session, "UPDATE issued_code SET replaces_id = "
                         "(SELECT id FROM issued_code WHERE code = ?) WHERE code = ?", links)
            execute_many(session, "UPDATE issued_code SET replaced_by_id = "
                         "(SELECT id FROM issued_code WHERE code = ?) WHERE code = ?",
                         [(new, old) for old, new in links])
        series.imported_count += len(plan.rows)
        series.code_count += len(plan.rows)
        digest = hashlib.sha256("".join(row.code + "\n" for row in plan.rows).encode("ascii"))
        voided = [row for row in plan.rows if row.status == VOIDED]
        entries = [NewEntry("import", series.id, plan.rows[0].code if len(plan.rows) == 1 else None, batch.id, {
            "count": len(plan.rows), "first": plan.rows[0].code, "last": plan.rows[-1].code,
            "codes_sha256": digest.hexdigest(), "source": plan.source, "voided": len(voided),
            "skipped": len(plan.rejected), "rows_sha256": rows_digest(
                (row.issued_at or now, row.issued_by or register.actor) for row in plan.rows
            ),
            "links": [[old, new] for old, new in links],
            # each code's own end of validity, as its file gave it (in id order; None: no end)
            "valid_until_sha256": rows_digest((row.valid_until,) for row in plan.rows),
            "texts": texts.detail(),
        })]  # fmt: skip
        entries.extend(
            NewEntry("void", series.id, row.code, None, {
                "reason": row.void_reason, "imported": True,
                "voided_at": (row.voided_at or now).isoformat(), "voided_by": row.voided_by or register.actor,
            })
            for row in voided
        )
        # a sighting the file brings is logged as one, so the replay knows where each code was last seen
        entries.extend(
            NewEntry("seen", series.id, row.code, None, {
                "seen_at": timestamp_text(row.last_seen_at), "source": plan.source, "imported": True,
                **({"where": row.last_seen_where} if row.last_seen_where else {}),
            })
            for row in plan.rows if row.last_seen_at is not None
        )
        # a code brought in suspended is logged as suspended (no holder text, like every entry)
        entries.extend(
            NewEntry("suspend", series.id, row.code, None, {"reason": "suspended in the imported file", "imported": True})
            for row in plan.rows if row.status == SUSPENDED
        )
        # and a place the file gives as a placing, so the replay knows where each code belongs
        entries.extend(
            NewEntry("placed", series.id, row.code, None, {
                "from": None, "to": row.expected_where, "by": plan.source, "imported": True,
            })
            for row in plan.rows if row.expected_where is not None
        )
        append_entries(session, entries, actor=register.actor, at=now)
        return ImportResult(series.key, batch.id, len(plan.rows), len(voided), plan.rows[0].code, plan.rows[-1].code)

    return register.write(work)


def import_codes(
    register: Register,
    key: str,
    table: Table,
    *,
    skip_bad: bool = False,
    dry_run: bool = False,
    progress: Callable[[int], None] | None = None,
) -> tuple[ImportPlan, ImportResult | None]:
    """Plan and (unless ``dry_run``) apply an import. A bad row refuses the whole file
    (:class:`InvalidFormat` naming each bad line) unless ``skip_bad``."""
    plan = plan_import(register, key, table)
    if plan.rejected and not skip_bad:
        raise InvalidFormat(plan.refusal())
    if dry_run:
        return plan, None
    return plan, apply_import(register, plan, progress=progress)


def rejects_rows(plan: ImportPlan, table: Table) -> Sequence[list[str]]:
    """The rejects file: each skipped row's line, why, and its cells as read."""
    by_line = {line: index for index, line in enumerate(table.lines)}
    header = ["line", "reason", table.code_column or "code", *table.columns]
    rows = [header]
    for rejected in plan.rejected:
        index = by_line.get(rejected.line)
        cells = [values[index] for values in table.columns.values()] if index is not None else []
        rows.append([str(rejected.line), rejected.reason, rejected.text, *cells])
    return rows


__all__ = [
    "IMPORT_ROLES",
    "ImportPlan",
    "ImportResult",
    "ImportRow",
    "Rejected",
    "apply_import",
    "import_codes",
    "plan_import",
    "rejects_rows",
]
