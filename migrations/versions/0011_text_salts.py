"""A random salt per code for its holder and note text (``issued_code.text_salt``).

The log keeps no personal data, yet a holder or note edited behind the tool's back, search
key and all, must show. Acts that give a code text give it 16 random bytes here, and log
SHA-256(salt + texts) instead of the texts; erasure clears the salt with the texts, so a
digest left in the log can no longer be tied to any text (crypto-shredding).

Codes that hold text already keep no salt: no log entry holds a digest of their text, so
the replay has nothing to hold them to and says nothing of them, until an act gives them
text again (then they get a salt and are judged from that act on). Salting them here would
need an entry appended to the log by the migration, with no act and no actor behind it,
and would rewrite every such row of a large register in the upgrade's one transaction.

PostgreSQL: roles that may change a code's holder (``issuer db roles``) may set its salt.

Revision ID: text_salts
Revises: partial_request_id
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "text_salts"
down_revision = "partial_request_id"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("issued_code") as batch:
        batch.add_column(sa.Column("text_salt", sa.LargeBinary(length=16), nullable=True))
    bind = op.get_bind()
    if bind.dialect.name == "postgresql":
        for (grantee,) in bind.execute(sa.text(
            "SELECT DISTINCT grantee FROM information_schema.column_privileges "
            "WHERE table_schema = current_schema() AND table_name = 'issued_code' AND column_name = 'holder' "
            "AND privilege_type = 'UPDATE' AND grantee <> current_user"
        )).all():  # fmt: skip
            op.execute(f'GRANT UPDATE (text_salt) ON issued_code TO "{grantee.replace(chr(34), chr(34) * 2)}"')


def downgrade() -> None:
    op.execute("ALTER TABLE issued_code DROP COLUMN text_salt")
