"""The roles on PostgreSQL for the holder, validity and suspension acts: a clerk sets and
clears holders and renews; only an admin erases, purges, suspends and reinstates. Each
refusal is one line and leaves nothing half-done."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from typing import Any

from sqlalchemy import select

from issuer.register.holders import clear_holder, erase_holder, purge_holders, set_holder
from issuer.register.lifecycle import void_code
from issuer.register.logverify import verify_chain
from issuer.register.models import IssuedCode
from issuer.register.suspension import reinstate_code, suspend_code
from issuer.register.validity import renew_code
from tests.register.pg import pg_database  # noqa: F401
from tests.register.test_roles import Guarded, as_role, groups, guarded, raw, refused  # noqa: F401


def stored(guarded: Guarded, code: str) -> tuple[Any, ...]:  # noqa: F811
    owner = as_role(guarded.owner, "owner")
    try:
        with owner.reading() as session:
            row = session.scalars(select(IssuedCode).where(IssuedCode.code == code)).one()
            return row.status, row.holder, row.note, row.erased_at
    finally:
        owner.close()


def test_a_clerk_sets_clears_and_renews(guarded: Guarded) -> None:  # noqa: F811
    clerk = as_role(guarded.clerk, "clerk-ann")
    try:
        code = guarded.codes[0]
        assert set_holder(clerk, code, "Wren Halloway", note="Evening volunteer").holder == "Wren Halloway"
        renewed = renew_code(clerk, code, days=365)
        assert renewed.valid_until > datetime.now(UTC) + timedelta(days=364)
        assert clear_holder(clerk, code).holder is None
    finally:
        clerk.close()


def test_a_clerk_may_not_erase_purge_suspend_or_reinstate(guarded: Guarded) -> None:  # noqa: F811
    code = guarded.codes[1]
    clerk = as_role(guarded.clerk, "clerk-ann")
    try:
        set_holder(clerk, code, "Ottoline Bracken", note="Workshop volunteer")
        set_holder(clerk, guarded.codes[2], "Isolde Marrow")
        assert "issued_code" in refused(lambda: erase_holder(clerk, code, reason="member left"))
        refused(lambda: suspend_code(clerk, code, reason="reported lost"))
        refused(lambda: raw(clerk, "UPDATE issued_code SET erased_at = now() WHERE code = :c", c=code))
        refused(lambda: raw(clerk, "UPDATE issued_code SET suspend_reason = 'x' WHERE code = :c", c=code))
        refused(lambda: raw(clerk, "UPDATE series SET fill_levels = 'none'"))
    finally:
        clerk.close()
    # nothing half-done: the holder is still there, the code still issued
    assert stored(guarded, code)[:3] == ("issued", "Ottoline Bracken", "Workshop volunteer")
    admin = as_role(guarded.admin, "admin-bo")
    try:
        suspend_code(admin, code, reason="reported lost")
        void_code(admin, guarded.codes[2], reason="tag snapped")
    finally:
        admin.close()
    clerk = as_role(guarded.clerk, "clerk-ann")
    try:
        refused(lambda: reinstate_code(clerk, code))
        refused(lambda: purge_holders(clerk, voided_before=datetime.now(UTC) + timedelta(hours=1)))
    finally:
        clerk.close()
    assert stored(guarded, code)[0] == "suspended"


def test_an_admin_erases_purges_suspends_and_reinstates(guarded: Guarded) -> None:  # noqa: F811
    admin = as_role(guarded.admin, "admin-bo")
    try:
        first, second = guarded.codes[3], guarded.codes[4]
        set_holder(admin, first, "Isolde Marrow")
        set_holder(admin, second, "Tamsin Ord")
        suspend_code(admin, first, reason="reported lost")
        assert reinstate_code(admin, first).status == "issued"
        assert erase_holder(admin, first, reason="member left").codes == [first]
        void_code(admin, second, reason="membership ended")
        assert purge_holders(admin, voided_before=datetime.now(UTC) + timedelta(hours=1)).count == 1
        with admin.reading() as session:
            assert verify_chain(session).intact
    finally:
        admin.close()
    assert stored(guarded, first)[1:3] == (None, None) and stored(guarded, second)[1] is None
