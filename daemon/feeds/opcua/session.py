"""An OPC UA client session as a source of readings: subscriptions, security, reconnect, gaps.

:class:`OpcUaSession` connects to one server endpoint, creates one subscription with a
monitored item per tag, and yields :class:`OpcUaBatch` es of decoded readings (an async
iterator, :meth:`OpcUaSession.batches`), with :attr:`OpcUaSession.stats` and a health flag
(:attr:`OpcUaSession.healthy`) for the feed seam to wrap.

Per connection::

    endpoints (discovery, no security) ──▶ check policy/mode and the server certificate
    connect (secure channel, session, user identity) ──▶ refuse if not encrypted when asked
    namespace array ──▶ resolve nsu= NodeIds
    CreateSubscription ──▶ CreateMonitoredItems (sampling, queue, absolute deadband)
    Read current values ──▶ readings
    HistoryRead of the outage (optional, nodes with the HistoryRead access bit) ──▶ readings
    data-change notifications ──▶ micro-batches ──▶ batches()
    connection lost ──▶ ConnectionLost event (inputs stale) ──▶ jittered backoff ──▶ again

Values (data-change notifications, reads, history) go through the same checks as MQTT
readings (:class:`daemon.feeds.values.ValueChecker`): StatusCode Good → quality good,
Uncertain → uncertain, Bad → ``bad_quality`` (the StatusCode name in the detail); no value →
``null_value``; text, arrays, structures → ``wrong_type``; Boolean → 0/1.  The source
timestamp is the DataValue's SourceTimestamp, else its ServerTimestamp, else the receive time.

Exception tree::

    OpcUaConfigError (ValueError)      the settings cannot work (missing file, secret, policy)
    OpcUaSecurityError (RuntimeError)  the server cannot be trusted or refused us: no endpoint
                                       with the asked policy/mode, untrusted certificate, an
                                       unencrypted channel when encryption was asked for,
                                       wrong credentials (raised on the first connection;
                                       later ones are retried and reported in ``stats``)
"""

from __future__ import annotations

import asyncio
import contextlib
import logging
import os
import random
import re
import time
from collections.abc import AsyncIterator, Callable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from daemon.feeds.decode import Batch, DecoderLimits, TagRoute
from daemon.feeds.mqtt import backoff_delay
from daemon.feeds.opcua.nodeid import NodeIdError, NodeIdSpec, NodeIdText
from daemon.feeds.values import ValueChecker
from daemon.types import Quarantined, Reading
from daemon.urls import url_secrets

__all__ = [
    "Connected",
    "ConnectionLost",
    "HistoryRecovered",
    "MonitoredItemFailed",
    "MonitoredTag",
    "MonitoredTagSpec",
    "OpcUaBatch",
    "OpcUaConfigError",
    "OpcUaEndpoint",
    "OpcUaEvent",
    "OpcUaSecurity",
    "OpcUaSecurityError",
    "OpcUaSession",
    "OpcUaStats",
    "decode_data_value",
]

log = logging.getLogger("brayscope.feeds.opcua")

_URL = re.compile(r"^opc\.tcp://[^/\s]+(/\S*)?$")

#: UserAccessLevel bit of HistoryRead (OPC 10000-3, 8.57 AccessLevelType: bit 2).
ACCESS_HISTORY_READ = 0x04

#: StatusCodes of the server refusing us for who we are (not for a network problem).
_AUTH_REFUSALS = frozenset(
    {
        "BadUserAccessDenied",
        "BadIdentityTokenInvalid",
        "BadIdentityTokenRejected",
        "BadSecurityChecksFailed",
        "BadCertificateUntrusted",
        "BadCertificateInvalid",
        "BadSecurityPolicyRejected",
        "BadSecurityModeRejected",
        "BadApplicationSignatureInvalid",
        "BadUserSignatureInvalid",
    }
)


class OpcUaConfigError(ValueError):
    """The OPC UA settings cannot work (caller / plant-file error)."""


class OpcUaSecurityError(RuntimeError):
    """The server cannot be trusted, or it refused our identity."""


# -- settings (plant-file shaped) -------------------------------------------------------------


