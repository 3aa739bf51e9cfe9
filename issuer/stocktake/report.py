"""A reconciled stocktake as a CSV report (one row per scanned line, then one per
missing code) and as JSON (counts, and the list of each class beside them)."""

from __future__ import annotations

from collections.abc import Iterator
from datetime import datetime
from typing import IO, Any

from issuer.outputs import SafeCsvWriter
from issuer.stocktake.results import LINE_CLASSES, Reconciliation, ScanLine, close_advice

#: the report's own columns; the scan file's other columns follow them. ``code`` and
#: ``likely_code`` are canonical (to join with an export); ``display`` and
#: ``likely_display`` are the same codes as people read them, and every code named in
#: ``detail`` is in its display form
REPORT_COLUMNS = (
    "line", "scanned", "code", "display", "status", "times_scanned", "detail",
    "likely_code", "likely_display", "likely_error", "last_seen_at", "last_seen_where", "expected_place",
)  # fmt: skip


def iso(moment: datetime | None) -> str | None:
    """UTC time as ``2026-03-14T09:30:00Z`` (fractions only when there are any)."""
    if moment is None:
        return None
    text = moment.strftime("%Y-%m-%dT%H:%M:%S")
    if moment.microsecond:
        text += f".{moment.microsecond:06d}"
    return text + "Z"


def extra_headers(recon: Reconciliation) -> list[str]:
    """The scan file's other columns as report headers (``scan_`` before a name the
    report uses itself)."""
    return [f"scan_{name}" if name in REPORT_COLUMNS else name for name in recon.table.columns]


def _displays(recon: Reconciliation) -> dict[str, str]:
    """Every scanned code's display form, made in bulk (a million scans are one pass)."""
    from issuer.register.bulk import display_texts

    shape = recon.shape
    width = shape.total_width
    wanted = list(dict.fromkeys(c for c in recon.canonical if c is not None))
    bulk = [c for c in wanted if len(c) == width and c.isascii()]
    shown = dict(zip(bulk, display_texts(shape, bulk)))
    shown.update((c, shape.display(c)) for c in wanted if c not in shown)
    return shown


def report_rows(recon: Reconciliation) -> Iterator[list[Any]]:
    """The report's rows, header first."""
    yield [*REPORT_COLUMNS, *extra_headers(recon)]
    shown = _displays(recon)
    # straight from the columns: a million lines make no ScanLine objects
    extras = list(recon.table.columns.values())
    times = recon.times
    table = recon.table
    places = recon.places
    for index, (number, text, code, status) in enumerate(
        zip(table.lines, table.codes, recon.canonical, recon.statuses)
    ):
        cells = [values[index] for values in extras]
        place = places.get(code, "") if code is not None else ""
        if status == "issued":
            yield [number, text, code, shown[code], status, times[code], "", "", "", "", "", "", place, *cells]  # type: ignore[index]
            continue
        likely = recon.likely.get(code, ()) if code is not None else recon.likely_by_line.get(index, ())
        first = likely[0] if likely else None
        detail = recon.detail(index, code, status)
        words = close_advice(likely)
        if words:
            detail = f"{detail}; {words}" if detail else words
        yield [
            number, text, code or "", shown[code] if code is not None else "", status,
            times[code] if code is not None else 1, detail, first.code if first else "",
            first.display if first else "", first.description if first else "", "", "", place, *cells,
        ]  # fmt: skip
    blanks = [""] * len(extras)
    for missing in recon.missing_codes():
        detail = "issued, not scanned"
        if missing.perhaps:
            detail += f"; perhaps scanned with a typo on {missing.perhaps}"
        yield [
            "", "", missing.code, missing.display, "missing", 0, detail, "", "", "",
            iso(missing.last_seen_at) or "", missing.last_seen_where or "", places.get(missing.code, ""), *blanks,
        ]  # fmt: skip


def write_report(recon: Reconciliation, stream: IO[str]) -> int:
    """Write the CSV report; returns the number of data rows."""
    writer = SafeCsvWriter(stream)
    rows = report_rows(recon)
    writer.writerow(next(rows))
    writer.writerows(rows)
    return recon.scans + len(recon.missing)


def _scan_fields(recon: Reconciliation, line: ScanLine) -> dict[str, Any]:
    fields: dict[str, Any] = {}
    if recon.time_column:
        fields["scanned_at"] = line.extra.get(recon.time_column) or None
    if recon.where_column:
        fields["location"] = line.extra.get(recon.where_column) or None
    if "file" in line.extra:  # a count's line comes from one of its files
        fields["file"] = line.extra["file"]
    return fields


