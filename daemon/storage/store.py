"""``Store``: the one place that writes and reads the brayscope database.

Same code for SQLite (the default: one file, WAL journal) and PostgreSQL (``postgresql+psycopg://``,
psycopg 3).  Synchronous SQLAlchemy 2: the daemon calls it from a worker thread
(``asyncio.to_thread``).  Writes are idempotent: results are keyed by (unit, ts), readings by
(unit, measurement, source_ts); a replayed or duplicated row changes nothing
(``INSERT ... ON CONFLICT DO NOTHING`` on both backends).

SQLite settings, applied to every new connection: ``journal_mode=WAL``,
``synchronous=NORMAL`` (a committed transaction survives a process kill, not necessarily a power
loss), ``foreign_keys=ON``, ``busy_timeout``.  PostgreSQL keeps its own durability settings
(leave ``fsync`` on).

Exceptions are SQLAlchemy's (:class:`sqlalchemy.exc.SQLAlchemyError` and subclasses, e.g.
``OperationalError`` when the database is down); ``ValueError`` for rows that do not fit the
schema (an unknown result name needs a migration).
"""

from __future__ import annotations

import hashlib
import json
import math
import random
import re
import threading
import time
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, Protocol

import sqlalchemy as sa
from sqlalchemy.dialects import postgresql, sqlite
from sqlalchemy.engine import URL, Connection, Engine, make_url
from sqlalchemy.pool import StaticPool

from daemon.storage import schema as s
from daemon.urls import mask_url

__all__ = [
    "MAX_DETAIL_CHARS",
    "MAX_QUARANTINE_PAYLOAD",
    "RECEIVE_TIME_DETAIL",
    "QuarantineLike",
    "ReadingLike",
    "ResultRow",
    "Store",
    "UnitLike",
    "quarantine_key",
    "redact_url",
    "refused_data",
    "storable_datetime",
]

#: Bytes of a rejected payload kept in the quarantine table.
MAX_QUARANTINE_PAYLOAD = 4096
#: Characters of a detail text kept.
MAX_DETAIL_CHARS = 2000
#: Characters of a raw value's JSON text kept in ``readings.raw_value``.
MAX_RAW_VALUE_CHARS = 256

_SCHEMA_RE = re.compile(r"^[a-z_][a-z0-9_]{0,62}$")
_MIGRATIONS = Path(__file__).resolve().parent.parent / "migrations"
#: Key of the PostgreSQL advisory lock held while migrating (replicas start together).
_MIGRATION_LOCK_KEY = 0x62726179  # "bray"
_MIGRATION_THREAD_LOCK = threading.Lock()


class ReadingLike(Protocol):
    """What :meth:`Store.write_readings` needs (``daemon.types.Reading`` fits).  Read-only
    properties, so frozen dataclasses match."""

    @property
    def unit(self) -> str: ...
    @property
    def measurement(self) -> str: ...
    @property
    def value(self) -> float: ...
    @property
    def source_ts(self) -> float: ...
    @property
    def received_ts(self) -> float: ...
    @property
    def quality(self) -> str: ...
    @property
    def topic(self) -> str: ...
    @property
    def raw_value(self) -> object: ...
    @property
    def raw_uom(self) -> str: ...


class QuarantineLike(Protocol):
    """What :meth:`Store.write_quarantine` needs (``daemon.types.Quarantined`` fits).
    Read-only properties, so frozen dataclasses match; ``measurement`` and ``source_ts`` are
    read with ``getattr`` and may be absent."""

    @property
    def received_ts(self) -> float: ...
    @property
    def topic(self) -> str: ...
    @property
    def payload(self) -> bytes: ...
    @property
    def reason(self) -> str: ...
    @property
    def detail(self) -> str: ...
    @property
    def unit(self) -> str | None: ...


#: Reasons whose detail text depends on the receive time (the offset of the source time):
#: their detail is left out of the natural key.
RECEIVE_TIME_DETAIL = frozenset({"future_timestamp", "past_timestamp"})


