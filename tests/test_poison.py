"""A message that cannot be stored must never stop ingestion (a "poison" message).

What is checked, and the outside facts it rests on:

* Python's ``datetime`` spans the years 1 to 9999 (Python documentation, ``datetime.MINYEAR``
  and ``datetime.MAXYEAR``): a source time outside that span cannot become a datetime, so the
  quarantine row keeps the receive time and no source time.
* QoS 1 with a persistent session redelivers every unacknowledged message after a reconnect
  (OASIS MQTT 5.0, sections 4.4 and 3.1.2.4): a batch whose commit keeps failing comes back
  forever, so the offender has to be isolated and quarantined, the rest committed and
  acknowledged.
* "The database is down" (nothing acknowledged, readiness false) and "this message cannot be
  stored" (quarantine it as ``unstorable``, acknowledge, carry on) stay apart: a refused value
  never marks the database unavailable.

The poison timestamps are the ones found under fault injection: ``1e15`` and ``2.6e14`` (read
as milliseconds: years 33658 and 10209), ``1e300``, ``-7e10`` s (year -249), and the ISO texts
``0001-01-01T00:00:00+14:00`` (year 0 in UTC) and ``9999-12-31T23:59:59-14:00`` (year 10000 in
UTC).
"""

from __future__ import annotations

import asyncio
import json
import math
import time
import uuid
from pathlib import Path
from typing import Any

import pytest
from live_support import free_port, snapshot_messages, topic_of, write_plant
from test_runtime import _metric, _publish, _until, running

from daemon.config import load_plant
from daemon.feeds.decode import Batch, Decoder
from daemon.runtime import Runtime
from daemon.storage import Store
from daemon.types import QUARANTINE_REASONS, Reading, UnstorableError

POISON_TS: list[object] = [
    1e15,
    2.6e14,
    1e300,
    -7e10,
    "0001-01-01T00:00:00+14:00",
    "9999-12-31T23:59:59-14:00",
]

#: An auxiliary block topic with keys, so a ts inside a unit object is exercised too.
AUX_BLOCK = """
  [[units.KR-GT1.tags]]
  topic = "{prefix}/kr-gt1/block"
  key = "VIB-1"
  measurement = "aux.bearing_vibration"
  uom = "mm/s"
  low = 0
  high = 50
  max_age_s = 600
"""


def _load(tmp_path: Path, broker_port: int, db: str) -> Any:
    prefix = f"bstest/{uuid.uuid4().hex[:10]}"
    path, _, _ = write_plant(
        tmp_path,
        database_url=db,
        broker_port=broker_port,
        prefix=prefix,
        edit=lambda text: text + AUX_BLOCK.format(prefix=prefix),
    )
    plant = load_plant(path)
    plant._test_prefix = prefix  # type: ignore[attr-defined]
    return plant


async def _burst(
    rt: Runtime, port: int, poison: list[tuple[str, bytes]]
) -> tuple[ReadyWatch, list[tuple[str, bytes]]]:
    """Publish good readings, the poison, more good readings; wait until every good reading
    is stored and every poison message quarantined, watching readiness meanwhile."""
    prefix = rt.plant._test_prefix
    now = time.time()
    good = snapshot_messages(prefix, "KR-GT1", now - 5) + snapshot_messages(
        prefix, "KR-GT1", now - 4
    )
    half = len(good) // 2
    with ReadyWatch(rt) as watch:
        await _publish(port, good[:half] + poison + good[half:])
        await _until(lambda: rt.store.count("readings") == len(good), 20, "good readings stored")
        await _until(lambda: rt.store.count("quarantine") == len(poison), 10, "poison quarantined")
        await asyncio.sleep(0.3)
    return watch, good


def _poison_messages(prefix: str) -> list[tuple[str, bytes]]:
    amb = topic_of(prefix, "KR-GT1", "ambient_temperature")
    block = f"{prefix}/kr-gt1/block"
    out: list[tuple[str, bytes]] = []
    for ts in POISON_TS:
        out.append((amb, json.dumps({"value": 12, "ts": ts}).encode()))
        out.append((block, json.dumps({"values": {"VIB-1": {"value": 2.5, "ts": ts}}}).encode()))
        out.append((block, json.dumps({"ts": ts, "VIB-1": 2.5}).encode()))
    return out