def _entry(recon: Reconciliation, index: int, line: ScanLine) -> dict[str, Any]:
    """One listed code of a class other than issued and malformed."""
    entry: dict[str, Any] = {
        "code": line.code, "display": line.display, "line": line.line, "times": line.times,
        **_scan_fields(recon, line),
    }  # fmt: skip
    if line.status == "voided":
        void = recon.voids.get(line.code)  # type: ignore[arg-type]
        entry["reason"] = void.reason if void else None
        entry["replacement"] = void.replacement if void else None
        entry["replacement_display"] = (
            recon.shape.display(void.replacement) if void and void.replacement else None
        )
    elif line.status == "elsewhere":
        entry["expected_place"] = recon.places.get(line.code)  # type: ignore[arg-type]
        entry["seen_at_places"] = sorted(
            {recon.seen_where[i] for i, code in enumerate(recon.canonical) if code == line.code and recon.seen_where[i]}
        ) if recon.seen_where is not None else []  # fmt: skip
    elif line.status == "other_series":
        other = recon.others[index]
        entry.update(code=other.code, display=other.display, scanned=line.scanned, series=other.series,
                     series_title=other.title, status=other.status)
    elif line.status in ("bad_check", "not_issued"):
        entry["scanned"] = line.scanned
        entry["likely"] = [item.as_dict() for item in line.likely]
        entry["advice"] = close_advice(line.likely)
    elif line.status in ("expired", "suspended"):
        held = recon.standings.get(line.code)  # type: ignore[arg-type]
        entry["valid_until"] = iso(held.valid_until) if held else None
        if line.status == "suspended":
            entry["since"] = iso(held.suspended_at) if held else None
            entry["reason"] = held.suspend_reason if held else None
    return entry


def as_json(recon: Reconciliation, *, list_issued: bool = True) -> dict[str, Any]:
    """Counts under ``counts``, and beside them the list of each class: present codes
    once each (at their first line; unless ``list_issued`` is false), malformed lines
    each, duplicates with their lines and places, missing codes with when and where they
    were last seen."""
    from issuer.register.bulk import display_texts

    lists: dict[str, list[dict[str, Any]]] = {key: [] for key in LINE_CLASSES}
    # issued codes straight from the columns (there may be a million), the rest line by line
    first_index: dict[str, int] = {}
    for index, (code, status) in enumerate(zip(recon.canonical, recon.statuses)):
        if list_issued and status == "issued" and code not in first_index:
            first_index[code] = index  # type: ignore[index]
    codes = list(first_index)
    times, lines = recon.times, recon.table.lines
    when, where = recon.table.role("time"), recon.table.role("where")
    for code, display in zip(codes, display_texts(recon.shape, codes)):
        index = first_index[code]
        entry: dict[str, Any] = {"code": code, "display": display, "line": lines[index], "times": times[code]}
        if when is not None:
            entry["scanned_at"] = when[index] or None
        if where is not None:
            entry["location"] = where[index] or None
        lists["issued"].append(entry)
    listed: set[str] = set()
    for index, status in enumerate(recon.statuses):
        if status == "issued":
            continue
        line = recon.line(index)
        if status == "malformed":
            lists["malformed"].append({
                "line": line.line, "scanned": line.scanned, "reason": line.detail,
                "likely": [item.as_dict() for item in line.likely], "advice": close_advice(line.likely),
                **_scan_fields(recon, line),
            })  # fmt: skip
            continue
        entry = _entry(recon, index, line)
        if entry["code"] in listed:
            continue
        listed.add(entry["code"])
        lists[status].append(entry)
    duplicates = [
        {"code": code, "display": recon.shape.display(code), "times": times, "lines": lines, "locations": places}
        for code, times, lines, places in recon.duplicates()
    ]
    missing = [
        {**item.as_dict(), "last_seen_at": iso(item.last_seen_at), "expected_place": recon.places.get(item.code)}
        for item in recon.missing_codes()
    ]
    return {
        "series": recon.series,
        "source": recon.source,
        "scope": recon.scope,
        "zone": recon.zone,
        "scans": recon.scans,
        "expected": recon.expected,
        "found": recon.found,
        "counts": dict(recon.counts),
        **lists,
        "duplicates": duplicates,
        "missing": missing,
    }


__all__ = ["REPORT_COLUMNS", "as_json", "iso", "report_rows", "write_report"]
