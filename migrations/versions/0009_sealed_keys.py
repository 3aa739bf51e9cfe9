"""Scatter keys are stored sealed (AES-256-GCM under the register's key file).

Each scattered series' raw 32-byte FF1 key is replaced by its sealed form; the key
itself does not change, so every series issues the same codes as before. The sealing is
done by the keyring issuer hands over (``config.attributes["seal_scatter_key"]``; the
default key file when none is handed over): the key file never enters the database. The series guard (a series holding codes keeps its
key) and any per-role triggers are set aside for this one update and put back exactly as
they were. The downgrade opens the keys again (``open_scatter_key``).

Revision ID: sealed_keys
Revises: leaner_rows
"""

from __future__ import annotations

from collections.abc import Callable

import sqlalchemy as sa
from alembic import context, op

revision = "sealed_keys"
down_revision = "leaner_rows"
branch_labels = None
depends_on = None

RAW_KEY_BYTES = 32
_MODES = {"O": "ENABLE TRIGGER", "A": "ENABLE ALWAYS TRIGGER", "R": "ENABLE REPLICA TRIGGER",
          "D": "DISABLE TRIGGER"}  # fmt: skip


def _rewrite(change: Callable[[str, bytes], bytes], wanted: Callable[[bytes], bool]) -> None:
    bind = op.get_bind()
    rows = [(int(i), str(k), bytes(b)) for i, k, b in bind.execute(
        sa.text("SELECT id, key, scatter_key FROM series WHERE scatter_key IS NOT NULL ORDER BY id"))
        if wanted(bytes(b))]  # fmt: skip
    if not rows:
        return
    if bind.dialect.name == "postgresql":
        triggers = [(str(n), str(m)) for n, m in bind.execute(sa.text(
            "SELECT t.tgname, t.tgenabled FROM pg_trigger t JOIN pg_class c ON c.oid = t.tgrelid "
            "WHERE NOT t.tgisinternal AND c.relname = 'series' AND c.relnamespace = current_schema()::regnamespace"))]  # fmt: skip
        for name, _mode in triggers:
            op.execute(f'ALTER TABLE series DISABLE TRIGGER "{name}"')
        for series_id, key, blob in rows:
            bind.execute(sa.text("UPDATE series SET scatter_key = :b WHERE id = :i"), {"b": change(key, blob), "i": series_id})
        for name, mode in triggers:
            op.execute(f'ALTER TABLE series {_MODES[mode]} "{name}"')
        return
    saved = [(str(n), str(q)) for n, q in bind.execute(sa.text(
        "SELECT name, sql FROM sqlite_master WHERE type = 'trigger' AND tbl_name = 'series'"))]  # fmt: skip
    for name, _sql in saved:
        op.execute(f'DROP TRIGGER "{name}"')
    for series_id, key, blob in rows:
        bind.execute(sa.text("UPDATE series SET scatter_key = :b WHERE id = :i"), {"b": change(key, blob), "i": series_id})
    for _name, sql in saved:
        op.execute(sql)


def _given(name: str) -> Callable[[str, bytes], bytes]:
    """The sealing (or opening) issuer hands over; run on its own (the alembic command line,
    a test), the register's key file at its default place, made when missing."""
    given = context.config.attributes.get(name)
    if given is not None:
        return given  # type: ignore[no-any-return]
    from issuer.register.sealing import Keyring, default_key_file

    keyring = Keyring(default_key_file(op.get_bind().engine.url))
    if name == "seal_scatter_key":
        keyring.create()
        return keyring.seal
    return keyring.open


def upgrade() -> None:
    bind = op.get_bind()
    raw = [b for (b,) in bind.execute(sa.text("SELECT scatter_key FROM series WHERE scatter_key IS NOT NULL"))
           if len(bytes(b)) == RAW_KEY_BYTES]  # fmt: skip
    if raw:
        _rewrite(_given("seal_scatter_key"), lambda blob: len(blob) == RAW_KEY_BYTES)


def downgrade() -> None:
    bind = op.get_bind()
    sealed = [b for (b,) in bind.execute(sa.text("SELECT scatter_key FROM series WHERE scatter_key IS NOT NULL"))
              if len(bytes(b)) != RAW_KEY_BYTES]  # fmt: skip
    if sealed:
        _rewrite(_given("open_scatter_key"), lambda blob: len(blob) != RAW_KEY_BYTES)
