"""Subscriptions of an earlier plant file must not stay in the broker's persistent session.

Facts the test rests on:

* A persistent session keeps the client's subscriptions across connections (OASIS MQTT 5.0,
  3.1.2.4 "Clean Start" and 4.1 "Session State"; MQTT 3.1.1, 3.1.2.4): subscribing to new
  filters does not remove the old ones, and MQTT has no request that lists them.
* With overlapping subscriptions a server may deliver further copies of a message, one per
  additional matching subscription (MQTT 5.0, 3.3.4 "PUBLISH Actions"); Mosquitto 2.0 does
  for MQTT 5 clients (its mailing list and eclipse/mosquitto issue 2555).
* UNSUBSCRIBE removes a subscription by its exact filter text (MQTT 5.0, 3.10.4).

The daemon remembers the filters it subscribed under its client id (database table
``broker_subscriptions``) and unsubscribes, at start, those the plant file no longer has.
"""

from __future__ import annotations

import asyncio
import json
import time
import uuid
from pathlib import Path
from typing import Any

import aiomqtt
import paho.mqtt.client as paho
import pytest
from live_support import topic_of, write_plant
from test_runtime import _metric, _publish, _until, running

from daemon.config import load_plant
from daemon.runtime import Runtime


def _plant(
    tmp_path: Path, name: str, *, prefix: str, client_id: str, port: int, db: str, **kw: Any
) -> Any:
    moved = kw.pop("moved_topic", None)
    old = topic_of(prefix, "KR-GT1", "fuel_temperature")

    def edit(text: str) -> str:  # the plant engineer moved one tag to another topic
        return text if moved is None else text.replace(f'topic = "{old}"', f'topic = "{moved}"')

    path, _, _ = write_plant(
        tmp_path,
        database_url=db,
        broker_port=port,
        name=name,
        prefix=prefix,
        client_id=client_id,
        edit=edit,
        **kw,
    )
    return load_plant(path)


async def _drop_session(port: int, client_id: str, protocol: str) -> None:
    v5 = protocol == "5"
    async with aiomqtt.Client(
        "127.0.0.1",
        port,
        identifier=client_id,
        protocol=aiomqtt.ProtocolVersion.V5 if v5 else aiomqtt.ProtocolVersion.V311,
        clean_session=None if v5 else True,
        clean_start=paho.MQTT_CLEAN_START_FIRST_ONLY,
    ):
        pass


@pytest.mark.services
@pytest.mark.parametrize(
    ("protocol", "store_url"),
    [("5", "sqlite"), ("5", "postgresql"), ("3.1.1", "sqlite")],
    indirect=["store_url"],
)
async def test_subscriptions_of_an_earlier_plant_file_are_removed(
    tmp_path: Path, mqtt_broker: Any, store_url: str, protocol: str
) -> None:
    mqtt_broker.require(v5=protocol == "5", redelivery=True)
    print(
        f"broker: {mqtt_broker.describe()}, MQTT {protocol}, persistent session; "
        f"database: {store_url.rsplit('@', maxsplit=1)[-1]}"
    )
    prefix = f"bstest/{uuid.uuid4().hex[:10]}"
    client_id = f"bs-subs-{uuid.uuid4().hex[:8]}"
    common = {"prefix": prefix, "client_id": client_id, "port": mqtt_broker.port, "db": store_url}
    old_topic = topic_of(prefix, "KR-GT1", "fuel_temperature")
    new_topic = f"{prefix}/kr-gt1/fuel_temperature_inlet"
    amb = topic_of(prefix, "KR-GT1", "ambient_temperature")
    try:
        # first plant file: one "parent/+" filter per unit
        first = _plant(tmp_path, "a.toml", subscriptions="parent", protocol=protocol, **common)
        assert f"{prefix}/kr-gt1/+" in first.subscriptions()
        rt = Runtime(first, serve_http=False, publish=False)
        async with running(rt):
            pass

        # second plant file: exact filters, and the fuel temperature tag on another topic
        second = _plant(tmp_path, "b.toml", protocol=protocol, moved_topic=new_topic, **common)
        assert old_topic not in second.subscriptions()
        assert f"{prefix}/kr-gt1/+" not in second.subscriptions()
        rt = Runtime(second, serve_http=False, publish=False)
        async with running(rt):
            now = time.time()
            await _publish(
                mqtt_broker.port,
                [
                    (old_topic, json.dumps({"value": 31.0, "ts": now}).encode()),
                    (amb, json.dumps({"value": 18.3, "ts": now}).encode()),
                    (new_topic, json.dumps({"value": 31.5, "ts": now}).encode()),
                ],
            )
            await _until(lambda: rt.store.count("readings") == 2, 15, "the two mapped readings")
            await asyncio.sleep(1.0)  # time for any stray or duplicate copy to arrive
            # the unmapped topic no longer arrives, and the mapped one arrives once
            assert _metric(rt, 'brayscope_readings_rejected_total{reason="unknown_topic"}') == 0
            assert _metric(rt, "brayscope_readings_received_total") == 2
            assert rt.store.count("quarantine") == 0
            remembered = rt.store.subscriptions(client_id)
            assert sorted(remembered) == sorted(second.subscriptions())
    finally:
        await _drop_session(mqtt_broker.port, client_id, protocol)


