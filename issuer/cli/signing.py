"""The log's signing key and signed statements as the commands read them: ``--key``, the
config's ``signing_key``, and one line for a file that cannot be read."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer

KeyOption = Annotated[
    Path | None,
    typer.Option(
        "--key",
        help="The Ed25519 signing key (PEM). Default: [register] signing_key in the config.",
        dir_okay=False,
        show_default=False,
    ),
]


def signing_key_path(key: Any) -> Any:
    """The signing key's path: --key, else the config's; one line when neither names one."""
    from issuer.config import load_settings
    from issuer.errors import InvalidFormat

    path = key if key is not None else load_settings().signing_key()
    if path is None:
        raise InvalidFormat(
            "no signing key: give --key PATH or set signing_key in the config's [register] table "
            "(make one with 'issuer log new-key --key PATH')"
        )
    return path


def read_key_file(path: Path, what: str) -> bytes:
    from issuer.errors import InvalidFormat

    try:
        return path.expanduser().read_bytes()
    except OSError as exc:
        raise InvalidFormat(f"cannot read the {what} {path}: {exc.strerror or exc}") from None


def read_statement(path: Any, what: str) -> str:
    from issuer.errors import InvalidFormat

    data = read_key_file(path, what)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise InvalidFormat(f"the {what} {path} is not UTF-8 text") from None


