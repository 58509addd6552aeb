"""The MQTT feed: QoS 1, persistent session, acknowledge only after a durable commit.

Flow per connection::

    paho on_message ──▶ bounded inbound queue ──▶ micro-batch ──▶ decode ──▶ commit(batch)
                                                                      └──▶ PUBACK each message,
                                                                           in arrival order
                                                                      └──▶ batches() consumer

Why not plain aiomqtt: aiomqtt 2.5 has no manual-ack API; its paho client acknowledges a QoS-1
message as soon as the message callback returns, i.e. before anything is stored.  We still use
aiomqtt for the asyncio socket integration, connect/subscribe and TLS, and close the gap on the
underlying paho client (``aiomqtt.Client._client``): ``manual_ack_set(True)`` before connecting,
our own ``on_message`` (which also replaces aiomqtt's queue, whose overflow only logs), and
``ack(mid, qos)`` once :func:`commit` has returned.  A message whose commit fails or never
happens is never acknowledged; the broker keeps it in the persistent session and sends it again
after the next connect (with the DUP flag).  The storage writes are idempotent, so a message
committed but not acknowledged (crash between the two) changes nothing when it comes back.

Overflow policy (inbound queue of ``broker.queue_size``):

* MQTT 5: we send Receive Maximum = min(queue_size, 65535) in CONNECT, so the broker keeps at
  most that many unacknowledged QoS-1 messages in flight to us: the queue cannot overflow with
  QoS-1 traffic; a slow commit is back-pressure on the broker, never memory growth here.
* MQTT 3.1.1 (no Receive Maximum; Mosquitto's ``max_inflight_messages`` bounds it instead) or a
  broker that ignores it: on overflow the message is not queued and not acknowledged, the
  connection is marked *overflowed*: every later message of that connection is refused the same
  way (acks must stay in arrival order), the messages already queued are committed and
  acknowledged, then the feed reconnects and the broker redelivers the refused ones.  Each
  refusal is counted (``FeedStats.queue_overflow``); QoS-0 messages refused this way are lost
  (at-most-once by the publisher's choice) and counted too.

QoS 2 is refused at construction: paho answers PUBREC before the application sees the message,
so it cannot be held back until the commit.

A message the database cannot store (a *poison* message) never blocks a batch: when the commit
raises :class:`daemon.types.UnstorableError` (the database answered but refused the data) the
batch is split in halves, each half committed on its own, recursively, until the offending
messages are single; each of those is committed instead as one quarantined item with reason
``unstorable`` (its payload kept), and then the whole batch is acknowledged in arrival order.
Any other commit error is treated as the database being unavailable (retry, then reconnect for
redelivery; nothing acknowledged).

Subscriptions of a persistent session outlive the plant file that made them, and MQTT cannot
list them.  Two measures keep the session to the current filters: :meth:`MqttFeed.retire`
names filters known to be stale (the runtime remembers every filter it subscribed under the
client id in the database); after subscribing the current filters, each connection
unsubscribes the retired ones and reports them through ``on_retired``.  And a message whose
topic matches none of the current filters (so it came through a subscription nobody
remembers, e.g. one made before the filters were recorded) makes the feed unsubscribe the
filters it could have come through (:func:`stale_filter_candidates`), once per topic.  The
message itself is still quarantined as ``unknown_topic``.
"""

from __future__ import annotations

import asyncio
import logging
import random
import ssl
import time
from collections.abc import AsyncIterator, Awaitable, Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol

import aiomqtt
import paho.mqtt.client as paho
from paho.mqtt.packettypes import PacketTypes
from paho.mqtt.properties import Properties
from paho.mqtt.subscribeoptions import SubscribeOptions

from daemon.feeds.decode import Batch, Decoder, DecodeResult, SequenceTracker
from daemon.types import Quarantined, UnstorableError

__all__ = [
    "BrokerLike",
    "FeedStats",
    "MemoryFeedStats",
    "MqttFeed",
    "MqttFeedError",
    "backoff_delay",
    "derive_filters",
    "stale_filter_candidates",
]

log = logging.getLogger("brayscope.feeds.mqtt")


class MqttFeedError(ValueError):
    """The feed was misconfigured (caller error); connection problems are retried, not raised."""


