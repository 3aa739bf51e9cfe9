"""Holder and note text against the log's salted digests (issue 10): an edit of a text
together with its search key, made behind the tool's back, is named by the doctor on
SQLite and PostgreSQL, wherever the code got its text (an issue, an import, a holder act,
a replacement); an erased code stays healthy and keeps no salt."""

from __future__ import annotations

from datetime import timedelta
from pathlib import Path

import pytest
from sqlalchemy import create_engine, text

from issuer.readers.scanfile import read_table
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.holders import erase_holder, purge_holders, set_holder
from issuer.register.importing import IMPORT_ROLES, import_codes
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import replace_code, void_code
from issuer.register.series import code_format, get_series
from issuer.register.standing import search_key, text_digest
from issuer.register.store import database_url, open_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401
from tests.register.sidestep import sql_behind_the_back
from tests.register.test_replay import replay_details


def _setup(url: str, folder: Path) -> dict[str, str]:
    """The Quillmere members: a batch issued to one holder with a note, a batch with no text,
    a holder changed, a card replaced (its holder copied), two imported, one erased."""
    register = open_register(url, actor="membership desk")
    add_series(register, SeriesSpec(key="members", scheme="damm", length=6, prefix="M", mode="scattered"))
    family = [i.code for i in issue_codes(register, "members", 3, holder="Ada Quill", note="family plan").codes]
    blank = [i.code for i in issue_codes(register, "members", 2).codes]
    set_holder(register, blank[0], "Bea Loom", note="joined at the spring fair")
    set_holder(register, blank[0], "Bea Loom-Weaver")  # married; the note stays
    replacement = replace_code(register, family[2], reason="card left in the wash").code
    with register.reading() as session:
        shape = code_format(get_series(session, "members"))
    imported = [shape.code_for_base(base) for base in (100_001, 100_002, 100_003)]
    legacy = folder / "paper-members.csv"
    legacy.write_text(f"code,holder,note\n{imported[0]},Cal Thimble,\n{imported[1]},,\n{imported[2]},Dot Spindle,paid cash\n")
    import_codes(register, "members", read_table(legacy, roles=IMPORT_ROLES))
    erase_holder(register, family[1], reason="member left the co-op")
    register.close()
    return {"issued": family[0], "erased": family[1], "replaced": family[2], "replacement": replacement,
            "no text": blank[1], "changed": blank[0], "imported": imported[0], "imported note": imported[2],
            "imported without": imported[1]}  # fmt: skip


def _row(url: str, code: str) -> tuple[str | None, str | None, bytes | None]:
    engine = create_engine(database_url(url))
    try:
        with engine.connect() as connection:
            holder, note, salt = connection.execute(
                text("SELECT holder, note, text_salt FROM issued_code WHERE code = :c"), {"c": code}
            ).one()
    finally:
        engine.dispose()
    return holder, note, None if salt is None else bytes(salt)


def test_texts_as_their_digests_say_replay_clean(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    codes = _setup(register_url, tmp_path)
    assert replay_details(register_url) == (True, [])
    # only codes holding text hold a salt; the erased one lost it with its texts
    assert _row(register_url, codes["erased"]) == (None, None, None)
    assert _row(register_url, codes["no text"]) == (None, None, None)
    assert _row(register_url, codes["imported without"]) == (None, None, None)
    salts = {_row(register_url, codes[which])[2] for which in ("issued", "replaced", "replacement", "changed")}
    assert None not in salts and len(salts) == 4 and all(len(salt) == 16 for salt in salts)  # type: ignore[arg-type]


def _named(url: str, code: str) -> list[str]:
    healthy, details = replay_details(url)
    assert not healthy
    return [line for line in details if line.startswith(code) or "holders and notes differ" in line]


@pytest.mark.parametrize("which", ["issued", "replacement", "changed", "imported", "no text", "imported without"])
def test_a_holder_edited_with_its_search_key_is_named(register_url: str, tmp_path: Path, which: str) -> None:  # noqa: F811
    codes = _setup(register_url, tmp_path)
    sql_behind_the_back(register_url, "UPDATE issued_code SET holder = :h, holder_key = :k WHERE code = :c",
                        h="Eve Forger", k=search_key("Eve Forger"), c=codes[which])  # fmt: skip
    assert _named(register_url, codes[which])


@pytest.mark.parametrize("which", ["issued", "changed", "imported note", "erased"])
def test_a_note_edited_with_its_search_key_is_named(register_url: str, tmp_path: Path, which: str) -> None:  # noqa: F811
    codes = _setup(register_url, tmp_path)
    sql_behind_the_back(register_url, "UPDATE issued_code SET note = :n, note_key = :k WHERE code = :c",
                        n="paid in full", k=search_key("paid in full"), c=codes[which])  # fmt: skip
    assert _named(register_url, codes[which])


@pytest.mark.parametrize("change", ["flipped", "cleared", "given"])
def test_a_salt_edited_is_named(register_url: str, tmp_path: Path, change: str) -> None:  # noqa: F811
    codes = _setup(register_url, tmp_path)
    which = codes["no text" if change == "given" else "issued"]
    salt = _row(register_url, codes["issued"])[2]
    assert salt is not None
    new = {"flipped": bytes([salt[0] ^ 1]) + salt[1:], "cleared": None, "given": salt}[change]
    sql_behind_the_back(register_url, "UPDATE issued_code SET text_salt = :s WHERE code = :c", s=new, c=which)
    assert _named(register_url, which)


def test_texts_forged_with_a_new_salt_and_digest_are_named(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    """Whoever edits the row may pick its salt too: the log's digest is not theirs to pick."""
    codes = _setup(register_url, tmp_path)
    salt = bytes(16)
    assert text_digest(salt, "Eve Forger", None)
    sql_behind_the_back(register_url, "UPDATE issued_code SET holder = :h, holder_key = :k, note = NULL, "
                        "note_key = NULL, text_salt = :s WHERE code = :c",
                        h="Eve Forger", k=search_key("Eve Forger"), s=salt, c=codes["issued"])  # fmt: skip
    assert _named(register_url, codes["issued"])


def test_an_edit_before_a_holder_act_shows_in_what_the_act_found(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    codes = _setup(register_url, tmp_path)
    sql_behind_the_back(register_url, "UPDATE issued_code SET holder = :h, holder_key = :k WHERE code = :c",
                        h="Eve Forger", k=search_key("Eve Forger"), c=codes["issued"])  # fmt: skip
    register = open_register(register_url, actor="membership desk")
    set_holder(register, codes["issued"], "Ada Quill")  # the desk puts the right holder back
    register.close()
    healthy, details = replay_details(register_url)
    assert not healthy and any("holders and notes differ" in line for line in details), details


def test_a_purge_by_age_leaves_the_register_healthy(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    """Each purged code's entry carries the digest it held; its salt goes with its texts."""
    codes = _setup(register_url, tmp_path)
    register = open_register(register_url, actor="membership desk")
    void_code(register, codes["issued"], reason="member left the co-op")
    purged = purge_holders(register, voided_before=register.clock() + timedelta(hours=1))
    register.close()
    assert purged.count >= 1 and _row(register_url, codes["issued"]) == (None, None, None)
    assert replay_details(register_url) == (True, [])
