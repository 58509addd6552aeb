"""Tables of the brayscope database (SQLAlchemy Core), identical on SQLite and PostgreSQL.

The tables here must match the Alembic migrations in ``daemon/migrations/versions`` exactly;
``tests/test_storage.py`` compares them.  Migrations are static: a new result of a unit type
needs a new column here *and* a new migration (a test checks that every result name of every
built-in unit type has its column).

Timestamps are UTC: ``timestamp with time zone`` on PostgreSQL; on SQLite (no time zone type)
naive UTC text, converted back to aware UTC datetimes on read by :class:`UTCDateTime`.

Tables
------
``units``       one row per configured unit (name, type, description, plant-file excerpt)
``results``     one row per unit and tick: KPI columns named exactly like the unit type's
                result names (glossary), input measurements (SI, prefixed ``in_``), status
``readings``    raw canonical readings (SI), unique on (unit, measurement, source_ts)
``quarantine``  rejected inputs: truncated payload bytes, topic, reason code, detail; unique
                on ``natural_key`` (a redelivered message is stored once)
``events``      events of the daemon (start, stop, broker reconnect, database outage) and of
                operators (``POST /api/events``: wash, note ...), by ``source``

``broker_subscriptions``  the MQTT topic filters subscribed under each client id (migration
                0003_rel): a persistent session keeps its subscriptions and MQTT cannot list
                them, so the daemon remembers them to unsubscribe those a new plant file drops

All identifiers are lower case (a test inspects the created schema on both backends), so
hand-written SQL needs no quoting.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Dialect
from sqlalchemy.types import TypeDecorator

__all__ = [
    "DAEMON_EVENT_KINDS",
    "EVENT_SOURCES",
    "INPUT_PREFIX",
    "RESULT_INPUT_COLUMNS",
    "RESULT_LABEL_COLUMNS",
    "RESULT_VALUE_COLUMNS",
    "UTCDateTime",
    "broker_subscriptions",
    "events",
    "metadata",
    "quarantine",
    "readings",
    "results",
    "to_utc_datetime",
    "units",
]

#: Prefix of the input-measurement columns of ``results`` (keeps them apart from KPI names).
INPUT_PREFIX = "in_"

#: Values of ``events.source``.
EVENT_SOURCES: tuple[str, ...] = ("daemon", "operator")

#: ``events.kind`` of the daemon's own events: ``start``, ``stop`` (clean stop), ``reconnect``
#: (the broker connection came back after a loss; detail: how long it was down),
#: ``db_outage`` (written when the database answers again; detail: from, to, seconds).
DAEMON_EVENT_KINDS: tuple[str, ...] = ("start", "stop", "reconnect", "db_outage")

NAMING = {
    "ix": "ix_%(table_name)s_%(column_0_N_name)s",
    "uq": "uq_%(table_name)s_%(column_0_N_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
}

metadata = sa.MetaData(naming_convention=NAMING)


def to_utc_datetime(value: datetime | float | int) -> datetime:
    """Return an aware UTC datetime from an aware datetime or epoch seconds.

    Raises
    ------
    ValueError
        A naive datetime (its zone is unknown).
    """
    if isinstance(value, datetime):
        if value.tzinfo is None:
            raise ValueError("naive datetime: give an aware datetime (UTC) or epoch seconds")
        return value.astimezone(UTC)
    return datetime.fromtimestamp(float(value), UTC)


class UTCDateTime(TypeDecorator[datetime]):
    """Aware-UTC datetime on both backends; accepts epoch seconds on write."""

    impl = sa.DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value: Any, dialect: Dialect) -> datetime | None:
        if value is None:
            return None
        dt = to_utc_datetime(value)
        return dt.replace(tzinfo=None) if dialect.name == "sqlite" else dt

    def process_result_value(self, value: Any, dialect: Dialect) -> datetime | None:
        if value is None:
            return None
        dt: datetime = value
        if dt.tzinfo is None:
            return dt.replace(tzinfo=UTC)
        return dt.astimezone(UTC)


def _id() -> sa.Column[int]:
    # BIGINT on PostgreSQL (identity); INTEGER PRIMARY KEY (rowid alias) on SQLite
    return sa.Column(
        "id",
        sa.BigInteger().with_variant(sa.Integer(), "sqlite"),
        primary_key=True,
        autoincrement=True,
    )


units = sa.Table(
    "units",
    metadata,
    sa.Column("name", sa.String(64), primary_key=True),
    sa.Column("unit_type", sa.String(64), nullable=False),
    sa.Column("description", sa.Text(), nullable=False, server_default=""),
    sa.Column("config_json", sa.Text(), nullable=False, server_default="{}"),
    sa.Column("updated_at", UTCDateTime(), nullable=False),
)

#: KPI columns of ``results``: exactly the result names of the built-in unit types.
RESULT_VALUE_COLUMNS: tuple[str, ...] = (
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
    "heat_rate_lhv_kj_per_kwh",
    "heat_rate_hhv_kj_per_kwh",
    "thermal_efficiency",
    "back_work_ratio",
    "ideal_brayton_efficiency",
    "ideal_cycle_efficiency",
    "carnot_efficiency",
    "corrected_power",
    "corrected_heat_rate_lhv_kj_per_kwh",
    "corrected_power_model",
    "corrected_heat_rate_lhv_model_kj_per_kwh",
    "corrected_power_curve",
    "corrected_heat_rate_lhv_curve_kj_per_kwh",
    "heat_balance_closure",
)

#: Input-measurement columns of ``results`` (without :data:`INPUT_PREFIX`).
RESULT_INPUT_COLUMNS: tuple[str, ...] = (
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

#: Text label columns of ``results``.
RESULT_LABEL_COLUMNS: tuple[str, ...] = ("air_mass_flow_source", "correction_method")

results = sa.Table(
    "results",
    metadata,
    sa.Column("unit", sa.String(64), sa.ForeignKey("units.name"), primary_key=True),
    sa.Column("ts", UTCDateTime(), primary_key=True),
    sa.Column("status", sa.BigInteger(), nullable=False),
    sa.Column("reasons", sa.Text(), nullable=False, server_default=""),
    # steady-state test: true steady, false transient, NULL undecided
    sa.Column("steady_state", sa.Boolean(), nullable=True),
    sa.Column("r_statistic", sa.Double(), nullable=True),
    *(sa.Column(name, sa.String(32), nullable=True) for name in RESULT_LABEL_COLUMNS),
    *(sa.Column(name, sa.Double(), nullable=True) for name in RESULT_VALUE_COLUMNS),
    *(sa.Column(INPUT_PREFIX + name, sa.Double(), nullable=True) for name in RESULT_INPUT_COLUMNS),
    sa.Column("created_at", UTCDateTime(), nullable=False),
    sa.Index(None, "ts"),
)

readings = sa.Table(
    "readings",
    metadata,
    sa.Column("unit", sa.String(64), sa.ForeignKey("units.name"), primary_key=True),
    sa.Column("measurement", sa.String(64), primary_key=True),
    sa.Column("source_ts", UTCDateTime(), primary_key=True),
    sa.Column("value", sa.Double(), nullable=True),
    sa.Column("received_at", UTCDateTime(), nullable=False),
    sa.Column("quality", sa.String(16), nullable=False),
    sa.Column("topic", sa.Text(), nullable=False),
    sa.Column("raw_value", sa.Text(), nullable=True),
    sa.Column("raw_uom", sa.String(32), nullable=False, server_default=""),
    sa.Index(None, "source_ts"),
)

quarantine = sa.Table(
    "quarantine",
    metadata,
    _id(),
    sa.Column("received_at", UTCDateTime(), nullable=False),
    sa.Column("topic", sa.Text(), nullable=False),
    sa.Column("payload", sa.LargeBinary(), nullable=False),
    sa.Column("reason", sa.String(32), nullable=False),
    sa.Column("detail", sa.Text(), nullable=False, server_default=""),
    sa.Column("unit", sa.String(64), nullable=True),
    sa.Column("measurement", sa.String(64), nullable=True),
    sa.Column("source_ts", UTCDateTime(), nullable=True),
    # SHA-256 hex of what makes two deliveries the same rejected input (migration 0002);
    # NULL for rows written before it
    sa.Column("natural_key", sa.String(64), nullable=True),
    sa.Index(None, "received_at"),
    sa.Index(None, "reason"),
    sa.Index(None, "natural_key", unique=True),
)

events = sa.Table(
    "events",
    metadata,
    _id(),
    sa.Column("ts", UTCDateTime(), nullable=False),
    # "daemon" or "operator" (migration 0004_names; operator kinds were "operator_<kind>")
    sa.Column("source", sa.String(16), nullable=False, server_default="daemon"),
    sa.Column("kind", sa.String(64), nullable=False),
    sa.Column("unit", sa.String(64), nullable=True),
    sa.Column("detail", sa.Text(), nullable=False, server_default=""),
    sa.Index(None, "ts"),
)

broker_subscriptions = sa.Table(
    "broker_subscriptions",
    metadata,
    sa.Column("client_id", sa.String(128), primary_key=True),
    sa.Column("topic_filter", sa.Text(), primary_key=True),
    sa.Column("subscribed_at", UTCDateTime(), nullable=False),
)
