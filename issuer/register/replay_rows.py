"""The doctor's replay of the rows outside the codes: the service's access tokens, stock
counts (their files and scanned lines) and each batch's id range, against the acts the log
holds for them.

* **Tokens**: each row is made by a ``token-add`` entry of its name, with the role, lookup
  and credential digest that entry logged, at its moment and by its actor, and revoked
  exactly when a ``token-revoke`` entry says (never else); a logged token is still there.
* **Stock counts**: each count is opened by a ``count_open`` entry (series, scope, zone, its
  moment and actor), closed exactly when a ``count_close`` entry says, with the frozen
  result that entry's digest names; each scan file is added by a ``count_add`` entry of its
  count and digest (name, scanner, zone, line counts, moment, actor) and holds the scanned
  lines the entry's digest covers; every scanned line belongs to a file of its own count.
* **Batch ranges**: the ids a batch's codes lie between (``code_id_from``/``code_id_to``)
  are what its act set. On SQLite (one writer) they are exactly its first and last code; on
  PostgreSQL the range may also hold codes other acts wrote at the same moment, so the
  bounds are checked as they were made: the code at ``code_id_to`` is the batch's own or
  one committed before its act (an earlier log entry), and so is the code just below
  ``code_id_from`` when the range starts below the batch's first code.

An entry written before a particular was logged (an older release) leaves that particular
unknown: it is not compared. The tokens and counts are few, the batches one grouped query,
the scanned lines one pass in index order.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from sqlalchemy import text
from sqlalchemy.orm import Session

from issuer.register.log import stored_time
from issuer.register.replay import UNKNOWN, json_object, same_time

TOKEN_ACTS = ("token-add", "token-revoke")
COUNT_ACTS = ("count_open", "count_add", "count_close")


def _entries(session: Session, acts: tuple[str, ...], where: str = "") -> list[tuple[int, datetime, str, str, Any, dict[str, Any]]]:
    marks = ", ".join(f":a{i}" for i in range(len(acts)))
    rows = session.execute(
        text(f"SELECT id, at, actor, action, series_id, detail FROM log_entry WHERE {where}action IN ({marks}) ORDER BY id"),
        {f"a{i}": act for i, act in enumerate(acts)},
    )
    return [(int(r[0]), stored_time(r[1]), str(r[2]), str(r[3]), r[4], json_object(r[5])) for r in rows]  # type: ignore[misc]


def _differs(held: Any, implied: Any) -> bool:
    if implied is UNKNOWN:
        return False
    if isinstance(implied, datetime) or isinstance(held, datetime):
        return not same_time(held, implied)
    return bool(held != implied)


# --- access tokens -------------------------------------------------------------------------


@dataclass
class TokenExpect:
    entry: int
    at: datetime
    actor: str
    role: Any
    lookup: Any
    credential: Any
    revoked: tuple[int, datetime, str] | None = None


def may_read_tokens(session: Session) -> bool:
    """Whether this login may read the service's tokens (on PostgreSQL with roles applied,
    a clerk's or an admin's may not: only the owner the service runs as)."""
    if session.get_bind().dialect.name != "postgresql":
        return True
    return bool(session.execute(text("SELECT has_table_privilege('access_token', 'SELECT')")).scalar_one())


def token_problems(session: Session) -> tuple[list[str], int]:
    """(problems, tokens compared): every token row against the log's token acts."""
    from issuer.register.tokens import credential_digest

    problems: list[str] = []
    expected: dict[str, TokenExpect] = {}
    # tokens name no series: their entries are on the register's chain (an index's range)
    for entry, at, actor, action, _series, detail in _entries(session, TOKEN_ACTS, "chain = 0 AND "):
        name = detail.get("token")
        if not isinstance(name, str):
            problems.append(f"log entry #{entry} ({action}) names no token")
        elif action == "token-add":
            expected[name] = TokenExpect(entry, at, actor, detail.get("role", UNKNOWN), detail.get("lookup", UNKNOWN),
                                         detail.get("credential_sha256", UNKNOWN))  # fmt: skip
        elif name not in expected:
            problems.append(f"token {name}: revoked by log entry #{entry}, but no entry made it")
        else:
            expected[name].revoked = (entry, at, actor)
    held: set[str] = set()
    rows = session.execute(text(
        "SELECT name, lookup, role, salt, digest, created_at, created_by, revoked_at, revoked_by "
        "FROM access_token ORDER BY id"
    ))  # fmt: skip
    for name, lookup, role, salt, digest, created_at, created_by, revoked_at, revoked_by in rows:
        held.add(name)
        expect = expected.get(name)
        if expect is None:
            problems.append(f"token {name}: no logged act made it")
            continue
        where = f" (log entry #{expect.entry})"
        if _differs(role, expect.role):
            problems.append(f"token {name}: role {role!r}, logged {expect.role!r}{where}")
        if _differs(lookup, expect.lookup):
            problems.append(f"token {name}: lookup {lookup!r}, logged {expect.lookup!r}{where}")
        if expect.credential is not UNKNOWN and credential_digest(str(lookup), bytes(salt), bytes(digest)) != expect.credential:
            problems.append(f"token {name}: its salt or secret's hash is not the one logged{where}")
        if created_by != expect.actor or not same_time(stored_time(created_at), expect.at):
            problems.append(f"token {name}: made by {created_by} at {stored_time(created_at)}, "
                            f"logged {expect.actor} at {expect.at}{where}")  # fmt: skip
        if expect.revoked is None:
            if revoked_at is not None or revoked_by is not None:
                problems.append(f"token {name}: revoked at {stored_time(revoked_at)} by {revoked_by}, "
                                "but no revocation of it is logged")  # fmt: skip
        else:
            entry, at, actor = expect.revoked
            if revoked_by != actor or not same_time(stored_time(revoked_at), at):
                problems.append(f"token {name}: revoked at {stored_time(revoked_at)} by {revoked_by}, "
                                f"log entry #{entry} revoked it at {at} by {actor}")  # fmt: skip
    problems += [f"token {name}: made by log entry #{expect.entry}, it is missing from the register"
                 for name, expect in sorted(expected.items()) if name not in held]  # fmt: skip
    return problems, len(held)


