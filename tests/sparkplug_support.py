"""A Sparkplug B edge node and a small host for the tests, over a real MQTT broker.

:class:`EdgeNode` publishes births, data, deaths, chosen sequence numbers and bad payloads
with the generated message classes (paho-mqtt, its own network thread), and answers Rebirth
Requests (NCMD ``Node Control/Rebirth``) when told to.  :class:`TestHost` is the host side a
feed will be: it follows the primary-host sequence of ``HostSession`` (will, subscriptions,
birth) with aiomqtt, decodes every message with a ``SparkplugDecoder``, publishes the
decoder's Rebirth Requests and closes elapsed reorder windows every 50 ms.

The edge node is the invented Kestrel Ridge gateway of unit KR-GT1.
"""

from __future__ import annotations

import asyncio
import contextlib
import struct
import threading
import time
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

import aiomqtt
import paho.mqtt.client as paho
from paho.mqtt.packettypes import PacketTypes
from paho.mqtt.reasoncodes import ReasonCode

from daemon.feeds.sparkplug import sparkplug_b_pb2 as pb
from daemon.feeds.sparkplug.decoder import RebirthRequest, SparkplugDecoder, SparkplugResult
from daemon.feeds.sparkplug.primary_host import HostSession
from daemon.types import Quarantined, Reading

DT = pb.DataType
GROUP = "KestrelRidge"
NODE = "kr-gt1-edge"
DEVICE = "GT1"

_INT32 = {DT.Int8, DT.Int16, DT.Int32, DT.UInt8, DT.UInt16, DT.UInt32}
_INT64 = {DT.Int64, DT.UInt64}


def set_value(m: pb.Payload.Metric, datatype: int, value: Any) -> None:
    """Write ``value`` into the field its datatype uses (signed types sign-extended)."""
    if value is None:
        m.is_null = True
    elif datatype in _INT32:
        m.int_value = int(value) & 0xFFFFFFFF
    elif datatype in _INT64:
        m.long_value = int(value) & 0xFFFFFFFFFFFFFFFF
    elif datatype == DT.Float:
        m.float_value = float(value)
    elif datatype == DT.Double:
        m.double_value = float(value)
    elif datatype == DT.Boolean:
        m.boolean_value = bool(value)
    elif datatype in (DT.String, DT.Text):
        m.string_value = str(value)
    elif datatype == DT.Bytes:
        m.bytes_value = bytes(value)
    elif datatype == DT.DataSet:
        m.dataset_value.num_of_columns = 1
        m.dataset_value.columns.append("v")
        m.dataset_value.types.append(DT.Double)
        m.dataset_value.rows.add().elements.add(double_value=float(value))
    elif datatype == DT.DoubleArray:
        m.bytes_value = struct.pack(f"<{len(value)}d", *value)
    else:
        raise ValueError(f"test helper cannot write datatype {datatype}")


def add_quality(m: pb.Payload.Metric, code: int) -> None:
    """Attach the Sparkplug ``Quality`` property (type Int32)."""
    m.properties.keys.append("Quality")
    m.properties.values.add(type=DT.Int32, int_value=code & 0xFFFFFFFF)


@dataclass
class MetricDef:
    name: str
    alias: int
    datatype: int


