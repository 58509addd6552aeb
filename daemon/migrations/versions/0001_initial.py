"""Initial schema: units, results, readings, quarantine, events.

Revision ID: 0001
Revises:
Create Date: 2026-01-01

Written out explicitly (never generated at run time): the columns of ``results`` are the
result names of the built-in unit types at the time of this revision; a new result needs a
new revision.  ``tests/test_storage.py`` checks this file against ``daemon.storage.schema``.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None

#: KPI columns of ``results`` (result names of the gas_turbine unit type).
RESULT_VALUES: tuple[str, ...] = (
    "compressor_pressure_ratio",
    "compressor_isentropic_efficiency",
    "compressor_polytropic_efficiency",
    "compressor_specific_work",
    "compressor_power",
    "compressor_isentropic_discharge_temperature",
    "air_mass_flow",
    "heat_balance_air_mass_flow",
    "fuel_air_ratio",
    "exhaust_mass_flow",
    "turbine_inlet_temperature",
    "turbine_inlet_pressure",
    "turbine_isentropic_efficiency",
    "turbine_isentropic_exhaust_temperature",
    "turbine_power",
    "shaft_power",
    "heat_input",
    "heat_rate_kJ_per_kWh",
    "heat_rate_hhv_kJ_per_kWh",
    "thermal_efficiency",
    "back_work_ratio",
    "ideal_brayton_efficiency",
    "ideal_cycle_efficiency",
    "carnot_efficiency",
    "corrected_power",
    "corrected_heat_rate_kJ_per_kWh",
    "corrected_power_model",
    "corrected_heat_rate_model_kJ_per_kWh",
    "corrected_power_curve",
    "corrected_heat_rate_curve_kJ_per_kWh",
    "heat_balance_closure",
)

#: Input-measurement columns of ``results``, stored as ``in_<name>``.
RESULT_INPUTS: tuple[str, ...] = (
    "ambient_temperature",
    "ambient_pressure",
    "ambient_relative_humidity",
    "compressor_inlet_temperature",
    "compressor_inlet_pressure",
    "compressor_discharge_temperature",
    "compressor_discharge_pressure",
    "exhaust_temperature",
    "exhaust_pressure",
    "fuel_mass_flow",
    "generator_power",
    "air_mass_flow",
    "fuel_temperature",
)


def _id() -> sa.Column[int]:
    return sa.Column(
        "id",
        sa.BigInteger().with_variant(sa.Integer(), "sqlite"),
        primary_key=True,
        autoincrement=True,
    )


def upgrade() -> None:
    ts = sa.DateTime(timezone=True)
    op.create_table(
        "units",
        sa.Column("name", sa.String(64), nullable=False),
        sa.Column("unit_type", sa.String(64), nullable=False),
        sa.Column("description", sa.Text(), nullable=False, server_default=""),
        sa.Column("config_json", sa.Text(), nullable=False, server_default="{}"),
        sa.Column("updated_at", ts, nullable=False),
        sa.PrimaryKeyConstraint("name", name="pk_units"),
    )
    op.create_table(
        "results",
        sa.Column("unit", sa.String(64), nullable=False),
        sa.Column("ts", ts, nullable=False),
        sa.Column("status", sa.BigInteger(), nullable=False),
        sa.Column("reasons", sa.Text(), nullable=False, server_default=""),
        sa.Column("steady", sa.Boolean(), nullable=True),
        sa.Column("r_statistic", sa.Double(), nullable=True),
        sa.Column("air_mass_flow_source", sa.String(32), nullable=True),
        sa.Column("correction_method", sa.String(32), nullable=True),
        *(sa.Column(name, sa.Double(), nullable=True) for name in RESULT_VALUES),
        *(sa.Column("in_" + name, sa.Double(), nullable=True) for name in RESULT_INPUTS),
        sa.Column("created_at", ts, nullable=False),
        sa.PrimaryKeyConstraint("unit", "ts", name="pk_results"),
        sa.ForeignKeyConstraint(["unit"], ["units.name"], name="fk_results_unit_units"),
    )
    op.create_index("ix_results_ts", "results", ["ts"])
    op.create_table(
        "readings",
        sa.Column("unit", sa.String(64), nullable=False),
        sa.Column("measurement", sa.String(64), nullable=False),
        sa.Column("source_ts", ts, nullable=False),
        sa.Column("value", sa.Double(), nullable=True),
        sa.Column("received_at", ts, nullable=False),
        sa.Column("quality", sa.String(16), nullable=False),
        sa.Column("topic", sa.Text(), nullable=False),
        sa.Column("raw_value", sa.Text(), nullable=True),
        sa.Column("raw_uom", sa.String(32), nullable=False, server_default=""),
        sa.PrimaryKeyConstraint("unit", "measurement", "source_ts", name="pk_readings"),
        sa.ForeignKeyConstraint(["unit"], ["units.name"], name="fk_readings_unit_units"),
    )
    op.create_index("ix_readings_source_ts", "readings", ["source_ts"])
    op.create_table(
        "quarantine",
        _id(),
        sa.Column("received_at", ts, nullable=False),
        sa.Column("topic", sa.Text(), nullable=False),
        sa.Column("payload", sa.LargeBinary(), nullable=False),
        sa.Column("reason", sa.String(32), nullable=False),
        sa.Column("detail", sa.Text(), nullable=False, server_default=""),
        sa.Column("unit", sa.String(64), nullable=True),
        sa.Column("measurement", sa.String(64), nullable=True),
        sa.Column("source_ts", ts, nullable=True),
        sa.PrimaryKeyConstraint("id", name="pk_quarantine"),
    )
    op.create_index("ix_quarantine_received_at", "quarantine", ["received_at"])
    op.create_index("ix_quarantine_reason", "quarantine", ["reason"])
    op.create_table(
        "events",
        _id(),
        sa.Column("ts", ts, nullable=False),
        sa.Column("kind", sa.String(64), nullable=False),
        sa.Column("detail", sa.Text(), nullable=False, server_default=""),
        sa.PrimaryKeyConstraint("id", name="pk_events"),
    )
    op.create_index("ix_events_ts", "events", ["ts"])


def downgrade() -> None:
    op.drop_index("ix_events_ts", table_name="events")
    op.drop_table("events")
    op.drop_index("ix_quarantine_reason", table_name="quarantine")
    op.drop_index("ix_quarantine_received_at", table_name="quarantine")
    op.drop_table("quarantine")
    op.drop_index("ix_readings_source_ts", table_name="readings")
    op.drop_table("readings")
    op.drop_index("ix_results_ts", table_name="results")
    op.drop_table("results")
    op.drop_table("units")
