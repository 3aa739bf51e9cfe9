"""``issuer doctor``: is this register whole?

Each check reads one consistent snapshot and answers ``ok``, ``warn`` (worth a look,
not wrong) or ``problem`` (the register disagrees with itself). The checks:

* the database's own integrity check (SQLite ``PRAGMA integrity_check`` and
  ``foreign_key_check``; PostgreSQL checks its own pages — ``pg_amcheck`` goes deeper);
* the schema's migration level against the one this issuer needs;
* the log's hash chain, recomputed from the first entry;
* every series' counters against the codes it holds: ``code_count`` equals the rows,
  and the counter covers exactly the numbers issued (an in-order series without a gap);
* every batch whole: as many codes as it says, each batch logged once, the logged
  count and the SHA-256 over its codes matching what is stored;
* voids logged, replacement links pointing both ways;
* the log replayed against the register (:mod:`issuer.register.replay`): each code's
  status, void reason, links, holder, print count and last sighting, each batch's kind
  and author, each series' shape, as the logged acts imply; each access token, stock
  count (its files and scanned lines) and batch id range as its acts left it
  (:mod:`issuer.register.replay_rows`);
* SQLite: the file and its folder owner-only, temporaries of output files left behind by
  a stopped process reported (``--fix`` removes them); PostgreSQL: the log's append-only triggers, the append
  function and the counter guard in force (missing or disabled is a problem), and the
  rights triggers of ``db roles --apply`` all present once any is.
"""

from __future__ import annotations

import hashlib
import json
import stat
from collections.abc import Callable
from typing import Any

from sqlalchemy import text
from sqlalchemy.orm import Session

from issuer.register.admin import snapshot, sqlite_path
from issuer.register.doctor_files import check_folder, check_leftovers
from issuer.register.doctor_states import check_fill, check_states
from issuer.register.findings import (
    OK,
    PROBLEM,
    SKIPPED,
    WARN,
    DoctorReport,
    Finding,
    _finding,
)
from issuer.register.logverify import verify_chain
from issuer.register.models import SCATTERED
from issuer.register.store import SCHEMA_HEAD, Register

Stage = Callable[[str], None]


def check_integrity(register: Register, session: Session) -> Finding:
    if register.backend != "sqlite":
        return Finding(
            "integrity", SKIPPED,
            f"{register.backend} checks its own pages; pg_amcheck runs a deeper check",
        )
    rows = [str(row[0]) for row in session.execute(text("PRAGMA integrity_check"))]
    problems = [] if rows == ["ok"] else rows
    problems += [
        f"table {row[0]} row {row[1]} points to a missing {row[2]} row"
        for row in session.execute(text("PRAGMA foreign_key_check"))
    ]
    return _finding("integrity", problems, "SQLite integrity check passed", "{n} integrity problem(s)")


def check_schema(revision: str | None) -> Finding:
    if revision == SCHEMA_HEAD:
        return Finding("schema", OK, f"at migration {revision}, as this issuer needs")
    if revision is None:
        return Finding("schema", PROBLEM, "no register schema here (run 'issuer db upgrade')")
    return Finding(
        "schema", PROBLEM,
        f"at migration {revision}, this issuer needs {SCHEMA_HEAD}: run 'issuer db upgrade'",
    )


def check_log(session: Session) -> Finding:
    report = verify_chain(session)
    if report.problem is None:
        return Finding("log chain", OK, f"{report.entries} entries in {report.chains} chain(s) intact up to "
                                        f"#{report.head_id}; {report.tree_size} sealed")
    return Finding(
        "log chain", PROBLEM,
        f"the chain breaks at entry {report.problem.entry_id}",
        [f"entry {report.problem.entry_id}: {report.problem.problem}"],
    )


def _series_rows(session: Session) -> list[Any]:
    return list(session.execute(text(
        "SELECT s.id, s.key, s.mode, s.range_start, s.range_end, s.next_counter, s.code_count, "
        "s.imported_count, "
        "(SELECT count(*) FROM issued_code c WHERE c.series_id = s.id) AS held, "
        "(SELECT count(*) FROM issued_code c JOIN batch b ON b.id = c.batch_id "
        " WHERE c.series_id = s.id AND b.kind = 'import') AS imported "
        "FROM series s ORDER BY s.key"
    )))