class OpcUaSecurity(BaseModel):
    """How to secure the connection; secrets are never inline.

    Attributes
    ----------
    policy : {"None", "Basic256Sha256"}
        Security policy.
    mode : {"None", "Sign", "SignAndEncrypt"}
        Message security mode; ``SignAndEncrypt`` asks for encryption, and the session is
        refused unless the channel really is encrypted.
    certificate_file, private_key_file : str
        Client application instance certificate and its key (PEM or DER).
    private_key_password_env : str
        Environment variable holding the key's password, if it has one.
    server_certificate_file : str
        The server's certificate, pinned: nothing else is accepted.
    trusted_certificates_dir : str
        A trust list: the server certificate (or its issuer) must be in it.
    username : str
        User name for a user-name identity token.
    password_env, password_file : str
        Where the password comes from (environment variable name, or a file).
    application_uri : str
        Our application URI; by default the URI in the client certificate.
    """

    model_config = ConfigDict(extra="forbid")

    policy: Literal["None", "Basic256Sha256"] = "None"
    mode: Literal["None", "Sign", "SignAndEncrypt"] = "None"
    certificate_file: str | None = None
    private_key_file: str | None = None
    private_key_password_env: str | None = None
    server_certificate_file: str | None = None
    trusted_certificates_dir: str | None = None
    username: str | None = None
    password_env: str | None = None
    password_file: str | None = None
    application_uri: str | None = None

    @model_validator(mode="after")
    def _consistent(self) -> OpcUaSecurity:
        if (self.policy == "None") != (self.mode == "None"):
            raise ValueError(
                f"policy {self.policy!r} with mode {self.mode!r}: use policy 'None' with mode "
                "'None', or 'Basic256Sha256' with 'Sign' / 'SignAndEncrypt'"
            )
        if self.policy != "None":
            if not (self.certificate_file and self.private_key_file):
                raise ValueError(
                    "a secure policy needs certificate_file and private_key_file (the client "
                    "application instance certificate)"
                )
            if not (self.server_certificate_file or self.trusted_certificates_dir):
                raise ValueError(
                    "a secure policy needs server_certificate_file or trusted_certificates_dir: "
                    "the server certificate is never trusted on first use"
                )
        if self.username and not (self.password_env or self.password_file):
            raise ValueError("username needs password_env or password_file (never inline)")
        if self.password_env and self.password_file:
            raise ValueError("give password_env or password_file, not both")
        return self

    @property
    def encrypted(self) -> bool:
        """True when encryption is asked for."""
        return self.mode == "SignAndEncrypt"

    def password(self, environ: Mapping[str, str]) -> str | None:
        """The password from the environment or the file (raises OpcUaConfigError)."""
        if self.password_env:
            value = environ.get(self.password_env, "")
            if not value:
                raise OpcUaConfigError(f"environment variable {self.password_env} is not set")
            return value
        if self.password_file:
            try:
                value = Path(self.password_file).read_text(encoding="utf-8").strip()
            except OSError as exc:
                raise OpcUaConfigError(
                    f"cannot read password_file {self.password_file}: {exc.strerror}"
                ) from None
            if not value:
                raise OpcUaConfigError(f"password_file {self.password_file} is empty")
            return value
        return None


class OpcUaEndpoint(BaseModel):
    """One server connection.

    Attributes
    ----------
    url : str
        ``opc.tcp://host:port/path``.
    security : OpcUaSecurity
        Policy, mode, certificates, identity.
    publishing_interval_ms : float
        Subscription publishing interval [ms].
    request_timeout_s : float
        Timeout of each service request [s].
    watchdog_s : float
        How often the connection is probed [s]; a dead connection is found within about this.
    history_on_reconnect : bool
        After a reconnect, read the outage from the server's history (HistoryRead) for the
        nodes that allow it.
    history_max_gap_s : float
        Longest outage read back [s].
    history_max_values : int
        Most values read back per node.
    """

    model_config = ConfigDict(extra="forbid")

    url: str
    security: OpcUaSecurity = Field(default_factory=OpcUaSecurity)
    publishing_interval_ms: float = Field(default=500.0, gt=0)
    request_timeout_s: float = Field(default=4.0, gt=0)
    watchdog_s: float = Field(default=1.0, gt=0)
    history_on_reconnect: bool = True
    history_max_gap_s: float = Field(default=3600.0, gt=0)
    history_max_values: int = Field(default=10000, ge=1)

    @field_validator("url")
    @classmethod
    def _opc_tcp(cls, v: str) -> str:
        where = url_secrets(v)
        if where:  # checked first: the message below would show it
            raise ValueError(
                f"the endpoint URL carries a secret in {', '.join(where)} (not shown): give "
                "the user name and password through the security settings instead"
            )
        if not _URL.match(v):
            raise ValueError(f"endpoint {v[:120]!r} must look like opc.tcp://host:port/path")
        return v


