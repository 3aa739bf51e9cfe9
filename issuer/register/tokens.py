"""Bearer tokens for the HTTP service, and which acts each role may do.

A token reads ``isr_<lookup>_<secret>``. The register keeps the lookup (to find the row)
and an scrypt hash of the secret with its own salt, never the secret itself; the token is
shown once, when it is made. Checking compares hashes in constant time. The token's name
is the actor the log records, so the log says which desk or system did what.

The roles are the same split as the database roles of ``issuer db roles``: a clerk
issues, checks, prints and counts; an admin also voids, replaces and restores.
"""

from __future__ import annotations

import hashlib
import hmac
import re
import secrets
from dataclasses import dataclass
from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session

from issuer.errors import Conflict, InvalidFormat, NotFound
from issuer.register.log import NewEntry, append_entry
from issuer.register.models import AccessToken
from issuer.register.store import Register

CLERK = "clerk"
ADMIN = "admin"
ROLES = (CLERK, ADMIN)

#: what each role may do through the service; reading (series, check, history, export)
#: is every role's
CLERK_ACTS = frozenset({"read", "issue", "labels", "reprint", "reconcile"})
ADMIN_ACTS = CLERK_ACTS | {"void", "replace", "restore"}
ROLE_ACTS: dict[str, frozenset[str]] = {CLERK: CLERK_ACTS, ADMIN: ADMIN_ACTS}

_PREFIX = "isr"
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$")
_TOKEN = re.compile(r"^isr_([0-9a-f]{16})_([A-Za-z0-9_-]{43})$")
# scrypt at 16 MiB of memory per check: slow for a guesser, a few tens of ms for us
_SCRYPT = {"n": 2**14, "r": 8, "p": 1, "dklen": 32}


def role_may(role: str, act: str) -> bool:
    return act in ROLE_ACTS.get(role, frozenset())


@dataclass(frozen=True)
class TokenInfo:
    """A token as listed: never its secret."""

    name: str
    role: str
    lookup: str
    created_at: datetime
    created_by: str
    revoked_at: datetime | None

    @property
    def active(self) -> bool:
        return self.revoked_at is None

    def as_dict(self) -> dict[str, object]:
        return {
            "name": self.name,
            "role": self.role,
            "created_at": self.created_at.isoformat(),
            "created_by": self.created_by,
            "revoked_at": self.revoked_at.isoformat() if self.revoked_at else None,
            "active": self.active,
        }


def _info(row: AccessToken) -> TokenInfo:
    return TokenInfo(row.name, row.role, row.lookup, row.created_at, row.created_by, row.revoked_at)


def _hash(secret: str, salt: bytes) -> bytes:
    return hashlib.scrypt(secret.encode("ascii"), salt=salt, **_SCRYPT)


def credential_digest(lookup: str, salt: bytes, digest: bytes) -> str:
    """SHA-256 (hex) over a token's lookup, salt and secret's hash: what its add entry logs,
    so a row whose credential was swapped behind the tool's back shows (never the secret)."""
    return hashlib.sha256(f"{lookup}\n{bytes(salt).hex()}\n{bytes(digest).hex()}".encode("ascii")).hexdigest()


def check_token_name(name: str) -> str:
    if not _NAME.match(name):
        raise InvalidFormat(
            "a token name is 1-64 letters, digits, '.', '_' or '-', starting with a letter or digit"
        )
    return name


def add_token(register: Register, name: str, role: str) -> tuple[TokenInfo, str]:
    """Make a token; returns it and its full text, which is shown this once."""
    check_token_name(name)
    if role not in ROLES:
        raise InvalidFormat(f"role must be one of {', '.join(ROLES)}, not {role!r}")
    lookup = secrets.token_hex(8)
    secret = secrets.token_urlsafe(32)
    salt = secrets.token_bytes(16)
    digest = _hash(secret, salt)

    def work(session: Session) -> TokenInfo:
        if session.scalar(select(AccessToken.id).where(AccessToken.name == name)) is not None:
            raise Conflict(f"a token named {name!r} exists already (revoke it or choose another name)")
        at = register.clock()
        row = AccessToken(
            name=name, lookup=lookup, role=role, salt=salt, digest=digest,
            created_at=at, created_by=register.actor,
        )  # fmt: skip
        session.add(row)
        session.flush()
        detail = {"token": name, "role": role, "lookup": lookup,
                  "credential_sha256": credential_digest(lookup, salt, digest)}  # fmt: skip
        append_entry(session, NewEntry("token-add", detail=detail), actor=register.actor, at=at)
        return _info(row)

    info = register.write(work)
    return info, f"{_PREFIX}_{lookup}_{secret}"


def list_tokens(register: Register) -> list[TokenInfo]:
    with register.reading() as session:
        return [_info(row) for row in session.scalars(select(AccessToken).order_by(AccessToken.name))]


def revoke_token(register: Register, name: str) -> TokenInfo:
    def work(session: Session) -> TokenInfo:
        row = session.scalars(select(AccessToken).where(AccessToken.name == name)).first()
        if row is None:
            raise NotFound(f"no token named {name!r}")
        if row.revoked_at is not None:
            raise Conflict(f"token {name!r} was revoked already")
        at = register.clock()
        row.revoked_at, row.revoked_by = at, register.actor
        session.flush()
        append_entry(session, NewEntry("token-revoke", detail={"token": name}),
                     actor=register.actor, at=at)  # fmt: skip
        return _info(row)

    return register.write(work)


def split_token(presented: str) -> tuple[str, str] | None:
    """The lookup and secret of a well-formed token text, else None."""
    match = _TOKEN.match(presented.strip())
    return (match.group(1), match.group(2)) if match else None


def verify_token(register: Register, presented: str) -> TokenInfo | None:
    """The active token ``presented`` names, or None (malformed, unknown, wrong or revoked)."""
    parts = split_token(presented)
    if parts is None:
        return None
    lookup, secret = parts
    with register.reading() as session:
        row = session.scalars(select(AccessToken).where(AccessToken.lookup == lookup)).first()
        if row is None:
            # spend the same time as a real check, so a guesser learns nothing from timing
            _hash(secret, b"\0" * 16)
            return None
        info, salt, digest = _info(row), bytes(row.salt), bytes(row.digest)
    if not hmac.compare_digest(_hash(secret, salt), digest):
        return None
    return info if info.active else None


def token_active(register: Register, lookup: str) -> bool:
    """Whether the token with ``lookup`` is still active (cheap: no hashing)."""
    with register.reading() as session:
        revoked = session.execute(
            select(AccessToken.revoked_at).where(AccessToken.lookup == lookup)
        ).first()
    return revoked is not None and revoked[0] is None