def _counter_problems(session: Session, row: Any) -> list[str]:
    key, problems = row.key, []
    if row.code_count != row.held:
        problems.append(f"{key}: code_count says {row.code_count}, the series holds {row.held} codes")
    if row.imported_count != row.imported:
        problems.append(f"{key}: imported_count says {row.imported_count}, imports hold {row.imported}")
    capacity = row.range_end - row.range_start + 1
    if not 0 <= row.next_counter <= capacity:
        return problems + [f"{key}: next_counter {row.next_counter} is outside 0..{capacity}"]
    bases = {
        kind: [int(b) for (b,) in session.execute(text(
            "SELECT c.base FROM issued_code c JOIN batch b ON b.id = c.batch_id "
            f"WHERE c.series_id = :s AND b.kind {'=' if kind else '<>'} 'import'"
        ), {"s": row.id})]
        for kind in (True, False)
    }
    imported, drawn = bases[True], bases[False]
    if row.mode == SCATTERED:
        try:
            counters_of = _scatter_counters(session, row.id)
        except ImportError:  # pragma: no cover - scatter ships with issuer
            return problems + [f"{key}: cannot check a scattered series without issuer.scattering.scatter"]
        drawn_counters, imported_counters = counters_of(drawn), counters_of(imported)
    else:
        drawn_counters = [base - row.range_start for base in drawn]
        imported_counters = [base - row.range_start for base in imported]
    beyond = [k for k in drawn_counters if not 0 <= k < row.next_counter]
    if beyond:
        problems.append(
            f"{key}: {len(beyond)} issued code(s) lie beyond the counter {row.next_counter}"
        )
    skipped = sum(1 for k in imported_counters if 0 <= k < row.next_counter)
    if len(drawn) + skipped != row.next_counter:
        missing = row.next_counter - len(drawn) - skipped
        what = "missing (a gap)" if missing > 0 else "too many"
        problems.append(
            f"{key}: the counter has used {row.next_counter} numbers but {len(drawn)} issued "
            f"and {skipped} imported are held: {abs(missing)} {what}"
        )
    return problems


def _scatter_counters(session: Session, series_id: int) -> Callable[[list[int]], list[int]]:
    from issuer.register.models import Series
    from issuer.register.series import permutation

    series = session.get(Series, series_id)
    assert series is not None
    scatter = permutation(series)

    def counters(bases: list[int]) -> list[int]:
        if not bases:
            return []
        return [int(k) for k in scatter.counters_for_bases(bases)]

    return counters


def check_counters(session: Session) -> Finding:
    rows = _series_rows(session)
    problems = [problem for row in rows for problem in _counter_problems(session, row)]
    return _finding(
        "counters", problems,
        f"{len(rows)} series: counters agree with the codes held",
        "{n} counter problem(s)",
    )


def check_batches(session: Session) -> Finding:
    problems = [
        f"batch {row[0]} ({row[1]}) says {row[2]} code(s), holds {row[3]}: half-issued"
        for row in session.execute(text(
            "SELECT b.id, b.kind, b.count, coalesce(n.held, 0) FROM batch b "
            "LEFT JOIN (SELECT batch_id, count(*) AS held FROM issued_code GROUP BY batch_id) n "
            "ON n.batch_id = b.id WHERE b.count <> coalesce(n.held, 0) ORDER BY b.id"
        ))
    ]
    problems += [
        f"code {row[0]} sits in batch {row[1]} of another series"
        for row in session.execute(text(
            "SELECT c.code, c.batch_id FROM issued_code c JOIN batch b ON b.id = c.batch_id "
            "WHERE b.series_id <> c.series_id"
        ))
    ]
    # a batch's codes are found by its id range: a code outside it would be lost to
    # replays, printing and export by batch
    problems += [
        f"code {row[0]} lies outside batch {row[1]}'s id range"
        for row in session.execute(text(
            "SELECT c.code, c.batch_id FROM issued_code c JOIN batch b ON b.id = c.batch_id "
            "WHERE b.code_id_from IS NULL OR b.code_id_to IS NULL "
            "OR c.id < b.code_id_from OR c.id > b.code_id_to ORDER BY c.id LIMIT 50"
        ))
    ]
    from issuer.register.replay_rows import batch_range_problems

    problems += batch_range_problems(session)
    total = session.execute(text("SELECT count(*) FROM batch")).scalar_one()
    return _finding("batches", problems, f"{total} batch(es), each whole", "{n} batch problem(s)")


