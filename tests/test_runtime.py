"""The live runtime in-process: batched compute, MQTT → SQL → metrics → MQTT, bad inputs,
idempotent replays and a database outage.

References for the check values:
- The stored KPIs are compared with ``models.units.gas_turbine.schema.GAS_TURBINE.compute`` called directly on
  the same SI inputs (the daemon must add nothing and lose nothing on the way: MQTT, unit
  conversion, assembly, batching, SQL).
- Heat rate × thermal efficiency = 3600 kJ/kWh, since heat rate [kJ/kWh] = 3600 / η_th by the
  definition of heat rate (common practice; 1 kWh = 3600 kJ, SI Brochure 9th ed. Table 8).
- Isentropic efficiency needs the discharge temperature (η_c = (h2s − h1)/(h2 − h1), e.g.
  Saravanamuttoo et al., *Gas Turbine Theory*, ch. 2): without a usable T2 it cannot be
  computed, so a stale or bad T2 must leave it NaN, never a number from an old value.
- MQTT 5.0 (OASIS standard, 2019), 3.3.1.3: a retained message is delivered to new
  subscribers; 3.1.2.5: the Will Message is published when the connection ends abnormally.
- Quarantine reason codes: the fixed set of ``daemon.types.QUARANTINE_REASONS``.
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import math
import threading
import time
import uuid
from collections.abc import AsyncIterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import sqlalchemy as sa
from live_support import (
    OPERATING_POINTS,
    Publisher,
    Subscriber,
    free_port,
    payload,
    plant_toml,
    snapshot_messages,
    topic_of,
)
from sqlalchemy.engine import make_url

from daemon.compute import bindings_from_plant, compute_batch
from daemon.config import load_plant
from daemon.runtime import Runtime
from daemon.storage import schema as db_schema
from daemon.types import Snapshot
from models.status import WARNING_REASONS, Reason
from models.units.gas_turbine.schema import GAS_TURBINE


def _plant(tmp_path: Path, *, broker_port: int = 1883, db: str = "sqlite://", **kw: Any) -> Any:
    prefix = f"bstest/{uuid.uuid4().hex[:10]}"
    text = plant_toml(
        prefix=prefix,
        broker_port=broker_port,
        database_url=db,
        http_port=free_port(),
        client_id=f"bs-test-{uuid.uuid4().hex[:8]}",
        units=("KR-GT1", "KR-GT2"),
        session_expiry_s=120,  # the shared test broker forgets these sessions soon
        **kw,
    )
    path = tmp_path / "plant.toml"
    path.write_text(text)
    plant = load_plant(path)
    plant._test_prefix = prefix  # type: ignore[attr-defined]
    return plant


def _snapshot(unit: str, ts: float, **override: float) -> Snapshot:
    values = dict(OPERATING_POINTS[unit]) | override
    return Snapshot(
        unit=unit,
        unit_type="gas_turbine",
        ts=ts,
        values=values,
        quality=dict.fromkeys(values, 0),
        age_s=dict.fromkeys(values, 1.0),
        steady=True,
        r_statistic=0.95,
    )


def _direct(plant: Any, unit: str, values: dict[str, float]) -> dict[str, float]:
    """GAS_TURBINE.compute on one snapshot with the unit's parameters (the reference)."""
    u = plant.units[unit]
    meas = {k: np.array([v]) for k, v in values.items()}
    out = GAS_TURBINE.compute(meas, u.fuel_properties, u.effective_parameters())
    return {k: float(v[0]) for k, v in out.values.items()}


def _same(a: float | None, b: float, rtol: float) -> bool:
    if a is None or (isinstance(a, float) and math.isnan(a)):
        return math.isnan(b)
    return math.isclose(a, b, rel_tol=rtol, abs_tol=1e-12)


# --------------------------------------------------------------------------------------------
# compute (no services)
# --------------------------------------------------------------------------------------------


