"""Scatter keys are stored sealed under a key file that never enters the database.

* upgrading a register whose keys were stored in clear seals them, and the series issue
  exactly the codes they would have issued before (the key itself is unchanged);
* a clerk's database login reads only the sealed blob: the key is not in it, and it does
  not open without the key file;
* a missing, foreign or malformed key file is one clear line.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from sqlalchemy import create_engine, text

from issuer.register.issuing import issue_codes
from issuer.register.sealing import KEY_BYTES, Keyring, KeyFileError, default_key_file, is_sealed
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.series import code_format, get_series, permutation
from issuer.register.store import database_url, open_register
from tests.edges.helpers import refused, run
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.test_roles import Guarded, groups, guarded  # noqa: F401
from tests.register.upgrades import to_revision

MEMBERS = SeriesSpec(key="members", scheme="luhn", length=7, prefix="QM", mode="scattered")


def stored_key(url: str, series: str = "members") -> bytes:
    engine = create_engine(database_url(url))
    try:
        with engine.connect() as connection:
            return bytes(connection.execute(text("SELECT scatter_key FROM series WHERE key = :k"), {"k": series}).scalar_one())
    finally:
        engine.dispose()


def test_an_older_register_is_sealed_and_issues_the_same_next_codes(register_url: str) -> None:  # noqa: F811
    register = open_register(register_url, actor="quartermaster")
    add_series(register, MEMBERS)
    first = [c.code for c in issue_codes(register, "members", 4).codes]
    sealed_before = stored_key(register_url)
    assert is_sealed(sealed_before)
    to_revision(register, "leaner_rows", down=True)  # the register as it was before sealing
    raw = stored_key(register_url)
    assert len(raw) == KEY_BYTES and raw == register.keyring.open("members", sealed_before)
    # what the register at that revision would issue next, from the key in clear
    with register.reading() as session:
        series = get_series(session, "members")
        series.opened_key = raw  # type: ignore[attr-defined]
        scatter, shape, counter = permutation(series), code_format(series), int(series.next_counter)
        expected = [shape.code_for_base(scatter.base_for_counter(k)) for k in range(counter, counter + 5)]
    register.close()

    upgraded = open_register(register_url, actor="quartermaster")  # opening upgrades and seals
    try:
        sealed = stored_key(register_url)
        assert is_sealed(sealed) and raw not in sealed and raw.hex() not in sealed.hex()
        assert upgraded.keyring.open("members", sealed) == raw  # the same key, sealed
        assert [c.code for c in issue_codes(upgraded, "members", 5).codes] == expected
        assert not set(expected) & set(first)
        from issuer.register.doctor import run_doctor

        report = run_doctor(upgraded)
        assert report.healthy, [(f.check, f.details) for f in report.findings if f.status == "problem"]
    finally:
        upgraded.close()


def test_the_key_file_is_made_with_the_register_owner_only(tmp_path: Path) -> None:
    path = tmp_path / "reg" / "register.sqlite"
    register = open_register(str(path), actor="quartermaster")
    register.close()
    key = default_key_file(database_url(str(path)))
    assert key == path.with_name("register.sqlite.key")
    assert key.stat().st_mode & 0o777 == 0o600
    words = key.read_text("ascii").split()
    assert words[0] == "issuer-key-v1" and len(bytes.fromhex(words[1])) == 32
    before = key.read_bytes()
    open_register(str(path), actor="quartermaster").close()  # opened again: never replaced
    assert key.read_bytes() == before


def test_a_missing_wrong_or_malformed_key_file_is_one_line(tmp_path: Path) -> None:
    path = tmp_path / "register.sqlite"
    url = str(path)
    register = open_register(url, actor="quartermaster")
    add_series(register, MEMBERS)
    issue_codes(register, "members", 2)
    register.close()
    moved = tmp_path / "elsewhere.key"
    path.with_name("register.sqlite.key").rename(moved)

    line = refused(run(url, "issue", "members"), "no key file at")
    assert "register.sqlite.key" in line and "backup" in line
    assert "1 issued" not in run(url, "issue", "members").stdout
    # the key file named in the environment opens the keys again
    assert run(url, "issue", "members", env={"ISSUER_KEY_FILE": str(moved)}).exit_code == 0

    other = Keyring(tmp_path / "another-register.key")
    assert other.create()
    refused(run(url, "issue", "members", env={"ISSUER_KEY_FILE": str(other.path)}), "does not open the scatter key")
    malformed = tmp_path / "notes.key"
    malformed.write_text("not a key\n")
    refused(run(url, "issue", "members", env={"ISSUER_KEY_FILE": str(malformed)}), "is not an issuer key file")
    # checking codes needs no key: the desk still answers
    assert run(url, "check", "QM0000000", env={"ISSUER_KEY_FILE": str(malformed)}).exit_code in (0, 1)
    # a backup made without the key file says so (the copy cannot issue scattered codes)
    backup = run(url, "backup", str(tmp_path / "copy.sqlite"))
    assert backup.exit_code == 0 and "no key file at" in backup.stderr
    assert not (tmp_path / "copy.sqlite.key").exists()
    # the doctor names the series whose key the file does not open
    doctor = run(url, "doctor", env={"ISSUER_KEY_FILE": str(other.path)})
    assert doctor.exit_code == 1 and "members" in doctor.output


def test_a_clerk_login_reads_only_the_sealed_key(guarded: Guarded) -> None:  # noqa: F811
    owner = open_register(guarded.owner, actor="owner")
    with owner.reading() as session:
        raw = owner.keyring.open("members", bytes(get_series(session, "members").scatter_key or b""))
    owner.close()
    clerk = open_register(guarded.clerk, actor="clerk-ann")
    try:
        # what the clerk's login may read of the series: the sealed blob, not the key
        with clerk.reading() as session:
            blob = bytes(session.execute(text("SELECT scatter_key FROM series WHERE key = 'members'")).scalar_one())
        assert is_sealed(blob) and raw not in blob and raw.hex() not in blob.hex()
        # without the key file the blob is useless: another key does not open it
        stranger = Keyring(Path("not-this-registers.key"))
        stranger._key = bytes(KEY_BYTES)  # a key that is not the register's
        with pytest.raises(KeyFileError, match="does not open"):
            stranger.open("members", blob)
        # the clerk's desk, holding the key file, still issues scattered codes
        assert issue_codes(clerk, "members", 2).count == 2
    finally:
        clerk.close()
