"""The MQTT feed against a real broker (see tests/conftest.py for which one; it is recorded in
each test's user_properties and in the run header).

What is checked, and the outside facts it rests on:

* QoS 1 is at-least-once, and the broker redelivers unacknowledged messages of a persistent
  session after the client reconnects with the same client id (OASIS MQTT 3.1.1 sections
  3.1.2.4 and 4.4; MQTT 5.0 sections 3.1.2.4, 3.1.2.11.2 and 4.4).
* PUBACKs must be sent in the order the PUBLISH packets arrived (MQTT 3.1.1 section 4.6,
  MQTT 5.0 section 4.6).
* In MQTT 5 the client's Receive Maximum caps the QoS-1 messages the server sends without an
  acknowledgement (MQTT 5.0 section 3.1.2.11.3 and 4.9).

Each test uses its own uuid topic prefix and client id, and removes its session at the end.
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import shutil
import time
import uuid
from collections.abc import AsyncIterator
from dataclasses import dataclass, field

import aiomqtt
import paho.mqtt.client as paho
import pytest

from daemon.feeds.decode import Batch, Decoder, TagRoute
from daemon.feeds.mqtt import MemoryFeedStats, MqttFeed, backoff_delay, derive_filters
from daemon.uom import Converter, compile_converter

pytestmark = pytest.mark.services

TIMEOUT_S = 30.0


@dataclass
class Tag:
    topic: str
    key: str
    measurement: str
    uom: str
    low: float
    high: float
    si: str
    converter: Converter = field(init=False)

    def __post_init__(self) -> None:
        self.converter = compile_converter(self.uom, self.si)

    @property
    def baro_reference(self) -> None:
        return None

    def to_si(self, value: float, baro_pa: float | None = None) -> float:
        return self.converter(value, baro_pa)


@dataclass
class Broker:
    host: str
    port: int
    protocol: str
    client_id: str
    qos: int = 1
    keepalive_s: int = 30
    session_expiry_s: int = 600
    queue_size: int = 1000


def plant_decoder(prefix: str) -> Decoder:
    tags = [
        Tag(f"{prefix}/gt1/TT-AMB", "", "ambient_temperature", "degC", -40, 55, "K"),
        Tag(f"{prefix}/gt1/JT-GEN", "", "generator_power", "MW", -5, 60, "W"),
        Tag(f"{prefix}/gt2/unit", "TT-AMB", "ambient_temperature", "degC", -40, 55, "K"),
        Tag(f"{prefix}/gt2/unit", "JT-GEN", "generator_power", "MW", -5, 60, "W"),
    ]
    return Decoder([TagRoute("KR-GT1" if "gt1" in t.topic else "KR-GT2", t, t.si) for t in tags])


@pytest.fixture(params=["5", "3.1.1"])
def protocol(request: pytest.FixtureRequest, mqtt_broker) -> str:
    if request.param == "5" and not mqtt_broker.supports_v5:
        pytest.skip(f"{mqtt_broker.describe()} does not speak MQTT 5")
    request.node.user_properties.append(("mqtt_protocol", request.param))
    return str(request.param)


@pytest.fixture
def prefix() -> str:
    return f"brayscope-test/{uuid.uuid4().hex}"


def broker_for(mqtt_broker, protocol: str, **kw) -> Broker:
    return Broker(
        mqtt_broker.host,
        mqtt_broker.port,
        protocol,
        client_id=f"brayscope-test-{uuid.uuid4().hex[:12]}",
        **kw,
    )


async def drop_session(b: Broker) -> None:
    """Connect once with a clean session so the broker forgets this test's client id."""
    v5 = b.protocol == "5"
    async with aiomqtt.Client(
        b.host,
        b.port,
        identifier=b.client_id,
        protocol=aiomqtt.ProtocolVersion.V5 if v5 else aiomqtt.ProtocolVersion.V311,
        clean_session=None if v5 else True,
        clean_start=paho.MQTT_CLEAN_START_FIRST_ONLY,
    ):
        pass


@contextlib.asynccontextmanager
async def publisher(b: Broker) -> AsyncIterator[aiomqtt.Client]:
    async with aiomqtt.Client(b.host, b.port, identifier=f"pub-{uuid.uuid4().hex[:12]}") as c:
        yield c