@dataclass(frozen=True, slots=True)
class MonitoredTag:
    """A tag read from one node.

    Attributes
    ----------
    node_id : NodeIdSpec
        The node (its Value attribute is monitored).
    route : TagRoute
        Unit, measurement, tag (units, range) — as for the MQTT decoder.
    sampling_interval_ms : float
        Requested sampling interval [ms]; 0 = the server's fastest, -1 = the publishing
        interval.
    deadband_abs : float or None
        Absolute deadband in the node's own unit (a data change filter), None for none.
    queue_size : int
        Server-side queue of the monitored item (values kept between two publishes).
    """

    node_id: NodeIdSpec
    route: TagRoute
    sampling_interval_ms: float = 1000.0
    deadband_abs: float | None = None
    queue_size: int = 10


class MonitoredTagSpec(BaseModel):
    """The plant-file shape of a :class:`MonitoredTag` (without the route)."""

    model_config = ConfigDict(extra="forbid")

    node_id: NodeIdText
    sampling_interval_ms: float = Field(default=1000.0, ge=-1)
    deadband_abs: float | None = Field(default=None, ge=0)
    queue_size: int = Field(default=10, ge=1, le=10000)


# -- events and batches -------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Connected:
    """A session is up: subscription created, current values read."""

    url: str
    security: str
    monitored: int
    failed: int


@dataclass(frozen=True, slots=True)
class ConnectionLost:
    """The session ended; these ``(unit, measurement)`` inputs are not current any more."""

    url: str
    reason: str
    inputs: tuple[tuple[str, str], ...]
    received_ts: float


@dataclass(frozen=True, slots=True)
class MonitoredItemFailed:
    """The server refused a monitored item (or its NodeId could not be resolved)."""

    node_id: str
    unit: str
    measurement: str
    status: str


@dataclass(frozen=True, slots=True)
class HistoryRecovered:
    """Values of an outage read back from the server's history."""

    node_id: str
    values: int
    start_ts: float
    end_ts: float


OpcUaEvent = Connected | ConnectionLost | MonitoredItemFailed | HistoryRecovered


@dataclass(frozen=True, slots=True)
class OpcUaBatch:
    """Decoded output of some notifications (``batch``) and the events seen with them."""

    batch: Batch
    events: tuple[OpcUaEvent, ...] = ()


@dataclass
class OpcUaStats:
    """Counters of a session (exported as metrics by the feed)."""

    connects: int = 0
    reconnects: int = 0
    connect_failures: int = 0
    notifications: int = 0
    reads: int = 0
    history_values: int = 0
    accepted: int = 0
    rejected: dict[str, int] = field(default_factory=dict)
    overflows: int = 0
    monitored_item_failures: int = 0
    connected: bool = False
    last_error: str = ""
    last_publish_monotonic: float | None = None


# -- value decoding -----------------------------------------------------------------------------


def _epoch(ts: datetime | None) -> float | None:
    if ts is None:
        return None
    if ts.tzinfo is None:
        ts = ts.replace(tzinfo=UTC)
    return ts.timestamp()