def quarantine_key(q: QuarantineLike) -> str:
    """The natural key of a rejected input: SHA-256 (hex) of what makes two deliveries the
    same input.

    Parts: topic, reason, unit, measurement, the payload as stored (first
    :data:`MAX_QUARANTINE_PAYLOAD` bytes), the detail (except for the timestamp reasons of
    :data:`RECEIVE_TIME_DETAIL`, whose detail holds the receive-time offset) and the time:
    the decoded source time when known, else the receive time floored to the second.

    Notes
    -----
    MQTT has no message identity across sessions (the packet id of a redelivery is that of
    the new session), so the content and the source time identify a message.  Without a
    source time (payload without ``ts``, or rejected before its ``ts`` was read:
    ``malformed_json``, ``oversized_payload``, ``unknown_topic`` ...) only the receive second
    is left: a redelivery received in a later second is stored again, and identical rejected
    payloads of one topic received within one second are stored once (the rejected-readings
    counter still counts each).
    """
    source_ts = getattr(q, "source_ts", None)
    when = f"s{float(source_ts)!r}" if source_ts is not None else f"r{math.floor(q.received_ts)}"
    detail = "" if q.reason in RECEIVE_TIME_DETAIL else (q.detail or "")[:MAX_DETAIL_CHARS]
    h = hashlib.sha256()
    for part in (
        q.topic,
        q.reason,
        q.unit or "",
        getattr(q, "measurement", None) or "",
        when,
        detail,
    ):
        b = part.encode("utf-8", "surrogatepass")
        h.update(len(b).to_bytes(8, "big") + b)  # length-prefixed: no ambiguous joins
    h.update(bytes(q.payload[:MAX_QUARANTINE_PAYLOAD]))
    return h.hexdigest()


class UnitLike(Protocol):
    """What :meth:`Store.upsert_units` needs (``daemon.config.UnitConfig`` fits)."""

    unit_type: str
    description: str

    def model_dump_json(self, **kwargs: Any) -> str: ...


@dataclass(frozen=True, slots=True)
class ResultRow:
    """One computed result of one unit at one tick.

    Attributes
    ----------
    unit : str
        Unit name.
    ts : float or datetime
        Tick time: epoch seconds (UTC) or an aware datetime.
    values : mapping str -> float
        KPI values by result name (the unit type's ``results``); NaN or absent → NULL.
    inputs : mapping str -> float
        Canonical input measurements (SI) by measurement name; stored as ``in_<name>``.
    status : int
        :class:`models.status.Reason` bits.
    reasons : str
        Comma-separated reason names (for people reading SQL).
    steady_state, r_statistic, air_mass_flow_source, correction_method
        Steady-state verdict (True steady, False transient, None undecided) and statistic,
        labels of how the result was obtained.
    """

    unit: str
    ts: float | datetime
    values: Mapping[str, float] = field(default_factory=dict)
    inputs: Mapping[str, float] = field(default_factory=dict)
    status: int = 0
    reasons: str = ""
    steady_state: bool | None = None
    r_statistic: float | None = None
    air_mass_flow_source: str | None = None
    correction_method: str | None = None


def redact_url(url: str | URL) -> str:
    """Return ``url`` with its password and every secret query parameter (``password``,
    ``sslpassword``, ``token`` ...) replaced by ``***`` (safe to print and log)."""
    try:
        return mask_url(make_url(url).render_as_string(hide_password=True))
    except Exception:
        return "<unparsable database URL>"


def _finite_or_none(x: Any) -> float | None:
    if x is None:
        return None
    v = float(x)
    return v if math.isfinite(v) else None