@dataclass
class EdgeNode:
    """A Sparkplug edge node on a real broker (MQTT 5, clean start, NDEATH as its will)."""

    host: str
    port: int
    node_metrics: list[MetricDef]
    device_metrics: dict[str, list[MetricDef]]
    group: str = GROUP
    node: str = NODE
    auto_rebirth: bool = False
    births: dict[str, dict[str, Any]] = field(default_factory=dict)
    seq: int = 0
    bd_seq: int = 0
    rebirth_requests: int = 0
    _client: paho.Client | None = None
    _lock: threading.Lock = field(default_factory=threading.Lock)

    # -- connection ---------------------------------------------------------------------

    def connect(self) -> None:
        c = paho.Client(
            paho.CallbackAPIVersion.VERSION2,
            client_id=f"kr-edge-{self.node}-{self.bd_seq}-{time.monotonic_ns()}",
            protocol=paho.MQTTv5,
        )
        c.will_set(self.topic("NDEATH"), self.ndeath_payload(), qos=1, retain=False)
        c.on_message = self._on_message
        connected = threading.Event()
        c.on_connect = lambda *_a: connected.set()
        c.connect(self.host, self.port, keepalive=10, clean_start=True)
        c.loop_start()
        if not connected.wait(10):
            raise RuntimeError("edge node could not connect")
        sub = threading.Event()
        c.on_subscribe = lambda *_a: sub.set()
        c.subscribe(f"spBv1.0/{self.group}/NCMD/{self.node}", qos=0)
        if not sub.wait(10):
            raise RuntimeError("edge node could not subscribe")
        self._client = c

    def close(self, *, with_will: bool = False) -> None:
        """Disconnect; ``with_will`` makes the broker publish the NDEATH will (MQTT 5
        reason code 0x04 "Disconnect with Will Message")."""
        c = self._client
        if c is None:
            return
        if with_will:
            c.disconnect(
                reasoncode=ReasonCode(PacketTypes.DISCONNECT, "Disconnect with will message")
            )
        else:
            c.disconnect()
        c.loop_stop()
        self._client = None

    def _on_message(self, _c: Any, _u: Any, msg: paho.MQTTMessage) -> None:
        p = pb.Payload.FromString(msg.payload)
        if any(m.name == "Node Control/Rebirth" and m.boolean_value for m in p.metrics):
            self.rebirth_requests += 1
            if self.auto_rebirth:
                threading.Thread(target=self.rebirth, daemon=True).start()

    # -- messages -----------------------------------------------------------------------

    def topic(self, mtype: str, device: str | None = None) -> str:
        tail = f"/{device}" if device else ""
        return f"spBv1.0/{self.group}/{mtype}/{self.node}{tail}"

    def ndeath_payload(self) -> bytes:
        p = pb.Payload(timestamp=int(time.time() * 1000))
        p.metrics.add(name="bdSeq", datatype=DT.UInt64, long_value=self.bd_seq)
        return p.SerializeToString()

    def publish(self, topic: str, payload: bytes) -> None:
        assert self._client is not None, "connect() first"
        info = self._client.publish(topic, payload, qos=0)
        info.wait_for_publish(5)

    def _next_seq(self, override: int | None) -> int:
        with self._lock:
            if override is not None:
                self.seq = override % 256
            else:
                self.seq = (self.seq + 1) % 256
            return self.seq

    def _payload(
        self,
        defs: Iterable[MetricDef],
        values: Mapping[str, Any],
        *,
        birth: bool,
        seq: int | None,
        ts: float | None = None,
        quality: Mapping[str, int] | None = None,
        datatypes: Mapping[str, int] | None = None,
    ) -> pb.Payload:
        now_ms = int((time.time() if ts is None else ts) * 1000)
        p = pb.Payload(timestamp=now_ms)
        if seq is not None:
            p.seq = seq
        for d in defs:
            if d.name not in values:
                continue
            m = p.metrics.add(alias=d.alias, timestamp=now_ms)
            if birth:
                m.name = d.name
                m.datatype = d.datatype
            if datatypes and d.name in datatypes:
                m.datatype = datatypes[d.name]
            set_value(m, d.datatype, values[d.name])
            if quality and d.name in quality:
                add_quality(m, quality[d.name])
        return p

    def nbirth(self, values: Mapping[str, Any]) -> None:
        with self._lock:
            self.seq = 0
        p = self._payload(self.node_metrics, values, birth=True, seq=0)
        p.metrics.add(name="bdSeq", datatype=DT.UInt64, long_value=self.bd_seq)
        p.metrics.add(name="Node Control/Rebirth", datatype=DT.Boolean, boolean_value=False)
        self.births["node"] = dict(values)
        self.publish(self.topic("NBIRTH"), p.SerializeToString())

    def dbirth(self, device: str, values: Mapping[str, Any]) -> None:
        p = self._payload(self.device_metrics[device], values, birth=True, seq=self._next_seq(None))
        self.births[device] = dict(values)
        self.publish(self.topic("DBIRTH", device), p.SerializeToString())

    def ndata(self, values: Mapping[str, Any], *, seq: int | None = None, **kw: Any) -> None:
        p = self._payload(self.node_metrics, values, birth=False, seq=self._next_seq(seq), **kw)
        self.publish(self.topic("NDATA"), p.SerializeToString())

    def ddata(
        self,
        device: str,
        values: Mapping[str, Any],
        *,
        seq: int | None = None,
        extra: Iterable[pb.Payload.Metric] = (),
        **kw: Any,
    ) -> None:
        p = self._payload(
            self.device_metrics[device], values, birth=False, seq=self._next_seq(seq), **kw
        )
        for m in extra:
            p.metrics.add().CopyFrom(m)
        self.publish(self.topic("DDATA", device), p.SerializeToString())

    def ddeath(self, device: str) -> None:
        p = pb.Payload(timestamp=int(time.time() * 1000), seq=self._next_seq(None))
        self.publish(self.topic("DDEATH", device), p.SerializeToString())

    def ndeath(self) -> None:
        """Publish the NDEATH explicitly (an intentional disconnect follows)."""
        self.publish(self.topic("NDEATH"), self.ndeath_payload())

    def rebirth(self) -> None:
        """A complete birth sequence with the last birth values (bdSeq unchanged)."""
        self.nbirth(self.births.get("node", {}))
        for device in self.device_metrics:
            if device in self.births:
                self.dbirth(device, self.births[device])


