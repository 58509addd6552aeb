"""daemon.storage against real databases: SQLite files and PostgreSQL (fixture ``store_url``).

What is checked, and why (facts of the trade, common practice):
* migrations run from an empty database and leave exactly the tables of
  ``daemon.storage.schema`` (Alembic's own autogenerate comparison finds no difference);
* QoS-1 delivery is at-least-once (MQTT 3.1.1 §4.3.2, MQTT 5.0 §4.3.2), so every write keyed by
  (unit, ts[, measurement]) must be idempotent: writing the same rows twice changes nothing;
* SQLite WAL with synchronous=NORMAL (SQLite documentation, "Write-Ahead Logging" and
  "PRAGMA synchronous") is what makes a committed write survive a process kill.
"""

from __future__ import annotations

import math
import random
import subprocess
import sys
from datetime import UTC, datetime, timedelta

import pytest
import sqlalchemy as sa
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext

from daemon.storage import MAX_QUARANTINE_PAYLOAD, ResultRow, Store, redact_url, schema
from daemon.types import Quarantined, Reading

T0 = datetime(2026, 6, 1, 12, 0, tzinfo=UTC).timestamp()


@pytest.fixture
def store(store_url: str) -> Store:
    st = Store(store_url)
    st.upgrade()
    st.ensure_unit("KR-GT1", "gas_turbine", "45 MW class")
    st.ensure_unit("KR-GT3", "gas_turbine", "12 MW class")
    yield st
    st.close()