# --- stock counts --------------------------------------------------------------------------


@dataclass
class FileExpect:
    entry: int
    at: datetime
    actor: str
    detail: dict[str, Any]


@dataclass
class CountExpect:
    entry: int
    at: datetime
    actor: str
    series_id: Any
    detail: dict[str, Any]
    files: dict[str, FileExpect] = field(default_factory=dict)
    closed: FileExpect | None = None  # the close entry (entry, at, actor, detail)


def _logged_counts(session: Session, problems: list[str]) -> dict[str, CountExpect]:
    counts: dict[str, CountExpect] = {}
    for entry, at, actor, action, series_id, detail in _entries(session, COUNT_ACTS):
        name = detail.get("count")
        if not isinstance(name, str):
            problems.append(f"log entry #{entry} ({action}) names no count")
            continue
        if action == "count_open":
            counts[name] = CountExpect(entry, at, actor, series_id, detail)
            continue
        count = counts.get(name)
        if count is None:
            problems.append(f"count {name}: log entry #{entry} ({action}) follows no opening of it")
        elif action == "count_add":
            count.files[str(detail.get("digest"))] = FileExpect(entry, at, actor, detail)
        else:
            count.closed = FileExpect(entry, at, actor, detail)
    return counts


def _scope_expected(detail: dict[str, Any]) -> dict[str, Any]:
    """The scope columns a count_open entry implies (UNKNOWN where it does not say)."""
    scope = detail.get("scope", UNKNOWN)
    numbered = scope in ("range", "batch")
    return {
        "scope": scope,
        "zone": detail.get("zone", UNKNOWN),
        # a holder's name stays out of the log (a closed count's result names it); a place is logged
        "scope_text": UNKNOWN if scope in ("holder", UNKNOWN) else detail.get("scope_text"),
        # older entries did not log a range's numbers or a batch's id
        "scope_first": detail.get("scope_first", UNKNOWN if numbered else None),
        "scope_last": detail.get("scope_last", UNKNOWN if scope == "range" else None),
    }