class Store:
    """The brayscope database.

    Parameters
    ----------
    url : str
        SQLAlchemy URL: ``sqlite:///path/file.sqlite`` (parent directory created) or
        ``postgresql+psycopg://user@host/db``.
    schema : str, optional
        PostgreSQL only: use this schema (created by :meth:`upgrade`) via ``search_path``.
    password : str, optional
        Password added to the URL's user part (the plant file's ``database.password_file`` or
        ``BRAYSCOPE_DATABASE_PASSWORD``); the URL itself carries none.  Never shown:
        :func:`redact_url` masks it.
    busy_timeout_ms : int
        SQLite: how long a writer waits for the lock [ms].
    connect_timeout_s : int
        PostgreSQL: connection timeout [s].
    echo : bool
        Log SQL (debugging).
    """

    def __init__(
        self,
        url: str,
        *,
        schema: str | None = None,
        password: str | None = None,
        busy_timeout_ms: int = 10_000,
        connect_timeout_s: int = 5,
        echo: bool = False,
    ) -> None:
        self.url = make_url(url)
        if password:
            self.url = self.url.set(password=password)
        self.schema = schema
        backend = self.url.get_backend_name()
        if backend not in ("sqlite", "postgresql"):
            raise ValueError(f"unsupported database {backend!r}: use sqlite or postgresql")
        if schema is not None and (backend != "postgresql" or not _SCHEMA_RE.match(schema)):
            raise ValueError(f"schema {schema!r}: PostgreSQL only, lower-case identifier")
        kwargs: dict[str, Any] = {"echo": echo, "pool_pre_ping": True}
        if backend == "sqlite":
            database = self.url.database or ""
            memory = database in ("", ":memory:") or database.startswith("file::memory:")
            kwargs["connect_args"] = {"check_same_thread": False, "timeout": busy_timeout_ms / 1e3}
            if memory:
                kwargs["poolclass"] = StaticPool
            else:
                Path(database).expanduser().parent.mkdir(parents=True, exist_ok=True)
        else:
            if self.url.get_driver_name() != "psycopg":
                raise ValueError("PostgreSQL URLs must use psycopg 3: postgresql+psycopg://...")
            connect_args: dict[str, Any] = {"connect_timeout": connect_timeout_s}
            if schema is not None:
                connect_args["options"] = f"-c search_path={schema}"
            kwargs["connect_args"] = connect_args
        self.engine: Engine = sa.create_engine(self.url, **kwargs)
        self.dialect = backend
        if backend == "sqlite":
            timeout = int(busy_timeout_ms)

            @sa.event.listens_for(self.engine, "connect")
            def _sqlite_pragmas(dbapi_conn: Any, _record: Any) -> None:
                cur = dbapi_conn.cursor()
                try:
                    # the busy timeout first: switching a new file to WAL takes a lock too
                    cur.execute(f"PRAGMA busy_timeout={timeout}")
                    cur.execute("PRAGMA journal_mode=WAL")
                    cur.execute("PRAGMA synchronous=NORMAL")
                    cur.execute("PRAGMA foreign_keys=ON")
                finally:
                    cur.close()

    @classmethod
    def from_config(cls, database: Any, **kwargs: Any) -> Store:
        """The store of a plant file's ``[database]`` (``daemon.config.DatabaseConfig``: its
        ``url`` and, when given, its ``password``)."""
        secret = getattr(database, "password", None)
        password = secret.get_secret_value() if secret is not None else None
        return cls(database.url, password=password, **kwargs)

    # -- lifecycle -----------------------------------------------------------------------------

    def close(self) -> None:
        """Close every pooled connection."""
        self.engine.dispose()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"Store({redact_url(self.url)!r}, schema={self.schema!r})"

    def ping(self) -> bool:
        """True when the database answers ``SELECT 1``; never raises."""
        try:
            with self.engine.connect() as conn:
                conn.execute(sa.text("SELECT 1"))
            return True
        except Exception:
            return False

    # -- migrations ----------------------------------------------------------------------------

    def alembic_config(self, connection: Connection | None = None) -> Any:
        """An :class:`alembic.config.Config` for our migrations (no alembic.ini needed)."""
        from alembic.config import Config

        cfg = Config()
        cfg.set_main_option("script_location", str(_MIGRATIONS))
        if connection is None:  # env.py opens its own connection from the URL
            url = self.url.render_as_string(hide_password=False)
            cfg.set_main_option("sqlalchemy.url", url.replace("%", "%%"))
        cfg.attributes["connection"] = connection
        return cfg

    def upgrade(self, revision: str = "head", *, lock_wait_s: float = 120.0) -> None:
        """Apply the migrations up to ``revision`` (idempotent; safe with parallel replicas,
        which serialise on PostgreSQL's advisory lock or SQLite's write lock).

        Parameters
        ----------
        revision : str
            Target revision.
        lock_wait_s : float
            SQLite: how long to keep retrying when the database stays locked by another
            process (each attempt also waits ``busy_timeout``) [s].
        """
        if self.dialect != "sqlite":
            self._upgrade_once(revision)
            return
        deadline = time.monotonic() + lock_wait_s
        delay = 0.05
        while True:
            try:
                self._upgrade_once(revision)
                return
            except sa.exc.OperationalError as exc:
                if not _sqlite_busy(exc) or time.monotonic() + delay > deadline:
                    raise
            # another replica holds the file: the pool may keep a connection in a bad state
            self.engine.dispose()
            time.sleep(delay * (0.5 + random.random()))
            delay = min(delay * 2.0, 2.0)

    def _upgrade_once(self, revision: str) -> None:
        from alembic import command

        # alembic's context/op proxies are process-global: one migration at a time per process
        with _MIGRATION_THREAD_LOCK, self.engine.begin() as conn:
            if self.dialect == "sqlite":
                # take the write lock first: with the sqlite3 module DDL starts no transaction
                # by itself, and replicas starting together must not race on CREATE TABLE
                conn.exec_driver_sql("BEGIN IMMEDIATE")
            if self.dialect == "postgresql":
                conn.execute(
                    sa.text("SELECT pg_advisory_xact_lock(:k)"), {"k": _MIGRATION_LOCK_KEY}
                )
                if self.schema is not None:
                    conn.execute(sa.text(f'CREATE SCHEMA IF NOT EXISTS "{self.schema}"'))
            command.upgrade(self.alembic_config(conn), revision)

    def current_revision(self) -> str | None:
        """The migration revision stored in the database (None for an empty database)."""
        from alembic.runtime.migration import MigrationContext

        with self.engine.connect() as conn:
            rev: str | None = MigrationContext.configure(conn).get_current_revision()
            return rev

    def head_revision(self) -> str:
        """The newest migration revision this version of brayscope knows."""
        from alembic.script import ScriptDirectory

        head = ScriptDirectory.from_config(self.alembic_config()).get_current_head()
        if head is None:
            raise RuntimeError("no migrations found in " + str(_MIGRATIONS))
        return head

    # -- writes --------------------------------------------------------------------------------

    def _insert(self, table: sa.Table) -> Any:
        if self.dialect == "postgresql":
            return postgresql.insert(table)
        return sqlite.insert(table)

    def _insert_ignore(self, conn: Connection, table: sa.Table, rows: list[dict[str, Any]]) -> int:
        """Insert ``rows``, skipping those whose key exists; return how many were new.

        SQLite: one single-row ``INSERT ... ON CONFLICT DO NOTHING`` run with the driver's
        ``executemany`` (one prepared statement, reused for every row), counted by the summed
        ``rowcount`` (skipped rows change nothing, so they do not count).  Not the multi-row
        ``VALUES`` form SQLAlchemy uses with RETURNING: its SQL text differs with the number
        of rows, and Python's ``sqlite3`` keeps up to 128 prepared statements per connection,
        each with up to 1000 × 9 parameters, so batches of varying size held about 90 MB of
        statement cache (measured; see docs/benchmarks.md, "Live path").  PostgreSQL keeps
        RETURNING (its prepared statements live in the server).
        """
        if not rows:
            return 0
        if self.dialect == "sqlite":
            stmt = self._insert(table).on_conflict_do_nothing()
            return int(conn.execute(stmt, rows).rowcount)
        key = next(iter(table.primary_key.columns))
        stmt = self._insert(table).on_conflict_do_nothing().returning(key)
        return len(conn.execute(stmt, rows).all())

    def upsert_units(self, configs: Mapping[str, UnitLike]) -> None:
        """Insert or update one ``units`` row per configured unit."""
        now = datetime.now(UTC)
        rows = [
            {
                "name": name,
                "unit_type": cfg.unit_type,
                "description": cfg.description,
                "config_json": cfg.model_dump_json(exclude={"tags"}),
                "updated_at": now,
            }
            for name, cfg in configs.items()
        ]
        if not rows:
            return
        stmt = self._insert(s.units)
        stmt = stmt.on_conflict_do_update(
            index_elements=[s.units.c.name],
            set_={
                "unit_type": stmt.excluded.unit_type,
                "description": stmt.excluded.description,
                "config_json": stmt.excluded.config_json,
                "updated_at": stmt.excluded.updated_at,
            },
        )
        with self.engine.begin() as conn:
            conn.execute(stmt, rows)

    def ensure_unit(self, name: str, unit_type: str, description: str = "") -> None:
        """Make sure a ``units`` row exists (no update when it does)."""
        row = {
            "name": name,
            "unit_type": unit_type,
            "description": description,
            "config_json": "{}",
            "updated_at": datetime.now(UTC),
        }
        with self.engine.begin() as conn:
            self._insert_ignore(conn, s.units, [row])

    def write_results(self, rows: Sequence[ResultRow]) -> int:
        """Store results; rows whose (unit, ts) exists are skipped.  Returns rows inserted.

        Raises
        ------
        ValueError
            A value or input name without a column (a new result needs a migration).
        """
        if not rows:
            return 0
        value_cols = set(s.RESULT_VALUE_COLUMNS)
        input_cols = set(s.RESULT_INPUT_COLUMNS)
        now = datetime.now(UTC)
        out: list[dict[str, Any]] = []
        for r in rows:
            unknown = set(r.values) - value_cols
            if unknown:
                raise ValueError(
                    f"results has no column for {sorted(unknown)}: a new result needs a "
                    "schema migration (daemon/migrations/versions)"
                )
            unknown = set(r.inputs) - input_cols
            if unknown:
                raise ValueError(f"results has no input column for {sorted(unknown)}")
            d: dict[str, Any] = {
                "unit": r.unit,
                "ts": s.to_utc_datetime(r.ts),
                "status": int(r.status),
                "reasons": r.reasons,
                "steady_state": None if r.steady_state is None else bool(r.steady_state),
                "r_statistic": _finite_or_none(r.r_statistic),
                "air_mass_flow_source": r.air_mass_flow_source,
                "correction_method": r.correction_method,
                "created_at": now,
            }
            for name in s.RESULT_VALUE_COLUMNS:
                d[name] = _finite_or_none(r.values.get(name))
            for name in s.RESULT_INPUT_COLUMNS:
                d[s.INPUT_PREFIX + name] = _finite_or_none(r.inputs.get(name))
            out.append(d)
        with self.engine.begin() as conn:
            return self._insert_ignore(conn, s.results, out)

    def write_readings(self, readings: Iterable[ReadingLike]) -> int:
        """Store raw readings; those whose (unit, measurement, source_ts) exists are skipped.

        Returns the number of rows inserted.  The transaction is committed when this returns,
        so the caller may acknowledge the messages afterwards.
        """
        rows = [
            {
                "unit": r.unit,
                "measurement": r.measurement,
                "source_ts": s.to_utc_datetime(r.source_ts),
                "value": _finite_or_none(r.value),
                "received_at": s.to_utc_datetime(r.received_ts),
                "quality": r.quality,
                "topic": r.topic,
                "raw_value": _raw_text(r.raw_value),
                "raw_uom": r.raw_uom,
            }
            for r in readings
        ]
        if not rows:
            return 0
        with self.engine.begin() as conn:
            return self._insert_ignore(conn, s.readings, rows)

    def write_quarantine(self, items: Iterable[QuarantineLike]) -> int:
        """Store rejected inputs (payload truncated to :data:`MAX_QUARANTINE_PAYLOAD` bytes);
        an item whose natural key (:func:`quarantine_key`) exists is skipped, so a redelivered
        message is stored once.  Returns the number of rows inserted; committed on return."""
        rows = [
            {
                "received_at": s.to_utc_datetime(q.received_ts),
                "topic": q.topic,
                "payload": bytes(q.payload[:MAX_QUARANTINE_PAYLOAD]),
                "reason": q.reason,
                "detail": (q.detail or "")[:MAX_DETAIL_CHARS],
                "unit": q.unit,
                "measurement": getattr(q, "measurement", None),
                "source_ts": storable_datetime(getattr(q, "source_ts", None)),
                "natural_key": quarantine_key(q),
            }
            for q in items
        ]
        if not rows:
            return 0
        with self.engine.begin() as conn:
            return self._insert_ignore(conn, s.quarantine, rows)

    def write_event(
        self,
        kind: str,
        detail: str = "",
        ts: float | datetime | None = None,
        *,
        source: str = "daemon",
        unit: str | None = None,
    ) -> None:
        """Record an event: ``source`` ``"daemon"`` (``kind`` one of
        :data:`daemon.storage.schema.DAEMON_EVENT_KINDS`) or ``"operator"`` (from the API,
        any lower-case word such as ``"wash"``), optionally for one ``unit``."""
        row = {
            "ts": s.to_utc_datetime(ts) if ts is not None else datetime.now(UTC),
            "source": source[:16],
            "kind": kind[:64],
            "unit": unit,
            "detail": detail[:MAX_DETAIL_CHARS],
        }
        with self.engine.begin() as conn:
            conn.execute(sa.insert(s.events), [row])

    # -- broker subscriptions ----------------------------------------------------------------

    def subscriptions(self, client_id: str) -> list[str]:
        """The MQTT topic filters remembered as subscribed under ``client_id``, sorted."""
        c = s.broker_subscriptions.c
        q = sa.select(c.topic_filter).where(c.client_id == client_id).order_by(c.topic_filter)
        with self.engine.connect() as conn:
            return [str(f) for f in conn.execute(q).scalars()]

    def remember_subscriptions(self, client_id: str, filters: Iterable[str]) -> int:
        """Record ``filters`` as subscribed under ``client_id`` (before subscribing, so the
        record never misses a subscription the broker holds); returns how many were new."""
        now = datetime.now(UTC)
        rows = [
            {"client_id": client_id, "topic_filter": f, "subscribed_at": now}
            for f in dict.fromkeys(filters)
        ]
        if not rows:
            return 0
        with self.engine.begin() as conn:
            return self._insert_ignore(conn, s.broker_subscriptions, rows)

    def forget_subscriptions(self, client_id: str, filters: Iterable[str]) -> int:
        """Drop ``filters`` of ``client_id`` (after the broker confirmed the unsubscribe);
        returns how many rows went."""
        names = list(dict.fromkeys(filters))
        if not names:
            return 0
        c = s.broker_subscriptions.c
        stmt = s.broker_subscriptions.delete().where(
            c.client_id == client_id, c.topic_filter.in_(names)
        )
        with self.engine.begin() as conn:
            return int(conn.execute(stmt).rowcount)

    # -- reads ---------------------------------------------------------------------------------

    def latest_results(self, unit: str, n: int = 1) -> list[dict[str, Any]]:
        """The ``n`` newest results of ``unit``, newest first, as column → value dicts
        (``ts`` an aware UTC datetime, NULL → None)."""
        q = (
            sa.select(s.results)
            .where(s.results.c.unit == unit)
            .order_by(s.results.c.ts.desc())
            .limit(int(n))
        )
        with self.engine.connect() as conn:
            return [dict(row._mapping) for row in conn.execute(q)]

    def results_between(
        self, unit: str, t0: float | datetime, t1: float | datetime
    ) -> list[dict[str, Any]]:
        """Results of ``unit`` with ``t0 <= ts < t1``, oldest first."""
        q = (
            sa.select(s.results)
            .where(
                s.results.c.unit == unit,
                s.results.c.ts >= s.to_utc_datetime(t0),
                s.results.c.ts < s.to_utc_datetime(t1),
            )
            .order_by(s.results.c.ts)
        )
        with self.engine.connect() as conn:
            return [dict(row._mapping) for row in conn.execute(q)]

    def readings_between(
        self,
        unit: str,
        t0: float | datetime,
        t1: float | datetime,
        measurement: str | None = None,
    ) -> list[dict[str, Any]]:
        """Raw readings of ``unit`` with ``t0 <= source_ts < t1``, oldest first."""
        c = s.readings.c
        cond = [c.unit == unit, c.source_ts >= s.to_utc_datetime(t0)]
        cond.append(c.source_ts < s.to_utc_datetime(t1))
        if measurement is not None:
            cond.append(c.measurement == measurement)
        q = sa.select(s.readings).where(*cond).order_by(c.source_ts, c.measurement)
        with self.engine.connect() as conn:
            return [dict(row._mapping) for row in conn.execute(q)]

    def quarantine_rows(self, limit: int = 100) -> list[dict[str, Any]]:
        """The newest quarantined inputs, newest first."""
        q = sa.select(s.quarantine).order_by(s.quarantine.c.id.desc()).limit(int(limit))
        with self.engine.connect() as conn:
            return [dict(row._mapping) for row in conn.execute(q)]

    def count(self, table: str) -> int:
        """Number of rows of one of our tables."""
        t = s.metadata.tables[table]
        with self.engine.connect() as conn:
            return int(conn.execute(sa.select(sa.func.count()).select_from(t)).scalar_one())

    # -- retention -----------------------------------------------------------------------------

    def purge_older_than(self, ts: float | datetime, *, dry_run: bool = False) -> dict[str, int]:
        """Delete results, readings, quarantine rows and events older than ``ts``.

        Parameters
        ----------
        ts : float or datetime
            Cut-off: epoch seconds (UTC) or an aware datetime; rows strictly older go.
        dry_run : bool
            Count only.

        Returns
        -------
        dict
            Table name → rows deleted (or that would be).
        """
        return self.purge(dict.fromkeys(_PURGE_COLUMNS, ts), dry_run=dry_run)

    def purge(
        self, cutoffs: Mapping[str, float | datetime], *, dry_run: bool = False
    ) -> dict[str, int]:
        """Delete, per table, the rows older than that table's cut-off (one transaction).

        Parameters
        ----------
        cutoffs : mapping table name -> float or datetime
            ``results``, ``readings``, ``quarantine`` and/or ``events`` to their cut-off
            (epoch seconds UTC or an aware datetime); tables not named are left alone.
        dry_run : bool
            Count only.

        Returns
        -------
        dict
            Table name → rows deleted (or that would be), for the tables named.

        Raises
        ------
        ValueError
            A table that has no retention (``units``) or does not exist.
        """
        unknown = set(cutoffs) - set(_PURGE_COLUMNS)
        if unknown:
            raise ValueError(f"no retention for {sorted(unknown)}: use {list(_PURGE_COLUMNS)}")
        counts: dict[str, int] = {}
        with self.engine.begin() as conn:
            for name, column in _PURGE_COLUMNS.items():
                if name not in cutoffs:
                    continue
                table = s.metadata.tables[name]
                col = table.c[column]
                cutoff = s.to_utc_datetime(cutoffs[name])
                if dry_run:
                    q = sa.select(sa.func.count()).select_from(table).where(col < cutoff)
                    counts[name] = int(conn.execute(q).scalar_one())
                else:
                    counts[name] = int(conn.execute(table.delete().where(col < cutoff)).rowcount)
        return counts


