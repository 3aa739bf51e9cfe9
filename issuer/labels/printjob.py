"""Print jobs: register rows onto labels, and the prints recorded only once the file exists.

This module joins two floors that know nothing of each other: the register
(:mod:`issuer.register.printing` selects codes and records prints) and the label layer
(:mod:`issuer.labels` draws them). The order is what keeps the outcome honest:

1. everything is checked and every symbol encoded before any file is touched;
2. the labels are drawn into a temporary file beside the target;
3. the prints are counted and logged in one transaction;
4. only then is the file moved onto the target name.

A failed drawing therefore logs nothing, and a failed log leaves no new file (an older
file of the same name is left as it was).
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from issuer.errors import InvalidFormat, LabelError
from issuer.labels import (
    LabelContent,
    Layout,
    RenderResult,
    output_format,
    render_labels,
    render_page_png,
    render_png,
)
from issuer.labels.design import FIELDS
from issuer.labels.fonts import font_set
from issuer.labels.printer import PrintCommand
from issuer.limits import printable
from issuer.outputs import OutputRefused, check_target, place, temporary_beside
from issuer.register.lifecycle import require_reason
from issuer.register.printing import PrintRow, PrintSelection, record_prints
from issuer.register.store import Register

#: what a label's text block can show, in the order asked for ("code": where the code goes)
LINE_FIELDS = FIELDS


def parse_lines(text: str | None) -> tuple[str, ...]:
    """``"title,holder"`` -> ``("title", "holder")``; ``"none"`` or empty -> ``()``."""
    if text is None:
        return ()
    parts = [part.strip().lower() for part in text.split(",") if part.strip()]
    if parts in ([], ["none"]):
        return ()
    unknown = [part for part in parts if part not in LINE_FIELDS]
    if unknown:
        raise InvalidFormat(
            f"unknown label line(s) {', '.join(unknown)}: choose from "
            f"{', '.join(LINE_FIELDS)} (comma-separated), or none"
        )
    if len(set(parts)) != len(parts):
        raise InvalidFormat("a label line is named twice")
    return tuple(parts)


def label_contents(
    rows: Sequence[PrintRow], lines: Sequence[str] = ("title",), caption: str | None = None
) -> list[LabelContent]:
    """The labels for ``rows``: the canonical code in the symbol, and as text the asked-for
    ``lines`` a row has (an empty one is skipped) in order, the grouped code where ``"code"``
    stands (first when it is not named) and the ``caption`` where ``"caption"`` stands (last
    when it is not named). Voided rows are marked VOID."""
    caption = (caption or "").strip() or None
    order = list(lines) if "code" in lines else ["code", *lines]
    if caption and "caption" not in order:
        order.append("caption")
    labels = []
    for row in rows:
        values = {
            "title": row.series_title, "holder": row.holder, "note": row.note, "caption": caption
        }  # fmt: skip
        shown: list[str] = []
        code_at = 0
        for name in order:
            if name == "code":
                code_at = len(shown)
            elif (values[name] or "").strip():
                # one label line: controls escaped (SVG stays XML, no font draws them), breaks as spaces
                shown.append(" ".join(printable(str(values[name])).split()))
        labels.append(LabelContent(row.code, row.display, tuple(shown), row.void, code_at))
    return labels


@dataclass(frozen=True)
class LabelOptions:
    """How to draw: the layout and symbology, start position, lines and extras."""

    layout: Layout
    symbology: str = "code128"
    skip: int = 0
    lines: tuple[str, ...] = ("title",)
    caption: str | None = None
    gs1_company_prefix: str | None = None
    outlines: bool = False
    text_beside: bool = False
    dpi: int = 300
    title: str | None = None
    fonts: tuple[str, ...] = ()  # fallback font files, in order, after the bundled faces


def options_from_settings(
    settings: Any, kind: str, layout: str | None = None, lines: str | None = None, **extra: Any
) -> LabelOptions:
    """A job's options as the config says: the named layout (or the default for the file
    kind), its fields unless ``lines`` are given, and the configured fallback fonts."""
    from issuer.labels.fonts import fallbacks_from_config
    from issuer.labels.layouts import default_layout, get_layout

    chosen = get_layout(layout or default_layout(kind), settings.section("layouts"), settings.folder)
    fields = chosen.design.fields if lines is None else None
    return LabelOptions(
        layout=chosen,
        lines=fields if fields is not None else parse_lines(lines or "title"),
        fonts=fallbacks_from_config(settings.section("labels"), settings.folder),
        **extra,
    )


@dataclass(frozen=True)
class PrintOutcome:
    """A finished job: the file, what is on it, and how many prints were logged."""

    path: Path | None  # None: sent to the printer without keeping a file
    format: str
    layout: str
    symbology: str
    labels: int
    pages: int
    skip: int
    module_mm: float
    logged: int
    reprint: bool
    void_labels: int
    description: str
    codes: tuple[str, ...]
    omitted_void: tuple[str, ...] = ()
    printed_with: str | None = None

    def as_dict(self) -> dict[str, Any]:
        data = dict(self.__dict__)
        data["path"] = None if self.path is None else str(self.path)
        data["codes"] = list(self.codes)
        data["omitted_void"] = list(self.omitted_void)
        data["module_mm"] = round(self.module_mm, 4)
        return data


def print_selection(
    register: Register,
    selection: PrintSelection,
    out: str | os.PathLike[str] | None,
    options: LabelOptions,
    *,
    reason: str | None = None,
    reprint: bool = False,
    progress: Callable[[int], None] | None = None,
    printer: PrintCommand | None = None,
    force: bool = False,
) -> PrintOutcome:
    """Draw ``selection`` to ``out`` (``.pdf`` sheet, or one label as ``.png``/``.svg``)
    and record one print per code — or a reprint, which needs a ``reason``.

    With a ``printer``, the finished PDF is handed to that print command once the prints
    are written, before they are committed: a failed command counts nothing. ``out`` may
    then be None (the PDF is kept only while the command reads it).

    ``progress`` is called with the number of labels drawn so far. On any error nothing
    is logged and no new file is left behind. An existing ``out`` is replaced only with
    ``force`` (never a register or a non-file: :mod:`issuer.outputs`).
    """
    if reprint:
        reason = require_reason(reason)
    if out is not None:
        check_target(out, force=force, what="--out")
    if out is None and printer is None:
        raise LabelError("name a file to write (--out) or send the labels to a printer (--print)")
    with tempfile.TemporaryDirectory(prefix="issuer-print-") as spool:
        # without --out, the PDF lives in a private folder only while the printer takes it
        target = Path(out) if out is not None else Path(spool) / "labels.pdf"
        outcome = _print_to(
            register,
            selection,
            target,
            options,
            reason,
            reprint,
            progress,
            printer,
            out is not None,
            force,
        )
        return outcome if out is not None else replace(outcome, path=None)


def _print_to(
    register: Register,
    selection: PrintSelection,
    target: Path,
    options: LabelOptions,
    reason: str | None,
    reprint: bool,
    progress: Callable[[int], None] | None,
    printer: PrintCommand | None,
    named: bool,
    force: bool,
) -> PrintOutcome:
    kind = output_format(target)
    if printer is not None and kind != "pdf":
        raise LabelError(f"--print sends a PDF; write the labels to a .pdf, not a .{kind}")
    target = check_target(target, force=force, what="--out")
    labels = label_contents(selection.rows, options.lines, options.caption)
    # the suffix stays, so the renderer writes the same format
    temp, note = temporary_beside(target, suffix=f".{kind}")
    keep = False
    try:
        result = render_labels(
            labels,
            options.layout,
            temp,
            symbology=options.symbology,
            skip=options.skip,
            gs1_company_prefix=options.gs1_company_prefix,
            dpi=options.dpi,
            title=options.title,
            outlines=options.outlines,
            text_beside=options.text_beside,
            fonts=font_set(options.fonts),
            progress=progress,
        )
        extra: dict[str, Any] = {}
        if options.gs1_company_prefix is not None:
            extra["gs1_company_prefix"] = options.gs1_company_prefix
        if printer is not None:
            extra["printed_with"] = printer.name
        logged = record_prints(
            register,
            selection.codes,
            reason=reason,
            reprint=reprint,
            layout=options.layout.name,
            symbology=result.symbology,
            file=target.name if named else None,
            void_labels=[row.code for row in selection.rows if row.void],
            extra=extra,
            before_commit=None if printer is None else lambda: printer.send(temp),
        )
        try:
            place(temp, target, force=force)
        except (OSError, OutputRefused) as exc:
            keep = True
            why = exc.message if isinstance(exc, OutputRefused) else exc.strerror
            raise LabelError(
                f"the labels were drawn and recorded as printed, but could not be moved to "
                f"{os.fspath(target)!r} ({why}); they are in {os.fspath(temp)!r}"
            ) from None
    finally:
        if not keep:
            temp.unlink(missing_ok=True)
        if note is not None:
            note.unlink(missing_ok=True)
    return PrintOutcome(
        path=target,
        format=kind,
        layout=options.layout.name,
        symbology=result.symbology,
        labels=result.labels,
        pages=result.pages,
        skip=result.skip,
        module_mm=result.module_mm,
        logged=logged,
        reprint=reprint,
        void_labels=sum(1 for row in selection.rows if row.void),
        description=selection.description,
        codes=tuple(selection.codes),
        omitted_void=selection.omitted_void,
        printed_with=None if printer is None else printer.name,
    )


def proof_selection(
    selection: PrintSelection,
    out: str | os.PathLike[str],
    options: LabelOptions,
    *,
    force: bool = False,
) -> RenderResult:
    """A proof to look at before printing: the first label (or, with ``options.outlines``,
    the first sheet with its cell outlines) as a PNG at 100 % scale. Nothing is recorded:
    a proof is not a print. An existing file is replaced only with ``force``."""
    if output_format(out) != "png":
        raise LabelError(f"a proof is a PNG image: name it ….png, not {os.fspath(out)!r}")
    check_target(out, force=force, what="--proof")
    labels = label_contents(selection.rows, options.lines, options.caption)
    if not labels:
        raise LabelError("nothing to print: the selection is empty")
    common: dict[str, Any] = {
        "symbology": options.symbology,
        "dpi": options.dpi,
        "gs1_company_prefix": options.gs1_company_prefix,
        "text_beside": options.text_beside,
        "fonts": font_set(options.fonts),
    }
    if options.outlines:
        return render_page_png(labels, options.layout, out, skip=options.skip, **common)
    return render_png(labels[0], options.layout, out, **common)