def _count_row_problems(row: Any, expect: CountExpect, last_erasure: Callable[[], int]) -> list[str]:
    from issuer.register.counting import result_digest
    from issuer.register.holders import ERASED
    from issuer.register.models import COUNT_CLOSED, COUNT_OPEN

    name, where = row.name, f" (log entry #{expect.entry})"
    problems = []
    if _differs(row.series_id, expect.series_id):
        problems.append(f"count {name}: of series #{row.series_id}, opened on series #{expect.series_id}{where}")
    for column, implied in _scope_expected(expect.detail).items():
        if _differs(getattr(row, column), implied):
            problems.append(f"count {name}: {column} is {getattr(row, column)!r}, logged {implied!r}{where}")
    if row.opened_by != expect.actor or not same_time(stored_time(row.opened_at), expect.at):
        problems.append(f"count {name}: opened by {row.opened_by} at {stored_time(row.opened_at)}, "
                        f"logged {expect.actor} at {expect.at}{where}")  # fmt: skip
    closed = expect.closed
    if closed is None:
        if (row.state, row.closed_at, row.closed_by, row.result) != (COUNT_OPEN, None, None, None):
            problems.append(f"count {name}: {row.state}, closed at {stored_time(row.closed_at)} by {row.closed_by}"
                            f"{' with a result' if row.result is not None else ''}, but no close of it is logged")  # fmt: skip
        return problems
    where = f" (log entry #{closed.entry})"
    if row.state != COUNT_CLOSED:
        problems.append(f"count {name}: {row.state}, closed by log entry #{closed.entry}")
    if row.closed_by != closed.actor or not same_time(stored_time(row.closed_at), closed.at):
        problems.append(f"count {name}: closed by {row.closed_by} at {stored_time(row.closed_at)}, "
                        f"logged {closed.actor} at {closed.at}{where}")  # fmt: skip
    logged = closed.detail.get("result_sha256")
    # erasing the holder a count was narrowed to rewrites the name in its result (the log
    # keeps no name, so no digest of the rewritten result): then its counts are compared
    erased = row.scope == "holder" and row.scope_text == ERASED and last_erasure() > closed.entry
    if logged is not None and not erased:
        if row.result is None or result_digest(str(row.result)) != logged:
            problems.append(f"count {name}: its frozen result is not the one logged{where}")
        elif row.scope == "holder" and json_object(row.result).get("scope") != f"holder {row.scope_text}":
            # the log keeps no holder's name, but the result it vouches for names it
            problems.append(f"count {name}: its holder is not the one its frozen result names{where}")
    else:  # an older entry logged the result's counts only
        counts = {k: v for k, v in closed.detail.items() if k not in ("count", "result_sha256")}
        stored = json_object(row.result).get("counts") if row.result is not None else None
        if counts and stored != counts:
            problems.append(f"count {name}: its frozen result's counts are not the ones logged{where}")
    return problems


#: a count_add entry's particulars -> the file row's columns
_FILE_COLUMNS = {"file": "name", "scans": "scans", "zone": "zone", "blank_lines": "blank_lines",
                 "comment_lines": "comment_lines"}  # fmt: skip