class BrokerLike(Protocol):
    """What the feed needs from ``daemon.config.BrokerConfig``."""

    @property
    def host(self) -> str: ...
    @property
    def port(self) -> int: ...
    @property
    def protocol(self) -> str: ...
    @property
    def client_id(self) -> str: ...
    @property
    def qos(self) -> int: ...
    @property
    def keepalive_s(self) -> int: ...
    @property
    def session_expiry_s(self) -> int: ...
    @property
    def queue_size(self) -> int: ...


class FeedStats(Protocol):
    """Counters the feed reports to (the runtime maps them to Prometheus).

    Only ``unit`` names from the plant file and ``reason`` codes from the fixed set are passed
    as labels, so label cardinality stays bounded whatever arrives on the wire.
    """

    def readings_received(self, n: int) -> None: ...
    def readings_accepted(self, unit: str, n: int) -> None: ...
    def readings_rejected(self, reason: str, n: int) -> None: ...
    def sequence_gap(self, unit: str | None, missing: int) -> None: ...
    def queue_overflow(self, n: int) -> None: ...
    def queue_depth(self, depth: int) -> None: ...
    def commit_failed(self) -> None: ...
    def committed(self, messages: int, seconds: float) -> None: ...
    def connection_state(self, connected: bool) -> None: ...
    def reconnect(self) -> None: ...


@dataclass
class MemoryFeedStats:
    """Plain in-memory :class:`FeedStats` (tests, the demo, and as a reference)."""

    received: int = 0
    accepted: dict[str, int] = field(default_factory=dict)
    rejected: dict[str, int] = field(default_factory=dict)
    gaps: int = 0
    missing: int = 0
    overflow: int = 0
    depth: int = 0
    commit_failures: int = 0
    commits: int = 0
    committed_messages: int = 0
    connected: bool = False
    reconnects: int = 0

    def readings_received(self, n: int) -> None:
        self.received += n

    def readings_accepted(self, unit: str, n: int) -> None:
        self.accepted[unit] = self.accepted.get(unit, 0) + n

    def readings_rejected(self, reason: str, n: int) -> None:
        self.rejected[reason] = self.rejected.get(reason, 0) + n

    def sequence_gap(self, unit: str | None, missing: int) -> None:
        self.gaps += 1
        self.missing += missing

    def queue_overflow(self, n: int) -> None:
        self.overflow += n

    def queue_depth(self, depth: int) -> None:
        self.depth = depth

    def commit_failed(self) -> None:
        self.commit_failures += 1

    def committed(self, messages: int, seconds: float) -> None:
        self.commits += 1
        self.committed_messages += messages

    def connection_state(self, connected: bool) -> None:
        self.connected = connected

    def reconnect(self) -> None:
        self.reconnects += 1


def derive_filters(topics: Sequence[str]) -> list[str]:
    """Subscription filters covering every configured topic.

    Topics are grouped by their first level; each group becomes its longest common level
    prefix followed by ``/#`` (which also matches the prefix itself), or the exact topic when
    the group has one topic.

    Parameters
    ----------
    topics : sequence of str
        Exact topic names (no wildcards).

    Returns
    -------
    list of str
        Sorted filters.

    Examples
    --------
    >>> derive_filters(["kestrel/gt1/TT-AMB", "kestrel/gt1/PT-AMB", "kestrel/gt2/all"])
    ['kestrel/#']
    >>> derive_filters(["a/x", "b/y/z"])
    ['a/x', 'b/y/z']
    """
    groups: dict[str, list[list[str]]] = {}
    for t in topics:
        if not t or "+" in t or "#" in t:
            raise MqttFeedError(f"topic {t!r} must be an exact topic name (no wildcards)")
        levels = t.split("/")
        groups.setdefault(levels[0], []).append(levels)
    out: set[str] = set()
    for members in groups.values():
        if len(members) == 1:
            out.add("/".join(members[0]))
            continue
        prefix: list[str] = []
        for parts in zip(*members, strict=False):
            if all(p == parts[0] for p in parts):
                prefix.append(parts[0])
            else:
                break
        out.add("/".join([*prefix, "#"]))
    return sorted(out)