class Recorder:
    """commit() target that keeps what was 'made durable' and logs commit/ack order."""

    def __init__(self, fail_first: int = 0) -> None:
        self.batches: list[Batch] = []
        self.events: list[tuple[str, int]] = []
        self.fail_first = fail_first

    async def commit(self, batch: Batch) -> None:
        if self.fail_first > 0:
            self.fail_first -= 1
            raise OSError("database unavailable (test)")
        self.batches.append(batch)
        self.events.append(("commit", batch.messages))

    def values(self) -> list[float]:
        return [r.raw_value for b in self.batches for r in b.readings]  # type: ignore[misc]


class SpyFeed(MqttFeed):
    """Records every PUBACK the feed sends (mid) into the recorder's event log."""

    recorder: Recorder

    def _make_client(self) -> aiomqtt.Client:
        client = super()._make_client()
        inner = client._client
        real_ack = inner.ack

        def ack(mid: int, qos: int):
            self.recorder.events.append(("ack", mid))
            return real_ack(mid, qos)

        inner.ack = ack  # type: ignore[method-assign]
        return client


def spy_feed(b: Broker, decoder: Decoder, rec: Recorder, **kw) -> SpyFeed:
    feed = SpyFeed(
        b,
        decoder,
        commit=rec.commit,
        stats=kw.pop("stats", MemoryFeedStats()),
        backoff_initial_s=0.05,
        backoff_cap_s=0.5,
        **kw,
    )
    feed.recorder = rec
    return feed


async def wait_for(cond, timeout: float = TIMEOUT_S) -> None:
    deadline = time.monotonic() + timeout
    while not cond():
        if time.monotonic() > deadline:
            raise AssertionError("condition not reached in time")
        await asyncio.sleep(0.02)


async def consume(feed: MqttFeed) -> None:
    async for _ in feed.batches():
        pass


# -- pure helpers -----------------------------------------------------------------------------


def test_derive_filters() -> None:
    assert derive_filters(["p/gt1/a", "p/gt1/b", "p/gt2/unit"]) == ["p/#"]
    assert derive_filters(["p/gt1/a"]) == ["p/gt1/a"]
    assert derive_filters(["p/a", "q/b/c", "q/b/d"]) == ["p/a", "q/b/#"]
    with pytest.raises(ValueError):
        derive_filters(["p/+/a"])


def test_backoff_is_exponential_jittered_and_capped() -> None:
    lo = [backoff_delay(n, initial_s=0.5, cap_s=30.0, rng=lambda: 0.0) for n in range(10)]
    hi = [backoff_delay(n, initial_s=0.5, cap_s=30.0, rng=lambda: 1.0) for n in range(10)]
    assert hi[:7] == [0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 30.0]
    assert lo[0] == 0.25 and max(hi) == 30.0 and max(lo) == 15.0


# -- end to end on the broker -----------------------------------------------------------------


async def test_publish_n_all_decoded_committed_before_ack(mqtt_broker, protocol, prefix) -> None:
    b = broker_for(mqtt_broker, protocol)
    decoder = plant_decoder(prefix)
    rec = Recorder()
    stats = MemoryFeedStats()
    n = 200
    try:
        async with spy_feed(b, decoder, rec, stats=stats) as feed:
            task = asyncio.create_task(consume(feed))
            await feed.wait_connected(TIMEOUT_S)
            async with publisher(b) as pub:
                for i in range(n):
                    await pub.publish(f"{prefix}/gt1/TT-AMB", f"{i % 50}.5", qos=1)
                await pub.publish(
                    f"{prefix}/gt2/unit",
                    json.dumps({"seq": 1, "values": {"TT-AMB": 12.5, "JT-GEN": 44.0}}),
                    qos=1,
                )
            await wait_for(lambda: stats.received >= n + 2)
            task.cancel()
    finally:
        await drop_session(b)
    got = sorted(rec.values())
    assert got == sorted([i % 50 + 0.5 for i in range(n)] + [12.5, 44.0])
    assert stats.accepted == {"KR-GT1": n, "KR-GT2": 2}
    assert stats.rejected == {}
    # every ack follows a commit that covered it: acks so far ≤ messages committed so far
    committed = acked = 0
    for kind, value in rec.events:
        if kind == "commit":
            committed += value
        else:
            acked += 1
            assert acked <= committed
    assert acked == n + 1