def test_batched_compute_equals_direct_calls_per_unit(tmp_path: Path) -> None:
    plant = _plant(tmp_path)
    bindings = bindings_from_plant(plant)
    snaps = [_snapshot("KR-GT1", 100.0), _snapshot("KR-GT2", 100.0), _snapshot("KR-GT1", 110.0)]
    results = compute_batch(snaps, bindings)
    assert [(r.unit, r.ts) for r in results] == [(s.unit, s.ts) for s in snaps]
    for r in results:
        ref = _direct(plant, r.unit, OPERATING_POINTS[r.unit])
        assert set(r.values) == {f.name for f in GAS_TURBINE.results}
        for k, v in ref.items():
            assert _same(r.values[k], v, 1e-12), (r.unit, k, r.values[k], v)
        assert r.valid, r.reasons
        # heat rate [kJ/kWh] = 3600 / thermal efficiency (definition; common practice)
        hr, eta = r.values["heat_rate_lhv_kj_per_kwh"], r.values["thermal_efficiency"]
        assert hr * eta == pytest.approx(3600.0, rel=1e-9)
        # deviation from the configured baseline, in result units
        assert r.deviations["compressor_isentropic_efficiency"] == pytest.approx(
            r.values["compressor_isentropic_efficiency"] - 0.87, abs=1e-15
        )
    # the two units differ in generator efficiency: per-element parameters were used
    assert results[0].values["shaft_power"] != results[1].values["shaft_power"]


def test_unusable_inputs_are_never_used(tmp_path: Path) -> None:
    plant = _plant(tmp_path)
    bindings = bindings_from_plant(plant)
    s = _snapshot("KR-GT1", 200.0)
    s.quality["compressor_discharge_temperature"] = int(Reason.INPUT_STALE)
    transient = Snapshot(**{**s.__dict__, "quality": dict.fromkeys(s.values, 0), "steady": False})
    stale, moving = compute_batch([s, transient], bindings)
    # the stale T2 still holds a number in the snapshot: it must not reach the models
    assert math.isnan(stale.inputs["compressor_discharge_temperature"])
    assert math.isnan(stale.values["compressor_isentropic_efficiency"])
    assert stale.status & Reason.INPUT_STALE
    assert not stale.valid
    assert "input_stale" in stale.reasons
    # the heat rate needs no T2 (fuel flow, LHV and power only)
    assert math.isfinite(stale.values["heat_rate_lhv_kj_per_kwh"])
    assert moving.status & Reason.NOT_STEADY
    assert moving.valid  # a transient is a warning, the numbers are computed
    assert "not_steady" in moving.warnings
    doc = json.loads(json.dumps(stale.to_json(), allow_nan=False))
    assert doc["results"]["compressor_isentropic_efficiency"] is None


# --------------------------------------------------------------------------------------------
# in-process runtime against a real broker and database
# --------------------------------------------------------------------------------------------


@contextlib.asynccontextmanager
async def running(rt: Runtime) -> AsyncIterator[asyncio.Task[None]]:
    task = asyncio.create_task(rt.run(stop_timeout_s=10))
    try:
        await _until(lambda: rt.readiness()[0], 20, "runtime ready")
        yield task
    finally:
        rt.request_stop()
        await asyncio.wait_for(task, 20)
        rt.store.close()


async def _until(pred: Any, timeout: float, what: str) -> float:
    t0 = time.monotonic()
    while not pred():
        if task_failed := getattr(pred, "task", None):
            assert not task_failed.done()
        if time.monotonic() - t0 > timeout:
            raise AssertionError(f"timed out after {timeout} s: {what}")
        await asyncio.sleep(0.1)
    return time.monotonic() - t0


async def _publish(port: int, msgs: list[tuple[str, bytes]]) -> None:
    def go() -> None:
        pub = Publisher(port, f"bs-plant-{uuid.uuid4().hex[:8]}")
        try:
            for t, p in msgs:
                pub.publish(t, p)
            pub.flush()
        finally:
            pub.close()

    await asyncio.to_thread(go)


def _metric(rt: Runtime, series: str) -> float:
    for line in rt.metrics_text().decode().splitlines():
        if line.startswith(series + " "):
            return float(line.split()[-1])
    raise KeyError(series)


def _results_rows(rt: Runtime, unit: str) -> list[dict[str, Any]]:
    return rt.store.latest_results(unit, 1000)


