"""One name per thing: lower-case heat-rate columns that say their basis, ``steady_state``,
and events with a ``source`` and a ``unit``.

Revision ID: 0004_names
Revises: 0003_rel
Create Date: 2026-12-02

* ``results``: the heat-rate columns were mixed case (``heat_rate_kJ_per_kWh``), so they were
  quoted identifiers on PostgreSQL and hand-written SQL failed; they are renamed to lower case
  and say the heating-value basis (``heat_rate_lhv_kj_per_kwh``).  ``steady`` becomes
  ``steady_state`` (true steady, false transient, NULL undecided).  Renames keep the data.
* ``events``: operator events were stored as ``kind = "operator_<kind>"`` with a JSON detail
  ``{"unit", "text", "source"}``; they become ``source = "operator"``, ``kind = "<kind>"``,
  ``unit`` and ``detail`` (the text), the names the API uses.  Daemon events get
  ``source = "daemon"``.

Written out explicitly, like 0001: ``tests/test_storage.py`` checks that 0001 plus these
renames give exactly the columns of ``daemon.storage.schema``.
"""

from __future__ import annotations

import json

import sqlalchemy as sa
from alembic import op

revision = "0004_names"
down_revision = "0003_rel"
branch_labels = None
depends_on = None

#: ``results`` columns renamed by this revision: old -> new.
RESULT_RENAMES: tuple[tuple[str, str], ...] = (
    ("heat_rate_kJ_per_kWh", "heat_rate_lhv_kj_per_kwh"),
    ("heat_rate_hhv_kJ_per_kWh", "heat_rate_hhv_kj_per_kwh"),
    ("corrected_heat_rate_kJ_per_kWh", "corrected_heat_rate_lhv_kj_per_kwh"),
    ("corrected_heat_rate_model_kJ_per_kWh", "corrected_heat_rate_lhv_model_kj_per_kwh"),
    ("corrected_heat_rate_curve_kJ_per_kWh", "corrected_heat_rate_lhv_curve_kj_per_kwh"),
    ("steady", "steady_state"),
)

_OPERATOR = "operator_"


def _rename(table: str, old: str, new: str) -> None:
    # ALTER TABLE ... RENAME COLUMN: PostgreSQL, and SQLite since 3.25; keeps data and indexes
    q = op.get_bind().dialect.identifier_preparer.quote
    op.execute(f"ALTER TABLE {q(table)} RENAME COLUMN {q(old)} TO {q(new)}")


def _events() -> sa.TableClause:
    """The columns of ``events`` this revision reads and writes."""
    return sa.table(
        "events",
        sa.column("id", sa.BigInteger()),
        sa.column("source", sa.String()),
        sa.column("kind", sa.String()),
        sa.column("unit", sa.String()),
        sa.column("detail", sa.Text()),
    )


def upgrade() -> None:
    for old, new in RESULT_RENAMES:
        _rename("results", old, new)
    op.add_column(
        "events", sa.Column("source", sa.String(16), nullable=False, server_default="daemon")
    )
    op.add_column("events", sa.Column("unit", sa.String(64), nullable=True))
    events = _events()
    conn = op.get_bind()
    operator_rows = conn.execute(
        sa.select(events.c.id, events.c.kind, events.c.detail).where(
            sa.func.substr(events.c.kind, 1, len(_OPERATOR)) == _OPERATOR
        )
    ).all()
    for row in operator_rows:
        unit, text = None, row.detail
        try:
            parsed = json.loads(row.detail)
        except ValueError:
            parsed = None
        if isinstance(parsed, dict):
            unit = parsed.get("unit") if isinstance(parsed.get("unit"), str) else None
            text = str(parsed.get("text", ""))
        conn.execute(
            events.update()
            .where(events.c.id == row.id)
            .values(source="operator", kind=row.kind[len(_OPERATOR) :], unit=unit, detail=text)
        )


def downgrade() -> None:
    events = _events()
    conn = op.get_bind()
    rows = conn.execute(
        sa.select(events.c.id, events.c.kind, events.c.unit, events.c.detail).where(
            events.c.source == "operator"
        )
    ).all()
    for row in rows:
        detail = json.dumps({"unit": row.unit, "text": row.detail, "source": "api"})
        conn.execute(
            events.update()
            .where(events.c.id == row.id)
            .values(kind=(_OPERATOR + row.kind)[:64], detail=detail)
        )
    with op.batch_alter_table("events") as batch:
        batch.drop_column("unit")
        batch.drop_column("source")
    for old, new in reversed(RESULT_RENAMES):
        _rename("results", new, old)