def decode_data_value(
    checker: ValueChecker,
    key: str,
    dv: Any,
    *,
    topic: str,
    received_ts: float,
) -> Reading | Quarantined:
    """Turn one ``asyncua.ua.DataValue`` of a configured node into a reading or a rejection.

    Parameters
    ----------
    checker : ValueChecker
        Checks of the session's tags (keyed by NodeId text).
    key : str
        The node's NodeId text (as configured).
    dv : asyncua.ua.DataValue
        Value, StatusCode, SourceTimestamp, ServerTimestamp.
    topic : str
        Source address recorded (``<endpoint url>#<NodeId>``).
    received_ts : float
        Receive time [s since the Unix epoch, UTC].
    """
    status = dv.StatusCode
    code = int(getattr(status, "value", 0) or 0)
    src = _epoch(dv.SourceTimestamp) or _epoch(dv.ServerTimestamp)
    raw = dv.Value.Value if dv.Value is not None else None
    clipped = f"{key} status=0x{code:08X} value={raw!r}"[:200].encode()
    severity = code >> 30
    if severity >= 2:
        name = getattr(status, "name", f"0x{code:08X}")
        return checker.refuse(
            key,
            "bad_quality",
            f"OPC UA StatusCode {name} (0x{code:08X})",
            topic=topic,
            payload=clipped,
            received_ts=received_ts,
            source_ts=src,
        )
    if raw is None:
        return checker.refuse(
            key, "null_value", "no value", topic=topic, payload=clipped, received_ts=received_ts
        )
    if isinstance(raw, bool):
        raw = int(raw)
    if not isinstance(raw, int | float):
        return checker.refuse(
            key,
            "wrong_type",
            f"OPC UA value of type {type(raw).__name__} is not a number",
            topic=topic,
            payload=clipped,
            received_ts=received_ts,
            source_ts=src,
        )
    return checker.check(
        key,
        raw,
        source_ts=src,
        quality="good" if severity == 0 else "uncertain",
        topic=topic,
        payload=clipped,
        received_ts=received_ts,
    )


# -- the session --------------------------------------------------------------------------------


class _Lost(Exception):  # noqa: N818 - control flow inside the session
    pass


