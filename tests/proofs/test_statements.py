"""Signed checkpoints and receipts as text: Ed25519 as RFC 8032 defines it, the format
read back exactly, and every altered line or wrong key refused."""

from __future__ import annotations

import hypothesis.strategies as st
import pytest
from cryptography.hazmat.primitives import serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from hypothesis import given, settings

from issuer.errors import InvalidFormat, ProofFailed
from issuer.proofs import merkle
from issuer.proofs.statements import (
    Receipt,
    check_checkpoint,
    check_consistency,
    check_receipt,
    new_private_key_pem,
    parse_checkpoint,
    parse_receipt,
    public_key_pem,
    sign_checkpoint,
)

# source: RFC 8032 section 7.1, TEST 1 (empty message)
RFC8032_SECRET = "9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60"
RFC8032_PUBLIC = "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a"
RFC8032_SIGNATURE = (
    "e5564300c360ac729086e2cc806e828a84877f1eb8e5d974d873e065"
    "224901555fb8821590a33bacc61e39701cf9b46bd25bf5f0595bbe24655141438e7a100b"
)


def _rfc_key_pem() -> bytes:
    key = Ed25519PrivateKey.from_private_bytes(bytes.fromhex(RFC8032_SECRET))
    return key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                             serialization.NoEncryption())  # fmt: skip


def test_the_signatures_are_rfc_8032_ed25519() -> None:
    pem = _rfc_key_pem()
    key = serialization.load_pem_private_key(pem, password=None)
    assert isinstance(key, Ed25519PrivateKey)
    raw = key.public_key().public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    assert raw.hex() == RFC8032_PUBLIC
    assert key.sign(b"").hex() == RFC8032_SIGNATURE


LEAVES = [merkle.leaf_hash(bytes([n])) for n in range(11)]


def test_a_checkpoint_reads_back_and_checks() -> None:
    pem = _rfc_key_pem()
    signed = sign_checkpoint(pem, size=7, root=merkle.root(LEAVES[:7]), at="2026-03-01T18:00:05Z")
    text = signed.text()
    assert text.splitlines()[0] == "issuer log checkpoint v1" and len(text.splitlines()) == 6
    again = parse_checkpoint(text)
    assert again == signed
    check_checkpoint(again, public_key_pem(pem))


def test_every_altered_line_and_a_wrong_key_are_refused() -> None:
    pem = _rfc_key_pem()
    text = sign_checkpoint(pem, size=7, root=merkle.root(LEAVES[:7]), at="2026-03-01T18:00:05Z").text()
    lines = text.splitlines()
    for number in range(1, 6):
        line = lines[number]
        last = line[-1]
        changed = line[:-1] + ("1" if last != "1" else "2") if last != "=" else line[:-3] + "AA="
        altered = "\n".join([*lines[:number], changed, *lines[number + 1:]]) + "\n"
        with pytest.raises((ProofFailed, InvalidFormat)):
            check_checkpoint(parse_checkpoint(altered), public_key_pem(pem))
    other = public_key_pem(new_private_key_pem())
    with pytest.raises(ProofFailed, match="not by this public key"):
        check_checkpoint(parse_checkpoint(text), other)


def test_consistency_between_two_checkpoints() -> None:
    pem = _rfc_key_pem()
    old = sign_checkpoint(pem, size=4, root=merkle.root(LEAVES[:4]), at="2026-03-01T18:00:05Z")
    new = sign_checkpoint(pem, size=11, root=merkle.root(LEAVES), at="2026-03-02T18:00:05Z")
    check_consistency(old, new, merkle.consistency_proof(4, LEAVES), public_key_pem(pem))
    forked = [*LEAVES[:2], merkle.leaf_hash(b"other"), *LEAVES[3:]]
    forged = sign_checkpoint(pem, size=11, root=merkle.root(forked), at="2026-03-02T18:00:05Z")
    with pytest.raises(ProofFailed, match="does not extend"):
        check_consistency(old, forged, merkle.consistency_proof(4, forked), public_key_pem(pem))
    with pytest.raises(ProofFailed, match="shrank"):
        check_consistency(new, old, [], public_key_pem(pem))


def test_a_receipt_reads_back_and_checks() -> None:
    import hashlib

    pem = _rfc_key_pem()
    entry = '{"action":"issue","actor":"front desk","code":"QTL-0042"}'
    leaves = [*LEAVES[:5], merkle.leaf_hash(hashlib.sha256(entry.encode()).digest()), *LEAVES[6:]]
    signed = sign_checkpoint(pem, size=len(leaves), root=merkle.root(leaves), at="2026-03-01T18:00:05Z")
    receipt = Receipt(entry, 5, merkle.inclusion_proof(5, leaves), signed)
    again = parse_receipt(receipt.text())
    assert again == receipt
    check_receipt(again, public_key_pem(pem))
    for wrong in (Receipt(entry, 4, receipt.path, signed), Receipt(entry.replace("42", "43"), 5, receipt.path, signed)):
        with pytest.raises(ProofFailed, match="not leaf"):
            check_receipt(wrong, public_key_pem(pem))


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=400), st.sampled_from(["", "issuer log checkpoint v1\n", "issuer log receipt v1\n"]))
def test_any_text_is_read_or_refused_in_one_line(text: str, start: str) -> None:
    for parse in (parse_checkpoint, parse_receipt):
        try:
            parse(start + text)
        except InvalidFormat as exc:
            assert "\n" not in str(exc)