def _batch_digests(session: Session) -> dict[int, tuple[int, str, list[str]]]:
    """Per batch: how many codes, the SHA-256 over them in issue order, the first two.

    One pass in id order (the primary key: no sort, no index by batch); a batch's codes
    are in id order within it, whatever other batches' codes lie between them."""
    open_batches: dict[int, tuple[list[int], Any, list[str]]] = {}
    rows = session.execute(
        text("SELECT batch_id, code FROM issued_code ORDER BY id"),
        execution_options={"yield_per": 20_000},
    )
    for batch_id, code in rows:
        state = open_batches.get(batch_id)
        if state is None:
            state = open_batches[batch_id] = ([0], hashlib.sha256(), [])
        count, digest, first = state
        digest.update(code.encode("ascii") + b"\n")
        count[0] += 1
        if len(first) < 2:
            first.append(code)
    return {batch: (count[0], digest.hexdigest(), first) for batch, (count, digest, first) in open_batches.items()}


def check_log_agrees(session: Session) -> Finding:
    problems: list[str] = []
    digests = _batch_digests(session)
    batches = {
        int(row[0]): (str(row[1]), int(row[2]))
        for row in session.execute(text("SELECT id, kind, count FROM batch"))
    }
    logged: dict[int, int] = {}
    for entry_id, action, code, batch_id, detail_text in session.execute(text(
        "SELECT id, action, code, batch_id, detail FROM log_entry WHERE batch_id IS NOT NULL "
        "ORDER BY id"
    )):
        logged[batch_id] = logged.get(batch_id, 0) + 1
        detail = json.loads(detail_text)
        count, digest, first = digests.get(batch_id, (0, "", []))
        if "count" in detail and int(detail["count"]) != count:
            problems.append(f"log entry {entry_id} says {detail['count']} code(s), batch {batch_id} holds {count}")
        if "codes_sha256" in detail and detail["codes_sha256"] != digest:
            problems.append(f"log entry {entry_id}: batch {batch_id}'s codes differ from those logged")
        if action in ("issue", "replace") and code is not None and first[:1] != [code]:
            problems.append(f"log entry {entry_id} names {code}, batch {batch_id} holds {first[:1]}")
    for batch_id, (kind, _count) in sorted(batches.items()):
        times = logged.get(batch_id, 0)
        if times == 0:
            problems.append(f"batch {batch_id} ({kind}) has no log entry")
        elif times > 1 and kind != "replace":
            problems.append(f"batch {batch_id} ({kind}) is logged {times} times")
    problems += [
        f"{row[0]} is voided but no void of it is logged"
        for row in session.execute(text(
            "SELECT c.code FROM issued_code c JOIN batch b ON b.id = c.batch_id "
            "WHERE c.status = 'voided' AND b.kind <> 'import' AND NOT EXISTS "
            "(SELECT 1 FROM log_entry e WHERE e.code = c.code AND e.action = 'void')"
        ))
    ]
    problems += [
        f"{row[0]} and its replacement {row[1]} do not point at each other"
        for row in session.execute(text(
            "SELECT o.code, n.code FROM issued_code o JOIN issued_code n ON n.id = o.replaced_by_id "
            "WHERE n.replaces_id IS NULL OR n.replaces_id <> o.id "
            "UNION ALL "
            "SELECT o.code, n.code FROM issued_code n JOIN issued_code o ON o.id = n.replaces_id "
            "WHERE o.replaced_by_id IS NULL OR o.replaced_by_id <> n.id"
        ))
    ]
    return _finding(
        "log and codes", problems,
        f"{len(batches)} batch(es) logged with matching counts and code digests; voids logged",
        "{n} disagreement(s) between the log and the codes",
    )


def check_replay(session: Session) -> Finding:
    from issuer.register.replay_findings import replay_problems

    problems, warnings, named = replay_problems(session)
    if problems:
        found = _finding("replay", problems, "", "{n} difference(s) between the register and what its log's acts imply")
        found.details += warnings
        return found
    if warnings:
        return Finding("replay", WARN, warnings[0], warnings[1:])
    return Finding("replay", OK, f"the register is what its log's acts imply ({named:,} codes and batches named)")


