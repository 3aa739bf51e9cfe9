"""Signed statements about the log, as small text files anyone can check offline.

A **checkpoint** says how many leaves the log's Merkle tree had and what its root was,
signed with Ed25519 (RFC 8032) by the register keeper's key::

    issuer log checkpoint v1
    size 1042
    root 5dc9da79a70659a9ad559cb701ded9a2ab9d823aad2f4960cfe370eff4604328
    at 2026-12-02T17:40:11Z
    key 3b4c...  (SHA-256 of the raw 32-byte public key, hex)
    signature <base64 of the 64-byte signature>

The signature covers the exact bytes of every line before ``signature`` (each ending in
a line feed, UTF-8). A **receipt** shows one log entry is a leaf of a checkpointed tree::

    issuer log receipt v1
    entry {"action":"issue",...}   the entry's canonical JSON: its SHA-256 is the entry hash
    index 7                        the leaf's position (from 0)
    path <hex>                     the audit path, leaf upwards, one line per node
    issuer log checkpoint v1       the checkpoint it is checked against, as above
    ...

The Merkle leaf of an entry is its 32-byte hash (leaf hash ``SHA-256(0x00 || hash)``).
Checking needs the statement and the public key only, never the register.
"""

from __future__ import annotations

import base64
import hashlib
from dataclasses import dataclass
from typing import TYPE_CHECKING

from issuer.errors import InvalidFormat, ProofFailed
from issuer.proofs import merkle

if TYPE_CHECKING:
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

CHECKPOINT_TITLE = "issuer log checkpoint v1"
RECEIPT_TITLE = "issuer log receipt v1"


# --- keys ----------------------------------------------------------------------------


def new_private_key_pem() -> bytes:
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    return Ed25519PrivateKey.generate().private_bytes(
        serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8, serialization.NoEncryption()
    )


def _private(pem: bytes) -> Ed25519PrivateKey:
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    try:
        key = serialization.load_pem_private_key(pem, password=None)
    except (ValueError, TypeError) as exc:
        raise InvalidFormat(f"the signing key is not an unencrypted PEM private key ({exc})") from None
    if not isinstance(key, Ed25519PrivateKey):
        raise InvalidFormat("the signing key is not an Ed25519 key")
    return key


def _public(pem: bytes):  # type: ignore[no-untyped-def]
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    try:
        key = serialization.load_pem_public_key(pem)
    except (ValueError, TypeError) as exc:
        raise InvalidFormat(f"the public key is not a PEM public key ({exc})") from None
    if not isinstance(key, Ed25519PublicKey):
        raise InvalidFormat("the public key is not an Ed25519 key")
    return key


def check_private_key(private_pem: bytes) -> None:
    """Refuse, with one line, a signing key that is not an Ed25519 private key: before an
    act that would sign, so that nothing is done (issued, sealed) that the signing then fails."""
    _private(private_pem)


def public_key_pem(private_pem: bytes) -> bytes:
    from cryptography.hazmat.primitives import serialization

    return _private(private_pem).public_key().public_bytes(
        serialization.Encoding.PEM, serialization.PublicFormat.SubjectPublicKeyInfo
    )


def fingerprint(public_pem: bytes) -> str:
    """SHA-256 of the raw 32-byte public key, hex: names the key in a checkpoint."""
    from cryptography.hazmat.primitives import serialization

    raw = _public(public_pem).public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    return hashlib.sha256(raw).hexdigest()


# --- checkpoints ---------------------------------------------------------------------


@dataclass(frozen=True)
class Checkpoint:
    size: int
    root: bytes
    at: str
    key: str
    signature: bytes

    def body(self) -> bytes:
        return (
            f"{CHECKPOINT_TITLE}\nsize {self.size}\nroot {self.root.hex()}\nat {self.at}\nkey {self.key}\n"
        ).encode()

    def text(self) -> str:
        return self.body().decode() + f"signature {base64.b64encode(self.signature).decode()}\n"


def sign_checkpoint(private_pem: bytes, *, size: int, root: bytes, at: str) -> Checkpoint:
    key = _private(private_pem)
    unsigned = Checkpoint(size, root, at, fingerprint(public_key_pem(private_pem)), b"")
    return Checkpoint(size, root, at, unsigned.key, key.sign(unsigned.body()))


def _field(line: str, name: str, where: str) -> str:
    word, _, value = line.partition(" ")
    if word != name or not value:
        raise InvalidFormat(f"{where}: expected a line '{name} ...', found {line[:40]!r}")
    return value


