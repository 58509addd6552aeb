"""Sparkplug B over a real broker: a test edge node publishes, a small host decodes.

The broker is the loopback Mosquitto (``mqtt_broker`` fixture; each test records which broker
it used).  The host follows the primary-host STATE sequence and publishes the decoder's Rebirth
Requests; the edge node answers them.  Check values: the unit conversions and Sparkplug rules
cited in ``test_sparkplug_decoder.py``; the STATE rules of Sparkplug 3.0.0 section 4.2.3
(retained, QoS 1, will offline with the birth's timestamp).
"""

from __future__ import annotations

import asyncio
import time
from pathlib import Path

import aiomqtt
import pytest
from sparkplug_support import (
    DEVICE,
    DEVICE_METRICS,
    DEVICE_VALUES,
    NODE_METRICS,
    NODE_VALUES,
    EdgeNode,
    TestHost,
    make_decoder,
)

from daemon.feeds.sparkplug.decoder import InputsStale, NodeDeath, SequenceGap
from daemon.feeds.sparkplug.primary_host import parse_state

pytestmark = pytest.mark.services

MAPPED_DEVICE = 5  # readable mapped device metrics per DDATA of DEVICE_VALUES


def edge_node(broker, **kw) -> EdgeNode:  # type: ignore[no-untyped-def]
    e = EdgeNode(broker.host, broker.port, NODE_METRICS, DEVICE_METRICS, **kw)
    e.connect()
    return e


async def test_births_data_and_bad_metrics_arrive_exactly(mqtt_broker, tmp_path: Path) -> None:
    mqtt_broker.require(v5=True)
    decoder = make_decoder(tmp_path, reorder_timeout_s=0.3)
    async with TestHost(mqtt_broker.host, mqtt_broker.port, decoder) as host:
        edge = edge_node(mqtt_broker)
        try:
            edge.nbirth(NODE_VALUES)
            edge.dbirth(DEVICE, DEVICE_VALUES)
            for i in range(20):
                edge.ddata(DEVICE, {"Compressor/Discharge Temperature": 398.0 + i / 10})
            edge.ddata(DEVICE, {"Fuel/Flow": 9800}, quality={"Fuel/Flow": 0})
            edge.ddata(DEVICE, {"Exhaust/Temperature": 900})  # out of range
            edge.publish(edge.topic("DDATA", DEVICE), b"\x0a\xff\x01")  # malformed
            await host.wait_until(lambda: len(host.results) == 25)
        finally:
            edge.close()
    # births: 2 node + 5 device readings, 1 unsupported; data: 20 CDT readings
    readings = host.readings
    assert len(readings) == 2 + MAPPED_DEVICE + 20
    cdt = [r.value for r in readings if r.measurement == "compressor_discharge_temperature"]
    assert cdt[1:] == pytest.approx([398.0 + i / 10 + 273.15 for i in range(20)], abs=1e-4)
    reasons = sorted(q.reason for q in host.quarantined)
    assert reasons == ["bad_quality", "malformed_protobuf", "out_of_range", "unsupported_datatype"]
    assert sum(r.received for r in host.results) == len(readings) + len(host.quarantined)


async def test_out_of_order_seq_asks_for_rebirth_and_values_flow_again(
    mqtt_broker, tmp_path: Path
) -> None:
    mqtt_broker.require(v5=True)
    decoder = make_decoder(tmp_path, reorder_timeout_s=0.3, rebirth_interval_s=0.0)
    async with TestHost(mqtt_broker.host, mqtt_broker.port, decoder) as host:
        edge = edge_node(mqtt_broker, auto_rebirth=True)
        try:
            edge.nbirth(NODE_VALUES)
            edge.dbirth(DEVICE, DEVICE_VALUES)
            edge.ddata(DEVICE, {"Fuel/Flow": 9700}, seq=2)
            edge.ddata(DEVICE, {"Fuel/Flow": 9720}, seq=4)  # 3 is lost
            await host.wait_until(lambda: edge.rebirth_requests >= 1, timeout=5)
            await host.wait_until(lambda: decoder.counters.births >= 4, timeout=5)
        finally:
            edge.close()
    (gap,) = host.events(SequenceGap)
    assert gap.missing == 1
    assert len(host.rebirths_sent) == 1 and edge.rebirth_requests == 1
    # the rebirth carries current values again
    fuel = [r for r in host.readings if r.measurement == "fuel_mass_flow"]
    assert len(fuel) == 4 and fuel[-1].value == pytest.approx(9720 / 3600)


async def test_node_will_makes_inputs_stale(mqtt_broker, tmp_path: Path) -> None:
    """The broker publishes the edge node's NDEATH will; its bdSeq matches the NBIRTH."""
    mqtt_broker.require(v5=True)
    decoder = make_decoder(tmp_path)
    async with TestHost(mqtt_broker.host, mqtt_broker.port, decoder) as host:
        edge = edge_node(mqtt_broker)
        edge.nbirth(NODE_VALUES)
        edge.dbirth(DEVICE, DEVICE_VALUES)
        await host.wait_until(lambda: len(host.results) == 2)
        edge.close(with_will=True)
        await host.wait_until(lambda: bool(host.events(InputsStale)), timeout=5)
    (death,) = host.events(NodeDeath)
    assert death.matched and death.bd_seq == 0
    (stale,) = host.events(InputsStale)
    assert stale.cause == "node_death" and len(stale.inputs) == 8


async def test_state_is_retained_and_the_will_says_offline(mqtt_broker, tmp_path: Path) -> None:
    decoder = make_decoder(tmp_path)
    host_id = f"brayscope-test-{time.monotonic_ns()}"
    topic = f"spBv1.0/STATE/{host_id}"

    async def retained_state() -> bytes:
        async with aiomqtt.Client(mqtt_broker.host, mqtt_broker.port) as c:
            await c.subscribe(topic, qos=1)
            async with asyncio.timeout(5):
                async for m in c.messages:
                    return bytes(m.payload)  # type: ignore[arg-type]
        raise AssertionError("no retained STATE")

    host = TestHost(mqtt_broker.host, mqtt_broker.port, decoder, host_id=host_id)
    async with host:
        online = parse_state(await retained_state())
        assert online.online and online.timestamp_ms == host.session.timestamp_ms
    offline = parse_state(await retained_state())  # the death published before DISCONNECT
    assert not offline.online and offline.timestamp_ms >= online.timestamp_ms
    async with aiomqtt.Client(mqtt_broker.host, mqtt_broker.port) as c:  # clear the retained
        await c.publish(topic, b"", qos=1, retain=True)