def _file_problems(row: Any, count: str, expect: FileExpect) -> list[str]:
    where = f" (log entry #{expect.entry})"
    problems = []
    for key, column in _FILE_COLUMNS.items():
        if _differs(getattr(row, column), expect.detail.get(key, UNKNOWN)):
            problems.append(f"count {count}, file {row.name}: {column} is {getattr(row, column)!r}, "
                            f"logged {expect.detail[key]!r}{where}")  # fmt: skip
    if row.scanner != expect.detail.get("scanner"):
        problems.append(f"count {count}, file {row.name}: scanner {row.scanner!r}, logged "
                        f"{expect.detail.get('scanner')!r}{where}")  # fmt: skip
    if row.added_by != expect.actor or not same_time(stored_time(row.added_at), expect.at):
        problems.append(f"count {count}, file {row.name}: added by {row.added_by} at {stored_time(row.added_at)}, "
                        f"logged {expect.actor} at {expect.at}{where}")  # fmt: skip
    return problems


@dataclass
class _Lines:
    """One file's scanned lines as read: how many, the digest over them, whose count."""

    counts: set[int]
    lines: int
    digest: Any


def _scanned_lines(session: Session) -> dict[int, _Lines]:
    """Every scanned line, once, in the index's order (count, file, line): per file its
    number of lines, the counts they say they belong to and their digest."""
    import hashlib

    from issuer.register.scanfiles import scan_line_text

    files: dict[int, _Lines] = {}
    rows = session.execute(
        text("SELECT file_id, count_id, line, scanned, seen_at, seen_where FROM stock_count_scan "
             "ORDER BY count_id, file_id, line, id"),
        execution_options={"yield_per": 50_000},
    )  # fmt: skip
    for file_id, count_id, line, scanned, seen_at, seen_where in rows:
        found = files.get(file_id)
        if found is None:
            found = files[file_id] = _Lines(set(), 0, hashlib.sha256())
        found.counts.add(count_id)
        found.lines += 1
        found.digest.update(scan_line_text(line, scanned, seen_at, seen_where))
    return files


def count_problems(session: Session) -> tuple[list[str], int]:
    """(problems, counts compared): every count, file and scanned line against the log."""
    problems: list[str] = []
    logged = _logged_counts(session, problems)
    erasure: list[int] = []

    def last_erasure() -> int:  # read once, and only for a count whose holder was erased
        if not erasure:
            erasure.append(int(session.execute(text(
                "SELECT coalesce(max(id), 0) FROM log_entry WHERE action = 'holder.erase'")).scalar_one()))  # fmt: skip
        return erasure[0]

    held: dict[int, str] = {}
    for row in session.execute(text(
        "SELECT id, name, series_id, scope, scope_text, scope_first, scope_last, zone, state, "
        "opened_at, opened_by, closed_at, closed_by, result FROM stock_count ORDER BY id"
    )):  # fmt: skip
        held[int(row.id)] = row.name
        expect = logged.get(row.name)
        if expect is None:
            problems.append(f"count {row.name}: no logged act opened it")
        else:
            problems += _count_row_problems(row, expect, last_erasure)
    problems += [f"count {name}: opened by log entry #{expect.entry}, it is missing from the register"
                 for name, expect in sorted(logged.items()) if name not in held.values()]  # fmt: skip
    lines = _scanned_lines(session)
    found: set[tuple[str, str]] = set()
    for row in session.execute(text(
        "SELECT id, count_id, digest, name, scanner, zone, scans, blank_lines, comment_lines, added_at, added_by "
        "FROM stock_count_file ORDER BY id"
    )):  # fmt: skip
        count = held.get(int(row.count_id))
        read = lines.pop(int(row.id), None)
        if count is None:
            problems.append(f"scan file {row.name} (#{row.id}) belongs to no count the register holds")
            continue
        expect = logged.get(count)
        added = expect.files.get(row.digest) if expect is not None else None
        if added is None:
            problems.append(f"count {count}, file {row.name}: no logged act added a file of digest {row.digest}")
            continue
        found.add((count, row.digest))
        problems += _file_problems(row, count, added)
        if read is None or read.lines != row.scans or read.counts != {row.count_id}:
            problems.append(f"count {count}, file {row.name}: holds {read.lines if read else 0} scanned line(s) "
                            f"of its count, says {row.scans}")  # fmt: skip
        logged_digest = added.detail.get("scans_sha256")
        if logged_digest is not None and (read is None or read.digest.hexdigest() != logged_digest):
            problems.append(f"count {count}, file {row.name}: its scanned lines are not the ones logged "
                            f"(log entry #{added.entry})")  # fmt: skip
    problems += [f"{read.lines} scanned line(s) belong to file #{file_id}, which the register does not hold"
                 for file_id, read in sorted(lines.items())]  # fmt: skip
    problems += [f"count {name}, file {added.detail.get('file')}: added by log entry #{added.entry}, "
                 "it is missing from the register"
                 for name, expect in sorted(logged.items()) if name in held.values()
                 for digest, added in expect.files.items() if (name, digest) not in found]  # fmt: skip
    return problems, len(held)


