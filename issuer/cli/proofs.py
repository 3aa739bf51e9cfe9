"""``--proof`` and ``--print`` of ``issuer labels`` and ``issuer reprint``: a look at the
labels before printing, and the finished PDF handed straight to the label printer."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

from issuer.cli.common import console, print_json

ProofOption = Annotated[
    Path | None,
    typer.Option(
        "--proof",
        help="Draw a proof instead of printing: the first label (with --outlines, the "
        "first sheet) as a PNG at 100 % scale, to look at before printing a batch. "
        "Nothing is recorded as printed.",
        show_default=False,
    ),
]
PrintOption = Annotated[
    bool,
    typer.Option(
        "--print",
        help="Hand the finished PDF to the print command in the config ([printing] command, "
        "or the layout's print_command). The prints are counted only if the command "
        "succeeds. With --out the PDF is kept too.",
    ),
]


def check_targets(out: Path | None, proof: Path | None, send: bool) -> None:
    """One way out per run: a file, the printer (and a file), or a proof."""
    if proof is not None and (out is not None or send):
        raise typer.BadParameter("--proof draws a preview only; leave out --out and --print")
    if proof is None and out is None and not send:
        raise typer.BadParameter("name a file with --out, send to the printer with --print, "
                                 "or draw a --proof")  # fmt: skip


def run_proof(
    register: Any, selection: Any, proof: Path, options: Any, as_json: bool, force: bool
) -> None:
    """Draw the proof of ``selection`` (a register read; nothing written)."""
    from issuer.labels.printjob import proof_selection

    result = proof_selection(selection, proof, options, force=force)
    what = "the first sheet" if options.outlines else "the first label"
    if as_json:
        print_json(
            {
                "proof": str(result.path),
                "shows": "sheet" if options.outlines else "label",
                "layout": options.layout.name,
                "labels": result.labels,
                "selected": len(selection.rows),
                "dpi": result.dpi,
                "recorded": 0,
            }
        )
        return
    console().print(
        f"Proof of {what} ({result.labels} of {len(selection.rows):,} selected; layout "
        f"{options.layout.name}) written to {result.path} at 100 % scale ({result.dpi} dpi). "
        "Nothing was recorded as printed.",
        markup=False,
        soft_wrap=True,
    )