def stale_filter_candidates(topic: str, current: Sequence[str]) -> list[str]:
    """Filters a message on ``topic`` could have come through, among those brayscope
    subscribes (an exact topic, ``parent/+``, ``prefix/#``, ``#``), minus ``current``.

    Parameters
    ----------
    topic : str
        Topic of a message that matches none of the current filters.
    current : sequence of str
        The filters subscribed now (never in the answer).

    Returns
    -------
    list of str
        Candidates, most specific first.

    Examples
    --------
    >>> stale_filter_candidates("kestrel/gt1/TT-OLD", ["kestrel/gt1/TT-AMB"])
    ['kestrel/gt1/TT-OLD', 'kestrel/gt1/+', 'kestrel/gt1/#', 'kestrel/#', '#']
    """
    levels = topic.split("/")
    out = [topic]
    if len(levels) > 1:
        out.append("/".join([*levels[:-1], "+"]))
    out += ["/".join([*levels[:k], "#"]) for k in range(len(levels) - 1, 0, -1)]
    out.append("#")
    keep = set(current)
    return [f for f in dict.fromkeys(out) if f not in keep]


def backoff_delay(
    attempt: int, *, initial_s: float, cap_s: float, rng: Callable[[], float]
) -> float:
    """Jittered exponential backoff: uniform in [d/2, d], d = min(cap, initial · 2^attempt) [s]."""
    d = min(cap_s, initial_s * (2.0 ** min(attempt, 30)))
    return d * (0.5 + 0.5 * rng())


@dataclass(frozen=True, slots=True)
class _Inbound:
    seq: int
    generation: int
    mid: int
    qos: int
    topic: str
    payload: bytes
    received_ts: float
    dup: bool


class _Reconnect(Exception):  # noqa: N818 - control flow inside the feed
    pass