@dataclass
class TestHost:
    """Host side of the tests: HostSession sequence + SparkplugDecoder over aiomqtt."""

    __test__ = False  # not a pytest test class

    host: str
    port: int
    decoder: SparkplugDecoder
    host_id: str = "brayscope-test"
    results: list[SparkplugResult] = field(default_factory=list)
    rebirths_sent: list[RebirthRequest] = field(default_factory=list)
    state_republished: int = 0
    clock: Callable[[], float] = time.time
    _client: aiomqtt.Client | None = None
    _tasks: list[asyncio.Task[None]] = field(default_factory=list)
    _changed: asyncio.Event = field(default_factory=asyncio.Event)

    async def __aenter__(self) -> TestHost:
        self.session = HostSession(self.host_id, clock=self.clock)
        self.session.begin()
        will = self.session.will()
        self._client = aiomqtt.Client(
            self.host,
            self.port,
            identifier=f"{self.host_id}-{time.monotonic_ns()}",
            protocol=aiomqtt.ProtocolVersion.V311,
            clean_session=True,
            will=aiomqtt.Will(will.topic, will.payload, will.qos, will.retain),
        )
        await self._client.__aenter__()
        await self._client.subscribe(self.session.subscriptions(self.decoder.subscriptions()))
        birth = self.session.birth()
        await self._client.publish(birth.topic, birth.payload, qos=birth.qos, retain=birth.retain)
        self._tasks = [
            asyncio.create_task(self._read()),
            asyncio.create_task(self._tick()),
        ]
        return self

    async def __aexit__(self, *exc: object) -> None:
        for t in self._tasks:
            t.cancel()
        for t in self._tasks:
            with contextlib.suppress(asyncio.CancelledError):
                await t
        if self._client is not None:
            death = self.session.death()
            with contextlib.suppress(aiomqtt.MqttError):
                await self._client.publish(death.topic, death.payload, qos=1, retain=True)
            await self._client.__aexit__(None, None, None)

    async def _read(self) -> None:
        assert self._client is not None
        async for message in self._client.messages:
            topic = str(message.topic)
            payload = bytes(message.payload)  # type: ignore[arg-type]
            if topic == self.session.topic:
                again = self.session.on_state(topic, payload)
                if again is not None:
                    self.state_republished += 1
                    await self._client.publish(again.topic, again.payload, qos=1, retain=True)
                continue
            res = self.decoder.decode(topic, payload, self.clock())
            self.results.append(res)
            await self._handle(res.events)

    async def _tick(self) -> None:
        while True:
            await asyncio.sleep(0.05)
            events = self.decoder.expire(self.clock())
            if events:
                self.results.append(SparkplugResult("(expire)", None, 0, (), (), events))
                await self._handle(events)

    async def _handle(self, events: Iterable[Any]) -> None:
        assert self._client is not None
        for ev in events:
            if isinstance(ev, RebirthRequest):
                self.rebirths_sent.append(ev)
                await self._client.publish(ev.topic, ev.payload, qos=0, retain=False)
        self._changed.set()

    async def wait_until(self, pred: Callable[[], bool], timeout: float = 5.0) -> None:
        deadline = asyncio.get_running_loop().time() + timeout
        while not pred():
            left = deadline - asyncio.get_running_loop().time()
            if left <= 0:
                raise AssertionError(f"condition not met within {timeout} s")
            self._changed.clear()
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(self._changed.wait(), min(left, 0.1))

    # -- views --------------------------------------------------------------------------

    @property
    def readings(self) -> list[Reading]:
        return [r for res in self.results for r in res.readings]

    @property
    def quarantined(self) -> list[Quarantined]:
        return [q for res in self.results for q in res.quarantined]

    def events(self, kind: type) -> list[Any]:
        return [e for res in self.results for e in res.events if isinstance(e, kind)]


