"""The Sparkplug B host-side decoder: one state machine per edge node, no I/O.

The feed hands every message over as ``(topic, payload, received_ts)`` and gets back a
:class:`SparkplugResult`: accepted readings (SI, through the same value checks as the MQTT
decoder), quarantined items with a reason, and **events** the feed or the assembly acts on:

* :class:`RebirthRequest` — publish ``payload`` on ``topic`` (an NCMD, QoS 0, not retained);
* :class:`InputsStale` — these ``(unit, measurement)`` inputs are no longer current (node
  death, device death, a rebirth, or our own broker connection lost): mark them stale at once;
* :class:`SequenceGap` — messages of an edge node were lost (counted);
* :class:`NodeBirth`, :class:`DeviceBirth`, :class:`NodeDeath` — session changes (health).

Rules (Eclipse Sparkplug 3.0.0; section numbers of that document):

* **Births** (NBIRTH, DBIRTH) declare every metric with name, datatype, current value and,
  optionally, an alias (6.4.18-19).  An NBIRTH starts a new session of the edge node: aliases
  and devices of the earlier session are forgotten, device inputs are stale until their
  DBIRTH.  Birth values are current values: mapped ones become readings.
* **Data** (NDATA, DDATA) carry metrics by alias (or name) and only what changed (report by
  exception, 5.14).  A metric is read with the datatype of its birth; an alias or name the
  birth did not declare is ``unknown_alias``; data of an edge node or device whose birth this
  host has not seen in the current session is ``no_birth`` (one item per message; the
  aliases cannot be resolved) and both ask the node for a rebirth.
* **Sequence numbers** ``seq`` 0..255 per edge node over NBIRTH, DBIRTH, NDATA, DDATA,
  DDEATH, wrapping 255 → 0 (6.4.1).  A jump ahead opens a reorder window
  (``reorder_timeout_s``, 5.10 "Message Ordering"): a late message inside it closes the hole;
  when it elapses with messages still missing, the gap is counted and a rebirth requested.
  A number already seen (and not missing) is counted as a repeat; its metrics are still read
  (storage writes are idempotent).
* **bdSeq**: the NBIRTH's ``bdSeq`` metric is matched by the NDEATH (the broker's will).  A
  matching NDEATH makes the node and its devices offline and their inputs stale; an NDEATH
  with another bdSeq belongs to an older session (wills may arrive after the next NBIRTH) and
  is ignored (counted).  A DDEATH makes that device's inputs stale.
* **Rebirth requests** are limited to one per edge node per ``rebirth_interval_s`` until a
  birth arrives.

Accounting: ``received == len(readings) + len(quarantined)`` for every message.  Metrics
that no tag maps (node controls, properties, other equipment) are not quarantined: they are
counted in :attr:`SparkplugCounters.ignored_metrics`; whole messages not meant for this
decoder (commands, other hosts' STATE, unmapped edge nodes) in ``ignored_messages``.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Final, Literal

from daemon.feeds.decode import DecodeResult, DecoderLimits, TagRoute
from daemon.feeds.sparkplug import sparkplug_b_pb2 as pb
from daemon.feeds.sparkplug.address import AddressKey, MetricAddress, SparkplugTagMap
from daemon.feeds.sparkplug.payload import (
    BDSEQ_METRIC,
    MetricValueError,
    datatype_name,
    metric_quality,
    metric_value,
    parse_payload,
    rebirth_request,
)
from daemon.feeds.sparkplug.topic import SparkplugTopic, TopicError, parse_topic
from daemon.feeds.values import ValueChecker
from daemon.types import Quarantined, Reading

__all__ = [
    "DeviceBirth",
    "InputsStale",
    "NodeBirth",
    "NodeDeath",
    "RebirthRequest",
    "SequenceGap",
    "SparkplugCounters",
    "SparkplugDecoder",
    "SparkplugEvent",
    "SparkplugResult",
]

SEQ_MODULO: Final = 256
_DATA_TYPES: Final = frozenset({"NDATA", "DDATA"})
_SEQ_TYPES: Final = frozenset({"DBIRTH", "NDATA", "DDATA", "DDEATH"})

StaleCause = Literal["node_death", "device_death", "rebirth", "host_offline"]


# -- events -------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class RebirthRequest:
    """Ask an edge node for a new birth sequence: publish ``payload`` on ``topic``, QoS 0,
    retain false."""

    group: str
    edge_node: str
    reason: str
    topic: str
    payload: bytes


@dataclass(frozen=True, slots=True)
class InputsStale:
    """The mapped inputs of a node / device are not current from ``received_ts`` on."""

    group: str
    edge_node: str
    device: str | None
    cause: StaleCause
    inputs: tuple[tuple[str, str], ...]
    received_ts: float


@dataclass(frozen=True, slots=True)
class SequenceGap:
    """``missing`` messages of an edge node never arrived within the reorder window."""

    group: str
    edge_node: str
    missing: int
    units: frozenset[str]


@dataclass(frozen=True, slots=True)
class NodeBirth:
    """An edge node started a session (NBIRTH)."""

    group: str
    edge_node: str
    bd_seq: int | None


@dataclass(frozen=True, slots=True)
class DeviceBirth:
    """A device of an edge node came online (DBIRTH)."""

    group: str
    edge_node: str
    device: str


@dataclass(frozen=True, slots=True)
class NodeDeath:
    """An NDEATH arrived; ``matched`` when its bdSeq is the current session's."""

    group: str
    edge_node: str
    bd_seq: int | None
    matched: bool