def _hex32(value: str, what: str, where: str) -> bytes:
    try:
        data = bytes.fromhex(value)
    except ValueError:
        data = b""
    if len(data) != 32:
        raise InvalidFormat(f"{where}: the {what} must be 64 hex digits")
    return data


def _parse_checkpoint_lines(lines: list[str], where: str) -> Checkpoint:
    if len(lines) != 6 or lines[0] != CHECKPOINT_TITLE:
        raise InvalidFormat(f"{where}: not an issuer checkpoint (expected '{CHECKPOINT_TITLE}' and five lines)")
    size_text = _field(lines[1], "size", where)
    if not size_text.isdigit():
        raise InvalidFormat(f"{where}: the size must be a whole number")
    root = _hex32(_field(lines[2], "root", where), "root", where)
    at = _field(lines[3], "at", where)
    key = _field(lines[4], "key", where)
    _hex32(key, "key fingerprint", where)
    try:
        signature = base64.b64decode(_field(lines[5], "signature", where), validate=True)
    except ValueError:
        signature = b""
    if len(signature) != 64:
        raise InvalidFormat(f"{where}: the signature must be 64 bytes in base64")
    return Checkpoint(int(size_text), root, at, key, signature)


def parse_checkpoint(text: str, where: str = "the checkpoint") -> Checkpoint:
    return _parse_checkpoint_lines(text.strip("\n").split("\n"), where)


def check_checkpoint(checkpoint: Checkpoint, public_pem: bytes) -> None:
    """Raise :class:`ProofFailed` unless the public key signed exactly this checkpoint."""
    from cryptography.exceptions import InvalidSignature

    key = _public(public_pem)
    if checkpoint.key != fingerprint(public_pem):
        raise ProofFailed(
            f"the checkpoint was signed by key {checkpoint.key[:16]}…, not by this public key "
            f"({fingerprint(public_pem)[:16]}…)"
        )
    try:
        key.verify(checkpoint.signature, checkpoint.body())
    except InvalidSignature:
        raise ProofFailed("the checkpoint's signature does not match its content: it was altered") from None


def check_consistency(old: Checkpoint, new: Checkpoint, proof: list[bytes], public_pem: bytes) -> None:
    """Both checkpoints signed by the key, and ``proof`` shows the newer tree extends the older."""
    check_checkpoint(old, public_pem)
    check_checkpoint(new, public_pem)
    if new.size < old.size:
        raise ProofFailed(f"the log now has {new.size} leaves, fewer than the checkpoint's {old.size}: it shrank")
    if not merkle.verify_consistency(old.size, new.size, proof, old.root, new.root):
        raise ProofFailed(
            f"the log does not extend the checkpoint: its first {old.size} leaves are no longer the ones signed"
        )


# --- receipts ------------------------------------------------------------------------


@dataclass(frozen=True)
class Receipt:
    entry: str  # the entry's canonical JSON
    index: int
    path: list[bytes]
    checkpoint: Checkpoint

    def text(self) -> str:
        lines = [RECEIPT_TITLE, f"entry {self.entry}", f"index {self.index}"]
        lines += [f"path {node.hex()}" for node in self.path]
        return "\n".join(lines) + "\n" + self.checkpoint.text()

    @property
    def entry_hash(self) -> str:
        return hashlib.sha256(self.entry.encode("utf-8")).hexdigest()


def parse_receipt(text: str, where: str = "the receipt") -> Receipt:
    lines = text.strip("\n").split("\n")
    if len(lines) < 3 + 6 or lines[0] != RECEIPT_TITLE:
        raise InvalidFormat(f"{where}: not an issuer receipt (expected '{RECEIPT_TITLE}')")
    entry = _field(lines[1], "entry", where)
    index_text = _field(lines[2], "index", where)
    if not index_text.isdigit():
        raise InvalidFormat(f"{where}: the index must be a whole number")
    path = [_hex32(_field(line, "path", where), "path node", where) for line in lines[3:-6]]
    return Receipt(entry, int(index_text), path, _parse_checkpoint_lines(lines[-6:], where))


def check_receipt(receipt: Receipt, public_pem: bytes) -> None:
    """The checkpoint is signed by the key and the entry is its leaf ``index``."""
    check_checkpoint(receipt.checkpoint, public_pem)
    leaf = merkle.leaf_hash(bytes.fromhex(receipt.entry_hash))
    cp = receipt.checkpoint
    if not merkle.verify_inclusion(receipt.index, cp.size, leaf, receipt.path, cp.root):
        raise ProofFailed(
            f"the entry is not leaf {receipt.index} of the signed tree of {cp.size}: the receipt was altered"
        )
