"""Signed checkpoints and receipts through the CLI on both backends: a checkpoint that
the log extends holds, one it no longer extends (a rewritten entry) fails; a receipt is
checked with nothing but itself and the public key; a wrong key or an altered statement
is one line and a non-zero exit."""

from __future__ import annotations

import json
import stat
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import create_engine, select, text
from sqlalchemy.orm import Session
from typer.testing import CliRunner

from issuer.cli.app import app
from issuer.proofs import merkle
from issuer.proofs.statements import parse_checkpoint
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.log import entry_hash
from issuer.register.models import LogEntry
from issuer.register.store import database_url, open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.sidestep import sidestep


def cli(*args: str, env: dict[str, str] | None = None) -> Any:
    return CliRunner().invoke(app, list(args), env={"COLUMNS": "200", **(env or {})})


@pytest.fixture
def scene(register_url: str, tmp_path: Path) -> tuple[str, Path]:  # noqa: F811
    register = open_register(register_url, actor="quartermaster")
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="T"))
    add_series(register, SeriesSpec(key="members", scheme="luhn", length=6, prefix="M"))
    for _ in range(3):
        issue_codes(register, "tools", 1)
        issue_codes(register, "members", 2)
    register.close()
    key = tmp_path / "keys" / "log.pem"
    made = cli("log", "new-key", "--key", str(key))
    assert made.exit_code == 0, made.output
    return register_url, key


def one_line_refusal(result: Any, words: str) -> None:
    assert result.exit_code == 2, result.output
    assert result.stderr.strip().count("\n") == 0 and words in result.stderr, result.stderr


def test_the_key_is_owner_only_and_its_public_half_exported(scene: tuple[str, Path]) -> None:
    _url, key = scene
    assert stat.S_IMODE(key.stat().st_mode) == 0o600
    exported = cli("log", "public-key", "--key", str(key))
    assert exported.exit_code == 0 and exported.stdout == key.with_name("log.pem.pub").read_text()
    assert exported.stdout.startswith("-----BEGIN PUBLIC KEY-----")
    again = cli("log", "new-key", "--key", str(key))
    assert again.exit_code == 2 and "exists" in again.stderr  # never replaced without --force


def test_no_key_configured_is_one_line(scene: tuple[str, Path], tmp_path: Path) -> None:
    url, _key = scene
    env = {"ISSUER_CONFIG": str(tmp_path / "none.toml")}
    one_line_refusal(cli("log", "checkpoint", "--db", url, env=env), "no signing key")


def test_the_key_path_comes_from_the_config(scene: tuple[str, Path], tmp_path: Path) -> None:
    url, key = scene
    config = tmp_path / "issuer.toml"
    config.write_text(f'[register]\nsigning_key = "keys/{key.name}"\n')  # relative to the config's folder
    result = cli("log", "checkpoint", "--db", url, "--json", env={"ISSUER_CONFIG": str(config)})
    assert result.exit_code == 0, result.output
    assert json.loads(result.stdout)["size"] == 8


def test_a_checkpoint_holds_while_the_log_grows_and_fails_once_rewritten(scene: tuple[str, Path], tmp_path: Path) -> None:
    url, key = scene
    public = key.with_name("log.pem.pub")
    first = tmp_path / "cp-1.txt"
    assert cli("log", "checkpoint", "--db", url, "--key", str(key), "--out", str(first)).exit_code == 0
    signed = parse_checkpoint(first.read_text())
    assert signed.size == 8  # two series added, six issues
    register = open_register(url, actor="desk")
    issue_codes(register, "members", 1)
    issue_codes(register, "tools", 4)
    register.close()
    # verify reads the sealed tree; the next checkpoint (or anchor) seals the new acts
    assert cli("log", "checkpoint", "--db", url, "--key", str(key), "--out", str(tmp_path / "cp-2.txt")).exit_code == 0

    result = cli("log", "verify", "--db", url, "--checkpoint", str(first), "--public-key", str(public), "--json")
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)["checkpoint"]
    assert data["from"] == 8 and data["size"] == 10
    # what a third party checks: the signed root, the proof and the new root, nothing else
    assert merkle.verify_consistency(8, 10, [bytes.fromhex(p) for p in data["proof"]], signed.root,
                                     bytes.fromhex(data["root"]))  # fmt: skip

    _rewrite_entry(url, 4)  # an early entry rewritten with a fresh hash, its chain and head re-linked
    assert cli("log", "verify", "--db", url).exit_code == 0  # the chains alone cannot tell ...
    broken = cli("log", "verify", "--db", url, "--checkpoint", str(first), "--public-key", str(public))
    one_line_refusal(broken, "does not extend the checkpoint")  # ... the checkpoint can