class OpcUaSession:
    """Subscribe to the tags of one OPC UA server and hand out decoded batches.

    Parameters
    ----------
    endpoint : OpcUaEndpoint
        URL, security, intervals, history settings.
    tags : sequence of MonitoredTag
        The nodes to monitor (a NodeId at most once).
    limits : DecoderLimits, optional
        Timestamp window and quarantine truncation (the plant's ``[daemon]``).
    environ : mapping, optional
        Where ``password_env`` / ``private_key_password_env`` are looked up
        (``os.environ`` by default).
    max_items, max_wait_s : int, float
        A batch closes at ``max_items`` values or after ``max_wait_s`` [s].
    queue_size : int
        Notifications buffered between the network and the batches; when full, the session
        is dropped and rebuilt (counted in ``stats.overflows``), and the history read of the
        reconnect fills what was refused.
    backoff_initial_s, backoff_cap_s : float
        Reconnect backoff [s] (jittered, doubling).
    clock, rng : callables
        Wall clock [s] and the uniform [0, 1) source of the jitter (injected for tests).

    Examples
    --------
    ::

        async with OpcUaSession(endpoint, tags, limits) as session:
            async for out in session.batches():
                await commit(out.batch)
                assembler.ingest(out.batch.readings, out.batch.quarantined)
    """

    def __init__(
        self,
        endpoint: OpcUaEndpoint,
        tags: Sequence[MonitoredTag],
        limits: DecoderLimits | None = None,
        *,
        environ: Mapping[str, str] | None = None,
        max_items: int = 1000,
        max_wait_s: float = 0.1,
        queue_size: int = 10000,
        backoff_initial_s: float = 0.5,
        backoff_cap_s: float = 30.0,
        clock: Callable[[], float] = time.time,
        rng: Callable[[], float] = random.random,
    ) -> None:
        keys = [str(t.node_id) for t in tags]
        if len(set(keys)) != len(keys):
            raise OpcUaConfigError("a NodeId is monitored twice")
        self.endpoint = endpoint
        self.tags = {str(t.node_id): t for t in tags}
        self.checker = ValueChecker(((str(t.node_id), t.route) for t in tags), limits)
        self._environ = os.environ if environ is None else environ
        self.max_items = max_items
        self.max_wait_s = max_wait_s
        self.queue_size = queue_size
        self.backoff_initial_s = backoff_initial_s
        self.backoff_cap_s = backoff_cap_s
        self._clock = clock
        self._rng = rng
        self.stats = OpcUaStats()
        self._out: asyncio.Queue[OpcUaBatch] = asyncio.Queue(maxsize=4)
        self._task: asyncio.Task[None] | None = None
        self._connected = asyncio.Event()
        self._last_ts: dict[str, float] = {}
        self._last_seen: dict[str, tuple[float | None, object, int]] = {}
        self._ever_connected = False
        self._pending_events: list[OpcUaEvent] = []
        self._failed: set[str] = set()
        self._ua_ids: dict[str, Any] = {}

    # -- public ----------------------------------------------------------------------------

    async def __aenter__(self) -> OpcUaSession:
        self._task = asyncio.create_task(self._run(), name="opcua-session")
        return self

    async def __aexit__(self, *exc: object) -> None:
        await self.aclose()

    async def aclose(self) -> None:
        """Stop: cancel the session task and disconnect."""
        task, self._task = self._task, None
        if task is None:
            return
        while not task.done():
            task.cancel()
            await asyncio.wait({task}, timeout=0.5)

    @property
    def connected(self) -> bool:
        """True while a session is up and subscribed."""
        return self._connected.is_set()

    @property
    def healthy(self) -> bool:
        """Connected, every monitored item created, and the server published within about
        three keep-alive periods (publishing interval x keep-alive count of 10)."""
        if not self.connected or self._failed:
            return False
        last = self.stats.last_publish_monotonic
        window = max(3.0, 30 * self.endpoint.publishing_interval_ms / 1000.0)
        return last is not None and time.monotonic() - last < window

    async def wait_connected(self, timeout_s: float | None = None) -> None:
        """Wait until connected and subscribed (raises TimeoutError, or the session's error)."""
        waiter = asyncio.ensure_future(self._connected.wait())
        assert self._task is not None, "use 'async with OpcUaSession(...)' first"
        done, _ = await asyncio.wait(
            {waiter, self._task}, timeout=timeout_s, return_when=asyncio.FIRST_COMPLETED
        )
        if waiter not in done:
            waiter.cancel()
            if self._task in done:
                self._task.result()
            raise TimeoutError("OPC UA session not connected in time")

    async def batches(self) -> AsyncIterator[OpcUaBatch]:
        """Yield decoded batches until the session fails for good (a configuration or
        security error, re-raised here); connection losses are retried inside."""
        task = self._task
        if task is None:
            raise OpcUaConfigError("use 'async with OpcUaSession(...)' before batches()")
        while True:
            get = asyncio.ensure_future(self._out.get())
            try:
                done, _ = await asyncio.wait({get, task}, return_when=asyncio.FIRST_COMPLETED)
            finally:
                if not get.done():
                    get.cancel()
            if get in done and not get.cancelled():
                yield get.result()
                continue
            task.result()
            return

    # -- connection loop -------------------------------------------------------------------

    async def _run(self) -> None:
        attempt = 0
        while True:
            reason = "connection failed"
            try:
                await self._session_once()
            except (OpcUaConfigError, OpcUaSecurityError):
                if not self._ever_connected:
                    raise
                reason = "refused"
                self.stats.connect_failures += 1
            except _Lost as exc:
                reason = str(exc)
            except Exception as exc:  # network, protocol and service errors: retried
                reason = f"{type(exc).__name__}: {str(exc)[:200]}"
                self.stats.connect_failures += 1
                if not self._ever_connected and _auth_refusal(exc):
                    raise OpcUaSecurityError(
                        f"{self.endpoint.url} refused the session: {reason}"
                    ) from exc
            was_up = self._connected.is_set()
            self._connected.clear()
            self.stats.connected = False
            self.stats.last_error = reason
            if was_up:
                attempt = 0
                inputs = tuple(
                    sorted({(t.route.unit, t.route.measurement) for t in self.tags.values()})
                )
                await self._emit(
                    [], [ConnectionLost(self.endpoint.url, reason, inputs, self._clock())]
                )
            else:
                attempt += 1
            log.warning("opc ua session to %s ended: %s", self.endpoint.url, reason)
            await asyncio.sleep(
                backoff_delay(
                    attempt,
                    initial_s=self.backoff_initial_s,
                    cap_s=self.backoff_cap_s,
                    rng=self._rng,
                )
            )
            self.stats.reconnects += 1

    async def _session_once(self) -> None:
        from asyncua import Client, ua
        from asyncua.common.subscription import OverflowPolicy

        ep = self.endpoint
        client = Client(ep.url, timeout=ep.request_timeout_s, watchdog_intervall=ep.watchdog_s)
        client.name = client.description = "brayscope"
        lost = asyncio.Event()
        lost_reason: list[str] = []

        async def on_lost(exc: Exception) -> None:
            lost_reason.append(f"{type(exc).__name__}: {exc}")
            lost.set()

        client.connection_lost_callback = on_lost
        await self.secure_client(client)
        sec = ep.security
        if sec.username:
            client.set_user(sec.username)
            password = sec.password(self._environ)
            if password is not None:
                client.set_password(password)
        await client.connect()
        try:
            if (
                sec.encrypted
                and client.security_policy.Mode != ua.MessageSecurityMode.SignAndEncrypt
            ):
                raise OpcUaSecurityError(
                    f"{ep.url}: the channel is not encrypted although SignAndEncrypt was asked for"
                )
            namespaces = await client.get_namespace_array()
            sub = await client.create_subscription(
                ep.publishing_interval_ms,
                None,
                queue_maxsize=self.queue_size,
                overflow=OverflowPolicy.DISCONNECT,
            )

            def overflow() -> None:
                self.stats.overflows += 1
                lost_reason.append("notification queue full")
                lost.set()

            sub.set_overflow_disconnect_handler(overflow)
            handles = await self._monitor(sub, namespaces)
            self._ever_connected = True
            self.stats.connects += 1
            self.stats.connected = True
            self.stats.last_publish_monotonic = time.monotonic()
            if ep.history_on_reconnect and self._last_ts:
                await self._read_history(client, handles)
            await self._read_current(client, handles)
            self._connected.set()
            failed = len(self._failed)
            self._pending_events.append(
                Connected(ep.url, f"{sec.policy}/{sec.mode}", len(handles), failed)
            )
            await self._pump(sub, handles, lost, lost_reason)
        finally:
            with contextlib.suppress(Exception):
                await asyncio.wait_for(client.disconnect(), 2.0)

    async def secure_client(self, client: Any) -> None:
        """Apply the security settings to an ``asyncua.Client`` (before ``connect``), after
        checking the server's endpoint ourselves: the policy and mode asked for must be
        offered, and the server certificate must be the pinned one or in the trust list.

        Raises
        ------
        OpcUaSecurityError, OpcUaConfigError
        """
        from asyncua import ua
        from asyncua.crypto import security_policies, uacrypto
        from asyncua.crypto.truststore import TrustStore
        from cryptography import x509

        sec = self.endpoint.security
        if sec.policy == "None":
            return
        assert sec.certificate_file and sec.private_key_file
        for f in (sec.certificate_file, sec.private_key_file):
            if not Path(f).is_file():
                raise OpcUaConfigError(f"file not found: {f}")
        mode = getattr(ua.MessageSecurityMode, sec.mode)
        policy = security_policies.SecurityPolicyBasic256Sha256
        endpoints = await client.connect_and_get_server_endpoints()
        matching = [
            e for e in endpoints if e.SecurityMode == mode and e.SecurityPolicyUri == policy.URI
        ]
        if not matching:
            offered = sorted(
                {
                    f"{e.SecurityPolicyUri.rsplit('#', 1)[-1]}/{e.SecurityMode.name}"
                    for e in endpoints
                }
            )
            raise OpcUaSecurityError(
                f"{self.endpoint.url} offers no Basic256Sha256/{sec.mode} endpoint "
                f"(it offers {offered}); refusing to connect with less"
            )
        der = matching[0].ServerCertificate
        server_cert = x509.load_der_x509_certificate(_first_der(der))
        if sec.server_certificate_file:
            pinned = await uacrypto.load_certificate(sec.server_certificate_file)
            if pinned.public_bytes(_der_encoding()) != server_cert.public_bytes(_der_encoding()):
                raise OpcUaSecurityError(
                    f"{self.endpoint.url}: the server certificate is not the pinned "
                    f"{sec.server_certificate_file}"
                )
        if sec.trusted_certificates_dir:
            store = TrustStore([Path(sec.trusted_certificates_dir)], [])
            await store.load()
            if not store.is_trusted(server_cert):
                raise OpcUaSecurityError(
                    f"{self.endpoint.url}: the server certificate "
                    f"{server_cert.subject.rfc4514_string()} is not in the trust list "
                    f"{sec.trusted_certificates_dir}"
                )
        cert = await uacrypto.load_certificate(sec.certificate_file)
        client.application_uri = sec.application_uri or _san_uri(cert) or client.application_uri
        key_password = None
        if sec.private_key_password_env:
            key_password = self._environ.get(sec.private_key_password_env)
            if not key_password:
                raise OpcUaConfigError(
                    f"environment variable {sec.private_key_password_env} is not set"
                )
        await client.set_security(
            policy,
            sec.certificate_file,
            sec.private_key_file,
            key_password,
            server_cert.public_bytes(_der_encoding()),
            mode,
        )

    async def _monitor(self, sub: Any, namespaces: Sequence[str]) -> dict[int, str]:
        """Create the monitored items; return client handle → NodeId key."""
        from asyncua import ua

        requests: list[Any] = []
        handles: dict[int, str] = {}
        self._failed.clear()
        for i, (key, tag) in enumerate(self.tags.items(), start=1):
            try:
                node = tag.node_id.to_ua(namespaces)
            except NodeIdError as exc:
                self._item_failed(key, tag, str(exc))
                continue
            self._ua_ids[key] = node
            rv = ua.ReadValueId()
            rv.NodeId = node
            rv.AttributeId = ua.AttributeIds.Value
            mp = ua.MonitoringParameters()
            mp.ClientHandle = i
            mp.SamplingInterval = tag.sampling_interval_ms
            mp.QueueSize = tag.queue_size
            mp.DiscardOldest = True
            if tag.deadband_abs is not None:
                f = ua.DataChangeFilter()
                f.Trigger = ua.DataChangeTrigger.StatusValue
                f.DeadbandType = ua.DeadbandType.Absolute
                f.DeadbandValue = float(tag.deadband_abs)
                mp.Filter = f
            req = ua.MonitoredItemCreateRequest()
            req.ItemToMonitor = rv
            req.MonitoringMode = ua.MonitoringMode.Reporting
            req.RequestedParameters = mp
            requests.append(req)
            handles[i] = key
        if requests:
            results = await sub.create_monitored_items(requests)
            for req, res in zip(requests, results, strict=True):
                if isinstance(res, ua.StatusCode):
                    key = handles.pop(req.RequestedParameters.ClientHandle)
                    self._item_failed(key, self.tags[key], res.name)
        return handles

    def _item_failed(self, key: str, tag: MonitoredTag, status: str) -> None:
        self._failed.add(key)
        self.stats.monitored_item_failures += 1
        self._pending_events.append(
            MonitoredItemFailed(key, tag.route.unit, tag.route.measurement, status)
        )
        log.error("opc ua monitored item %s refused: %s", key, status)

    async def _read_current(self, client: Any, handles: Mapping[int, str]) -> None:
        from asyncua import ua

        keys = list(handles.values())
        if not keys:
            return
        nodes = [client.get_node(self._ua_ids[k]) for k in keys]
        values = await client.read_attributes(nodes, ua.AttributeIds.Value)
        now = self._clock()
        self.stats.reads += len(values)
        await self._emit([(k, dv) for k, dv in zip(keys, values, strict=True)], [], now=now)

    async def _read_history(self, client: Any, handles: Mapping[int, str]) -> None:
        """Read back, per node allowing HistoryRead, what changed since its last value."""
        from asyncua import ua

        keys = [k for k in handles.values() if k in self._last_ts]
        if not keys:
            return
        nodes = [client.get_node(self._ua_ids[k]) for k in keys]
        access = await client.read_attributes(nodes, ua.AttributeIds.UserAccessLevel)
        end = self._clock()
        for key, node, acc in zip(keys, nodes, access, strict=True):
            level = acc.Value.Value if acc.Value is not None else 0
            if not isinstance(level, int) or not level & ACCESS_HISTORY_READ:
                continue
            start = max(self._last_ts[key], end - self.endpoint.history_max_gap_s)
            try:
                values = await node.read_raw_history(
                    datetime.fromtimestamp(start, UTC),
                    datetime.fromtimestamp(end, UTC),
                    numvalues=self.endpoint.history_max_values,
                    return_bounds=False,
                )
            except Exception as exc:
                log.warning("history read of %s failed: %s", key, exc)
                continue
            fresh = [dv for dv in values if (_epoch(dv.SourceTimestamp) or 0.0) > start]
            if fresh:
                self.stats.history_values += len(fresh)
                await self._emit(
                    [(key, dv) for dv in fresh],
                    [HistoryRecovered(key, len(fresh), start, end)],
                    now=end,
                    history=True,
                )

    async def _pump(
        self, sub: Any, handles: Mapping[int, str], lost: asyncio.Event, why: list[str]
    ) -> None:
        from asyncua.common.subscription import DataChangeEvent, StatusChangeEvent

        loop = asyncio.get_running_loop()
        lost_wait = asyncio.ensure_future(lost.wait())
        try:
            while True:
                if lost.is_set():
                    raise _Lost(why[0] if why else "connection lost")
                first = asyncio.ensure_future(sub.next_event())
                done, _ = await asyncio.wait(
                    {first, lost_wait}, return_when=asyncio.FIRST_COMPLETED
                )
                if first not in done:
                    first.cancel()
                    raise _Lost(why[0] if why else "connection lost")
                items: list[tuple[str, Any]] = []
                events = [first.result()]
                deadline = loop.time() + self.max_wait_s
                while len(events) < self.max_items and loop.time() < deadline:
                    ev = await sub.next_event(timeout=max(0.0, deadline - loop.time()))
                    if ev is None:
                        break
                    events.append(ev)
                self.stats.last_publish_monotonic = time.monotonic()
                for ev in events:
                    if isinstance(ev, DataChangeEvent):
                        key = handles.get(ev.data.subscription_data.client_handle or -1)
                        if key is not None:
                            items.append((key, ev.data.monitored_item.Value))
                    elif isinstance(ev, StatusChangeEvent):
                        status = ev.notification.Status
                        if not status.is_good():
                            raise _Lost(f"subscription status {status.name}")
                self.stats.notifications += len(items)
                await self._emit(items, [])
        finally:
            lost_wait.cancel()

    async def _emit(
        self,
        items: Sequence[tuple[str, Any]],
        events: Sequence[OpcUaEvent],
        *,
        now: float | None = None,
        history: bool = False,
    ) -> None:
        received_ts = self._clock() if now is None else now
        readings: list[Reading] = []
        quarantined: list[Quarantined] = []
        for key, dv in items:
            src = _epoch(dv.SourceTimestamp)
            raw = dv.Value.Value if dv.Value is not None else None
            code = int(getattr(dv.StatusCode, "value", 0) or 0)
            sig = (src, raw, code)
            if not history and self._last_seen.get(key) == sig:
                continue  # the same value again (initial notification after the read)
            self._last_seen[key] = sig
            item = decode_data_value(
                self.checker,
                key,
                dv,
                topic=f"{self.endpoint.url}#{key}",
                received_ts=received_ts,
            )
            if isinstance(item, Reading):
                readings.append(item)
                self.stats.accepted += 1
                prev = self._last_ts.get(key)
                if prev is None or item.source_ts > prev:
                    self._last_ts[key] = item.source_ts
            else:
                quarantined.append(item)
                self.stats.rejected[item.reason] = self.stats.rejected.get(item.reason, 0) + 1
                if item.source_ts is not None:
                    prev = self._last_ts.get(key)
                    if prev is None or item.source_ts > prev:
                        self._last_ts[key] = item.source_ts
        all_events = (*self._pending_events, *events)
        self._pending_events.clear()
        if not readings and not quarantined and not all_events:
            return
        batch = Batch(
            tuple(readings), tuple(quarantined), len(items), len(readings) + len(quarantined)
        )
        await self._out.put(OpcUaBatch(batch, all_events))