@pytest.mark.services
async def test_live_path_end_to_end(tmp_path: Path, mqtt_broker: Any, store_url: str) -> None:
    mqtt_broker.require(v5=True)
    print(f"broker: {mqtt_broker.describe()}; database: {store_url.rsplit('@', maxsplit=1)[-1]}")
    plant = _plant(tmp_path, broker_port=mqtt_broker.port, db=store_url)
    prefix = plant._test_prefix
    rt = Runtime(plant, serve_http=False)
    sub = Subscriber(mqtt_broker.port, f"{prefix}/out/#")
    try:
        async with running(rt) as task:
            now = time.time()
            msgs = snapshot_messages(prefix, "KR-GT1", now - 2) + snapshot_messages(
                prefix, "KR-GT2", now - 2
            )
            await _publish(mqtt_broker.port, msgs)

            def valid_results() -> bool:
                # a tick may fall between the commits of one unit's messages: wait for the
                # first result computed from all of them
                for u in ("KR-GT1", "KR-GT2"):
                    latest = rt.store.latest_results(u, 1)
                    if not latest or latest[0]["status"] & ~int(WARNING_REASONS):
                        return False
                return True

            await _until(valid_results, 20, "valid results of both units")
            # stored KPIs = models on the same inputs
            for unit in ("KR-GT1", "KR-GT2"):
                row = rt.store.latest_results(unit, 1)[0]
                ref = _direct(plant, unit, OPERATING_POINTS[unit])
                for k, v in ref.items():
                    if k in row:
                        assert _same(row[k], v, 1e-9), (unit, k, row[k], v)
                assert row["status"] & ~int(WARNING_REASONS) == 0, row["reasons"]
                assert row["in_generator_power"] == pytest.approx(
                    OPERATING_POINTS[unit]["generator_power"], rel=1e-12
                )
            assert rt.store.count("readings") == len(msgs)
            await _until(
                lambda: _metric(rt, "brayscope_readings_received_total") == len(msgs), 5, "counts"
            )
            assert _metric(rt, 'brayscope_readings_accepted_total{unit="KR-GT1"}') == 12
            assert _metric(rt, 'brayscope_snapshots_computed_total{unit="KR-GT1"}') >= 1
            # retained result and online status on the broker
            out_topic = f"{prefix}/out/KR-GT1/results"
            await _until(lambda: sub.last(out_topic) is not None, 10, "published result")
            pub_doc = json.loads(sub.last(out_topic) or b"{}")
            ref1 = _direct(plant, "KR-GT1", OPERATING_POINTS["KR-GT1"])
            assert pub_doc["results"]["compressor_isentropic_efficiency"] == pytest.approx(
                ref1["compressor_isentropic_efficiency"], rel=1e-9
            )
            assert "not a protection or control system" in pub_doc["advisory"]
            assert sub.last(f"{prefix}/out/status") == b"online"

            # idempotency: the same messages again change no stored reading
            n_readings = rt.store.count("readings")
            first_rows = {r["ts"]: r for r in _results_rows(rt, "KR-GT1")}
            await _publish(mqtt_broker.port, msgs)
            await asyncio.sleep(1.5)
            assert rt.store.count("readings") == n_readings
            again = {r["ts"]: r for r in _results_rows(rt, "KR-GT1")}
            for ts, r in first_rows.items():
                assert again[ts] == r
            assert not task.done()
    finally:
        sub.close()
    assert sub.last(f"{prefix}/out/status") in (b"offline", b"online")  # offline after stop
    sub2 = Subscriber(mqtt_broker.port, f"{prefix}/out/status")
    try:
        # retained: a new subscriber gets the last status (MQTT 5.0 3.3.1.3)
        await _until(lambda: sub2.last(f"{prefix}/out/status") == b"offline", 10, "offline")
    finally:
        sub2.close()