#: Tables with a retention period -> the time column that decides a row's age.
_PURGE_COLUMNS: dict[str, str] = {
    "results": "ts",
    "readings": "source_ts",
    "quarantine": "received_at",
    "events": "ts",
}


def _sqlite_busy(exc: sa.exc.OperationalError) -> bool:
    """True for SQLite's "database is locked" / "busy" errors (worth a retry)."""
    text = str(getattr(exc, "orig", exc)).lower()
    return "locked" in text or "busy" in text


def storable_datetime(ts: float | datetime | None) -> datetime | None:
    """``ts`` as an aware UTC datetime, or None when it has none: absent, not finite, or
    outside the years 1..9999 that a Python ``datetime`` (and so a row) can hold.

    A rejected input keeps its receive time; a source time that cannot be represented (a
    poison timestamp such as ``1e300`` or year 10000 in UTC) is left out of the row instead
    of making the whole write fail.
    """
    if ts is None:
        return None
    try:
        return s.to_utc_datetime(ts)
    except (ValueError, OverflowError, OSError):
        return None


#: SQLAlchemy errors that mean "these values were refused" rather than "the database is
#: unreachable or broken": bad data (out of range, NUL in text ...) and constraint violations.
_DATA_ERRORS: tuple[type[BaseException], ...] = (sa.exc.DataError, sa.exc.IntegrityError)
#: Python errors raised while turning values into rows (an unrepresentable datetime ...).
_VALUE_ERRORS: tuple[type[BaseException], ...] = (
    ValueError,
    OverflowError,
    TypeError,
    UnicodeError,
)


def refused_data(exc: BaseException) -> bool:
    """True when a failed write was refused because of its *data* (the database itself may be
    fine), False for everything that points at the database (connection lost, refused,
    timed out, disk full, locked, missing table ...).

    The caller still asks the database (:meth:`Store.ping`) before it treats a failure as
    bad data: "refused data" on a database that does not answer is an outage.
    """
    if isinstance(exc, sa.exc.DBAPIError):
        return isinstance(exc, _DATA_ERRORS) and not exc.connection_invalidated
    if isinstance(exc, sa.exc.StatementError):  # a bind parameter failed to convert
        return isinstance(exc.orig, _VALUE_ERRORS)
    if isinstance(exc, sa.exc.SQLAlchemyError):
        return False
    return isinstance(exc, _VALUE_ERRORS)


def _raw_text(raw: object) -> str | None:
    if raw is None:
        return None
    try:
        text = json.dumps(raw, allow_nan=True, default=str)
    except (TypeError, ValueError):
        text = repr(raw)
    return text[:MAX_RAW_VALUE_CHARS]
