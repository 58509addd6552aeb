"""The MQTT topic filters subscribed under each client id.

Revision ID: 0003_rel
Revises: 0002
Create Date: 2026-12-08

A persistent MQTT session keeps every subscription the client ever made, and MQTT has no
request that lists them.  ``broker_subscriptions`` remembers the filters the daemon subscribed
under its client id, so that at start it can unsubscribe those the plant file no longer has
(see ``daemon.runtime.Runtime`` and ``docs/feeds.md``, "Subscriptions").
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0003_rel"
down_revision = "0002"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "broker_subscriptions",
        sa.Column("client_id", sa.String(128), nullable=False),
        sa.Column("topic_filter", sa.Text(), nullable=False),
        sa.Column("subscribed_at", sa.DateTime(timezone=True), nullable=False),
        sa.PrimaryKeyConstraint("client_id", "topic_filter", name="pk_broker_subscriptions"),
    )


def downgrade() -> None:
    op.drop_table("broker_subscriptions")
