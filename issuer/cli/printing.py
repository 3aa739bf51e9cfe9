"""``issuer labels`` and ``issuer reprint``: print-ready labels from the register.

Thin: the codes are chosen by :func:`issuer.register.printing.select_for_printing`,
drawn and recorded by :func:`issuer.labels.printjob.print_selection`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

from issuer.cli.common import (
    PERSONAL_DATA_CAUTION,
    ActorOption,
    DbOption,
    ForceOption,
    JsonOption,
    command_set,
    console,
    open_register_from_options,
    print_json,
    progress_bar,
)
from issuer.cli.label_options import (
    BarcodeOption,
    BesideOption,
    CaptionOption,
    DpiOption,
    GS1Option,
    LayoutOption,
    LinesOption,
    OutlinesOption,
    OutOption,
    SkipOption,
    VoidLabelsOption,
)
from issuer.cli.proofs import PrintOption, ProofOption

commands = command_set()

#: jobs of at least this many labels show a progress bar (about a second of drawing)
PROGRESS_FROM = 1000
_SYMBOLOGY_NAMES = {"code128": "Code 128", "qr": "QR Code", "datamatrix": "Data Matrix"}

SCALE_HELP = (
    'Print at 100 % scale (actual size), never "fit to page": only then do the labels have '
    "the layout's stated dimensions and the barcodes their module size and quiet zones."
)
LABELS_HELP = (
    "Print labels for issued codes: a PDF sheet, or one label as PNG or SVG.\n\n"
    "Choose the codes one way: name them, or --batch ID (issue order), or --series KEY, "
    "optionally --from CODE --to CODE, both included (an in-order series runs by number, "
    "a scattered one by issue order). Each code's print count goes up by one and a "
    '"print" entry is logged, only once the file is complete. Voided codes are refused '
    "unless --void-labels (printed marked VOID) or --without-void (left out).\n\n"
    f"{SCALE_HELP}\n\n"
    "A check character catches mistakes, not fraud; a printed scattered number is public."
)
REPRINT_HELP = (
    "Print labels again for codes already issued (a damaged, faded or lost label): each "
    'code\'s print count goes up by one and a "reprint" entry logs who reprinted and why '
    "(--reason is required). 'issuer history CODE' shows every print.\n\n"
    f"{SCALE_HELP}"
)


def _run(
    *,
    codes: list[str] | None,
    batch: int | None,
    series: str | None,
    first: str | None,
    last: str | None,
    out: Path | None,
    barcode: str,
    layout: str | None,
    skip: int,
    lines: str | None,
    caption: str | None,
    void: str,
    gs1_prefix: str | None,
    outlines: bool,
    text_beside: bool,
    dpi: int,
    db: str | None,
    actor: str | None,
    as_json: bool,
    reason: str | None = None,
    reprint: bool = False,
    force: bool = False,
    proof: Path | None = None,
    send: bool = False,
) -> None:
    from issuer import limits
    from issuer.cli.proofs import check_targets, run_proof
    from issuer.config import load_settings
    from issuer.labels import output_format
    from issuer.labels.printer import print_command
    from issuer.labels.printjob import options_from_settings, print_selection
    from issuer.register.lifecycle import require_reason

    # everything that needs no register is checked first
    if reprint:
        reason = require_reason(reason)
    limits.number("batch", batch, label="--batch")
    limits.text("title", caption, label="--caption")
    check_targets(out, proof, send)
    kind = output_format(out) if out is not None else "pdf"
    settings = load_settings(database=db, actor=actor)
    options = options_from_settings(
        settings, kind, layout, lines, symbology=barcode, skip=skip, caption=caption,
        gs1_company_prefix=gs1_prefix, outlines=outlines, text_beside=text_beside, dpi=dpi,
    )  # fmt: skip
    printer = print_command(options.layout, settings.section("printing")) if send else None
    from issuer.cli.interrupts import now, truthful_interrupt

    register = open_register_from_options(db, actor)
    told = _print_told(out, now())
    try:
        with truthful_interrupt(lambda: register, ("print", "reprint"), told):
            selection = _select(register, codes, batch, series, first, last, void, reprint)
            if proof is not None:
                run_proof(register, selection, proof, options, as_json, force)
                return
            total = len(selection.rows)
            with progress_bar(total, f"Drawing {total:,} labels", show_from=PROGRESS_FROM) as advance:
                drawn = [0]

                def progress(done: int) -> None:
                    advance(done - drawn[0])
                    drawn[0] = done

                outcome = print_selection(
                    register, selection, out, options, reason=reason, reprint=reprint,
                    progress=progress, printer=printer, force=force,
                )  # fmt: skip
    finally:
        register.close()
    if as_json:
        data = outcome.as_dict()
        data["actor"] = register.actor
        if reason is not None:
            data["reason"] = reason
        print_json(data)
        return
    # the caution where it means something: people's names on labels, not a shelf's
    people = "holder" in options.lines and any(
        row.holds_people and row.holder for row in selection.rows
    )
    _summary(outcome, register.actor, reason, people)


def _select(register: Any, codes: list[str] | None, batch: int | None, series: str | None,
            first: str | None, last: str | None, void: str, reprint: bool) -> Any:
    from issuer.register.printing import VoidedInSelection, select_for_printing

    try:
        return select_for_printing(
            register, codes=codes or (), batch=batch, series=series, first=first, last=last,
            void=void,
        )  # fmt: skip
    except VoidedInSelection as exc:
        ways = "--void-labels" if reprint else "--void-labels, or leave them out with --without-void"
        raise VoidedInSelection(f"{exc.message} ({ways})") from None


def _print_told(out: Path | None, started: float) -> Any:
    """What an interrupted print says: recorded or not, and whether the file is there."""
    from issuer.cli.interrupts import written_since

    def tell(done: Any) -> str:
        written = written_since(out, started)
        if not done:
            where = "" if out is None else f"; {out} was {'written' if written else 'not written'}"
            return f"nothing was recorded as printed{where}"
        told = f"{done.entries:,} label(s) were recorded as printed (log entries {done.first_id}-{done.last_id})"
        if out is None or written:
            return told + ("" if out is None else f"; {out} holds them")
        return f"{told}, but {out} was not written: draw them again with 'issuer reprint CODE... --reason ... --out FILE'"

    return tell


def _summary(outcome: Any, actor: str, reason: str | None, holder: bool) -> None:
    out = console()
    symbology = _SYMBOLOGY_NAMES.get(outcome.symbology, outcome.symbology)
    n = outcome.labels
    labels = f"{n:,} label{'s' if n != 1 else ''}"
    if outcome.format == "pdf":
        pages = f" on {outcome.pages} page{'s' if outcome.pages != 1 else ''}"
    else:
        pages = ""
    where = [] if outcome.path is None else [f"written to {outcome.path}"]
    if outcome.printed_with:
        where.append(f"sent to the printer with {outcome.printed_with}")
    out.print(
        f"{labels}{pages} {' and '.join(where)} ({outcome.description}; layout "
        f"{outcome.layout}, {symbology}). Print at 100 % scale (actual size).",
        markup=False,
        soft_wrap=True,
    )
    act = "reprint" if outcome.reprint else "print"
    logged = f"Logged {outcome.logged:,} {act}{'s' if outcome.logged != 1 else ''} by {actor}"
    out.print(
        logged + (f": {reason}" if reason else "") + "; print counts went up by one.",
        markup=False,
        soft_wrap=True,
    )
    if outcome.void_labels:
        out.print(f"{outcome.void_labels} label(s) are marked VOID.", markup=False, soft_wrap=True)
    if outcome.omitted_void:
        shown = ", ".join(outcome.omitted_void[:5])
        more = len(outcome.omitted_void) - 5
        out.print(
            f"Left out {len(outcome.omitted_void)} voided or suspended code(s): {shown}"
            + (f" and {more} more" if more > 0 else ""),
            markup=False,
            soft_wrap=True,
        )
    if holder:
        out.print(PERSONAL_DATA_CAUTION, style="dim", markup=False)


def _void_mode(void_labels: bool, without_void: bool) -> str:
    from issuer.register.printing import VOID_MARK, VOID_OMIT, VOID_REFUSE

    if void_labels and without_void:
        raise typer.BadParameter("give --void-labels or --without-void, not both")
    return VOID_MARK if void_labels else VOID_OMIT if without_void else VOID_REFUSE


@commands.command("labels", help=LABELS_HELP)
def labels(
    codes: Annotated[
        list[str] | None,
        typer.Argument(
            help="Codes to print, as typed or scanned, in label order.", show_default=False
        ),
    ] = None,
    *,
    out: OutOption = None,
    batch: Annotated[
        int | None,
        typer.Option(
            "--batch", help="Print every code of this batch, in issue order.", show_default=False
        ),
    ] = None,
    series: Annotated[
        str | None,
        typer.Option(
            "--series",
            help="Print the codes of this series: an in-order series by number, a "
            "scattered series by issue order.",
            show_default=False,
        ),
    ] = None,
    first: Annotated[
        str | None,
        typer.Option(
            "--from", help="With --series: start at this code (included).", show_default=False
        ),
    ] = None,
    last: Annotated[
        str | None,
        typer.Option(
            "--to", help="With --series: end at this code (included).", show_default=False
        ),
    ] = None,
    barcode: BarcodeOption = "code128",
    layout: LayoutOption = None,
    skip: SkipOption = 0,
    lines: LinesOption = None,
    caption: CaptionOption = None,
    void_labels: VoidLabelsOption = False,
    without_void: Annotated[
        bool,
        typer.Option(
            "--without-void", help="Leave voided codes out of the selection instead of refusing it."
        ),
    ] = False,
    gs1_prefix: GS1Option = None,
    outlines: OutlinesOption = False,
    text_beside: BesideOption = False,
    dpi: DpiOption = 300,
    proof: ProofOption = None,
    send: PrintOption = False,
    force: ForceOption = False,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Print labels for issued codes (see LABELS_HELP)."""
    _run(
        codes=codes, batch=batch, series=series, first=first, last=last, out=out,
        barcode=barcode, layout=layout, skip=skip, lines=lines, caption=caption,
        void=_void_mode(void_labels, without_void), gs1_prefix=gs1_prefix,
        outlines=outlines, text_beside=text_beside, dpi=dpi, db=db, actor=actor,
        as_json=as_json, proof=proof, send=send, force=force,
    )  # fmt: skip