SparkplugEvent = RebirthRequest | InputsStale | SequenceGap | NodeBirth | DeviceBirth | NodeDeath


@dataclass(frozen=True, slots=True)
class SparkplugResult:
    """Outcome of one message; ``received == len(readings) + len(quarantined)``.

    Attributes
    ----------
    topic : str
        The MQTT topic.
    message_type : str or None
        Sparkplug message type, None when the topic did not parse.
    received : int
        Items this message carried for us (mapped metrics, or 1 for a message refused whole).
    readings, quarantined : tuple
        Accepted and rejected items, in metric order.
    events : tuple
        Events raised by this message (and by reorder windows it found elapsed).
    ignored : int
        Unmapped metrics (or 1 for a message not meant for this decoder).
    """

    topic: str
    message_type: str | None
    received: int
    readings: tuple[Reading, ...]
    quarantined: tuple[Quarantined, ...]
    events: tuple[SparkplugEvent, ...] = ()
    ignored: int = 0

    def to_decode_result(self) -> DecodeResult:
        """The readings and quarantined items as a :class:`DecodeResult` (for ``Batch``);
        ``seq`` is left None: Sparkplug sequence numbers are tracked here, modulo 256."""
        return DecodeResult(self.topic, self.received, self.readings, self.quarantined, None)


@dataclass
class SparkplugCounters:
    """Cumulative counters of a decoder (the feed exports them as metrics)."""

    messages: int = 0
    ignored_messages: int = 0
    ignored_metrics: int = 0
    historical: int = 0
    gaps: int = 0
    missing: int = 0
    repeats: int = 0
    rebirth_requests: int = 0
    births: int = 0
    deaths: int = 0
    deaths_ignored: int = 0
    by_type: dict[str, int] = field(default_factory=dict)


# -- per-node state -----------------------------------------------------------------------------


@dataclass(slots=True)
class _MetricDef:
    name: str
    datatype: int
    device: str  # "" for a node metric
    key: AddressKey | None  # None when no tag maps it


@dataclass
class _NodeState:
    online: bool = False
    bd_seq: int | None = None
    last_seq: int | None = None
    aliases: dict[int, _MetricDef] = field(default_factory=dict)
    names: dict[tuple[str, str], _MetricDef] = field(default_factory=dict)  # (device, name)
    devices_online: set[str] = field(default_factory=set)
    missing: set[int] = field(default_factory=set)
    reorder_deadline: float | None = None
    last_rebirth_ts: float | None = None


@dataclass
class _Msg:
    topic: str
    payload: bytes
    received_ts: float
    unit: str | None
    items: list[Reading | Quarantined] = field(default_factory=list)
    events: list[SparkplugEvent] = field(default_factory=list)
    ignored: int = 0