def check_tokens(session: Session) -> Finding:
    from issuer.register.replay_rows import may_read_tokens, token_problems

    if not may_read_tokens(session):
        return Finding("tokens", SKIPPED, "this login may not read the service's tokens (the owner's doctor compares them)")
    problems, held = token_problems(session)
    return _finding("tokens", problems, f"{held} access token(s), each as its logged acts left it",
                    "{n} difference(s) between the access tokens and the log's token acts")  # fmt: skip


def check_counts(session: Session) -> Finding:
    from issuer.register.replay_rows import count_problems

    problems, held = count_problems(session)
    return _finding("stock counts", problems, f"{held} stock count(s), their files and scans as logged",
                    "{n} difference(s) between the stock counts and the log's count acts")  # fmt: skip


def check_guard(register: Register, session: Session) -> Finding:
    if register.backend == "sqlite":
        path = sqlite_path(register)
        if path is None:
            return Finding("access", SKIPPED, "an in-memory register")
        mode = stat.S_IMODE(path.stat().st_mode)
        if mode & 0o022:
            return Finding(
                "access", PROBLEM,
                f"{path} can be written by others (mode {mode:o}): chmod 600 it",
            )
        if mode & 0o044:
            return Finding("access", WARN, f"{path} can be read by others (mode {mode:o}): chmod 600 it")
        return Finding("access", OK, f"the register file is owner-only (mode {mode:o})")
    if register.backend != "postgresql":
        return Finding("access", SKIPPED, f"no access check for {register.backend}")
    from issuer.register.rights import guard_problems

    problems, notes = guard_problems(session)
    if problems:
        return Finding("access", PROBLEM, "the database's guards are not all in force", problems + notes)
    if notes:
        return Finding("access", WARN, notes[0], notes[1:])
    return Finding("access", OK, "log_entry is append-only and appended by one function (triggers in force)")


def run_doctor(register: Register, stage: Stage | None = None, *, fix: bool = False) -> DoctorReport:
    """Every check, in one snapshot of the register. A check the database cannot even
    run (a damaged file, say) is itself a problem; the others still run. ``fix`` removes
    temporaries that stopped processes left behind (nothing in the register changes)."""
    from sqlalchemy.exc import DBAPIError

    from issuer.register.admin import redacted_url
    from issuer.register.sealing import KeyFileError

    findings: list[Finding] = []

    def run(name: str, check: Callable[[], Finding], session: Session) -> None:
        if stage is not None:
            stage(name)
        try:
            findings.append(check())
        except DBAPIError as exc:
            session.rollback()
            reason = str(exc.orig).splitlines()[0] if str(exc.orig) else type(exc.orig).__name__
            findings.append(Finding(name, PROBLEM, f"the check could not run: {reason}", [reason]))
        except KeyFileError as exc:  # a scattered series' key does not open with the key file
            findings.append(Finding(name, PROBLEM, f"the check could not run: {exc.message}", [exc.message]))

    try:
        revision = register.schema_revision()
    except DBAPIError as exc:
        revision = None
        findings.append(Finding("schema", PROBLEM, f"cannot read the schema level: {str(exc.orig).splitlines()[0]}"))
    with snapshot(register) as session:
        run("integrity", lambda: check_integrity(register, session), session)
        findings.append(check_schema(revision))
        if revision == SCHEMA_HEAD:
            run("log chain", lambda: check_log(session), session)
            run("counters", lambda: check_counters(session), session)
            run("batches", lambda: check_batches(session), session)
            run("log and codes", lambda: check_log_agrees(session), session)
            run("states", lambda: check_states(session, register.clock()), session)
            run("fill", lambda: check_fill(session), session)
            run("replay", lambda: check_replay(session), session)
            run("tokens", lambda: check_tokens(session), session)
            run("stock counts", lambda: check_counts(session), session)
        run("access", lambda: check_guard(register, session), session)
    path = sqlite_path(register)
    findings.append(Finding("folder", *check_folder(path)))
    findings.append(Finding("leftovers", *check_leftovers(path, fix=fix)))
    return DoctorReport(redacted_url(register), register.backend, findings)