# -- the KR-GT1 gateway's metrics and their plant-file addresses ---------------------------------

NODE_METRICS = [
    MetricDef("Site/Ambient Temperature", 1, DT.Float),  # degC
    MetricDef("Site/Barometer", 2, DT.Double),  # kPa
    MetricDef("Properties/Hardware Make", 3, DT.String),  # not mapped
]
DEVICE_METRICS = {
    DEVICE: [
        MetricDef("Compressor/Discharge Temperature", 10, DT.Float),  # degC
        MetricDef("Compressor/Discharge Pressure", 11, DT.Double),  # bar
        MetricDef("Exhaust/Temperature", 12, DT.Int16),  # degC
        MetricDef("Fuel/Flow", 13, DT.UInt16),  # kg/h
        MetricDef("Generator/Power", 14, DT.Int64),  # MW
        MetricDef("Exhaust/Spectrum", 15, DT.DataSet),  # mapped, unsupported datatype
        MetricDef("Status/Running", 16, DT.Boolean),  # not mapped
    ]
}

#: measurement → metric address of the KR-GT1 gateway
ADDRESSES = {
    "ambient_temperature": f"{GROUP}/{NODE}#Site/Ambient Temperature",
    "ambient_pressure": f"{GROUP}/{NODE}#Site/Barometer",
    "compressor_discharge_temperature": f"{GROUP}/{NODE}/{DEVICE}#Compressor/Discharge Temperature",
    "compressor_discharge_pressure": f"{GROUP}/{NODE}/{DEVICE}#Compressor/Discharge Pressure",
    "exhaust_temperature": f"{GROUP}/{NODE}/{DEVICE}#Exhaust/Temperature",
    "fuel_mass_flow": f"{GROUP}/{NODE}/{DEVICE}#Fuel/Flow",
    "generator_power": f"{GROUP}/{NODE}/{DEVICE}#Generator/Power",
    "exhaust_pressure": f"{GROUP}/{NODE}/{DEVICE}#Exhaust/Spectrum",
}

#: One invented operating point of KR-GT1, in the plant units of the metrics above.
NODE_VALUES = {
    "Site/Ambient Temperature": 18.3,
    "Site/Barometer": 100.85,
    "Properties/Hardware Make": "KR",
}
DEVICE_VALUES = {
    "Compressor/Discharge Temperature": 398.85,
    "Compressor/Discharge Pressure": 14.985,
    "Exhaust/Temperature": 547,
    "Fuel/Flow": 9720,
    "Generator/Power": 44,
    "Exhaust/Spectrum": 1.0,
    "Status/Running": True,
}


def make_decoder(tmp_path: Any, **kwargs: float) -> SparkplugDecoder:
    """A decoder for the KR-GT1 gateway with the real plant-file routes."""
    from typed_feed_support import kestrel_routes

    from daemon.feeds.sparkplug.address import MetricAddress

    routes, limits = kestrel_routes(tmp_path)
    pairs = [(MetricAddress.parse(a), routes[m]) for m, a in ADDRESSES.items()]
    return SparkplugDecoder.from_routes(pairs, limits, **kwargs)
