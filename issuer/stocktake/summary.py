"""A count's result as a CSV (one row per item to act on) or as JSON: the same data the
PDF report prints, for spreadsheets and other programs."""

from __future__ import annotations

import json
from collections.abc import Iterator, Sequence
from typing import IO, Any

from issuer.outputs import SafeCsvWriter
from issuer.register.counting import CountInfo
from issuer.register.scanfiles import FileInfo

#: the CSV's columns: ``code`` and ``likely_code`` canonical, ``display`` and
#: ``likely_display`` as people read them; codes in ``detail`` in display form
SUMMARY_COLUMNS = (
    "class", "code", "display", "scanned", "file", "line", "times_scanned", "expected_place", "seen_at_places",
    "likely_code", "likely_display", "likely_error", "detail",
)  # fmt: skip
#: the listed classes, in report order
LISTED = ("missing", "elsewhere", "voided", "bad_check", "not_issued", "malformed", "other_series", "out_of_scope")


def _likely(entry: dict[str, Any]) -> tuple[str, str, str]:
    options = entry.get("likely") or []
    first = options[0] if options else {}
    return (first.get("code", ""), first.get("display", ""), first.get("description", ""))


def _detail(kind: str, entry: dict[str, Any]) -> str:
    if kind == "missing":
        where = f"; last seen {entry['last_seen_at']} at {entry['last_seen_where'] or '?'}" if entry.get("last_seen_at") else ""
        perhaps = f"; perhaps scanned with a typo on {entry['perhaps']}" if entry.get("perhaps") else ""
        return f"expected, not scanned{where}{perhaps}"
    if kind == "voided":
        reason = entry.get("reason") or ""
        return f"voided: {reason}" + (
            f"; replaced by {entry.get('replacement_display') or entry['replacement']}" if entry.get("replacement") else ""
        )
    if kind == "other_series":
        return f"belongs to series {entry['series']} ({entry['status']})"
    if kind == "malformed":
        return str(entry.get("reason") or "")
    return ""


def summary_rows(result: dict[str, Any]) -> Iterator[list[Any]]:
    """The CSV's rows, header first: every listed item of every class."""
    yield list(SUMMARY_COLUMNS)
    for kind in LISTED:
        for entry in result.get(kind, []):
            likely_code, likely_display, likely_error = _likely(entry)
            yield [
                kind, entry.get("code") or "", entry.get("display") or "", entry.get("scanned", ""),
                entry.get("file", ""), entry.get("line", ""), entry.get("times", 0),
                entry.get("expected_place") or "", "; ".join(entry.get("seen_at_places", [])),
                likely_code, likely_display, likely_error, _detail(kind, entry),
            ]  # fmt: skip


def write_csv(info: CountInfo, files: Sequence[FileInfo], result: dict[str, Any], stream: IO[str]) -> None:
    writer = SafeCsvWriter(stream)
    writer.writerows(summary_rows(result))


def report_data(info: CountInfo, files: Sequence[FileInfo], result: dict[str, Any]) -> dict[str, Any]:
    """The count, its files and its result, as one JSON-ready object."""
    return {"count": info.as_dict(), "files": [item.as_dict() for item in files], "result": result}


def write_json(info: CountInfo, files: Sequence[FileInfo], result: dict[str, Any], stream: IO[str]) -> None:
    json.dump(report_data(info, files, result), stream, indent=2, default=str)
    stream.write("\n")


__all__ = ["LISTED", "SUMMARY_COLUMNS", "report_data", "summary_rows", "write_csv", "write_json"]
