"""Scatter keys sealed under a key that never enters the database.

A scattered series' FF1 key is stored only *sealed*: AES-256-GCM under the register's
key file, a 32-byte key kept on the machines that issue (beside a SQLite register, in
the user's data folder for a PostgreSQL one, or wherever ``register.key_file`` /
``ISSUER_KEY_FILE`` says). A database login that may read ``series`` (a clerk's, to
issue) reads only the sealed blob, which is useless without the file; a desk that
issues scattered codes must hold the file. Losing the file means the scattered series
can no longer issue (their codes stay in the register and are still checked).

The sealed form: ``ISK1`` + a 12-byte nonce + the ciphertext with its 16-byte tag. The
associated data names the series (its key text never changes), so a blob moved from one
series to another does not open.

The key file is text: one line ``issuer-key-v1 <64 hex digits>``, created 0600 in an
owner-only folder when a register is made or upgraded to sealed keys, never replaced.
"""

from __future__ import annotations

import hashlib
import os
import secrets
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from sqlalchemy import Connection, text
from sqlalchemy.engine import URL, make_url
from sqlalchemy.orm import Session

from issuer.errors import RegisterError

MAGIC = b"ISK1"
NONCE_BYTES = 12
KEY_BYTES = 32
TAG_BYTES = 16
FILE_TAG = "issuer-key-v1"
_AAD = b"issuer scatter key\x00"
#: the name under which a session carries its register's keyring
SESSION_INFO = "issuer_keyring"


class KeyFileError(RegisterError):
    """The key file is missing, not a key file, or not the one that sealed the keys."""


def default_key_file(url: str | URL) -> Path:
    """Where a register's key file lives unless the settings say otherwise: beside a SQLite
    file (``register.sqlite.key``); for a server database, in the user's data folder under
    a name made from the server, database and schema (never the login: every login of one
    register finds the same file)."""
    parsed = make_url(url) if isinstance(url, str) else url
    if parsed.drivername.startswith("sqlite"):
        database = parsed.database or ""
        if database and database != ":memory:":
            return Path(database).with_name(Path(database).name + ".key")
    from platformdirs import user_data_dir

    options = "&".join(f"{k}={v}" for k, v in sorted(parsed.query.items()))
    place = f"{parsed.get_backend_name()}://{parsed.host or ''}:{parsed.port or ''}/{parsed.database or ''}?{options}"
    digest = hashlib.sha256(place.encode("utf-8")).hexdigest()[:24]
    return Path(user_data_dir("issuer")) / "keys" / f"{parsed.database or 'register'}-{digest}.key"


def is_sealed(blob: bytes) -> bool:
    return len(blob) == len(MAGIC) + NONCE_BYTES + KEY_BYTES + TAG_BYTES and blob.startswith(MAGIC)


def fingerprint(raw: bytes) -> str:
    """What the log records of a scatter key: a SHA-256 of the key itself (it shows a
    changed key and tells nothing about the key)."""
    return hashlib.sha256(raw).hexdigest()


@dataclass
class Keyring:
    """A register's key file, read once and kept in memory."""

    path: Path
    _key: bytes | None = field(default=None, repr=False)

    # --- the file -----------------------------------------------------------------------

    def _read(self) -> bytes:
        if self._key is not None:
            return self._key
        try:
            content = self.path.read_text("ascii")
        except FileNotFoundError:
            raise KeyFileError(
                f"no key file at {self.path}: this register's scatter keys are sealed under it; "
                "restore it from your backup, or name it with register.key_file / ISSUER_KEY_FILE"
            ) from None
        except (OSError, UnicodeDecodeError) as exc:
            reason = getattr(exc, "strerror", None) or "not text"
            raise KeyFileError(f"cannot read the key file {self.path}: {reason}") from None
        words = content.split()
        try:
            if len(words) != 2 or words[0] != FILE_TAG:
                raise ValueError
            key = bytes.fromhex(words[1])
            if len(key) != KEY_BYTES:
                raise ValueError
        except ValueError:
            raise KeyFileError(f"{self.path} is not an issuer key file (expected one line '{FILE_TAG} <64 hex digits>')") from None
        from issuer.outputs import protect

        protect(self.path)  # no output of this process may replace it
        self._key = key
        return key

    def create(self) -> bool:
        """Make the key file if there is none (owner-only, in an owner-only folder);
        whether it was made. An existing file is never replaced."""
        if self.path.exists():
            return False
        from issuer.outputs import private_folder

        try:
            private_folder(self.path.parent)
            descriptor = os.open(self.path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        except FileExistsError:
            return False
        except OSError as exc:
            raise KeyFileError(f"cannot create the key file {self.path}: {exc.strerror or exc}") from None
        key = secrets.token_bytes(KEY_BYTES)
        with os.fdopen(descriptor, "w", encoding="ascii") as handle:
            handle.write(f"{FILE_TAG} {key.hex()}\n")
            handle.flush()
            os.fsync(handle.fileno())
        self._key = None
        return True

    def ensure(self, connection: Connection) -> bool:
        """Make the key file when the register holds no sealed key yet (a new or newly
        upgraded register). A register that holds sealed keys never gets a fresh file:
        that would only turn "the file is missing" into "the file is wrong"."""
        from sqlalchemy import inspect

        if self.path.exists():
            return False
        if inspect(connection).has_table("series"):
            # a sealed blob is longer than the raw 32-byte keys of registers before sealing
            held = connection.execute(text(
                f"SELECT count(*) FROM series WHERE scatter_key IS NOT NULL AND length(scatter_key) <> {KEY_BYTES}"
            )).scalar_one()  # fmt: skip
            if held:
                return False
        return self.create()

    # --- sealing --------------------------------------------------------------------------

    def seal(self, series_key: str, raw: bytes) -> bytes:
        from cryptography.hazmat.primitives.ciphers.aead import AESGCM

        nonce = secrets.token_bytes(NONCE_BYTES)
        return MAGIC + nonce + AESGCM(self._read()).encrypt(nonce, bytes(raw), _AAD + series_key.encode("utf-8"))

    def open(self, series_key: str, blob: bytes) -> bytes:
        """The raw key of ``series_key`` from its sealed blob, or one clear line."""
        from cryptography.exceptions import InvalidTag
        from cryptography.hazmat.primitives.ciphers.aead import AESGCM

        blob = bytes(blob)
        if not is_sealed(blob):
            raise KeyFileError(f"series {series_key}: its scatter key is not sealed (run 'issuer db upgrade')")
        nonce, sealed = blob[len(MAGIC) : len(MAGIC) + NONCE_BYTES], blob[len(MAGIC) + NONCE_BYTES :]
        try:
            return AESGCM(self._read()).decrypt(nonce, sealed, _AAD + series_key.encode("utf-8"))
        except InvalidTag:
            raise KeyFileError(
                f"the key file {self.path} does not open the scatter key of series {series_key} "
                "(another register's key file, or a changed key): restore this register's key file"
            ) from None


def keyring_of(session: Session | Connection | Any) -> Keyring:
    """The keyring of the register a session belongs to."""
    found = session.info.get(SESSION_INFO)
    if found is None:
        raise KeyFileError("this session was not opened through a register: no key file to open scatter keys with")
    return found  # type: ignore[no-any-return]