async def test_bad_inputs_through_the_broker_are_quarantined_and_counted(
    mqtt_broker, protocol, prefix
) -> None:
    b = broker_for(mqtt_broker, protocol)
    rec = Recorder()
    stats = MemoryFeedStats()
    try:
        async with spy_feed(b, plant_decoder(prefix), rec, stats=stats) as feed:
            task = asyncio.create_task(consume(feed))
            await feed.wait_connected(TIMEOUT_S)
            async with publisher(b) as pub:
                for topic, payload in [
                    (f"{prefix}/gt1/TT-AMB", "NaN"),
                    (f"{prefix}/gt1/TT-AMB", "true"),
                    (f"{prefix}/gt1/TT-AMB", "-300"),
                    (f"{prefix}/gt1/JT-GEN", "75"),
                    (f"{prefix}/gt1/unknown", "1"),  # inside the '#' filter, not mapped
                    (f"{prefix}/gt2/unit", '{"TT-AMB": 10, "XX": 1}'),
                ]:
                    await pub.publish(topic, payload, qos=1)
            await wait_for(lambda: stats.received >= 7)
            task.cancel()
    finally:
        await drop_session(b)
    assert stats.rejected == {
        "non_finite": 1,
        "wrong_type": 1,
        "nonphysical": 1,
        "out_of_range": 1,
        "unknown_topic": 1,
        "unknown_key": 1,
    }
    assert stats.accepted == {"KR-GT2": 1}
    q = [x for batch in rec.batches for x in batch.quarantined]
    assert len(q) == 6 and all(x.payload for x in q)


async def test_commit_failure_leaves_messages_unacked_and_they_come_back(
    mqtt_broker, protocol, prefix
) -> None:
    """The first commits fail; the feed reconnects and the broker redelivers (DUP)."""
    mqtt_broker.require(redelivery=True)
    b = broker_for(mqtt_broker, protocol)
    rec = Recorder(fail_first=2)
    stats = MemoryFeedStats()
    n = 30
    try:
        async with spy_feed(b, plant_decoder(prefix), rec, stats=stats, commit_attempts=1) as feed:
            task = asyncio.create_task(consume(feed))
            await feed.wait_connected(TIMEOUT_S)
            async with publisher(b) as pub:
                for i in range(n):
                    await pub.publish(f"{prefix}/gt1/JT-GEN", str(10 + i), qos=1)
            await wait_for(lambda: sorted(set(rec.values())) == [10 + i for i in range(n)])
            task.cancel()
    finally:
        await drop_session(b)
    assert stats.commit_failures == 2
    assert stats.reconnects >= 2
    assert sum(batch.duplicates for batch in rec.batches) >= 1  # redelivered with DUP


@pytest.mark.parametrize("mode", ["commit_raises", "commit_never_returns"])
async def test_unacked_messages_redelivered_to_the_next_feed_process(
    mqtt_broker, protocol, prefix, mode
) -> None:
    """Feed A never completes a commit and stops; feed B (same client id) gets every message."""
    mqtt_broker.require(redelivery=True)
    b = broker_for(mqtt_broker, protocol)
    decoder = plant_decoder(prefix)
    n = 25
    attempts = 0

    async def bad_commit(batch: Batch) -> None:
        nonlocal attempts
        attempts += 1
        if mode == "commit_raises":
            raise OSError("disk full (test)")
        await asyncio.Event().wait()  # hangs, like a process killed mid-write

    try:
        feed_a = MqttFeed(
            b,
            decoder,
            commit=bad_commit,
            commit_attempts=100,
            backoff_initial_s=0.05,
            backoff_cap_s=0.2,
        )
        async with feed_a:
            await feed_a.wait_connected(TIMEOUT_S)
            async with publisher(b) as pub:
                for i in range(n):
                    await pub.publish(f"{prefix}/gt1/JT-GEN", str(20 + i), qos=1)
            await wait_for(lambda: attempts >= 1)
        rec = Recorder()
        stats = MemoryFeedStats()
        async with spy_feed(b, plant_decoder(prefix), rec, stats=stats) as feed_b:
            task = asyncio.create_task(consume(feed_b))
            await wait_for(lambda: sorted(set(rec.values())) == [20 + i for i in range(n)])
            task.cancel()
    finally:
        await drop_session(b)