class SparkplugDecoder:
    """Decode Sparkplug B messages of the mapped edge nodes.

    Parameters
    ----------
    tags : SparkplugTagMap
        The mapped metrics.
    limits : DecoderLimits, optional
        Payload size, timestamp window, quarantine truncation (the plant's ``[daemon]``).
    reorder_timeout_s : float
        How long a hole in the sequence may stay open before it counts as a gap [s]; 0 counts
        it at once (for brokers that keep QoS-0 order across topics).
    rebirth_interval_s : float
        Shortest time between two rebirth requests to the same edge node [s].

    Examples
    --------
    ::

        dec = SparkplugDecoder(tag_map, limits)
        res = dec.decode(msg.topic, msg.payload, time.time())
        for ev in res.events:
            if isinstance(ev, RebirthRequest):
                await client.publish(ev.topic, ev.payload, qos=0)
    """

    def __init__(
        self,
        tags: SparkplugTagMap,
        limits: DecoderLimits | None = None,
        *,
        reorder_timeout_s: float = 2.0,
        rebirth_interval_s: float = 10.0,
    ) -> None:
        if not math.isfinite(reorder_timeout_s) or reorder_timeout_s < 0:
            raise ValueError("reorder_timeout_s must be a finite number ≥ 0")
        self.tags = tags
        self.reorder_timeout_s = reorder_timeout_s
        self.rebirth_interval_s = rebirth_interval_s
        self._checker = ValueChecker(((a.key, r) for a, r in tags), limits)
        self.limits = self._checker.limits
        self.counters = SparkplugCounters()
        self._nodes: dict[tuple[str, str], _NodeState] = {k: _NodeState() for k in tags.nodes}

    @classmethod
    def from_routes(
        cls,
        routes: Iterable[tuple[MetricAddress, TagRoute]],
        limits: DecoderLimits | None = None,
        **kwargs: float,
    ) -> SparkplugDecoder:
        """Build from ``(address, route)`` pairs (see :class:`SparkplugTagMap`)."""
        return cls(SparkplugTagMap(routes), limits, **kwargs)

    # -- introspection -------------------------------------------------------------------

    def online(self, group: str, edge_node: str, device: str | None = None) -> bool:
        """True while the node (or device) has a current birth in this host's view."""
        st = self._nodes.get((group, edge_node))
        if st is None or not st.online:
            return False
        return device is None or device in st.devices_online

    def subscriptions(self) -> list[str]:
        """Topic filters for the mapped edge nodes."""
        return self.tags.subscriptions()

    # -- time and connection -------------------------------------------------------------

    def expire(self, now: float) -> tuple[SparkplugEvent, ...]:
        """Close elapsed reorder windows: count their gaps, request rebirths.  Call it
        periodically (every ``decode`` calls it too, with the receive time)."""
        out: list[SparkplugEvent] = []
        for (group, node), st in self._nodes.items():
            if st.reorder_deadline is None or now < st.reorder_deadline:
                continue
            n = len(st.missing)
            st.missing.clear()
            st.reorder_deadline = None
            if n:
                self.counters.gaps += 1
                self.counters.missing += n
                out.append(SequenceGap(group, node, n, self.tags.units_of_node(group, node)))
                self._rebirth(out, group, node, st, now, f"{n} message(s) missing from seq")
        return tuple(out)

    def connection_lost(self, now: float) -> tuple[SparkplugEvent, ...]:
        """Our broker connection dropped: every online node's inputs are stale and every
        node needs a new birth before its data is read again (Sparkplug 3.0.0, 5.2)."""
        out: list[SparkplugEvent] = []
        for (group, node), st in self._nodes.items():
            if st.online:
                out.append(self._stale(group, node, None, "host_offline", now, whole=True))
            self._reset(st)
        return tuple(out)

    # -- decoding ------------------------------------------------------------------------

    def decode(self, topic: str, payload: bytes, received_ts: float) -> SparkplugResult:
        """Decode one message; never raises for any topic or payload."""
        self.counters.messages += 1
        expired = self.expire(received_ts)
        try:
            t = parse_topic(topic)
        except TopicError as exc:
            q = self._checker.refuse(
                None,
                "unknown_topic",
                str(exc),
                topic=topic,
                payload=payload,
                received_ts=received_ts,
            )
            return SparkplugResult(topic, None, 1, (), (q,), expired)
        mtype = t.message_type
        self.counters.by_type[mtype] = self.counters.by_type.get(mtype, 0) + 1
        st = self._nodes.get(t.node_key)
        if st is None or mtype in ("STATE", "NCMD", "DCMD"):
            self.counters.ignored_messages += 1
            return SparkplugResult(topic, mtype, 0, (), (), expired, ignored=1)
        units = self.tags.units_of_node(t.group, t.edge_node)
        msg = _Msg(topic, payload, received_ts, next(iter(units)) if len(units) == 1 else None)
        msg.events.extend(expired)
        if len(payload) > self.limits.max_payload_bytes:
            self._whole(
                msg,
                "oversized_payload",
                f"{len(payload)} bytes > max_payload_bytes {self.limits.max_payload_bytes}",
            )
            return self._result(msg, mtype)
        try:
            p = parse_payload(payload)
        except MetricValueError as exc:
            self._whole(msg, exc.reason, exc.detail)
            return self._result(msg, mtype)
        try:
            self._dispatch(msg, t, st, p)
        except ValueError as exc:  # e.g. invalid UTF-8 in a string field
            self._whole(msg, "malformed_protobuf", f"unreadable field: {str(exc)[:200]}")
        return self._result(msg, mtype)

    def _dispatch(self, msg: _Msg, t: SparkplugTopic, st: _NodeState, p: pb.Payload) -> None:
        mtype = t.message_type
        if mtype == "NBIRTH":
            self._nbirth(msg, t, st, p)
        elif mtype == "NDEATH":
            self._ndeath(msg, t, st, p)
        elif not st.online:
            self._no_birth(msg, t, st, p, "NBIRTH")
        else:
            self._sequence(msg, t, st, p)
            if mtype == "DBIRTH":
                self._dbirth(msg, t, st, p)
            elif mtype == "DDEATH":
                dev = str(t.device)
                if dev in st.devices_online:
                    st.devices_online.discard(dev)
                    msg.events.append(
                        self._stale(t.group, t.edge_node, dev, "device_death", msg.received_ts)
                    )
            elif t.device is not None and t.device not in st.devices_online:
                self._no_birth(msg, t, st, p, "DBIRTH")
            else:
                self._data(msg, t, st, p)

    def _no_birth(
        self, msg: _Msg, t: SparkplugTopic, st: _NodeState, p: pb.Payload, birth: str
    ) -> None:
        what = f"device {t.device}" if t.device is not None else "edge node"
        self._whole(
            msg,
            "no_birth",
            f"{t.message_type} from {what} of {t.group}/{t.edge_node} before its {birth} "
            f"({len(p.metrics)} metric(s)); rebirth requested",
        )
        self._rebirth(msg.events, t.group, t.edge_node, st, msg.received_ts, f"no {birth}")

    # -- message types -------------------------------------------------------------------

    def _nbirth(self, msg: _Msg, t: SparkplugTopic, st: _NodeState, p: pb.Payload) -> None:
        stale: InputsStale | None = None
        if st.devices_online:
            stale = self._stale(t.group, t.edge_node, None, "rebirth", msg.received_ts, whole=True)
        self._reset(st)
        st.online = True
        st.last_seq = int(p.seq) % SEQ_MODULO if p.HasField("seq") else 0
        self.counters.births += 1
        for m in p.metrics:
            if m.name == BDSEQ_METRIC:
                st.bd_seq = _bdseq(m)
        msg.events.append(NodeBirth(t.group, t.edge_node, st.bd_seq))
        if stale is not None:
            msg.events.append(stale)
        self._birth_metrics(msg, t, st, p, "")

    def _dbirth(self, msg: _Msg, t: SparkplugTopic, st: _NodeState, p: pb.Payload) -> None:
        dev = str(t.device)
        for alias in [a for a, d in st.aliases.items() if d.device == dev]:
            del st.aliases[alias]
        for k in [k for k in st.names if k[0] == dev]:
            del st.names[k]
        st.devices_online.add(dev)
        self.counters.births += 1
        msg.events.append(DeviceBirth(t.group, t.edge_node, dev))
        self._birth_metrics(msg, t, st, p, dev)

    def _ndeath(self, msg: _Msg, t: SparkplugTopic, st: _NodeState, p: pb.Payload) -> None:
        bd: int | None = None
        for m in p.metrics:
            if m.name == BDSEQ_METRIC:
                bd = _bdseq(m)
        matched = st.online and (st.bd_seq is None or bd is None or bd == st.bd_seq)
        msg.events.append(NodeDeath(t.group, t.edge_node, bd, matched))
        if not matched:
            self.counters.deaths_ignored += 1
            return
        self.counters.deaths += 1
        msg.events.append(
            self._stale(t.group, t.edge_node, None, "node_death", msg.received_ts, whole=True)
        )
        self._reset(st)

    def _birth_metrics(
        self, msg: _Msg, t: SparkplugTopic, st: _NodeState, p: pb.Payload, dev: str
    ) -> None:
        payload_ts = _ms(p.timestamp) if p.HasField("timestamp") else None
        for m in p.metrics:
            if not m.name:
                self._ignore(msg)  # a birth metric must be named
                continue
            key: AddressKey = (t.group, t.edge_node, dev, m.name)
            mapped = key in self._checker
            d = _MetricDef(m.name, int(m.datatype), dev, key if mapped else None)
            st.names[(dev, m.name)] = d
            if m.HasField("alias"):
                alias = int(m.alias)
                other = st.aliases.get(alias)
                if other is not None and (other.device, other.name) != (dev, m.name):
                    # the specification requires unique aliases per edge node; a clash makes
                    # both unusable until the next birth
                    st.aliases[alias] = _MetricDef("", 0, "\x00clash", None)
                else:
                    st.aliases[alias] = d
            if mapped:
                self._value(msg, d, m, payload_ts)
            else:
                self._ignore(msg)

    def _data(self, msg: _Msg, t: SparkplugTopic, st: _NodeState, p: pb.Payload) -> None:
        dev = t.device or ""
        payload_ts = _ms(p.timestamp) if p.HasField("timestamp") else None
        unknown = 0
        for m in p.metrics:
            d: _MetricDef | None
            if m.HasField("alias"):
                d = st.aliases.get(int(m.alias))
                label = f"alias {int(m.alias)}"
            else:
                d = st.names.get((dev, m.name))
                label = f"metric {m.name[:120]!r}"
            if d is None or d.device != dev:
                unknown += 1
                where = f"device {dev}" if dev else "the edge node"
                detail = f"{label} was not declared in the birth of {where}"
                if d is not None and d.device == "\x00clash":
                    detail = f"{label} was declared twice in the births of this edge node"
                msg.items.append(
                    self._checker.refuse(
                        None,
                        "unknown_alias",
                        f"{t.group}/{t.edge_node}: {detail}; rebirth requested",
                        topic=msg.topic,
                        payload=msg.payload,
                        received_ts=msg.received_ts,
                        unit=msg.unit,
                    )
                )
                continue
            if d.key is None:
                self._ignore(msg)
                continue
            if m.HasField("datatype") and int(m.datatype) != d.datatype:
                msg.items.append(
                    self._refuse_metric(
                        msg,
                        d,
                        "wrong_type",
                        f"datatype {datatype_name(int(m.datatype))} differs from the birth's "
                        f"{datatype_name(d.datatype)}",
                    )
                )
                continue
            self._value(msg, d, m, payload_ts)
        if unknown:
            self._rebirth(
                msg.events, t.group, t.edge_node, st, msg.received_ts, "undeclared metric"
            )

    # -- helpers -------------------------------------------------------------------------

    def _ignore(self, msg: _Msg) -> None:
        msg.ignored += 1
        self.counters.ignored_metrics += 1

    def _value(
        self, msg: _Msg, d: _MetricDef, m: pb.Payload.Metric, payload_ts: float | None
    ) -> None:
        assert d.key is not None
        ts = _ms(m.timestamp) if m.HasField("timestamp") else payload_ts
        try:
            raw = metric_value(m, d.datatype)
        except MetricValueError as exc:
            msg.items.append(self._refuse_metric(msg, d, exc.reason, exc.detail, ts))
            return
        if raw is None:
            msg.items.append(self._refuse_metric(msg, d, "null_value", "metric is_null", ts))
            return
        if isinstance(raw, str):
            msg.items.append(
                self._refuse_metric(
                    msg, d, "wrong_type", f"{datatype_name(d.datatype)} value for a numeric tag", ts
                )
            )
            return
        if isinstance(raw, bool):
            raw = int(raw)  # a Boolean feeds a 0/1 measurement
        q = metric_quality(m)
        if m.is_historical:
            self.counters.historical += 1
        msg.items.append(
            self._checker.check(
                d.key,
                raw,
                source_ts=ts,
                quality=q.quality,
                topic=_address(d),
                payload=msg.payload,
                received_ts=msg.received_ts,
                quality_detail=q.detail,
            )
        )

    def _refuse_metric(
        self, msg: _Msg, d: _MetricDef, reason: str, detail: str, ts: float | None = None
    ) -> Quarantined:
        return self._checker.refuse(
            d.key,
            reason,
            f"{d.name[:120]}: {detail}",
            topic=_address(d) if d.key is not None else msg.topic,
            payload=msg.payload,
            received_ts=msg.received_ts,
            source_ts=ts,
        )

    def _whole(self, msg: _Msg, reason: str, detail: str) -> None:
        msg.items.append(
            self._checker.refuse(
                None,
                reason,
                detail,
                topic=msg.topic,
                payload=msg.payload,
                received_ts=msg.received_ts,
                unit=msg.unit,
            )
        )

    def _sequence(self, msg: _Msg, t: SparkplugTopic, st: _NodeState, p: pb.Payload) -> None:
        if not p.HasField("seq"):
            return
        seq = int(p.seq) % SEQ_MODULO
        if st.last_seq is None:
            st.last_seq = seq
            return
        expected = (st.last_seq + 1) % SEQ_MODULO
        if seq == expected:
            st.last_seq = seq
            return
        if seq in st.missing:  # a late message inside the reorder window
            st.missing.discard(seq)
            if not st.missing:
                st.reorder_deadline = None
            return
        ahead = (seq - expected) % SEQ_MODULO
        if ahead >= SEQ_MODULO // 2:  # behind: a message seen before
            self.counters.repeats += 1
            return
        st.missing.update((expected + i) % SEQ_MODULO for i in range(ahead))
        st.last_seq = seq
        if st.reorder_deadline is None:
            st.reorder_deadline = msg.received_ts + self.reorder_timeout_s
        if self.reorder_timeout_s == 0:
            msg.events.extend(self.expire(msg.received_ts))

    def _rebirth(  # noqa: PLR0917 - private, called with positional arguments only
        self,
        out: list[SparkplugEvent],
        group: str,
        node: str,
        st: _NodeState,
        now: float,
        reason: str,
    ) -> None:
        last = st.last_rebirth_ts
        if last is not None and now - last < self.rebirth_interval_s:
            return
        st.last_rebirth_ts = now
        self.counters.rebirth_requests += 1
        topic = str(SparkplugTopic.node("NCMD", group, node))
        out.append(RebirthRequest(group, node, reason, topic, rebirth_request(int(now * 1000))))

    def _stale(
        self,
        group: str,
        node: str,
        device: str | None,
        cause: StaleCause,
        now: float,
        *,
        whole: bool = False,
    ) -> InputsStale:
        inputs = self.tags.inputs_of(group, node, device, whole_node=whole)
        return InputsStale(group, node, device, cause, inputs, now)

    @staticmethod
    def _reset(st: _NodeState) -> None:
        st.online = False
        st.bd_seq = None
        st.last_seq = None
        st.aliases.clear()
        st.names.clear()
        st.devices_online.clear()
        st.missing.clear()
        st.reorder_deadline = None
        st.last_rebirth_ts = None

    @staticmethod
    def _result(msg: _Msg, mtype: str) -> SparkplugResult:
        readings = tuple(i for i in msg.items if isinstance(i, Reading))
        quarantined = tuple(i for i in msg.items if isinstance(i, Quarantined))
        return SparkplugResult(
            msg.topic,
            mtype,
            len(msg.items),
            readings,
            quarantined,
            tuple(msg.events),
            msg.ignored,
        )


def _ms(ms: int) -> float:
    """Sparkplug milliseconds since the epoch → seconds."""
    return int(ms) / 1000.0


def _bdseq(m: pb.Payload.Metric) -> int | None:
    which = m.WhichOneof("value")
    if which in ("int_value", "long_value"):
        return int(getattr(m, which)) % SEQ_MODULO
    return None


def _address(d: _MetricDef) -> str:
    """The source address recorded with a reading: ``spBv1.0/group/node[/device]#metric``."""
    assert d.key is not None
    g, n, dev, name = d.key
    return f"spBv1.0/{g}/{n}{'/' + dev if dev else ''}#{name}"