def _first_der(der: bytes) -> bytes:
    """The first certificate of a DER blob that may hold a chain."""
    from cryptography import x509

    try:
        x509.load_der_x509_certificate(der)
        return der
    except ValueError:
        # ASN.1 SEQUENCE header: 0x30 0x82 <len16>
        if len(der) > 4 and der[0] == 0x30 and der[1] == 0x82:
            return der[: 4 + int.from_bytes(der[2:4], "big")]
        raise


def _san_uri(cert: Any) -> str | None:
    from cryptography import x509

    try:
        san = cert.extensions.get_extension_for_class(x509.SubjectAlternativeName)
    except x509.ExtensionNotFound:
        return None
    uris = san.value.get_values_for_type(x509.UniformResourceIdentifier)
    return str(uris[0]) if uris else None


def _der_encoding() -> Any:
    from cryptography.hazmat.primitives.serialization import Encoding

    return Encoding.DER


def _auth_refusal(exc: BaseException) -> bool:
    """The server refused who we are (credentials, certificate) or how (security policy)."""
    name = type(exc).__name__
    text = str(exc)
    return (
        name in _AUTH_REFUSALS
        or any(n in text for n in _AUTH_REFUSALS)
        or "No matching endpoints" in text  # asyncua: the server lacks the policy/mode asked
    )
