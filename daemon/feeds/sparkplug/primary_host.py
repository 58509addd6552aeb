"""brayscope as a Sparkplug primary host application: the ``STATE`` messages and their order.

Edge nodes configured with a primary host publish their births only once that host's STATE
says online, and (when they implement store and forward) keep their data while it says
offline, sending it later as historical metrics.  The STATE message (Eclipse Sparkplug 3.0.0,
sections 4.2.3 "Sparkplug Host Application" and 5.2 "Host Application Session
Establishment"):

* topic ``spBv1.0/STATE/<host id>``, QoS 1, **retained**;
* payload UTF-8 JSON ``{"online": true|false, "timestamp": <ms since the epoch, UTC>}``;
* the *death* (online false) is the MQTT will of the host's connection; the *birth* (online
  true) carries the **same timestamp** as the will of the CONNECT it follows, so an edge node
  can tell a late will of an older connection from the current state.

The sequence a feed follows, per connection (:class:`HostSession` gives every piece)::

    ts = session.begin()                          # timestamp of this connection
    connect(clean_start=True,                     # Sparkplug hosts never resume sessions
            will=session.will())                  # topic, payload, qos 1, retain
    subscribe(session.subscriptions(filters))     # own STATE topic + the nodes' topics, QoS 1
    publish(*session.birth())                     # online, same ts, qos 1, retain
    ...                                           # messages; for own STATE: session.on_state()
    publish(*session.death(now))                  # before a clean DISCONNECT
    disconnect()

If a STATE on its own topic says offline while the host is connected (a will of an older
connection delivered late, or another process with the same host id), :meth:`HostSession.
on_state` returns the birth to publish again.
"""

from __future__ import annotations

import json
import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Final

from daemon.feeds.sparkplug.topic import SparkplugTopic, TopicError, parse_topic

__all__ = ["HostSession", "HostState", "StateMessage", "parse_state", "state_payload"]

#: QoS of STATE births and deaths (the specification requires 1).
STATE_QOS: Final = 1


@dataclass(frozen=True, slots=True)
class HostState:
    """A decoded STATE payload."""

    online: bool
    timestamp_ms: int


@dataclass(frozen=True, slots=True)
class StateMessage:
    """A STATE message to publish (or to register as the will)."""

    topic: str
    payload: bytes
    qos: int = STATE_QOS
    retain: bool = True


def state_payload(online: bool, timestamp_ms: int) -> bytes:
    """Encode a STATE payload.

    Examples
    --------
    >>> state_payload(True, 1_700_000_000_000)
    b'{"online":true,"timestamp":1700000000000}'
    """
    if isinstance(timestamp_ms, bool) or not isinstance(timestamp_ms, int) or timestamp_ms < 0:
        raise ValueError(f"timestamp_ms must be a non-negative integer, got {timestamp_ms!r}")
    return json.dumps(
        {"online": bool(online), "timestamp": timestamp_ms}, separators=(",", ":")
    ).encode()


def parse_state(payload: bytes) -> HostState:
    """Decode a STATE payload (raises ``ValueError`` with the reason).

    Examples
    --------
    >>> parse_state(b'{"online": false, "timestamp": 1700000000000}')
    HostState(online=False, timestamp_ms=1700000000000)
    """
    try:
        doc = json.loads(payload)
    except (ValueError, RecursionError) as exc:
        raise ValueError(f"STATE payload is not JSON: {str(exc)[:120]}") from None
    if not isinstance(doc, dict):
        raise ValueError("STATE payload is not a JSON object")
    online = doc.get("online")
    ts = doc.get("timestamp")
    if not isinstance(online, bool):
        raise ValueError("STATE payload needs a boolean 'online'")
    if isinstance(ts, bool) or not isinstance(ts, int | float) or not math.isfinite(ts) or ts < 0:
        raise ValueError("STATE payload needs a numeric 'timestamp' (ms since the epoch)")
    return HostState(online, int(ts))


class HostSession:
    """The STATE messages of one host id, connection by connection.

    Parameters
    ----------
    host_id : str
        Sparkplug host id (unique among the host applications of the system).
    clock : callable
        Wall clock [s since the epoch] (injected for tests).
    """

    def __init__(self, host_id: str, *, clock: Callable[[], float] = time.time) -> None:
        self.topic = str(SparkplugTopic.state(host_id))
        self.host_id = host_id
        self._clock = clock
        self._ts: int | None = None

    @property
    def timestamp_ms(self) -> int | None:
        """Timestamp of the current connection's will and birth (None before ``begin``)."""
        return self._ts

    def begin(self) -> int:
        """Start a connection: fix its timestamp [ms] (call before building the CONNECT)."""
        self._ts = int(self._clock() * 1000)
        return self._ts

    def will(self) -> StateMessage:
        """The will to register in the CONNECT: offline, this connection's timestamp."""
        return StateMessage(self.topic, state_payload(False, self._require()))

    def subscriptions(self, filters: Sequence[str]) -> list[tuple[str, int]]:
        """What to subscribe to right after CONNACK, before the birth: the host's own STATE
        topic and the nodes' filters, all QoS 1."""
        return [(self.topic, 1), *((f, 1) for f in filters if f != self.topic)]

    def birth(self) -> StateMessage:
        """The birth to publish once subscribed: online, the will's timestamp."""
        return StateMessage(self.topic, state_payload(True, self._require()))

    def death(self, now: float | None = None) -> StateMessage:
        """The death to publish before a clean disconnect: offline, the current time."""
        t = self._clock() if now is None else now
        return StateMessage(self.topic, state_payload(False, int(t * 1000)))

    def on_state(self, topic: str, payload: bytes) -> StateMessage | None:
        """A STATE message arrived: the birth to publish again when it is our own topic saying
        offline while we are connected, else None (other hosts, unreadable payloads, our own
        online state)."""
        try:
            t = parse_topic(topic)
        except TopicError:
            return None
        if t.message_type != "STATE" or t.host_id != self.host_id or self._ts is None:
            return None
        try:
            state = parse_state(payload)
        except ValueError:
            return self.birth()  # our retained state is unreadable: put the right one back
        return None if state.online else self.birth()

    def _require(self) -> int:
        if self._ts is None:
            raise RuntimeError("call begin() before building the will or the birth")
        return self._ts