def test_stale_filter_candidates_and_url_doctests() -> None:
    import doctest

    from daemon import urls
    from daemon.feeds import mqtt
    from daemon.feeds.mqtt import stale_filter_candidates

    assert stale_filter_candidates("a/b/c", ["a/b/c"]) == ["a/b/+", "a/b/#", "a/#", "#"]
    assert stale_filter_candidates("solo", []) == ["solo", "#"]
    for module in (mqtt, urls):
        assert doctest.testmod(module).failed == 0


@pytest.mark.services
async def test_a_subscription_nobody_remembers_is_removed_when_its_messages_arrive(
    tmp_path: Path, mqtt_broker: Any
) -> None:
    """Filters subscribed before they were recorded (an older version, a new database): the
    first message through one is quarantined as unknown_topic, and the feed unsubscribes the
    filters it could have come through; the next message on that topic never arrives."""
    mqtt_broker.require(v5=True, redelivery=True)
    print(f"broker: {mqtt_broker.describe()}, persistent session; database: sqlite file")
    prefix = f"bstest/{uuid.uuid4().hex[:10]}"
    client_id = f"bs-subs-{uuid.uuid4().hex[:8]}"
    exact_old = f"{prefix}/kr-gt1/retired_tag"
    wildcard_old = f"{prefix}/legacy/#"
    try:
        # an earlier life of this client id subscribed two filters, recorded nowhere
        async with aiomqtt.Client(
            "127.0.0.1",
            mqtt_broker.port,
            identifier=client_id,
            protocol=aiomqtt.ProtocolVersion.V5,
            clean_start=False,
            properties=_session_props(120),
        ) as legacy:
            await legacy.subscribe([(exact_old, 1), (wildcard_old, 1)])
        plant = _plant(
            tmp_path,
            "plant.toml",
            prefix=prefix,
            client_id=client_id,
            port=mqtt_broker.port,
            db=f"sqlite:///{tmp_path / 'fresh.sqlite'}",
        )
        rt = Runtime(plant, serve_http=False, publish=False)
        rejected = 'brayscope_readings_rejected_total{reason="unknown_topic"}'
        async with running(rt):
            await _publish(mqtt_broker.port, [(exact_old, b"1.0"), (f"{prefix}/legacy/x", b"2")])
            await _until(lambda: _metric(rt, rejected) == 2, 15, "the two stray messages")
            await _until(lambda: not rt.feed._background, 5, "the unsubscribe to finish")
            await _publish(mqtt_broker.port, [(exact_old, b"1.0"), (f"{prefix}/legacy/y", b"3")])
            await asyncio.sleep(1.0)
            assert _metric(rt, rejected) == 2  # neither came again
            assert rt.store.count("quarantine") == 2
    finally:
        await _drop_session(mqtt_broker.port, client_id, "5")


def _session_props(expiry_s: int) -> Any:
    from paho.mqtt.packettypes import PacketTypes
    from paho.mqtt.properties import Properties

    props = Properties(PacketTypes.CONNECT)
    props.SessionExpiryInterval = expiry_s
    return props