class MqttFeed:
    """Subscribe to a plant's topics and hand out committed, acknowledged batches.

    Parameters
    ----------
    broker : BrokerLike
        Broker settings (``daemon.config.BrokerConfig``).
    decoder : Decoder
        Decoder for the plant's tag map; the subscription filters derive from its topics.
    commit : async callable(Batch) -> None
        Makes the batch's readings and quarantined items durable (the runtime passes the
        storage write).  The feed acknowledges the batch's messages only after it returns.
        It is retried ``commit_attempts`` times with backoff; then the feed reconnects so the
        broker redelivers.  When it raises :class:`daemon.types.UnstorableError` the
        offending messages are isolated and quarantined as ``unstorable`` (see the module
        notes) instead.
    stats : FeedStats, optional
        Counters; :class:`MemoryFeedStats` when omitted.
    username, password : str, optional
        Credentials (the caller resolves secrets from env or file; never logged).
    tls_context : ssl.SSLContext, optional
        TLS context when the broker requires TLS.
    filters : sequence of str, optional
        Subscription filters; :func:`derive_filters` of the decoder's topics by default.
    max_items : int
        Most messages per batch.
    max_wait_s : float
        Longest time a batch collects messages [s].
    linger_s : float
        A batch closes early once no message arrived for this long [s].
    commit_attempts : int
        Tries per batch before giving up the connection.
    backoff_initial_s, backoff_cap_s : float
        Reconnect/commit-retry backoff [s].
    connect_timeout_s : float
        Timeout of one connect / subscribe attempt [s].
    on_retired : async callable(list of str) -> None, optional
        Called once the broker confirmed the unsubscribe of filters named by :meth:`retire`
        (the runtime forgets them in the database); its errors are logged, never raised.
    clock : callable
        Wall clock [s since the epoch] for receive times (injected for tests).
    rng : callable
        Uniform [0, 1) source for the backoff jitter.

    Examples
    --------
    ::

        async with MqttFeed(plant.broker, decoder, commit=store_batch, stats=stats) as feed:
            async for batch in feed.batches():
                assembler.ingest(batch.readings, batch.quarantined)
    """

    def __init__(
        self,
        broker: BrokerLike,
        decoder: Decoder,
        *,
        commit: Callable[[Batch], Awaitable[None]],
        stats: FeedStats | None = None,
        username: str | None = None,
        password: str | None = None,
        tls_context: ssl.SSLContext | None = None,
        filters: Sequence[str] | None = None,
        max_items: int = 1000,
        max_wait_s: float = 0.1,
        linger_s: float = 0.01,
        commit_attempts: int = 3,
        backoff_initial_s: float = 0.5,
        backoff_cap_s: float = 30.0,
        connect_timeout_s: float = 10.0,
        on_retired: Callable[[list[str]], Awaitable[None]] | None = None,
        clock: Callable[[], float] = time.time,
        rng: Callable[[], float] = random.random,
    ) -> None:
        if broker.qos not in (0, 1):
            raise MqttFeedError(
                f"broker.qos = {broker.qos}: use 1 (QoS 2 cannot be held back until the "
                "commit with paho, so ack-after-commit would not hold)"
            )
        if str(broker.protocol) not in ("5", "3.1.1"):
            raise MqttFeedError(f"broker.protocol = {broker.protocol!r}: use '5' or '3.1.1'")
        if broker.queue_size < 1:
            raise MqttFeedError("broker.queue_size must be at least 1")
        self.broker = broker
        self.decoder = decoder
        self._commit = commit
        self.stats: FeedStats = stats if stats is not None else MemoryFeedStats()
        self._username = username or None
        self._password = password or None
        self._tls = tls_context
        self.filters = list(filters) if filters is not None else derive_filters(decoder.topics)
        self.max_items = max_items
        self.max_wait_s = max_wait_s
        self.linger_s = linger_s
        self.commit_attempts = max(1, commit_attempts)
        self.backoff_initial_s = backoff_initial_s
        self.backoff_cap_s = backoff_cap_s
        self.connect_timeout_s = connect_timeout_s
        self._clock = clock
        self._rng = rng
        self.sequences = SequenceTracker()
        self._v5 = str(broker.protocol) == "5"
        self._inbound: asyncio.Queue[_Inbound] = asyncio.Queue(maxsize=broker.queue_size)
        # (batch, seq of its last message, messages in it)
        self._out: asyncio.Queue[tuple[Batch, int, int]] = asyncio.Queue(maxsize=2)
        # delivery accounting (see wait_delivered): every queued message gets a number; a
        # message is "outstanding" from its arrival until its batch was handed to the
        # consumer and the consumer asked for the next one, or until it was discarded
        self._recv_seq = 0
        self._done_seq = 0
        self._inflight = 0
        self._flush_seq = 0
        self._progress = asyncio.Event()
        self._flush_evt = asyncio.Event()
        self._generation = 0
        self._overflowed: set[int] = set()
        self._lost = asyncio.Event()
        self._connected = asyncio.Event()
        self._task: asyncio.Task[None] | None = None
        self._session_committed = False
        self._retire: list[str] = []
        self._on_retired = on_retired
        self._client: aiomqtt.Client | None = None
        self._stray_topics: set[str] = set()
        self._stray_filters: set[str] = set()
        self._background: set[asyncio.Task[None]] = set()

    # -- public ----------------------------------------------------------------------------

    async def __aenter__(self) -> MqttFeed:
        self._task = asyncio.create_task(self._run(), name="mqtt-feed")
        return self

    async def __aexit__(self, *exc: object) -> None:
        await self.aclose()

    async def aclose(self) -> None:
        """Stop the feed: disconnect; unacknowledged messages stay with the broker.

        The task is cancelled again until it has ended: on Python 3.11 a cancellation can be
        swallowed by ``asyncio.wait_for`` (CPython gh-86296) inside aiomqtt or paho glue.
        Re-raises the error that stopped the feed, if any (not a cancellation).
        """
        for t in list(self._background):
            t.cancel()
        task = self._task
        if task is None:
            return
        while not task.done():
            task.cancel()
            await asyncio.wait({task}, timeout=0.5)
        self._task = None
        if not task.cancelled():
            exc = task.exception()
            if exc is not None and not isinstance(exc, asyncio.CancelledError):
                raise exc

    def retire(self, filters: Sequence[str]) -> None:
        """Unsubscribe ``filters`` (stale ones of the persistent session) after the next
        subscribe; filters among the current ones are ignored."""
        self._retire = [f for f in dict.fromkeys(filters) if f not in self.filters]

    @property
    def connected(self) -> bool:
        """True while a broker connection is up and subscribed."""
        return self._connected.is_set()

    async def wait_connected(self, timeout_s: float | None = None) -> None:
        """Wait until the feed is connected and subscribed (raises TimeoutError)."""
        await asyncio.wait_for(self._connected.wait(), timeout_s)

    async def batches(self) -> AsyncIterator[Batch]:
        """Yield batches whose messages are committed and acknowledged, in arrival order.

        Raises whatever stopped the feed (a configuration error); connection losses are
        retried inside and never end the iteration.
        """
        if self._task is None:
            raise MqttFeedError("use 'async with MqttFeed(...) as feed' before batches()")
        task = self._task
        while True:
            get = asyncio.ensure_future(self._out.get())
            try:
                done, _ = await asyncio.wait({get, task}, return_when=asyncio.FIRST_COMPLETED)
            finally:
                if not get.done():
                    get.cancel()  # never leave a pending get behind (cancel, close)
            if get in done and not get.cancelled():
                batch, last_seq, n = get.result()
                yield batch
                # the consumer is back for the next one: this batch is delivered
                self._done_seq = max(self._done_seq, last_seq)
                self._release(n)
                continue
            task.result()  # re-raise the feed's error
            return

    async def wait_delivered(self, timeout_s: float) -> bool:
        """Wait until every message received so far went through the consumer.

        "Through" means committed, acknowledged, handed out by :meth:`batches` and the
        consumer came back for the next batch (or discarded for redelivery after a lost
        connection).  The batch being collected is closed early as soon as it holds the last
        of those messages.  The runtime calls this at a tick boundary so that the tick's
        snapshot includes every reading received before the boundary.

        Parameters
        ----------
        timeout_s : float
            Longest wait [s] (a database outage must not hold ticks back for long).

        Returns
        -------
        bool
            True when delivered, False on timeout.
        """
        target = self._recv_seq
        self._flush_seq = target
        self._flush_evt.set()
        loop = asyncio.get_running_loop()
        deadline = loop.time() + timeout_s
        while not self._delivered(target):
            remaining = deadline - loop.time()
            if remaining <= 0:
                return False
            self._progress.clear()
            try:
                async with asyncio.timeout(remaining):
                    await self._progress.wait()
            except TimeoutError:
                return self._delivered(target)
        return True

    def _delivered(self, target: int) -> bool:
        return self._done_seq >= target or (self._inbound.empty() and self._inflight == 0)

    def _release(self, n: int) -> None:
        self._inflight -= n
        self._progress.set()

    async def run(self, handler: Callable[[Batch], Awaitable[None]]) -> None:
        """Call ``handler`` for every committed batch until cancelled."""
        async with self:
            async for batch in self.batches():
                await handler(batch)

    # -- connection loop ---------------------------------------------------------------------

    async def _run(self) -> None:
        attempt = 0
        first = True
        while True:
            if not first:
                self.stats.reconnect()
            first = False
            self._session_committed = False
            try:
                await self._session()
            except (aiomqtt.MqttError, OSError, TimeoutError, _Reconnect) as exc:
                log.warning(
                    "mqtt connection to %s:%s ended: %s", self.broker.host, self.broker.port, exc
                )
            finally:
                self._connected.clear()
                self.stats.connection_state(False)
            attempt = 0 if self._session_committed else attempt + 1
            delay = backoff_delay(
                attempt, initial_s=self.backoff_initial_s, cap_s=self.backoff_cap_s, rng=self._rng
            )
            await asyncio.sleep(delay)

    def _make_client(self) -> aiomqtt.Client:
        b = self.broker
        props: Properties | None = None
        if self._v5:
            props = Properties(PacketTypes.CONNECT)  # type: ignore[no-untyped-call]
            props.SessionExpiryInterval = int(b.session_expiry_s)
            props.ReceiveMaximum = max(1, min(int(b.queue_size), 65535))
        client = aiomqtt.Client(
            b.host,
            int(b.port),
            username=self._username,
            password=self._password,
            identifier=b.client_id,
            protocol=aiomqtt.ProtocolVersion.V5 if self._v5 else aiomqtt.ProtocolVersion.V311,
            clean_session=None if self._v5 else False,
            # MQTT 5: never clean (resume the session); 3.1.1 takes clean_session instead and
            # paho refuses any clean_start other than its default there
            clean_start=False if self._v5 else paho.MQTT_CLEAN_START_FIRST_ONLY,
            keepalive=int(b.keepalive_s),
            properties=props,
            tls_context=self._tls,
            timeout=self.connect_timeout_s,
            logger=log,
        )
        self._generation += 1
        gen = self._generation
        inner: paho.Client = client._client
        inner.manual_ack_set(True)

        def on_message(_c: paho.Client, _u: Any, m: paho.MQTTMessage) -> None:
            self._on_message(gen, m)

        inner.on_message = on_message
        aiomqtt_on_disconnect = inner.on_disconnect

        def on_disconnect(*args: Any) -> None:
            if aiomqtt_on_disconnect is not None:
                aiomqtt_on_disconnect(*args)
            fut = client._disconnected
            if fut.done() and not fut.cancelled():
                fut.exception()  # retrieved: we report the loss through _lost
            if gen == self._generation:
                self._lost.set()

        inner.on_disconnect = on_disconnect
        return client

    def _on_message(self, gen: int, m: paho.MQTTMessage) -> None:
        item = _Inbound(
            seq=self._recv_seq + 1,
            generation=gen,
            mid=m.mid,
            qos=m.qos,
            topic=m.topic,
            payload=bytes(m.payload),
            received_ts=self._clock(),
            dup=bool(m.dup),
        )
        if gen in self._overflowed:
            self.stats.queue_overflow(1)
            return
        try:
            self._inbound.put_nowait(item)
            self._recv_seq = item.seq
        except asyncio.QueueFull:
            self.stats.queue_overflow(1)
            if item.qos > 0:
                self._overflowed.add(gen)
                log.warning("inbound queue full: refusing messages until reconnect")
            self.stats.queue_depth(self._inbound.qsize())
        # (the depth is reported once per batch in _collect, not per message: cheaper)

    async def _session(self) -> None:
        """One connection, until it ends (by an exception)."""
        self._client = None
        client = self._make_client()
        gen = self._generation
        self._lost.clear()
        # drop what an earlier connection left queued: its mids mean nothing on this one,
        # and the broker redelivers those messages anyway
        while not self._inbound.empty():
            self._inbound.get_nowait()
        self._progress.set()
        async with client:
            if self._v5:
                opts = SubscribeOptions(
                    qos=self.broker.qos, retainHandling=SubscribeOptions.RETAIN_SEND_IF_NEW_SUB
                )
                await client.subscribe(
                    [(f, opts) for f in self.filters], timeout=self.connect_timeout_s
                )
            else:
                await client.subscribe(
                    [(f, self.broker.qos) for f in self.filters], timeout=self.connect_timeout_s
                )
            await self._unsubscribe_retired(client)
            self._connected.set()
            self.stats.connection_state(True)
            log.info(
                "mqtt connected to %s:%s, filters %s",
                self.broker.host,
                self.broker.port,
                self.filters,
            )
            inner: paho.Client = client._client
            self._client = client
            while True:
                msgs = await self._collect(gen)
                if msgs:
                    try:
                        await self._process(inner, msgs)
                    except BaseException:
                        self._release(len(msgs))  # not delivered; the broker sends them again
                        raise
                    self._session_committed = True
                if gen in self._overflowed and self._inbound.empty():
                    self._overflowed.discard(gen)
                    raise _Reconnect("inbound queue overflowed; reconnecting for redelivery")
                if self._lost.is_set() and self._inbound.empty():
                    raise _Reconnect("connection lost")

    async def _unsubscribe_retired(self, client: aiomqtt.Client) -> None:
        """Unsubscribe the retired filters (after the current ones are subscribed, so no
        topic is uncovered in between); report them once the broker confirmed."""
        todo = list(self._retire)
        if not todo:
            return
        await client.unsubscribe(todo, timeout=self.connect_timeout_s)
        self._retire = [f for f in self._retire if f not in todo]
        log.info("unsubscribed %d filter(s) the plant file no longer has: %s", len(todo), todo)
        if self._on_retired is not None:
            try:
                await self._on_retired(todo)
            except Exception as exc:  # the next start unsubscribes them again: harmless
                log.warning("could not record the unsubscribed filters: %s", exc)

    def _unsubscribe_strays(self, results: Sequence[DecodeResult]) -> None:
        """Unsubscribe, in the background, the filters a message matching no current filter
        could have come through (once per topic and candidate)."""
        client = self._client
        if client is None:
            return
        topics: list[str] = []
        todo: list[str] = []
        for r in results:
            if r.topic in self._stray_topics or not any(
                q.reason == "unknown_topic" for q in r.quarantined
            ):
                continue
            if any(paho.topic_matches_sub(f, r.topic) for f in self.filters):
                continue  # a current filter brought it: nothing stale
            topics.append(r.topic)
            todo += stale_filter_candidates(r.topic, self.filters)
        todo = [f for f in dict.fromkeys(todo) if f not in self._stray_filters]
        self._stray_topics.update(topics)
        if not todo:
            return
        self._stray_filters.update(todo)

        async def go() -> None:
            try:
                await client.unsubscribe(todo, timeout=self.connect_timeout_s)
                log.info(
                    "messages came through a subscription the plant file does not have: "
                    "unsubscribed %s",
                    todo,
                )
            except Exception as exc:  # connection gone: try again when it comes back
                self._stray_topics.difference_update(topics)
                self._stray_filters.difference_update(todo)
                log.warning("unsubscribing stale filters %s failed: %s", todo, exc)

        task = asyncio.create_task(go(), name="mqtt-unsubscribe-stale")
        self._background.add(task)
        task.add_done_callback(self._background.discard)

    async def _collect(self, gen: int) -> list[_Inbound]:
        """Wait for messages and gather one micro-batch of this connection's messages.

        The batch closes at ``max_items``, after ``max_wait_s``, after ``linger_s`` without a
        new message, or as soon as it holds the message a :meth:`wait_delivered` waits for.
        """
        loop = asyncio.get_running_loop()
        out: list[_Inbound] = []
        if self._inbound.empty():
            get = asyncio.ensure_future(self._inbound.get())
            lost = asyncio.ensure_future(self._lost.wait())
            try:
                done, _ = await asyncio.wait({get, lost}, return_when=asyncio.FIRST_COMPLETED)
            finally:
                lost.cancel()
                if not get.done():
                    get.cancel()  # Queue.get leaves the item in the queue when cancelled
            if get not in done or get.cancelled():
                return []
            out.append(get.result())
            self._inflight += 1
        deadline = loop.time() + self.max_wait_s
        try:
            while len(out) < self.max_items:
                if out and out[0].seq <= self._flush_seq <= out[-1].seq:
                    break  # a tick waits for this batch
                if not self._inbound.empty():
                    out.append(self._inbound.get_nowait())
                    self._inflight += 1
                    continue
                remaining = deadline - loop.time()
                if remaining <= 0 or self._lost.is_set():
                    break
                # asyncio.wait, not asyncio.wait_for: on 3.11 wait_for can swallow a
                # cancellation that races with the get completing (CPython gh-86296); a
                # wait_delivered() call wakes this wait to close the batch at once
                self._flush_evt.clear()
                get = asyncio.ensure_future(self._inbound.get())
                flush = asyncio.ensure_future(self._flush_evt.wait())
                try:
                    done, _ = await asyncio.wait(
                        {get, flush},
                        timeout=min(remaining, self.linger_s),
                        return_when=asyncio.FIRST_COMPLETED,
                    )
                finally:
                    flush.cancel()
                    if not get.done():
                        get.cancel()
                if get in done and not get.cancelled():
                    out.append(get.result())
                    self._inflight += 1
                elif flush not in done:
                    break  # lingered long enough
        except BaseException:
            self._release(len(out))  # taken, never delivered: the broker sends them again
            raise
        self.stats.queue_depth(self._inbound.qsize())
        mine = [m for m in out if m.generation == gen]
        if len(mine) < len(out):
            self._release(len(out) - len(mine))  # an earlier connection's: redelivered
        return mine

    async def _process(self, inner: paho.Client, msgs: list[_Inbound]) -> None:
        results = [self.decoder.decode(m.topic, m.payload, m.received_ts) for m in msgs]
        dups = sum(m.dup for m in msgs)
        batch = Batch.from_results(results, dups=dups)
        t0 = time.perf_counter()
        for attempt in range(self.commit_attempts):
            try:
                isolated = await self._commit_isolating(msgs, results, batch)
                if isolated is not None:
                    results = isolated
                    batch = Batch.from_results(results, dups=dups)
                break
            except asyncio.CancelledError:
                raise
            except Exception as exc:
                self.stats.commit_failed()
                log.warning(
                    "commit of %d messages failed (attempt %d/%d): %s",
                    len(msgs),
                    attempt + 1,
                    self.commit_attempts,
                    exc,
                )
                if attempt + 1 == self.commit_attempts:
                    raise _Reconnect("commit failed; messages left unacknowledged") from exc
                await asyncio.sleep(
                    backoff_delay(
                        attempt,
                        initial_s=self.backoff_initial_s,
                        cap_s=self.backoff_cap_s,
                        rng=self._rng,
                    )
                )
        elapsed = time.perf_counter() - t0
        for m in msgs:  # arrival order
            if m.qos > 0:
                inner.ack(m.mid, m.qos)
        self.stats.committed(len(msgs), elapsed)
        last_seq = max(m.seq for m in msgs)
        self.stats.readings_received(batch.received)
        for unit, n in batch.accepted_by_unit().items():
            self.stats.readings_accepted(unit, n)
        for reason, n in batch.rejected_by_reason().items():
            self.stats.readings_rejected(reason, n)
        for r in results:
            missing = self.sequences.observe(r.topic, r.seq)
            if missing:
                self.stats.sequence_gap(self.decoder.unit_of(r.topic), missing)
        if batch.quarantined:
            self._unsubscribe_strays(results)
        await self._out.put((batch, last_seq, len(msgs)))

    async def _commit_isolating(
        self, msgs: list[_Inbound], results: list[DecodeResult], batch: Batch
    ) -> list[DecodeResult] | None:
        """Commit ``batch``; None when it went in whole, else the results actually committed
        (the messages the database refused replaced by their ``unstorable`` quarantine)."""
        try:
            await self._commit(batch)
            return None
        except UnstorableError as exc:
            log.warning(
                "the database refused the data of a batch of %d messages (%s): isolating "
                "the message(s) it cannot store",
                len(msgs),
                exc,
            )
            return await self._isolate(msgs, results, exc)

    async def _isolate(
        self, msgs: list[_Inbound], results: list[DecodeResult], exc: UnstorableError
    ) -> list[DecodeResult]:
        """Bisect a refused part of a batch; quarantine every single message still refused."""
        if len(results) == 1:
            item = self._unstorable(msgs[0], results[0], exc)
            await self._commit(Batch.from_results([item]))
            log.warning(
                "message on %r quarantined as unstorable: %s", msgs[0].topic[:200], str(exc)
            )
            return [item]
        mid = len(results) // 2
        out: list[DecodeResult] = []
        for part_m, part_r in ((msgs[:mid], results[:mid]), (msgs[mid:], results[mid:])):
            try:
                await self._commit(Batch.from_results(part_r))
                out.extend(part_r)
            except UnstorableError as part_exc:
                out.extend(await self._isolate(part_m, part_r, part_exc))
        return out

    def _unstorable(self, m: _Inbound, r: DecodeResult, exc: UnstorableError) -> DecodeResult:
        """The whole message as one quarantined item (counted as one received item); its
        texts are plain printable ASCII, so this row itself can always be stored."""
        detail = f"the database refused this message: {exc}"[:500]
        q = Quarantined(
            received_ts=m.received_ts,
            topic=m.topic,
            payload=m.payload[: self.decoder.limits.quarantine_payload_limit],
            reason="unstorable",
            detail=detail.encode("ascii", "backslashreplace").decode("ascii").replace("\x00", ""),
            unit=self.decoder.unit_of(m.topic),
        )
        return DecodeResult(m.topic, 1, (), (q,), r.seq)