def _readings(n: int, unit: str = "KR-GT1", t0: float = T0) -> list[Reading]:
    names = ("ambient_temperature", "compressor_discharge_pressure", "generator_power")
    return [
        Reading(
            unit=unit,
            measurement=names[i % len(names)],
            value=288.15 + i,
            source_ts=t0 + (i // len(names)) * 1.0,
            received_ts=t0 + (i // len(names)) * 1.0 + 0.05,
            quality="good",
            topic=f"kestrel/gt1/{names[i % len(names)]}",
            raw_value=15.0 + i,
            raw_uom="degC",
        )
        for i in range(n)
    ]


# ----------------------------------------------------------------------------------------------
# Migrations
# ----------------------------------------------------------------------------------------------


def test_migrations_from_empty_match_the_schema(store_url: str) -> None:
    st = Store(store_url)
    try:
        assert st.current_revision() is None
        st.upgrade()
        assert st.current_revision() == st.head_revision()
        with st.engine.connect() as conn:
            tables = set(sa.inspect(conn).get_table_names())
            assert {"units", "results", "readings", "quarantine", "events"} <= tables
            diff = compare_metadata(
                MigrationContext.configure(conn, opts={"compare_type": True}), schema.metadata
            )
        assert diff == []
        st.upgrade()  # a second run is a no-op
        assert st.current_revision() == st.head_revision()
    finally:
        st.close()


def test_parallel_upgrades_do_not_collide(store_url: str) -> None:
    # Replicas of a fleet start together, each its own process: on PostgreSQL an advisory
    # lock serialises their migrations, on SQLite the write lock (BEGIN IMMEDIATE) does.
    code = "import sys; from daemon.storage import Store; Store(sys.argv[1]).upgrade()"
    procs = [
        subprocess.Popen([sys.executable, "-c", code, store_url], stderr=subprocess.PIPE)
        for _ in range(4)
    ]
    errors = [p.communicate(timeout=120)[1].decode() for p in procs]
    assert [p.returncode for p in procs] == [0, 0, 0, 0], errors
    st = Store(store_url)
    try:
        assert st.current_revision() == st.head_revision()
    finally:
        st.close()


def test_result_columns_cover_every_result_of_every_builtin_unit_type() -> None:
    # A new result of a unit type must come with a migration: this fails until it does.
    from models.units.registry import builtin_unit_types

    columns = set(schema.results.c.keys())
    for unit_type in builtin_unit_types().values():
        missing = [r.name for r in unit_type.results if r.name not in columns]
        assert missing == [], f"{unit_type.name}: results without a column: {missing}"
        inputs = {
            c[len(schema.INPUT_PREFIX) :] for c in columns if c.startswith(schema.INPUT_PREFIX)
        }
        missing_in = [m.name for m in unit_type.measurements if m.name not in inputs]
        assert missing_in == [], f"{unit_type.name}: measurements without a column: {missing_in}"


def test_migration_lists_the_same_result_columns_as_the_schema() -> None:
    import importlib.util
    from pathlib import Path

    import daemon

    def load(name: str) -> object:
        path = Path(daemon.__file__).parent / "migrations" / "versions" / f"{name}.py"
        spec = importlib.util.spec_from_file_location(f"brayscope_migration_{name}", path)
        assert spec is not None and spec.loader is not None
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        return mod

    first, names = load("0001_initial"), load("0004_names")
    renamed = dict(names.RESULT_RENAMES)  # type: ignore[attr-defined]
    values = tuple(renamed.get(c, c) for c in first.RESULT_VALUES)  # type: ignore[attr-defined]
    assert values == schema.RESULT_VALUE_COLUMNS
    assert tuple(first.RESULT_INPUTS) == schema.RESULT_INPUT_COLUMNS  # type: ignore[attr-defined]
    assert renamed["steady"] == "steady_state" and "steady_state" in schema.results.c


# ----------------------------------------------------------------------------------------------
# Idempotent writes
# ----------------------------------------------------------------------------------------------


def test_readings_are_idempotent(store: Store) -> None:
    rows = _readings(3000)
    assert store.write_readings(rows) == 3000
    assert store.count("readings") == 3000
    assert store.write_readings(rows) == 0  # replay
    shuffled = rows[:]
    random.Random(7).shuffle(shuffled)
    assert store.write_readings([*shuffled[:500], *_readings(30, t0=T0 + 10_000)]) == 30
    assert store.count("readings") == 3030


def test_reading_round_trip_keeps_values_and_utc(store: Store) -> None:
    r = _readings(1)[0]
    store.write_readings([r])
    (row,) = store.readings_between("KR-GT1", T0 - 1, T0 + 1)
    assert row["value"] == r.value
    assert row["source_ts"] == datetime.fromtimestamp(r.source_ts, UTC)
    assert row["source_ts"].tzinfo is not None and row["source_ts"].utcoffset() == timedelta(0)
    assert row["raw_value"] == "15.0" and row["raw_uom"] == "degC" and row["quality"] == "good"


def _result(ts: float, unit: str = "KR-GT1", **values: float) -> ResultRow:
    names = schema.RESULT_VALUE_COLUMNS
    vals = {n: 0.5 + i for i, n in enumerate(names)}
    vals.update(values)
    inputs = {n: 100.0 + i for i, n in enumerate(schema.RESULT_INPUT_COLUMNS)}
    return ResultRow(
        unit=unit,
        ts=ts,
        values=vals,
        inputs=inputs,
        status=1 << 13,
        reasons="not_steady",
        steady_state=False,
        r_statistic=2.7,
        air_mass_flow_source="heat_balance",
        correction_method="model",
    )


def test_results_are_idempotent_on_unit_and_ts(store: Store) -> None:
    rows = [_result(T0 + 10 * i) for i in range(50)] + [_result(T0, unit="KR-GT3")]
    assert store.write_results(rows) == 51
    assert store.write_results(rows) == 0
    assert store.write_results([*rows[::-1][:10], _result(T0 + 10_000)]) == 1
    assert store.count("results") == 52


def test_result_round_trip(store: Store) -> None:
    store.write_results([_result(T0), _result(T0 + 10), _result(T0 + 20)])
    latest = store.latest_results("KR-GT1", 2)
    assert [r["ts"] for r in latest] == [
        datetime.fromtimestamp(T0 + 20, UTC),
        datetime.fromtimestamp(T0 + 10, UTC),
    ]
    row = latest[0]
    assert row["status"] == 1 << 13 and row["reasons"] == "not_steady"
    assert row["steady_state"] is False and row["r_statistic"] == 2.7
    assert row["air_mass_flow_source"] == "heat_balance" and row["correction_method"] == "model"
    for i, name in enumerate(schema.RESULT_VALUE_COLUMNS):
        assert row[name] == 0.5 + i
    for i, name in enumerate(schema.RESULT_INPUT_COLUMNS):
        assert row[schema.INPUT_PREFIX + name] == 100.0 + i
    between = store.results_between("KR-GT1", T0, T0 + 20)
    assert [r["ts"].timestamp() for r in between] == [T0, T0 + 10]  # half-open interval


def test_nan_results_are_stored_as_null(store: Store) -> None:
    if not schema.RESULT_VALUE_COLUMNS:
        pytest.skip("no result columns in the schema yet")
    name = schema.RESULT_VALUE_COLUMNS[0]
    store.write_results([_result(T0, **{name: math.nan})])
    assert store.latest_results("KR-GT1")[0][name] is None


def test_unknown_result_name_needs_a_migration(store: Store) -> None:
    with pytest.raises(ValueError, match="needs a schema migration"):
        store.write_results([ResultRow("KR-GT1", T0, values={"flux_capacitance": 1.0})])
    assert store.count("results") == 0


def test_readings_of_an_unknown_unit_are_refused(store: Store) -> None:
    # foreign keys are on (PostgreSQL always; SQLite by our connect pragma)
    with pytest.raises(sa.exc.IntegrityError):
        store.write_readings(_readings(1, unit="KR-GT9"))
    assert store.count("readings") == 0


# ----------------------------------------------------------------------------------------------
# Quarantine, events, units
# ----------------------------------------------------------------------------------------------


def test_quarantine_round_trip_with_binary_payload(store: Store) -> None:
    binary = bytes(range(256)) * 40  # every byte value, incl. NUL and invalid UTF-8
    items = [
        Quarantined(
            T0,
            "kestrel/gt1/TT-AMB",
            b'{"v": NaN}',
            "non_finite",
            "NaN in v",
            "KR-GT1",
            "ambient_temperature",
            T0 - 1.0,
        ),
        Quarantined(T0 + 1, "kestrel/unknown", binary, "oversized_payload", "10240 bytes", None),
    ]
    assert store.write_quarantine(items) == 2
    newest, oldest = store.quarantine_rows(10)
    assert oldest["payload"] == b'{"v": NaN}' and oldest["reason"] == "non_finite"
    assert oldest["unit"] == "KR-GT1" and oldest["measurement"] == "ambient_temperature"
    assert oldest["source_ts"] == datetime.fromtimestamp(T0 - 1.0, UTC)
    assert newest["payload"] == binary[:MAX_QUARANTINE_PAYLOAD]
    assert newest["unit"] is None and newest["topic"] == "kestrel/unknown"
    assert newest["received_at"] == datetime.fromtimestamp(T0 + 1, UTC)


def test_events_and_unit_upsert(store: Store) -> None:
    store.write_event("start", "brayscope 0.1.0", ts=T0)
    assert store.count("events") == 1

    class Unit:
        unit_type = "gas_turbine"
        description = "Heavy-duty single-shaft unit, 45 MW class (re-rated)"

        def model_dump_json(self, **kwargs: object) -> str:
            return '{"unit_type": "gas_turbine"}'

    store.upsert_units({"KR-GT1": Unit(), "KR-GT2": Unit()})
    with store.engine.connect() as conn:
        rows = dict(conn.execute(sa.select(schema.units.c.name, schema.units.c.description)).all())
    assert rows["KR-GT1"].endswith("(re-rated)") and "KR-GT2" in rows and "KR-GT3" in rows


# ----------------------------------------------------------------------------------------------
# Retention
# ----------------------------------------------------------------------------------------------


def test_purge_deletes_only_older_rows(store: Store) -> None:
    day = 86400.0
    store.write_readings(_readings(30, t0=T0 - 10 * day) + _readings(30, t0=T0))
    store.write_results([_result(T0 - 10 * day), _result(T0)])
    store.write_quarantine([Quarantined(T0 - 10 * day, "x", b"x", "malformed_json", "", None)])
    store.write_event("old", ts=T0 - 10 * day)
    store.write_event("new", ts=T0)
    cutoff = T0 - day
    dry = store.purge_older_than(cutoff, dry_run=True)
    assert dry == {"results": 1, "readings": 30, "quarantine": 1, "events": 1}
    assert store.count("readings") == 60
    assert store.purge_older_than(cutoff) == dry
    assert store.count("readings") == 30 and store.count("results") == 1
    assert store.count("quarantine") == 0 and store.count("events") == 1
    assert store.purge_older_than(cutoff) == {
        "results": 0,
        "readings": 0,
        "quarantine": 0,
        "events": 0,
    }


# ----------------------------------------------------------------------------------------------
# Backend settings
# ----------------------------------------------------------------------------------------------


def test_sqlite_connection_pragmas(tmp_path) -> None:
    st = Store(f"sqlite:///{tmp_path}/sub/dir/b.sqlite")  # parent directories are created
    try:
        with st.engine.connect() as conn:
            assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
            assert conn.exec_driver_sql("PRAGMA synchronous").scalar() == 1  # NORMAL
            assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
            assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() == 10_000
    finally:
        st.close()


def test_ping(store: Store, tmp_path) -> None:
    assert store.ping() is True
    dead = Store("postgresql+psycopg://nobody@127.0.0.1:1/none", connect_timeout_s=1)
    try:
        assert dead.ping() is False
    finally:
        dead.close()


def test_urls_are_redacted_and_checked() -> None:
    assert "s3cret" not in redact_url("postgresql+psycopg://bray:s3cret@db/brayscope")
    assert "***" in redact_url("postgresql+psycopg://bray:s3cret@db/brayscope")
    st = Store("postgresql+psycopg://bray:s3cret@db/brayscope")
    assert "s3cret" not in repr(st)
    st.close()
    with pytest.raises(ValueError, match="psycopg 3"):
        Store("postgresql+asyncpg://bray@db/brayscope")
    with pytest.raises(ValueError, match="unsupported database"):
        Store("mysql+pymysql://bray@db/brayscope")


def test_aux_and_sensor_readings_share_the_readings_table(store: Store) -> None:
    # auxiliary values and the sensors of a redundant pair are readings like any other;
    # two sensors of one measurement at the same source time are two rows (own names)
    base = _readings(1)[0]
    names = (
        "aux.bearing1_vibration",
        "compressor_discharge_temperature:A",
        "compressor_discharge_temperature:B",
    )
    rows = [
        Reading(base.unit, n, 0.0045 + i, T0, T0 + 0.1, "good", f"kestrel/gt1/x{i}", 4.5, "mm/s")
        for i, n in enumerate(names)
    ]
    assert store.write_readings(rows) == 3
    assert store.write_readings(rows) == 0
    got = store.readings_between("KR-GT1", T0 - 1, T0 + 1, measurement="aux.bearing1_vibration")
    assert [(r["measurement"], r["value"]) for r in got] == [("aux.bearing1_vibration", 0.0045)]


# ----------------------------------------------------------------------------------------------
# Quarantine idempotency (a commit followed by a crash before the MQTT ack redelivers)
# ----------------------------------------------------------------------------------------------


def _decoded_rejects(received_ts: float) -> list[Quarantined]:
    """Rejected items of real decoder runs on the shipped example plant."""
    from pathlib import Path

    from daemon.config import load_plant
    from daemon.feeds.decode import Decoder

    example = Path(__file__).resolve().parent.parent / "daemon" / "examples" / "kestrel-ridge.toml"
    dec = Decoder.from_plant(load_plant(example))
    msgs = [
        ("kestrel/gt1/TT-AMB", b'{"value": NaN, "ts": %.1f}' % T0),  # non_finite, with ts
        ("kestrel/gt1/TT-AMB", b'{"value": 90.0, "ts": %.1f}' % T0),  # out_of_range
        ("kestrel/gt1/TT-AMB", b'{"value": 15.0, "ts": %.1f}' % (T0 + 3600.0)),  # future
        # a unit object with two bad keys: two rows of one message
        ("kestrel/gt3/data", b'{"ts": %.1f, "ambient_temp": "warm", "NOPE": 1.0}' % T0),
        ("kestrel/gt1/TT-AMB", b"{not json"),  # no source time at all
    ]
    out: list[Quarantined] = []
    for topic, payload in msgs:
        out.extend(dec.decode(topic, payload, received_ts).quarantined)
    return out


def test_redelivered_rejects_are_stored_once(store: Store) -> None:
    first = _decoded_rejects(T0 + 0.2)
    reasons = sorted(q.reason for q in first)
    assert reasons == sorted(
        [
            "non_finite",
            "out_of_range",
            "future_timestamp",
            "wrong_type",
            "unknown_key",
            "malformed_json",
        ]
    )
    assert store.write_quarantine(first) == len(first) == 6
    # the same messages delivered again 0.5 s later (same receive second): nothing new
    assert store.write_quarantine(_decoded_rejects(T0 + 0.7)) == 0
    # 40 s later: items with a source time are still the same input; those without one
    # (whole message refused before its ts was read, values of a unit object refused before
    # the ts was applied) cannot be told from a new message: stored again (documented
    # limitation of quarantine_key)
    again = _decoded_rejects(T0 + 40.2)
    timeless = [q for q in again if q.source_ts is None]
    assert {q.reason for q in again if q.source_ts is not None} == {
        "out_of_range",
        "future_timestamp",
    }
    assert store.write_quarantine(again) == len(timeless) == 4
    assert store.count("quarantine") == 10
    assert store.write_quarantine(again) == 0


def test_quarantine_key_parts() -> None:
    from daemon.storage import quarantine_key

    base = Quarantined(
        T0,
        "kestrel/gt1/TT-AMB",
        b"x",
        "out_of_range",
        "99 degC",
        "KR-GT1",
        "ambient_temperature",
        T0 - 1,
    )
    k = quarantine_key(base)
    assert len(k) == 64 and k == quarantine_key(base)
    redelivered = Quarantined(
        T0 + 60,
        base.topic,
        base.payload,
        base.reason,
        base.detail,
        base.unit,
        base.measurement,
        base.source_ts,
    )
    assert quarantine_key(redelivered) == k  # receive time does not matter with a source time
    for changed in (
        Quarantined(
            T0,
            "kestrel/gt1/TT-AMB",
            b"y",
            "out_of_range",
            "99 degC",
            "KR-GT1",
            "ambient_temperature",
            T0 - 1,
        ),
        Quarantined(
            T0,
            "kestrel/gt1/TT-AMB",
            b"x",
            "non_finite",
            "99 degC",
            "KR-GT1",
            "ambient_temperature",
            T0 - 1,
        ),
        Quarantined(
            T0,
            "kestrel/gt1/TT-AMB",
            b"x",
            "out_of_range",
            "99 degC",
            "KR-GT1",
            "ambient_temperature",
            T0 - 2,
        ),
        Quarantined(
            T0,
            "kestrel/gt1/TT-AMB",
            b"x",
            "out_of_range",
            "98 degC",
            "KR-GT1",
            "ambient_temperature",
            T0 - 1,
        ),
        Quarantined(
            T0,
            "kestrel/gt1/TT-AM",
            b"x",
            "out_of_range",
            "99 degC",
            "KR-GT1",
            "ambient_temperature",
            T0 - 1,
        ),
    ):
        assert quarantine_key(changed) != k
    # no source time: the receive second decides
    a = Quarantined(T0 + 0.1, "t", b"{", "malformed_json", "line 1", None)
    b = Quarantined(T0 + 0.9, "t", b"{", "malformed_json", "line 1", None)
    c = Quarantined(T0 + 1.1, "t", b"{", "malformed_json", "line 1", None)
    assert quarantine_key(a) == quarantine_key(b) != quarantine_key(c)
    # timestamp reasons: the detail holds the receive-time offset and is left out
    f1 = Quarantined(T0, "t", b"p", "future_timestamp", "source time 3600 s ahead", "U", "m", T0)
    f2 = Quarantined(
        T0 + 9, "t", b"p", "future_timestamp", "source time 3591 s ahead", "U", "m", T0
    )
    assert quarantine_key(f1) == quarantine_key(f2)


def test_upgrade_from_0001_keeps_old_quarantine_rows(store_url: str) -> None:
    st = Store(store_url)
    try:
        st.upgrade("0001")
        old = {
            "received_at": T0,
            "topic": "kestrel/gt1/TT-AMB",
            "payload": b"{",
            "reason": "malformed_json",
            "detail": "line 1",
        }
        with st.engine.begin() as conn:  # two identical rows, as 0001 allowed
            conn.execute(sa.insert(schema.quarantine), [old, old])
        st.upgrade()
        assert st.current_revision() == st.head_revision()
        rows = st.quarantine_rows(10)
        assert len(rows) == 2 and all(r["natural_key"] is None for r in rows)
        q = Quarantined(T0, "kestrel/gt1/TT-AMB", b"{", "malformed_json", "line 1", None)
        assert st.write_quarantine([q, q]) == 1  # new rows get their key
        assert st.count("quarantine") == 3
    finally:
        st.close()