async def test_sequence_gaps_are_counted(mqtt_broker, protocol, prefix) -> None:
    b = broker_for(mqtt_broker, protocol)
    rec = Recorder()
    stats = MemoryFeedStats()
    try:
        async with spy_feed(b, plant_decoder(prefix), rec, stats=stats) as feed:
            task = asyncio.create_task(consume(feed))
            await feed.wait_connected(TIMEOUT_S)
            async with publisher(b) as pub:
                for seq in (1, 2, 3, 6, 7, 10):
                    await pub.publish(
                        f"{prefix}/gt2/unit", json.dumps({"seq": seq, "TT-AMB": 10.0}), qos=1
                    )
            await wait_for(lambda: stats.received >= 6)
            task.cancel()
    finally:
        await drop_session(b)
    assert (stats.gaps, stats.missing) == (2, 4)  # 4, 5 and 8, 9 never arrived


async def test_inbound_overflow_is_counted_and_nothing_is_lost(
    mqtt_broker, protocol, prefix
) -> None:
    """A tiny inbound queue and a slow commit.  MQTT 5: the feed asks the broker for Receive
    Maximum = queue size; MQTT 3.1.1 has no such cap (Mosquitto's max_inflight_messages, 20 by
    default, bounds it).  Whatever the broker sends beyond the queue is refused, counted, and
    redelivered after a reconnect: the queue stays within its bound and nothing is lost."""
    mqtt_broker.require(redelivery=True)
    b = broker_for(mqtt_broker, protocol, queue_size=4)
    n = 60

    class Slow(Recorder):
        async def commit(self, batch: Batch) -> None:
            await asyncio.sleep(0.02)
            await super().commit(batch)

    rec = Slow()
    stats = MemoryFeedStats()
    sent_props: list[object] = []

    class PropsFeed(SpyFeed):
        def _make_client(self) -> aiomqtt.Client:
            client = super()._make_client()
            sent_props.append(client._properties)
            return client

    feed = PropsFeed(
        b,
        plant_decoder(prefix),
        commit=rec.commit,
        stats=stats,
        max_items=4,
        backoff_initial_s=0.05,
        backoff_cap_s=0.5,
    )
    feed.recorder = rec
    depths: list[int] = []
    try:
        async with feed:
            task = asyncio.create_task(consume(feed))
            await feed.wait_connected(TIMEOUT_S)
            async with publisher(b) as pub:
                for i in range(n):
                    await pub.publish(f"{prefix}/gt1/JT-GEN", str(i % 60), qos=1)
                    depths.append(feed._inbound.qsize())
            await wait_for(lambda: sorted(set(rec.values())) == list(range(n)), timeout=60)
            task.cancel()
    finally:
        await drop_session(b)
    assert max(depths) <= 4 and stats.depth <= 4
    assert max(batch.messages for batch in rec.batches) <= 4
    if protocol == "5":
        assert sent_props[0].ReceiveMaximum == 4  # type: ignore[attr-defined]
        assert sent_props[0].SessionExpiryInterval == 600  # type: ignore[attr-defined]
    else:
        assert sent_props[0] is None
        # the broker's in-flight window (20 on a default Mosquitto) exceeds the queue of 4
        assert stats.overflow > 0
    if stats.overflow:
        assert stats.reconnects >= 1  # refused messages came back through a reconnect


def _free_port() -> int:
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


async def _start_mosquitto(conf, port: int):
    import subprocess

    proc = subprocess.Popen(
        ["mosquitto", "-c", str(conf)], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
    )
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline:
        try:
            _, w = await asyncio.open_connection("127.0.0.1", port)
            w.close()
            await w.wait_closed()
            return proc
        except OSError:
            await asyncio.sleep(0.05)
    proc.kill()
    raise AssertionError("private mosquitto did not start")


