"""``issuer log`` signing commands: the signing key (new-key, public-key), signed
checkpoints of the sealed log and offline checks of inclusion receipts.

:mod:`issuer.cli.logcmd` adds these functions to the ``log`` group.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from issuer.cli.common import DbOption, JsonOption, console, open_existing_from_options, print_json
from issuer.cli.signing import KeyOption, read_key_file, read_statement, signing_key_path


def log_new_key(
    *,
    key: KeyOption = None,
    force: Annotated[bool, typer.Option("--force", help="Replace an existing key file.")] = False,
) -> None:
    """Make an Ed25519 key to sign the log's checkpoints and receipts.

    Writes the private key (owner-only) and, beside it, KEY.pub, the public key to publish.
    Keep the private key outside the register and away from anyone who can edit the register.
    """
    from issuer.outputs import check_target, output_text
    from issuer.proofs.statements import fingerprint, new_private_key_pem, public_key_pem

    path = Path(signing_key_path(key)).expanduser()
    public = path.with_name(path.name + ".pub")
    check_target(path, force=force, what="key file")
    check_target(public, force=force, what="public key file")
    private = new_private_key_pem()
    with output_text(path, force=force, what="key file") as stream:
        stream.write(private.decode())
    with output_text(public, force=force, what="public key file") as stream:
        stream.write(public_key_pem(private).decode())
    console().print(f"Signing key written to {path}; publish {public} (key {fingerprint(public_key_pem(private))})")


def log_public_key(*, key: KeyOption = None) -> None:
    """Print the signing key's public half (PEM), to publish where checkers find it."""
    from issuer.proofs.statements import public_key_pem

    typer.echo(public_key_pem(read_key_file(signing_key_path(key), "signing key")).decode(), nl=False)


def log_checkpoint(
    *,
    key: KeyOption = None,
    out: Annotated[
        Path | None, typer.Option("--out", help="Write the checkpoint to this file (default: print it).", dir_okay=False)
    ] = None,
    force: Annotated[bool, typer.Option("--force", help="Replace an existing --out file.")] = False,
    db: DbOption = None,
    as_json: JsonOption = False,
) -> None:
    """Seal the log and write a signed checkpoint: the Merkle tree's size and root.

    Keep or publish it; later 'issuer log verify --checkpoint FILE' proves the log still
    extends it (nothing in it was changed or removed).
    """
    from issuer.outputs import check_target, output_text
    from issuer.register.checkpoints import make_checkpoint

    private = read_key_file(signing_key_path(key), "signing key")
    if out is not None:
        check_target(out, force=force, what="checkpoint file")
    register = open_existing_from_options(db)
    checkpoint = make_checkpoint(register, private)
    register.close()
    if out is not None:
        with output_text(out, force=force, what="checkpoint file") as stream:
            stream.write(checkpoint.text())
    if as_json:
        print_json({"size": checkpoint.size, "root": checkpoint.root.hex(), "at": checkpoint.at,
                    "key": checkpoint.key, "text": checkpoint.text()})  # fmt: skip
    elif out is None:
        typer.echo(checkpoint.text(), nl=False)
    else:
        console().print(f"Checkpoint of {checkpoint.size:,} leaves written to {out}")


def log_check_receipt(
    receipt: Annotated[Path, typer.Argument(help="The receipt file ('issuer issue --receipt').", dir_okay=False)],
    *,
    public_key: Annotated[
        Path, typer.Option("--public-key", help="The log's published public key (PEM).", dir_okay=False)
    ],
    as_json: JsonOption = False,
) -> None:
    """Check an inclusion receipt offline: signed by the key, and its entry is in the signed tree.

    Needs only the receipt and the public key, never the register. Exit 0 when it holds;
    a wrong key or an altered receipt is one line and exit 2.
    """
    import json

    from issuer.proofs.statements import check_receipt, parse_receipt

    found = parse_receipt(read_statement(receipt, "receipt"), str(receipt))
    check_receipt(found, read_key_file(public_key, "public key"))
    entry = json.loads(found.entry)
    if as_json:
        print_json({"holds": True, "entry": entry, "entry_hash": found.entry_hash, "index": found.index,
                    "size": found.checkpoint.size, "root": found.checkpoint.root.hex(),
                    "at": found.checkpoint.at})  # fmt: skip
        return
    what = ", ".join(f"{k} {entry[k]}" for k in ("action", "code", "batch") if entry.get(k) is not None)
    console().print(
        f"[green]Receipt holds[/]: entry {entry['id']} ({what}) is leaf {found.index} of the tree of "
        f"{found.checkpoint.size:,} signed at {found.checkpoint.at}"
    )
