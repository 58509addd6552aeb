"""Quarantine rows get a natural key, so a redelivered message is stored once.

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-01

``quarantine.natural_key`` is the SHA-256 (hex) of what makes two deliveries the same rejected
input (see ``daemon.storage.store.quarantine_key``); a unique index on it lets
``write_quarantine`` insert with ``ON CONFLICT DO NOTHING``.  Rows written before this revision
keep a NULL key (NULLs never conflict), so upgrading never fails on old duplicates.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.add_column("quarantine", sa.Column("natural_key", sa.String(64), nullable=True))
    op.create_index("ix_quarantine_natural_key", "quarantine", ["natural_key"], unique=True)


def downgrade() -> None:
    op.drop_index("ix_quarantine_natural_key", table_name="quarantine")
    with op.batch_alter_table("quarantine") as batch:
        batch.drop_column("natural_key")