class ReadyWatch:
    """Samples readiness every 50 ms; records every not-ready sample once it was ready."""

    def __init__(self, rt: Runtime) -> None:
        self.rt = rt
        self.not_ready: list[dict[str, bool]] = []
        self._task: asyncio.Task[None] | None = None

    async def _run(self) -> None:
        while True:
            ready, checks, _ = self.rt.readiness()
            if not ready:
                self.not_ready.append(checks)
            await asyncio.sleep(0.05)

    def __enter__(self) -> ReadyWatch:
        self._task = asyncio.create_task(self._run())
        return self

    def __exit__(self, *exc: object) -> None:
        assert self._task is not None
        self._task.cancel()


# --------------------------------------------------------------------------------------------
# storage: a rejected value with an unrepresentable time is stored (no services but the DB)
# --------------------------------------------------------------------------------------------


@pytest.mark.services
def test_quarantine_rows_of_unrepresentable_times_are_stored(
    tmp_path: Path, store_url: str
) -> None:
    plant = _load(tmp_path, 1883, store_url)
    prefix = plant._test_prefix
    decoder = Decoder.from_plant(plant)
    now = time.time()
    results = [decoder.decode(t, p, now) for t, p in _poison_messages(prefix)]
    batch = Batch.from_results(results)
    assert not batch.readings
    assert {q.reason for q in batch.quarantined} <= {"future_timestamp", "past_timestamp"}
    with Store(store_url) as store:
        store.upgrade()
        store.upsert_units(plant.units)
        # on the broken version this raised (datetime.fromtimestamp out of range)
        n = store.write_quarantine(batch.quarantined)
        assert n == len(batch.quarantined) == 3 * len(POISON_TS)
        # a redelivery is the same input: stored once (natural key keeps the decoded time)
        assert store.write_quarantine(batch.quarantined) == 0
        rows = store.quarantine_rows(100)
        for r in rows:
            assert r["source_ts"] is None  # not representable: left out, never invented
            assert abs(r["received_at"].timestamp() - now) < 1.0
            assert r["reason"] in ("future_timestamp", "past_timestamp")


# --------------------------------------------------------------------------------------------
# the live daemon: poison messages mixed with good ones
# --------------------------------------------------------------------------------------------


@pytest.mark.services
async def test_poison_timestamps_are_quarantined_and_ingestion_goes_on(
    tmp_path: Path, mqtt_broker: Any, store_url: str
) -> None:
    mqtt_broker.require(v5=True)
    print(f"broker: {mqtt_broker.describe()}; database: {store_url.rsplit('@', maxsplit=1)[-1]}")
    plant = _load(tmp_path, mqtt_broker.port, store_url)
    rt = Runtime(plant, serve_http=False, publish=False)
    async with running(rt) as task:
        watch, _ = await _burst(rt, mqtt_broker.port, _poison_messages(plant._test_prefix))
        assert watch.not_ready == []  # readiness never flapped
        assert _metric(rt, "brayscope_commit_failures_total") == 0
        assert _metric(rt, "brayscope_database_up") == 1
        reasons = {r["reason"] for r in rt.store.quarantine_rows(100)}
        assert reasons <= {"future_timestamp", "past_timestamp"}
        assert not task.done()