def test_a_wrong_key_or_an_altered_checkpoint_is_refused(scene: tuple[str, Path], tmp_path: Path) -> None:
    url, key = scene
    first = tmp_path / "cp.txt"
    assert cli("log", "checkpoint", "--db", url, "--key", str(key), "--out", str(first)).exit_code == 0
    other = tmp_path / "other.pem"
    assert cli("log", "new-key", "--key", str(other)).exit_code == 0
    wrong = cli("log", "verify", "--db", url, "--checkpoint", str(first), "--public-key", f"{other}.pub")
    one_line_refusal(wrong, "not by this public key")
    altered = tmp_path / "altered.txt"
    altered.write_text(first.read_text().replace("size 8", "size 7"))
    one_line_refusal(cli("log", "verify", "--db", url, "--checkpoint", str(altered), "--key", str(key)),
                     "signature does not match")  # fmt: skip
    garbled = tmp_path / "garbled.txt"
    garbled.write_text("issuer log checkpoint v1\nsize eight\n")
    one_line_refusal(cli("log", "verify", "--db", url, "--checkpoint", str(garbled), "--key", str(key)),
                     "not an issuer checkpoint")  # fmt: skip


def test_an_issue_receipt_is_checked_offline(scene: tuple[str, Path], tmp_path: Path) -> None:
    url, key = scene
    public = key.with_name("log.pem.pub")
    receipt = tmp_path / "receipt.txt"
    issued = cli("issue", "tools", "--db", url, "--receipt", str(receipt), "--key", str(key), "--json")
    assert issued.exit_code == 0, issued.output
    told = json.loads(issued.stdout)["receipt"]
    assert told["size"] == 9 and told["index"] == 8
    # no register anywhere: the check needs the receipt and the public key only
    offline = {"ISSUER_DB": str(tmp_path / "nowhere" / "none.sqlite"), "ISSUER_CONFIG": str(tmp_path / "none.toml")}
    checked = cli("log", "check-receipt", str(receipt), "--public-key", str(public), "--json", env=offline)
    assert checked.exit_code == 0, checked.output
    data = json.loads(checked.stdout)
    code = json.loads(issued.stdout)["codes"][0]["code"]
    assert data["entry"]["action"] == "issue" and code in data["entry"]["detail"]
    assert not (tmp_path / "nowhere").exists()

    lines = receipt.read_text().split("\n")
    for number, line in enumerate(lines):
        if line.startswith(("entry ", "path ", "root ")):
            changed = line[:-3] + ("0" if line[-3] != "0" else "1") + line[-2:]
            bad = tmp_path / f"bad-{number}.txt"
            bad.write_text("\n".join([*lines[:number], changed, *lines[number + 1:]]))
            result = cli("log", "check-receipt", str(bad), "--public-key", str(public), env=offline)
            assert result.exit_code == 2 and result.stderr.strip().count("\n") == 0, (line, result.output)
    other = tmp_path / "other.pem"
    assert cli("log", "new-key", "--key", str(other)).exit_code == 0
    one_line_refusal(cli("log", "check-receipt", str(receipt), "--public-key", f"{other}.pub", env=offline),
                     "not by this public key")  # fmt: skip


def _rewrite_entry(url: str, entry_id: int) -> None:
    """Entry ``entry_id`` given a new detail and a fresh hash, the rest of its chain re-linked,
    its chain's head moved: consistent in itself, as a careful forger would leave it."""
    engine = create_engine(database_url(url))
    with Session(engine) as session, session.begin():
        target = session.get(LogEntry, entry_id)
        assert target is not None
        rows = session.scalars(select(LogEntry).where(LogEntry.chain == target.chain, LogEntry.id >= entry_id)
                               .order_by(LogEntry.id)).all()  # fmt: skip
        previous = target.prev_hash
        for row in rows:
            detail = row.detail[:-1] + ', "note": "rewritten"}' if row.id == entry_id else row.detail
            digest = entry_hash(entry_id=row.id, at=row.at, actor=row.actor, action=row.action,
                                series_id=row.series_id, code=row.code, batch_id=row.batch_id, detail=detail,
                                prev_hash=previous, login=row.login, chain=row.chain)  # fmt: skip
            sidestep(session.connection(), "UPDATE log_entry SET detail = :d, prev_hash = :p, hash = :h WHERE id = :i",
                     {"d": detail, "p": previous, "h": digest, "i": row.id})  # fmt: skip
            previous = digest
        session.execute(text("UPDATE log_chain SET last_hash = :h WHERE chain = :c"), {"h": previous, "c": target.chain})
    engine.dispose()


def _sealed_and_issued(url: str) -> tuple[int, int]:
    engine = create_engine(database_url(url))
    with engine.connect() as connection:
        sealed = connection.execute(text("SELECT size FROM log_tree")).scalar_one_or_none() or 0
        issued = connection.execute(text("SELECT count(*) FROM issued_code")).scalar_one()
    engine.dispose()
    return int(sealed), int(issued)


def test_a_key_that_cannot_sign_changes_nothing(scene: tuple[str, Path], tmp_path: Path) -> None:
    """A checkpoint or an issue with a receipt refuses a file that is no signing key before
    it seals the log or issues a code (found by the CLI fuzz test: the log was sealed, then
    the signing failed)."""
    url, _key = scene
    junk = tmp_path / "junk.pem"
    junk.write_bytes(b"not a key\n")
    before = _sealed_and_issued(url)
    one_line_refusal(cli("log", "checkpoint", "--db", url, "--key", str(junk)), "signing key")
    receipt = tmp_path / "r.txt"
    result = cli("issue", "tools", "--db", url, "--receipt", str(receipt), "--key", str(junk), "--actor", "desk")
    one_line_refusal(result, "signing key")
    assert _sealed_and_issued(url) == before
    assert not receipt.exists()