@pytest.mark.skipif(shutil.which("mosquitto") is None, reason="mosquitto not on PATH")
@pytest.mark.parametrize("proto", ["5", "3.1.1"])
async def test_broker_restart_feed_reconnects_and_loses_nothing(tmp_path, proto, request) -> None:
    """A private Mosquitto (persistence on, so sessions survive its restart) is stopped and
    started again under the feed; the feed reconnects by itself and every message published
    before and after arrives.  The shared broker on 1883 is never touched."""
    port = _free_port()
    request.node.user_properties.append(("mqtt_broker", f"private mosquitto at 127.0.0.1:{port}"))
    conf = tmp_path / "mosquitto.conf"
    conf.write_text(
        f"listener {port} 127.0.0.1\nallow_anonymous true\npersistence true\n"
        f"persistence_location {tmp_path}/\nautosave_interval 1\n"
    )
    b = Broker("127.0.0.1", port, proto, client_id=f"brayscope-test-{uuid.uuid4().hex[:12]}")
    prefix = f"brayscope-test/{uuid.uuid4().hex}"
    rec = Recorder()
    stats = MemoryFeedStats()
    proc = await _start_mosquitto(conf, port)
    try:
        async with spy_feed(b, plant_decoder(prefix), rec, stats=stats) as feed:
            task = asyncio.create_task(consume(feed))
            await feed.wait_connected(TIMEOUT_S)
            async with publisher(b) as pub:
                for i in range(10):
                    await pub.publish(f"{prefix}/gt1/JT-GEN", str(i), qos=1)
            await wait_for(lambda: len(set(rec.values())) == 10)
            proc.terminate()  # SIGTERM: Mosquitto saves its persistence file and exits
            proc.wait(timeout=10)
            await wait_for(lambda: not feed.connected)
            proc = await _start_mosquitto(conf, port)
            await feed.wait_connected(TIMEOUT_S)
            async with publisher(b) as pub:
                for i in range(10, 20):
                    await pub.publish(f"{prefix}/gt1/JT-GEN", str(i), qos=1)
            await wait_for(lambda: sorted(set(rec.values())) == list(range(20)))
            task.cancel()
    finally:
        proc.terminate()
        proc.wait(timeout=10)
    assert stats.reconnects >= 1


# -- stopping and delivery accounting -----------------------------------------------------------


async def test_aclose_cancels_again_when_a_cancel_is_swallowed() -> None:
    # CPython gh-86296: on 3.11 asyncio.wait_for can swallow a cancellation; aclose must
    # cancel until the task has really ended (a single cancel would leave it running).
    feed = MqttFeed(
        Broker("127.0.0.1", 1, "5", client_id="t"), plant_decoder("x"), commit=Recorder().commit
    )
    swallowed = 0

    async def stubborn() -> None:
        nonlocal swallowed
        while True:
            try:
                await asyncio.sleep(10)
            except asyncio.CancelledError:
                swallowed += 1
                if swallowed >= 2:
                    raise

    feed._task = asyncio.create_task(stubborn())
    await asyncio.sleep(0)
    await asyncio.wait_for(feed.aclose(), 5.0)
    assert swallowed == 2
    assert feed._task is None


async def test_cancelled_batches_leaves_no_pending_get() -> None:
    feed = MqttFeed(
        Broker("127.0.0.1", 1, "5", client_id="t"), plant_decoder("x"), commit=Recorder().commit
    )
    feed._task = asyncio.create_task(asyncio.sleep(30))
    consumer = asyncio.create_task(consume(feed))
    await asyncio.sleep(0.05)
    consumer.cancel()
    with contextlib.suppress(asyncio.CancelledError):
        await consumer
    await asyncio.sleep(0)
    # a get left behind would take the next batch out of the queue and drop it
    feed._out.put_nowait((Batch.from_results([], dups=0), 0, 0))
    await asyncio.sleep(0.05)
    assert feed._out.qsize() == 1
    await feed.aclose()


async def test_wait_delivered_covers_every_message_received_before_it(
    mqtt_broker, protocol, prefix
) -> None:
    b = broker_for(mqtt_broker, protocol)
    rec = Recorder()
    seen: list[float] = []
    # a long batch window: without the early close the wait would take about 2 s
    feed = spy_feed(b, plant_decoder(prefix), rec, max_wait_s=2.0, linger_s=2.0)
    try:
        async with feed:
            await feed.wait_connected(TIMEOUT_S)

            async def ingest() -> None:
                async for batch in feed.batches():
                    seen.extend(r.raw_value for r in batch.readings)  # type: ignore[misc]

            task = asyncio.create_task(ingest())
            async with publisher(b) as pub:
                for i in range(20):
                    await pub.publish(f"{prefix}/gt1/TT-AMB", json.dumps(10.0 + i), qos=1)
                await wait_for(lambda: feed._recv_seq >= 20)
            t0 = time.monotonic()
            assert await feed.wait_delivered(5.0)
            waited = time.monotonic() - t0
            # every message received before the call was consumed when it returned
            assert sorted(seen) == [10.0 + i for i in range(20)]
            assert waited < 1.0
            task.cancel()
            with contextlib.suppress(asyncio.CancelledError):
                await task
    finally:
        await drop_session(b)