@pytest.mark.services
async def test_bad_inputs_quarantined_counted_and_daemon_keeps_running(
    tmp_path: Path, mqtt_broker: Any
) -> None:
    db = f"sqlite:///{tmp_path / 'bad.sqlite'}"
    mqtt_broker.require(v5=True)
    print(f"broker: {mqtt_broker.describe()}; database: sqlite file")
    plant = _plant(
        tmp_path, broker_port=mqtt_broker.port, db=db, max_age_s=5.0, subscriptions="parent"
    )
    prefix = plant._test_prefix
    rt = Runtime(plant, serve_http=False, publish=False)
    t2 = topic_of(prefix, "KR-GT1", "compressor_discharge_temperature")
    amb = topic_of(prefix, "KR-GT1", "ambient_temperature")
    async with running(rt) as task:
        now = time.time()
        await _publish(mqtt_broker.port, snapshot_messages(prefix, "KR-GT1", now - 1))
        await _until(lambda: bool(_results_rows(rt, "KR-GT1")), 20, "first result")
        bad = {
            "malformed_json": (amb, b'{"value": 12.0,'),
            "non_finite": (amb, b'{"value": NaN}'),
            "wrong_type": (amb, b'{"value": "12.5"}'),
            "out_of_range": (amb, payload("ambient_temperature", 273.15 + 80.0, now)),
            "nonphysical": (amb, b'{"value": -300.0}'),
            "future_timestamp": (amb, payload("ambient_temperature", 290.0, now + 3600)),
            "past_timestamp": (amb, payload("ambient_temperature", 290.0, now - 3 * 86400)),
            "oversized_payload": (amb, b'{"value": 12.0, "pad": "' + b"x" * 70000 + b'"}'),
            "bad_quality": (amb, payload("ambient_temperature", 290.0, now, quality="bad")),
            "unknown_topic": (f"{prefix}/kr-gt1/not_a_tag", b"1.0"),
        }
        await _publish(mqtt_broker.port, list(bad.values()))
        # a bad T2 newer than the good one: η_c must go NaN, flagged
        await _publish(mqtt_broker.port, [(t2, b'{"value": "NaN", "ts": %f}' % (time.time()))])
        await asyncio.sleep(0.5)
        rows = rt.store.quarantine_rows(100)
        reasons = sorted(r["reason"] for r in rows)
        for reason in bad:
            assert reason in reasons, (reason, reasons)
        text = rt.metrics_text().decode()
        for reason in bad:
            assert f'brayscope_readings_rejected_total{{reason="{reason}"}}' in text
            line = next(
                x
                for x in text.splitlines()
                if x.startswith(f'brayscope_readings_rejected_total{{reason="{reason}"}}')
            )
            assert float(line.split()[-1]) >= 1.0, line
        assert 'unit="not_a_tag"' not in text and "unknown" not in text.split("reason=")[0]

        def flagged() -> bool:
            latest = rt.store.latest_results("KR-GT1", 1)
            return bool(latest) and latest[0]["status"] & int(Reason.INPUT_BAD_QUALITY) != 0

        await _until(flagged, 10, "a result flagged for the bad T2")
        row = rt.store.latest_results("KR-GT1", 1)[0]
        assert row["compressor_isentropic_efficiency"] is None
        assert "input_bad_quality" in row["reasons"]
        assert rt.readiness()[0] and not task.done()


# --------------------------------------------------------------------------------------------
# database outage through a TCP proxy in front of PostgreSQL
# --------------------------------------------------------------------------------------------


class TcpProxy:
    """A TCP forwarder that can be switched off (refuses and cuts connections) and on.

    It runs its own event loop in a thread, so blocking database calls of the test (and of the
    runtime's worker threads) never wait on the loop under test.
    """

    def __init__(self, target_host: str, target_port: int) -> None:
        self.target = (target_host, target_port)
        self.port = free_port()
        self._server: asyncio.Server | None = None
        self._writers: set[asyncio.StreamWriter] = set()
        self._loop = asyncio.new_event_loop()
        self._thread = threading.Thread(target=self._loop.run_forever, daemon=True)
        self._thread.start()

    def _call(self, coro: Any) -> Any:
        return asyncio.run_coroutine_threadsafe(coro, self._loop).result(10)

    def start(self) -> None:
        self._call(self._start())

    def stop(self) -> None:
        self._call(self._stop())

    def close(self) -> None:
        self.stop()
        self._call(self._cancel_all())
        self._loop.call_soon_threadsafe(self._loop.stop)
        self._thread.join(5)
        self._loop.close()

    async def _cancel_all(self) -> None:
        me = asyncio.current_task()
        tasks = [t for t in asyncio.all_tasks() if t is not me]
        for t in tasks:
            t.cancel()
        await asyncio.gather(*tasks, return_exceptions=True)

    async def _start(self) -> None:
        self._server = await asyncio.start_server(self._handle, "127.0.0.1", self.port)

    async def _stop(self) -> None:
        if self._server is not None:
            self._server.close()
            for w in list(self._writers):
                w.transport.abort()
            await self._server.wait_closed()
            self._server = None
        for w in list(self._writers):
            w.transport.abort()
        self._writers.clear()

    async def _handle(self, r: asyncio.StreamReader, w: asyncio.StreamWriter) -> None:
        try:
            ur, uw = await asyncio.open_connection(*self.target)
        except OSError:
            w.transport.abort()
            return
        self._writers |= {w, uw}

        async def pipe(a: asyncio.StreamReader, b: asyncio.StreamWriter) -> None:
            with contextlib.suppress(Exception):
                while data := await a.read(65536):
                    b.write(data)
                    await b.drain()
            b.transport.abort()

        await asyncio.gather(pipe(r, uw), pipe(ur, w))
        self._writers -= {w, uw}