@commands.command("reprint", help=REPRINT_HELP)
def reprint(
    codes: Annotated[
        list[str],
        typer.Argument(
            help="Codes to print again, as typed or scanned, in label order.", show_default=False
        ),
    ],
    *,
    out: OutOption = None,
    reason: Annotated[
        str,
        typer.Option(
            "--reason",
            help="Why (damaged, faded, lost label...): it goes into the log with who reprinted.",
            show_default=False,
        ),
    ],
    barcode: BarcodeOption = "code128",
    layout: LayoutOption = None,
    skip: SkipOption = 0,
    lines: LinesOption = None,
    caption: CaptionOption = None,
    void_labels: VoidLabelsOption = False,
    gs1_prefix: GS1Option = None,
    outlines: OutlinesOption = False,
    text_beside: BesideOption = False,
    dpi: DpiOption = 300,
    proof: ProofOption = None,
    send: PrintOption = False,
    force: ForceOption = False,
    db: DbOption = None,
    actor: ActorOption = None,
    as_json: JsonOption = False,
) -> None:
    """Print labels again (see REPRINT_HELP)."""
    _run(
        codes=codes, batch=None, series=None, first=None, last=None, out=out,
        barcode=barcode, layout=layout, skip=skip, lines=lines, caption=caption,
        void=_void_mode(void_labels, False), gs1_prefix=gs1_prefix, outlines=outlines,
        text_beside=text_beside, dpi=dpi, db=db, actor=actor, as_json=as_json,
        reason=reason, reprint=True, proof=proof, send=send, force=force,
    )  # fmt: skip