@pytest.mark.services
async def test_a_value_the_database_refuses_is_isolated_as_unstorable(
    tmp_path: Path, mqtt_broker: Any, store_url: str
) -> None:
    """The backstop: a value the decoder accepted but storage cannot hold (here a source time
    let through by a timestamp window the check would refuse) is quarantined as ``unstorable``
    and the rest of its batch is committed."""
    mqtt_broker.require(v5=True)
    print(f"broker: {mqtt_broker.describe()}; database: {store_url.rsplit('@', maxsplit=1)[-1]}")
    plant = _load(tmp_path, mqtt_broker.port, store_url)
    plant.daemon.future_tolerance_s = math.inf  # set behind the check's back
    plant.daemon.past_tolerance_s = math.inf
    prefix = plant._test_prefix
    rt = Runtime(plant, serve_http=False, publish=False)
    assert "unstorable" in QUARANTINE_REASONS
    async with running(rt) as task:
        amb = topic_of(prefix, "KR-GT1", "ambient_temperature")
        poison = [(amb, json.dumps({"value": 12, "ts": ts}).encode()) for ts in POISON_TS]
        watch, _ = await _burst(rt, mqtt_broker.port, poison)
        assert watch.not_ready == []
        rows = rt.store.quarantine_rows(100)
        assert {r["reason"] for r in rows} == {"unstorable"}
        assert sorted(bytes(r["payload"]) for r in rows) == sorted(p for _, p in poison)
        assert all(r["unit"] == "KR-GT1" and r["topic"] == amb for r in rows)
        assert _metric(rt, "brayscope_database_up") == 1
        assert _metric(rt, 'brayscope_readings_rejected_total{reason="unstorable"}') == len(poison)
        # the good readings of the same burst went on to the assembly
        snap = rt.assembler.snapshot("KR-GT1", math.floor(time.time()))
        assert snap is not None
        assert snap.values["ambient_temperature"] == pytest.approx(291.45, abs=1e-9)
        assert not task.done()


@pytest.mark.services
async def test_database_down_is_not_taken_for_an_unstorable_message(tmp_path: Path) -> None:
    """With the database unreachable a commit raises the database error (nothing acknowledged,
    readiness false), never :class:`UnstorableError`; with the database up, a refused value
    raises :class:`UnstorableError` and the database stays reported up."""
    down = f"postgresql+psycopg://postgres@127.0.0.1:{free_port()}/test"
    plant = _load(tmp_path, 1883, f"sqlite:///{tmp_path / 'x.sqlite'}")
    now = time.time()
    bad = Reading("KR-GT1", "ambient_temperature", 290.0, 1e12, now, "good", "t", 12, "degC")
    rt = Runtime(plant, store=Store(down, connect_timeout_s=2), serve_http=False, publish=False)
    rt._db_prepared = True
    rt._set_db(True)
    with pytest.raises(Exception) as info:
        await rt._commit(Batch((bad,), (), 1, 1))
    assert not isinstance(info.value, UnstorableError)
    assert rt.readiness()[1]["database"] is False
    rt.store.close()

    up = Runtime(plant, serve_http=False, publish=False)
    await asyncio.to_thread(up._prepare_db_sync)
    up._db_prepared = True
    up._set_db(True)
    with pytest.raises(UnstorableError):
        await up._commit(Batch((bad,), (), 1, 1))
    assert up.readiness()[1]["database"] is True
    up.store.close()


# --------------------------------------------------------------------------------------------
# brayscope check refuses windows that would let unrepresentable times through
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("key", "value"),
    [
        ("future_tolerance_s", "1e30"),
        ("past_tolerance_s", "1e30"),
        ("tick_s", "1e30"),
        ("max_age_s", "1e30"),
        ("session_expiry_s", "4294967296"),  # MQTT 5.0 3.1.2.11.2: a four-byte integer
        ("keepalive_s", "65536"),  # MQTT 5.0 3.1.2.10: a two-byte integer
    ],
)
def test_check_refuses_absurd_windows(
    tmp_path: Path, key: str, value: str, capsys: pytest.CaptureFixture[str]
) -> None:
    from daemon.cli import main

    db = f"sqlite:///{tmp_path / 'x.sqlite'}"

    def absurd(text: str) -> str:
        lines = [
            f"{ln.split('=')[0].rstrip()} = {value}" if ln.strip().startswith(key + " ") else ln
            for ln in text.splitlines()
        ]
        assert lines != text.splitlines(), key
        return "\n".join(lines) + "\n"

    path, _, _ = write_plant(tmp_path, database_url=db, edit=absurd)
    assert main(["check", "-c", str(path)]) == 2
    err = capsys.readouterr().err
    assert f"{key}: Input should be less than or equal to" in err, err
    assert "fix: give a number <=" in err
    # and the shipped windows stay accepted
    path, _, _ = write_plant(tmp_path, database_url=db)
    assert main(["check", "-c", str(path)]) == 0