@pytest.mark.slow
@pytest.mark.services
@pytest.mark.parametrize("store_url", ["postgresql"], indirect=True)
async def test_database_outage_nothing_acked_is_lost(
    tmp_path: Path, mqtt_broker: Any, store_url: str
) -> None:
    url = make_url(store_url)
    proxy = TcpProxy(url.host or "127.0.0.1", url.port or 5432)
    proxy.start()
    proxied = url.set(host="127.0.0.1", port=proxy.port).render_as_string(hide_password=False)
    print(f"broker: {mqtt_broker.describe()}; database: postgresql via TCP proxy :{proxy.port}")
    plant = _plant(tmp_path, broker_port=mqtt_broker.port, db=proxied)
    prefix = plant._test_prefix
    rt = Runtime(
        plant,
        serve_http=False,
        publish=False,
        feed_options={"backoff_cap_s": 2.0, "backoff_initial_s": 0.2},
    )
    try:
        async with running(rt) as task:
            now = time.time()
            first = snapshot_messages(prefix, "KR-GT1", now - 30)
            await _publish(mqtt_broker.port, first)
            await _until(lambda: rt.store.count("readings") == len(first), 15, "first set")
            proxy.stop()
            t_down = time.monotonic()
            second = [
                m for k in range(5) for m in snapshot_messages(prefix, "KR-GT1", now - 20 + k)
            ]
            await _publish(mqtt_broker.port, second)
            took = await _until(lambda: not rt.readiness()[0], 10, "not ready")
            print(f"readiness went false {took:.1f} s after the outage began")
            assert rt.readiness()[1]["database"] is False
            await asyncio.sleep(max(0.0, 6.0 - (time.monotonic() - t_down)))
            assert not task.done()  # the process keeps running
            proxy.start()
            took = await _until(
                lambda: (
                    rt.readiness()[0] and rt.store.count("readings") == len(first) + len(second)
                ),
                45,
                "recovery with every reading stored",
            )
            print(f"recovered and caught up {took:.1f} s after the database came back")
            assert rt.store.count("readings") == len(first) + len(second)

            # the outage is written as a db_outage event once the database answers again
            def outages() -> list[dict[str, Any]]:
                with rt.store.engine.connect() as conn:
                    rows = conn.execute(
                        sa.select(db_schema.events.c.source, db_schema.events.c.detail).where(
                            db_schema.events.c.kind == "db_outage"
                        )
                    ).all()
                return [json.loads(d) | {"source": src} for src, d in rows]

            await _until(lambda: bool(outages()), 15, "db_outage event")
            (outage,) = outages()
            assert outage["source"] == "daemon" and outage["from"] < outage["until"]
            assert 5.0 <= outage["duration_s"] <= 60.0, outage
    finally:
        proxy.close()


# --------------------------------------------------------------------------------------------
# brayscope run: logs, exit codes, secrets
# --------------------------------------------------------------------------------------------


def test_json_log_lines_and_no_secret_in_logs(
    tmp_path: Path, caplog: pytest.LogCaptureFixture, monkeypatch: pytest.MonkeyPatch
) -> None:
    import logging

    from daemon.run_cmd import JsonFormatter

    rec = logging.LogRecord("brayscope.test", logging.WARNING, __file__, 1, "x=%d", (3,), None)
    rec.unit = "KR-GT1"
    doc = json.loads(JsonFormatter().format(rec))
    assert doc["level"] == "warning" and doc["msg"] == "x=3" and doc["unit"] == "KR-GT1"
    assert doc["ts"].endswith("+00:00")

    secret = "s3cret-" + uuid.uuid4().hex
    # the database password comes from the environment (never the plant file, never a URL)
    monkeypatch.setenv("BRAYSCOPE_DATABASE_URL", "postgresql+psycopg://brayscope@127.0.0.1:1/plant")
    monkeypatch.setenv("BRAYSCOPE_DATABASE_PASSWORD", secret)
    plant = _plant(tmp_path)
    rt = Runtime(plant, serve_http=False, publish=False)
    with caplog.at_level(logging.INFO, logger="brayscope"):
        rt._set_db(True)
        rt._set_db(False, "ping failed")
    text = caplog.text + rt.metrics_text().decode()
    assert "***" in caplog.text
    assert secret not in text
    rt.store.close()


def test_run_command_refuses_a_bad_plant_file_with_exit_2(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from daemon.cli import main

    bad = tmp_path / "plant.toml"
    bad.write_text('[site]\nname = "Kestrel Ridge Energy Park"\n[units.KR-GT1]\ntype = "steam"\n')
    assert main(["run", "-c", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "units.KR-GT1" in err and "fix:" in err
