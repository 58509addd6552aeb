"""Publish results and the daemon's status back to MQTT.

Topics (``prefix`` = ``daemon.results_topic_prefix`` of the plant file):

``{prefix}/{unit}/results``
    The latest result of a unit as JSON (:meth:`daemon.compute.Result.to_json` plus an
    ``advisory`` notice), QoS 1, **retained**, so a dashboard that subscribes later gets the
    current value at once.
``{prefix}/status``
    ``online`` (retained) once connected; ``offline`` (retained) on a clean stop, and as the
    MQTT last will, so the broker publishes it when the daemon dies or loses the connection.

The publisher has its own broker connection (client id ``{broker.client_id}-pub``, clean
session): publishing never competes with the feed's acknowledgement order.  Pending messages are
coalesced per unit (only the newest result of each unit waits), so the backlog is bounded by the
number of units whatever the broker's state; a superseded message is counted.  Results are
durable in the database before they are published: publishing is best effort.
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import logging
import random
import ssl
from typing import Any

import aiomqtt

from daemon.compute import Result
from daemon.feeds.mqtt import BrokerLike, backoff_delay

__all__ = [
    "ADVISORY_NOTICE",
    "ResultPublisher",
    "result_topic",
    "status_topic",
]

log = logging.getLogger("brayscope.publish")

#: Short notice carried by every published result.
ADVISORY_NOTICE = (
    "advisory monitoring only; not a protection or control system; follow the manufacturer's "
    "limits, site procedures, local codes and licensed engineers"
)

ONLINE = b"online"
OFFLINE = b"offline"


def result_topic(prefix: str, unit: str) -> str:
    """Topic of a unit's results: ``{prefix}/{unit}/results``."""
    return f"{prefix.rstrip('/')}/{unit}/results"


def status_topic(prefix: str) -> str:
    """Topic of the daemon's status: ``{prefix}/status``."""
    return f"{prefix.rstrip('/')}/status"


class ResultPublisher:
    """Publish the latest result per unit (retained) and the daemon status with a last will.

    Parameters
    ----------
    broker : BrokerLike
        Broker settings (``daemon.config.BrokerConfig``).
    prefix : str
        Topic prefix.
    username, password : str, optional
        Credentials (resolved by the caller; never logged).
    tls_context : ssl.SSLContext, optional
        TLS when the broker requires it.
    metrics : daemon.metrics.Metrics, optional
        Counts published and superseded messages.
    publish_timeout_s : float
        Longest wait for one PUBACK [s].
    """

    def __init__(
        self,
        broker: BrokerLike,
        prefix: str,
        *,
        username: str | None = None,
        password: str | None = None,
        tls_context: ssl.SSLContext | None = None,
        metrics: Any = None,
        publish_timeout_s: float = 10.0,
        backoff_initial_s: float = 0.5,
        backoff_cap_s: float = 30.0,
    ) -> None:
        self.broker = broker
        self.prefix = prefix
        self._username = username or None
        self._password = password or None
        self._tls = tls_context
        self._metrics = metrics
        self.publish_timeout_s = publish_timeout_s
        self.backoff_initial_s = backoff_initial_s
        self.backoff_cap_s = backoff_cap_s
        self._pending: dict[str, bytes] = {}
        self._wake = asyncio.Event()
        self._stopping = False
        self._connected = False
        self.published = 0

    @property
    def connected(self) -> bool:
        """True while the publisher's connection is up."""
        return self._connected

    @property
    def status_topic(self) -> str:
        """The status topic."""
        return status_topic(self.prefix)

    def submit(self, result: Result) -> None:
        """Queue ``result`` for publishing (replaces a pending one of the same unit)."""
        doc = result.to_json()
        doc["advisory"] = ADVISORY_NOTICE
        payload = json.dumps(doc, allow_nan=False, separators=(",", ":")).encode()
        if result.unit in self._pending and self._metrics is not None:
            self._metrics.publish_dropped_total.inc()
        self._pending[result.unit] = payload
        self._wake.set()

    def stop(self) -> None:
        """Ask :meth:`run` to send what is pending, publish ``offline`` and return."""
        self._stopping = True
        self._wake.set()

    def _client(self) -> aiomqtt.Client:
        b = self.broker
        v5 = str(b.protocol) == "5"
        return aiomqtt.Client(
            b.host,
            int(b.port),
            username=self._username,
            password=self._password,
            identifier=f"{b.client_id}-pub",
            protocol=aiomqtt.ProtocolVersion.V5 if v5 else aiomqtt.ProtocolVersion.V311,
            clean_session=None if v5 else True,
            keepalive=int(b.keepalive_s),
            tls_context=self._tls,
            will=aiomqtt.Will(self.status_topic, OFFLINE, qos=1, retain=True),
            timeout=self.publish_timeout_s,
            logger=log,
        )

    async def run(self) -> None:
        """Connect, publish ``online``, then publish results as they come; reconnect on loss.

        Returns after :meth:`stop` (having published ``offline``); cancelling it leaves the
        last will to announce ``offline``.
        """
        attempt = 0
        while not self._stopping:
            try:
                async with self._client() as client:
                    await client.publish(
                        self.status_topic,
                        ONLINE,
                        qos=1,
                        retain=True,
                        timeout=self.publish_timeout_s,
                    )
                    self._connected = True
                    attempt = 0
                    log.info("publisher connected; status %s = online", self.status_topic)
                    await self._serve(client)
                    with contextlib.suppress(aiomqtt.MqttError):
                        await client.publish(
                            self.status_topic,
                            OFFLINE,
                            qos=1,
                            retain=True,
                            timeout=self.publish_timeout_s,
                        )
                    return
            except aiomqtt.MqttError as exc:
                log.warning("publisher connection ended: %s", exc)
            finally:
                self._connected = False
            if self._stopping:
                return
            await asyncio.sleep(
                backoff_delay(
                    attempt,
                    initial_s=self.backoff_initial_s,
                    cap_s=self.backoff_cap_s,
                    rng=random.random,
                )
            )
            attempt += 1

    async def _serve(self, client: aiomqtt.Client) -> None:
        while True:
            if not self._pending:
                if self._stopping:
                    return
                self._wake.clear()
                await self._wake.wait()
                continue
            unit, payload = next(iter(self._pending.items()))
            topic = result_topic(self.prefix, unit)
            await client.publish(topic, payload, qos=1, retain=True, timeout=self.publish_timeout_s)
            # drop it only if no newer result of the unit arrived while we were sending
            if self._pending.get(unit) is payload:
                del self._pending[unit]
            self.published += 1
            if self._metrics is not None:
                self._metrics.publish_total.inc()
