"""``issuer log``: the logged acts, filtered; subcommands check the chain."""

from __future__ import annotations

from datetime import datetime
from pathlib import Path
from typing import Annotated, Any

import typer

from issuer.cli.common import (
    DbOption,
    JsonOption,
    command_set,
    console,
    err_console,
    open_existing_from_options,
    open_register_from_options,
    print_json,
    shown,
)
from issuer.cli.logkeys import log_check_receipt, log_checkpoint, log_new_key, log_public_key
from issuer.cli.signing import KeyOption, read_key_file, read_statement, signing_key_path

commands = command_set()

log_app = typer.Typer(
    help="Show the log of who did what and when; 'log verify' checks that nobody edited it.",
    invoke_without_command=True,
    no_args_is_help=False,
)
commands.add_typer(log_app, name="log")


def parse_since(text: str | None) -> datetime | None:
    from issuer import limits

    return None if text is None else limits.moment("--since", text)


@log_app.callback()
def show_log(
    ctx: typer.Context,
    *,
    series: Annotated[str | None, typer.Option("--series", help="Only this series' entries.")] = None,
    by: Annotated[
        str | None, typer.Option("--actor", help="Only entries by this person (as logged).")
    ] = None,
    since: Annotated[
        str | None, typer.Option("--since", help="Only entries at or after this date/time (UTC), e.g. 2026-03-01.")
    ] = None,
    last: Annotated[int | None, typer.Option("--last", help="Only the newest N entries.", min=1)] = None,
    entries: Annotated[
        bool,
        typer.Option("--entries", help="Every log entry on its own line (default: one line per act, a batch or print job summed up)."),
    ] = False,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """List logged acts, oldest first (filter with --series, --actor, --since, --last).

    One line per act: a print of 300 labels or a stocktake's sightings is one line;
    --entries shows every entry. --json always lists every entry.
    """
    if ctx.invoked_subcommand is not None:
        return
    from issuer import limits
    from issuer.register.lifecycle import log_entries

    limits.number("entries", last, label="--last")
    register = open_register_from_options(db, None)
    with register.reading() as session:
        events = log_entries(session, series=series, actor=by, since=parse_since(since), limit=last)
    if as_json:
        print_json([event.as_dict() for event in events])
        return
    if entries:
        _render_entries(events)
    else:
        _render_acts(events)


def _render_entries(events: list[Any]) -> None:
    from issuer.cli.blocks import Rows

    rows = Rows(("#", "when (UTC)", "who", "act", "series", "code", "batch", "details"), title="Log",
                heading=(0, 1, 3))
    for event in events:
        rows.add_row(
            str(event.id),
            event.at.strftime("%Y-%m-%d %H:%M:%S"),
            shown(event.actor),
            event.action,
            event.series or "",
            shown(event.display or ""),
            str(event.batch or ""),
            shown(_detail_summary(event.shown_detail)),
        )
    rows.print(console())


def _render_acts(events: list[Any]) -> None:
    from issuer.cli.blocks import Rows
    from issuer.register.acts import group_acts

    rows = Rows(("#", "when (UTC)", "who", "act", "series", "what", "details"), title="Log", heading=(0, 1, 3))
    at = 0
    for act in group_acts(events):
        # an act is ``entries`` consecutive events: their codes and details as people read them
        group = events[at: at + act.entries]
        at += act.entries
        displays = {e.code: e.display or e.code for e in group if e.code}
        detail = next(
            (e.shown_detail for e in group if e.action == act.action and e.detail == act.detail), act.detail
        )
        number = str(act.first_id) if act.entries == 1 else f"{act.first_id}-{act.last_id}"
        rows.add_row(
            number,
            act.at.strftime("%Y-%m-%d %H:%M:%S"),
            shown(act.actor),
            act.action,
            act.series or "",
            shown(_what(act, displays)),
            shown(_detail_summary(detail, brief=True)),
        )
    rows.print(console())


def _what(act: Any, displays: dict[str, str] | None = None) -> str:
    """The codes an act touched, summed up in display form: one code, or how many from
    first to last."""
    seen = displays or {}
    codes = [seen.get(code, code) for code in act.codes]
    parts = []
    if act.batch:
        parts.append(f"batch {act.batch}")
    if 0 < len(codes) <= 3:
        parts.append(", ".join(codes))
    elif codes:
        parts.append(f"{len(codes):,} codes, {codes[0]} .. {codes[-1]}")
    return ", ".join(parts)


#: an act's line shows at most this much of its details (--entries and --json show all)
BRIEF_DETAILS = 72


def _detail_summary(detail: str, *, brief: bool = False) -> str:
    import json

    data = json.loads(detail)
    data.pop("codes_sha256", None)
    if brief:
        # nested records (what a replay checks against) belong to --entries, not the act's line
        data = {key: value for key, value in data.items() if not isinstance(value, dict | list)}
    text = ", ".join(f"{key}={value}" for key, value in data.items())
    if brief and len(text) > BRIEF_DETAILS:
        text = text[: BRIEF_DETAILS - 1].rstrip(", ") + "…"
    return text


TAMPER_NOTE = (
    "The chain shows edits made behind issuer's back; someone able to rewrite the whole "
    "log and its head can hide them: compare with an anchor written down elsewhere "
    "('issuer log anchor')."
)


# --- issuer log verify / anchor -----------------------------------------------------


@log_app.command("verify")
def log_verify(
    *,
    checkpoint: Annotated[
        Path | None,
        typer.Option(
            "--checkpoint",
            help="A signed checkpoint ('issuer log checkpoint'): prove the log extends it with a "
            "Merkle consistency proof.",
            dir_okay=False,
        ),
    ] = None,
    public_key: Annotated[
        Path | None,
        typer.Option(
            "--public-key",
            help="The public key that signed --checkpoint (default: the public half of --key or of "
            "the configured signing key).",
            dir_okay=False,
        ),
    ] = None,
    key: KeyOption = None,
    anchor: Annotated[
        list[str] | None,
        typer.Option(
            "--anchor",
            help="An anchor written down earlier (tree:SIZE:ROOT from 'issuer log anchor'; or ID:HASH "
            "from an older issuer, checking that entry's chain up to it). Repeat for several.",
        ),
    ] = None,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Recompute the log's hash chain and name the first entry edited behind issuer's back.

    Reports the first entry altered, deleted or inserted. Exit 1 when the chain or an
    anchor does not hold. Someone able to rewrite the whole chain and its head can hide
    an edit: check against an anchor written down elsewhere ('issuer log anchor').
    """
    from issuer.register.anchors import parse_anchor, verify_log

    anchors = [parse_anchor(value) for value in anchor or []]
    signed, public = _checkpoint_and_key(checkpoint, public_key, key)
    register = open_existing_from_options(db)
    if as_json:
        report, checks = verify_log(register, anchors)
    else:
        with err_console().status("Recomputing the log's hash chain"):
            report, checks = verify_log(register, anchors)
    extension = _extends(register, signed, public) if signed is not None else None
    register.close()
    broken = report.problem is not None or any(not check.holds for check in checks)
    if as_json:
        print_json({
            "intact": report.intact,
            "entries": report.entries,
            "head": {"id": report.head_id, "hash": report.head_hash},
            "problem": None if report.problem is None else {
                "entry": report.problem.entry_id, "problem": report.problem.problem,
            },
            "anchors": [
                {"anchor": str(check.anchor), "holds": check.holds, "problem": check.problem}
                for check in checks
            ],
            "tree": {"size": report.tree_size, "root": report.tree_root},
            "chains": report.chains,
            "checkpoint": extension,
        })
    else:
        out = console()
        if report.problem is None:
            out.print(
                f"[green]Log intact[/]: {report.entries:,} entries in {report.chains} chain(s); "
                f"sealed tree tree:{report.tree_size}:{report.tree_root}"
            )
        else:
            out.print(
                f"[bold red]Log broken at entry {report.problem.entry_id}[/]: {report.problem.problem}"
            )
        for check in checks:
            if check.holds:
                out.print(f"[green]Anchor holds[/]: {check.anchor.entry_id} is unchanged")
            else:
                out.print(f"[bold red]Anchor fails[/]: {check.problem}")
        if extension is not None:
            out.print(
                f"[green]Checkpoint holds[/]: the log's {extension['size']:,} sealed leaves extend the "
                f"{extension['from']:,} signed at {extension['signed_at']} (consistency proof of "
                f"{len(extension['proof'])} hashes)"
            )
        out.print(TAMPER_NOTE, style="dim")
    if broken:
        raise typer.Exit(1)


def _checkpoint_and_key(path: Any, public_key: Any, key: Any) -> tuple[Any, bytes | None]:
    """The parsed checkpoint and the public key to check it with (read before the register opens)."""
    if path is None:
        return None, None
    from issuer.proofs.statements import parse_checkpoint, public_key_pem

    signed = parse_checkpoint(read_statement(path, "checkpoint"), str(path))
    if public_key is not None:
        return signed, read_key_file(public_key, "public key")
    return signed, public_key_pem(read_key_file(signing_key_path(key), "signing key"))


def _extends(register: Any, signed: Any, public: Any) -> dict[str, Any]:
    """The consistency proof from the checkpoint to the log now, checked as a verifier
    would (checkpoint, proof and public key): raises ProofFailed when it does not hold."""
    from issuer.errors import ProofFailed
    from issuer.proofs.merkle import verify_consistency
    from issuer.proofs.statements import check_checkpoint
    from issuer.register.checkpoints import extension_proof

    check_checkpoint(signed, public)
    size, root, proof = extension_proof(register, signed)
    if not verify_consistency(signed.size, size, proof, signed.root, root):
        raise ProofFailed(
            f"the log does not extend the checkpoint: its first {signed.size:,} leaves are no longer the ones signed"
        )
    return {"from": signed.size, "signed_at": signed.at, "size": size, "root": root.hex(),
            "proof": [node.hex() for node in proof]}  # fmt: skip


@log_app.command("anchor")
def log_anchor(db: DbOption = None, as_json: JsonOption = False) -> None:
    """Seal the log and print its Merkle tree as tree:SIZE:ROOT, to write down or publish elsewhere.

    Later, 'issuer log verify --anchor tree:SIZE:ROOT' shows whether any entry sealed then
    changed or went missing, on any series' chain.
    """
    from issuer.register.anchors import current_anchor

    register = open_existing_from_options(db)
    anchor, at = current_anchor(register)
    register.close()
    if as_json:
        print_json({"size": anchor.entry_id, "root": anchor.hash, "at": at, "anchor": str(anchor)})
        return
    if anchor.entry_id == 0:
        console().print("The log is empty; there is nothing to anchor yet.")
        return
    typer.echo(str(anchor))
    when = f" (entry of {at:%Y-%m-%d %H:%M:%S} UTC)" if at is not None else ""
    err_console().print(
        f"Write this down or publish it somewhere the register cannot reach{when}; "
        "check it later with: issuer log verify --anchor tree:SIZE:ROOT",
        style="dim",
    )


# --- signed checkpoints and receipts (issuer/cli/logkeys.py) --------------------------

log_app.command("new-key")(log_new_key)
log_app.command("public-key")(log_public_key)
log_app.command("checkpoint")(log_checkpoint)
log_app.command("check-receipt")(log_check_receipt)