# --- batch ranges --------------------------------------------------------------------------


def batch_range_problems(session: Session) -> list[str]:
    """Each batch's series and id range as its act set them (see the module's docstring)."""
    problems = [
        f"batch {r[0]} is of series #{r[1]}, log entry #{r[2]} made it in series #{r[3]}"
        for r in session.execute(text(
            "SELECT b.id, b.series_id, e.id, e.series_id FROM batch b JOIN log_entry e ON e.batch_id = b.id "
            "WHERE e.action IN ('issue', 'import', 'replace') AND (e.series_id IS NULL OR e.series_id <> b.series_id) "
            "ORDER BY b.id LIMIT 50"
        ))
    ]  # fmt: skip
    return problems + _range_problems(session)


def _range_problems(session: Session) -> list[str]:
    own = ("SELECT batch_id, min(id) AS lo, max(id) AS hi FROM issued_code GROUP BY batch_id")
    if session.get_bind().dialect.name == "sqlite":
        rows = session.execute(text(
            f"SELECT b.id, b.code_id_from, b.code_id_to, o.lo, o.hi FROM batch b JOIN ({own}) o ON o.batch_id = b.id "
            "WHERE b.code_id_from IS NOT o.lo OR b.code_id_to IS NOT o.hi ORDER BY b.id LIMIT 50"
        ))  # fmt: skip
        return [f"batch {r[0]}: its codes are ids {r[3]}..{r[4]}, its range says {r[1]}..{r[2]}" for r in rows]
    # the act that made each batch: its first log entry
    logged = "logged AS (SELECT batch_id, min(id) AS entry FROM log_entry WHERE batch_id IS NOT NULL GROUP BY batch_id)"
    # a bound's code: the batch's own, or one whose act was logged before this batch's
    rows = session.execute(text(
        f"WITH {logged} SELECT b.id, b.code_id_from, b.code_id_to, o.lo, o.hi FROM batch b "
        f"JOIN ({own}) o ON o.batch_id = b.id JOIN logged lb ON lb.batch_id = b.id "
        "LEFT JOIN issued_code c ON c.id = b.code_id_to LEFT JOIN logged le ON le.batch_id = c.batch_id "
        "LEFT JOIN issued_code p ON p.id = b.code_id_from - 1 LEFT JOIN logged lp ON lp.batch_id = p.batch_id "
        "WHERE c.id IS NULL OR NOT (c.batch_id = b.id OR coalesce(le.entry < lb.entry, false)) "
        "OR (b.code_id_from < o.lo AND b.code_id_from > 1 AND NOT coalesce(lp.entry < lb.entry, false)) "
        "ORDER BY b.id LIMIT 50"
    ))  # fmt: skip
    return [f"batch {r[0]}: its range {r[1]}..{r[2]} (its codes are ids {r[3]}..{r[4]}) reaches codes "
            "not written before its act" for r in rows]  # fmt: skip
