"""The live daemon: feed → assembly → compute → store · metrics · publish, in one TaskGroup.

Tasks (one :class:`asyncio.TaskGroup`, all stopped together)::

    feed       MqttFeed: bounded inbound queue, micro-batches, commit → ack, batches out
               └─ commit = write readings + quarantine in a worker thread (durable before ack)
    ingest     batches → Assembler.ingest (sample-and-hold per measurement)
    ticks      every tick_s (aligned to UTC multiples): wait until the readings received
               before the boundary are committed and ingested (MqttFeed.wait_delivered,
               bounded), then Assembler.tick → compute_tick (one vectorised call per group,
               worker thread) → write_results → metrics → publish
    publisher  retained results and online/offline status (last will)
    db watch   SELECT 1 every db_probe_s: readiness and brayscope_database_up
    retention  purge rows past their retention (database.*retention_days), hourly
    http       uvicorn serving daemon.http.create_app in this event loop

Durability: a message is acknowledged to the broker only after its readings (and its
quarantined items) are committed.  A commit refused for its data while the database answers
(:func:`daemon.storage.refused_data` and a ping) raises :class:`daemon.types.UnstorableError`:
the feed isolates the offending message and quarantines it as ``unstorable``; the database
stays reported up.  While the database is down, commits fail, nothing is
acknowledged, the broker keeps the messages in the persistent session and the feed reconnects
to have them sent again; readiness turns false within ``db_probe_s`` seconds.  Result rows that
cannot be written wait in a bounded in-memory buffer (:data:`MAX_PENDING_RESULTS`) and are
written with the next tick; results can also be recomputed from the stored readings.

Subscriptions: the filters subscribed under the broker client id are remembered in the
database (``broker_subscriptions``) before they are subscribed; filters remembered from an
earlier plant file are unsubscribed after the current ones are subscribed, then forgotten
(a persistent session would otherwise keep delivering them; MQTT cannot list them).

Warm start: on start the assembler is primed from the readings stored in the last
``max_age_s`` of each tag, so a restart (or a crash after a commit but before the in-memory
ingest) does not lose held values.

Stop (:meth:`Runtime.request_stop`, SIGTERM/SIGINT in ``brayscope run``): the feed disconnects
(acknowledged messages are committed; unacknowledged ones stay with the broker), pending
results are written, ``offline`` is published, the HTTP server closes.
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import logging
import math
import ssl
import threading
import time
from collections import deque
from collections.abc import Mapping, Sequence
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from prometheus_client import CollectorRegistry

from daemon import __version__
from daemon.assembly import Assembler
from daemon.compute import Result, UnitBinding, bindings_from_plant, compute_tick, steady_state_word
from daemon.feeds.decode import Batch, Decoder
from daemon.feeds.mqtt import MqttFeed
from daemon.metrics import Metrics
from daemon.publish import ResultPublisher, result_topic
from daemon.storage import ResultRow, Store, redact_url, refused_data
from daemon.storage import schema as db_schema
from daemon.types import Reading, UnstorableError
from models.status import WARNING_REASONS, reason_names

__all__ = [
    "MAX_PENDING_RESULTS",
    "TICK_SLACK_S",
    "Runtime",
    "result_row",
    "row_to_api",
    "tls_context_for",
]

log = logging.getLogger("brayscope.runtime")

_OWN_TASKS = frozenset(
    {"http", "db-watch", "ingest", "ticks", "retention", "publisher", "mqtt-feed", "http-server"}
)

#: Result rows kept while the database refuses them (oldest dropped first, counted).
MAX_PENDING_RESULTS = 10_000

#: Daemon events (reconnect, db_outage) kept while the database refuses them.
MAX_PENDING_EVENTS = 1000

#: Wake-up after a tick boundary [s] (timer granularity; the tick then waits for the feed).
TICK_SLACK_S = 0.002


def _iso(ts: float) -> str:
    return datetime.fromtimestamp(ts, UTC).isoformat(timespec="milliseconds").replace("+00:00", "Z")


class _ConnectionEvents:
    """The feed's stats (:class:`daemon.feeds.mqtt.FeedStats`): every call goes to the
    metrics; a change of the broker connection also goes to ``on_change(connected,
    down_since)``, so the runtime can record a ``reconnect`` event."""

    def __init__(self, metrics: Metrics, on_change: Any, clock: Any) -> None:
        self._m = metrics
        self._on_change = on_change
        self._clock = clock
        self._connected = False
        self._down_since: float | None = None

    def __getattr__(self, name: str) -> Any:
        return getattr(self._m, name)  # the other FeedStats counters, unchanged

    def connection_state(self, connected: bool) -> None:
        self._m.connection_state(connected)
        if connected and not self._connected:
            self._on_change(True, self._down_since)
            self._down_since = None
        elif not connected and self._connected:
            self._down_since = self._clock()
        self._connected = connected


def tls_context_for(broker: Any, base_dir: Path | None = None) -> ssl.SSLContext | None:
    """An :class:`ssl.SSLContext` for ``broker`` (``daemon.config.BrokerConfig``), or None.

    Relative file names are taken relative to ``base_dir`` (the plant file's directory).
    """
    if not broker.tls:
        return None

    def path(p: str) -> str | None:
        if not p:
            return None
        q = Path(p).expanduser()
        if not q.is_absolute() and base_dir is not None:
            q = base_dir / q
        return str(q)

    ctx = ssl.create_default_context(cafile=path(broker.ca_file))
    cert = path(getattr(broker, "cert_file", ""))
    if cert:
        ctx.load_cert_chain(cert, path(getattr(broker, "key_file", "")))
    return ctx


def result_row(
    r: Result, value_columns: frozenset[str], input_columns: frozenset[str]
) -> ResultRow:
    """The storage row of a result (only names the ``results`` table has columns for)."""
    return ResultRow(
        unit=r.unit,
        ts=r.ts,
        values={k: v for k, v in r.values.items() if k in value_columns},
        inputs={k: v for k, v in r.inputs.items() if k in input_columns},
        status=r.status,
        reasons=",".join(reason_names(r.status)),
        steady_state=r.steady_state,
        r_statistic=r.r_statistic,
        air_mass_flow_source=r.labels.get("air_mass_flow_source"),
        correction_method=r.labels.get("correction_method"),
    )


def _error_text(exc: BaseException) -> str:
    """One line naming an error: its class and the first line of the driver's message."""
    orig = getattr(exc, "orig", None)
    cause = orig if isinstance(orig, BaseException) else exc
    lines = str(cause).splitlines()
    return f"{cause.__class__.__name__}: {lines[0] if lines else ''}"[:300]


def _num(v: Any) -> float | None:
    if v is None:
        return None
    f = float(v)
    return f if math.isfinite(f) else None


def row_to_api(row: Mapping[str, Any]) -> dict[str, Any]:
    """A stored ``results`` row as the API's result object (see ``daemon.http.ResultOut``)."""
    ts: datetime = row["ts"]
    status = int(row["status"])
    prefix = db_schema.INPUT_PREFIX
    return {
        "unit": row["unit"],
        "ts": ts.isoformat().replace("+00:00", "Z"),
        "ts_epoch_s": ts.timestamp(),
        "valid": not (status & ~int(WARNING_REASONS)),
        "status": status,
        "reasons": reason_names(status & ~int(WARNING_REASONS)),
        "warnings": reason_names(status & int(WARNING_REASONS)),
        "steady_state": steady_state_word(row.get("steady_state")),
        "r_statistic": _num(row.get("r_statistic")),
        "labels": {k: row.get(k) for k in db_schema.RESULT_LABEL_COLUMNS},
        "results": {k: _num(row.get(k)) for k in db_schema.RESULT_VALUE_COLUMNS},
        "inputs": {k: _num(row.get(prefix + k)) for k in db_schema.RESULT_INPUT_COLUMNS},
    }


class Runtime:
    """One daemon serving one plant file.

    Parameters
    ----------
    plant : daemon.config.PlantConfig
        Loaded plant file.
    store : Store, optional
        Database; ``Store.from_config(plant.database)`` by default.
    registry : CollectorRegistry, optional
        Metrics registry; a fresh one by default.
    clock : callable
        Wall clock [s since the epoch].
    serve_http : bool
        Serve the HTTP app on ``plant.http.bind``.
    publish : bool
        Publish results and status to the broker.
    db_probe_s : float
        Period of the database probe [s].
    feed_options : mapping, optional
        Extra keyword arguments of :class:`daemon.feeds.mqtt.MqttFeed` (batch sizes,
        backoff), mainly for tests.
    """

    def __init__(
        self,
        plant: Any,
        *,
        store: Store | None = None,
        registry: CollectorRegistry | None = None,
        clock: Any = time.time,
        serve_http: bool = True,
        publish: bool = True,
        db_probe_s: float = 2.0,
        feed_options: Mapping[str, Any] | None = None,
    ) -> None:
        self.plant = plant
        self.clock = clock
        self.site: str = plant.site.name
        self.registry = registry if registry is not None else CollectorRegistry()
        self.metrics = Metrics(
            self.registry, list(plant.units), site=self.site, version=__version__, clock=clock
        )
        self.store = store if store is not None else Store.from_config(plant.database)
        self.decoder = Decoder.from_plant(plant)
        self.assembler = Assembler.from_plant(plant, clock=clock)
        self.bindings: dict[str, UnitBinding] = bindings_from_plant(plant)
        self.serve_http = serve_http
        self.db_probe_s = db_probe_s
        base_dir = Path(plant.source).parent if plant.source else None
        tls = tls_context_for(plant.broker, base_dir)
        password = plant.broker.password
        secret = password.get_secret_value() if password is not None else None
        self.filters: list[str] = list(plant.subscriptions())
        self._check_own_topics()
        self.feed = MqttFeed(
            plant.broker,
            self.decoder,
            filters=self.filters,
            commit=self._commit,
            stats=_ConnectionEvents(self.metrics, self._broker_connection, clock),
            username=plant.broker.username or None,
            password=secret,
            tls_context=tls,
            on_retired=self._forget_filters,
            **dict(feed_options or {}),
        )
        self.publisher: ResultPublisher | None = (
            ResultPublisher(
                plant.broker,
                plant.daemon.results_topic_prefix,
                username=plant.broker.username or None,
                password=secret,
                tls_context=tls,
                metrics=self.metrics,
            )
            if publish
            else None
        )
        self._value_cols = frozenset(db_schema.RESULT_VALUE_COLUMNS)
        self._input_cols = frozenset(db_schema.RESULT_INPUT_COLUMNS)
        self._pending: deque[ResultRow] = deque()
        self._db_ok = False
        self._db_was_up = False
        self._db_down_since: float | None = None
        self._db_detail = "not checked yet"
        # daemon events waiting to be written (reconnect, db_outage), oldest dropped first
        self._events: deque[tuple[float, str, str]] = deque(maxlen=MAX_PENDING_EVENTS)
        self._db_prepared = False
        self._started = time.monotonic()
        self._stop: asyncio.Event | None = None
        self._http_ready = asyncio.Event()
        self.ticks = 0
        self.last_results: dict[str, Result] = {}
        # longest wait of a tick for the readings received before its boundary [s]
        self._drain_timeout_s = min(1.0, 0.5 * float(plant.daemon.tick_s))
        # SQLite has one writer: readings commits and result writes take turns here (in
        # arrival order) instead of meeting in SQLite's busy handler, which sleeps in steps
        # of up to 100 ms
        sqlite = getattr(getattr(self.store, "url", None), "get_backend_name", lambda: "")()
        self._write_lock: Any = threading.Lock() if sqlite == "sqlite" else contextlib.nullcontext()
        self._warn_missing_columns()
        for issue in getattr(plant, "deprecations", ()):
            log.warning("plant file: %s", issue)

    def _check_own_topics(self) -> None:
        from paho.mqtt.client import topic_matches_sub

        prefix = self.plant.daemon.results_topic_prefix
        own = [result_topic(prefix, u) for u in self.plant.units]
        own.append(f"{prefix.rstrip('/')}/status")
        hits = sorted({f for f in self.filters for t in own if topic_matches_sub(f, t)})
        if hits:
            log.warning(
                "subscription filters %s also match the daemon's own result topics under %r: "
                "its own messages come back and are quarantined as unknown_topic; choose a "
                "results_topic_prefix outside the plant's topic tree",
                hits,
                prefix,
            )

    def _warn_missing_columns(self) -> None:
        for b in {b.unit_type.name: b for b in self.bindings.values()}.values():
            missing = [r.name for r in b.unit_type.results if r.name not in self._value_cols]
            if missing:
                log.warning(
                    "results table has no column for %s results %s: they are published and "
                    "exported but not stored (a schema migration would add them)",
                    b.unit_type.name,
                    missing,
                )

    # -- state for the HTTP app ----------------------------------------------------------------

    def units_info(self) -> list[dict[str, Any]]:
        """Configured units (name, type, description, results topic)."""
        prefix = self.plant.daemon.results_topic_prefix
        return [
            {
                "name": name,
                "unit_type": u.unit_type,
                "description": u.description,
                "results_topic": result_topic(prefix, name),
            }
            for name, u in self.plant.units.items()
        ]

    def uptime_s(self) -> float:
        """Seconds since the runtime was built."""
        return time.monotonic() - self._started

    def readiness(self) -> tuple[bool, dict[str, bool], dict[str, str]]:
        """(ready, checks, detail): broker connected and database answering."""
        broker = self.feed.connected
        checks = {"broker": broker, "database": self._db_ok}
        detail = {
            "broker": "connected" if broker else "not connected",
            "database": self._db_detail,
        }
        return all(checks.values()), checks, detail

    def metrics_text(self) -> bytes:
        """Prometheus exposition of the runtime's registry."""
        return self.metrics.render()

    async def latest(self, unit: str, n: int) -> list[dict[str, Any]]:
        """Newest ``n`` stored results of ``unit`` (API objects)."""
        rows = await self._db(self.store.latest_results, unit, n)
        return [row_to_api(r) for r in rows]

    async def results(
        self, unit: str, since: float, until: float, limit: int
    ) -> list[dict[str, Any]]:
        """Stored results of ``unit`` in ``[since, until)`` (at most ``limit``)."""
        rows = await self._db(self.store.results_between, unit, since, until)
        return [row_to_api(r) for r in rows[:limit]]

    async def add_event(self, kind: str, unit: str | None, detail: str) -> None:
        """Record an operator event (``source = "operator"``)."""
        await self._db(lambda: self.store.write_event(kind, detail, source="operator", unit=unit))

    async def _db(self, fn: Any, *args: Any) -> Any:
        try:
            return await asyncio.to_thread(fn, *args)
        except Exception as exc:
            self._set_db(False, f"{exc.__class__.__name__}")
            raise RuntimeError("database unavailable") from exc

    # -- database state ------------------------------------------------------------------------

    def _set_db(self, ok: bool, detail: str = "") -> None:
        if ok != self._db_ok:
            if ok:
                log.info("database %s available", redact_url(self.store.url))
                if self._db_down_since is not None:
                    self._event_outage("db_outage", self._db_down_since, self._db_detail)
                    self._db_down_since = None
                self._db_was_up = True
            else:
                log.warning("database %s unavailable: %s", redact_url(self.store.url), detail)
                if self._db_was_up:
                    self._db_down_since = self.clock()
        self._db_ok = ok
        self._db_detail = "ok" if ok else (detail or "unavailable")
        self.metrics.database_up.set(1 if ok else 0)

    # -- daemon events (written with the next tick, so an outage is recorded once it is over) --

    def _event_outage(self, kind: str, since: float, cause: str) -> None:
        now = self.clock()
        detail = json.dumps(
            {
                "from": _iso(since),
                "until": _iso(now),
                "duration_s": round(now - since, 3),
                "cause": cause,
            }
        )
        self._events.append((now, kind, detail))

    def _broker_connection(self, connected: bool, down_since: float | None) -> None:
        """Called by the feed's stats when the broker connection changes."""
        if connected and down_since is not None:
            self._event_outage("reconnect", down_since, "broker connection lost")

    async def _flush_events(self) -> None:
        while self._events and self._db_prepared and self._db_ok:
            ts, kind, detail = self._events[0]
            try:
                await asyncio.to_thread(self.store.write_event, kind, detail, ts)
            except Exception as exc:
                log.warning("daemon event %s waits for the database: %s", kind, exc)
                return
            self._events.popleft()

    def _prepare_db_sync(self) -> None:
        self.store.upgrade()
        self.store.upsert_units(self.plant.units)
        self._reconcile_subscriptions()

    def _reconcile_subscriptions(self) -> None:
        """Remember the current filters under the client id (before subscribing them) and
        hand the feed those remembered from an earlier plant file, to unsubscribe."""
        client_id = self.plant.broker.client_id
        previous = self.store.subscriptions(client_id)
        self.store.remember_subscriptions(client_id, self.filters)
        stale = [f for f in previous if f not in self.filters]
        if stale:
            log.info(
                "%d subscription filter(s) of an earlier plant file will be unsubscribed: %s",
                len(stale),
                stale,
            )
        self.feed.retire(stale)

    async def _forget_filters(self, filters: list[str]) -> None:
        """The broker confirmed the unsubscribe of ``filters``: forget them."""
        client_id = self.plant.broker.client_id
        await asyncio.to_thread(self.store.forget_subscriptions, client_id, filters)

    async def _prepare_db(self) -> None:
        """Migrate and register units; retried until it works (the daemon never gives up)."""
        attempt = 0
        while True:
            try:
                await asyncio.to_thread(self._prepare_db_sync)
                self._db_prepared = True
                self._set_db(True)
                return
            except Exception as exc:
                self._set_db(False, f"prepare failed: {exc.__class__.__name__}")
                log.warning("database not ready (%s); retrying", exc.__class__.__name__)
                await asyncio.sleep(min(30.0, 0.5 * 2**attempt))
                attempt += 1

    async def _db_watch(self) -> None:
        while True:
            await asyncio.sleep(self.db_probe_s)
            try:
                ok = await asyncio.wait_for(
                    asyncio.to_thread(self.store.ping), timeout=max(1.0, self.db_probe_s * 2)
                )
            except TimeoutError:
                ok = False
            self._set_db(ok, "" if ok else "ping failed")

    # -- live path -----------------------------------------------------------------------------

    def _write_batch(self, batch: Batch) -> None:
        # frozen dataclasses vs the store's attribute protocols: same fields, read-only
        readings: Any = batch.readings
        quarantined: Any = batch.quarantined
        with self._write_lock:
            self.store.write_readings(readings)
            if quarantined:
                self.store.write_quarantine(quarantined)

    def _write_results(self, rows: list[ResultRow]) -> int:
        with self._write_lock:
            return int(self.store.write_results(rows))

    async def _commit(self, batch: Batch) -> None:
        """Make a batch durable (the feed acknowledges it after this returns)."""
        if not self._db_prepared:
            raise RuntimeError("database not prepared yet")
        try:
            await asyncio.to_thread(self._write_batch, batch)
        except Exception as exc:
            # refused data on a database that answers: the message, not the database, is the
            # problem (the feed isolates and quarantines it); anything else is an outage
            if refused_data(exc) and await asyncio.to_thread(self.store.ping):
                self._set_db(True)
                raise UnstorableError(_error_text(exc)) from exc
            self._set_db(False, f"commit failed: {exc.__class__.__name__}")
            raise
        self._set_db(True)

    async def _ingest(self) -> None:
        async with self.feed:
            async for batch in self.feed.batches():
                self.assembler.ingest(batch.readings, batch.quarantined)

    async def _ticks(self) -> None:
        while True:
            now = self.clock()
            await asyncio.sleep(max(0.0, self.assembler.next_tick_at(now) - now) + TICK_SLACK_S)
            # close the tick as soon as the boundary has passed and every reading received
            # before it is committed and ingested (bounded: a database outage must not hold
            # the ticks back)
            delivered = await self.feed.wait_delivered(self._drain_timeout_s)
            if not delivered:
                log.debug("tick: readings received before the boundary still uncommitted")
            snaps = self.assembler.tick(self.clock())
            try:
                await self.process_snapshots(snaps)
            except asyncio.CancelledError:
                raise
            except Exception:
                log.exception("tick failed; the daemon continues")
            self.ticks += 1
            self.metrics.tick_done(self.clock())

    async def process_snapshots(self, snaps: Sequence[Any]) -> list[Result]:
        """Compute, store, export and publish one tick's snapshots; return the results."""
        results, elapsed = await compute_tick(snaps, self.bindings)
        if snaps:
            self.metrics.compute_duration.observe(elapsed)
        for r in results:
            self._pending.append(result_row(r, self._value_cols, self._input_cols))
        while len(self._pending) > MAX_PENDING_RESULTS:
            self._pending.popleft()
            self.metrics.results_dropped_total.inc()
        await self._flush_results()
        for r in results:
            self.last_results[r.unit] = r
            self.metrics.observe_result(
                r.unit, r.ts, r.values, r.status, valid=r.valid, steady_state=r.steady_state
            )
            if self.publisher is not None:
                self.publisher.submit(r)
        return results

    async def _flush_results(self) -> None:
        if not self._pending or not self._db_prepared:
            self.metrics.results_pending.set(len(self._pending))
            return
        rows = list(self._pending)
        try:
            n = await asyncio.to_thread(self._write_results, rows)
        except Exception as exc:
            self.metrics.result_write_failures_total.inc()
            self._set_db(False, f"result write failed: {exc.__class__.__name__}")
            log.warning("%d result rows wait for the database: %s", len(rows), exc)
        else:
            for _ in rows:
                self._pending.popleft()
            self.metrics.results_written(n)
        self.metrics.results_pending.set(len(self._pending))
        await self._flush_events()

    async def _warm_start(self) -> None:
        """Prime the assembler from readings stored within each tag's max age."""
        now = self.clock()
        total = 0
        for name, unit in self.plant.units.items():
            horizon = max((float(t.max_age_s) for t in unit.tags), default=0.0)
            try:
                rows = await asyncio.to_thread(
                    self.store.readings_between, name, now - horizon, now + 3600.0
                )
            except Exception as exc:
                log.warning("warm start of %s skipped: %s", name, exc.__class__.__name__)
                continue
            readings = [
                Reading(
                    unit=name,
                    measurement=r["measurement"],
                    value=math.nan if r["value"] is None else float(r["value"]),
                    source_ts=r["source_ts"].timestamp(),
                    received_ts=r["received_at"].timestamp(),
                    quality=r["quality"],
                    topic=r["topic"],
                    raw_value=r["raw_value"],
                    raw_uom=r["raw_uom"],
                )
                for r in rows
                if r["value"] is not None
            ]
            self.assembler.ingest(readings)
            total += len(readings)
        if total:
            log.info("warm start: %d stored readings primed the assembler", total)

    async def _retention(self) -> None:
        days = self.plant.database.retention_by_table()
        while True:
            try:
                now = self.clock()
                cutoffs = {table: now - d * 86400.0 for table, d in days.items()}
                counts = await asyncio.to_thread(self.store.purge, cutoffs)
                if any(counts.values()):
                    log.info("retention purge: %s", counts)
            except Exception as exc:
                log.warning("retention purge failed: %s", exc.__class__.__name__)
            await asyncio.sleep(3600.0)

    async def _http(self) -> None:
        from daemon.http import create_app, serve

        app = create_app(
            self,
            api_token=self.plant.http.api_token,
            read_token=self.plant.http.read_token,
        )

        host = self.plant.http.host
        no_token = self.plant.http.read_token is None and self.plant.http.api_token is None
        if host not in ("127.0.0.1", "::1", "localhost") and no_token:
            log.warning(
                "HTTP endpoint bound to %s without a token: anyone who reaches it can read "
                "the results; set BRAYSCOPE_API_READ_TOKEN or bind to 127.0.0.1",
                host,
            )

        async def started() -> None:
            self._http_ready.set()
            log.info("http listening on %s", self.plant.http.bind)

        await serve(app, self.plant.http.host, self.plant.http.port, started=started)

    # -- lifecycle -----------------------------------------------------------------------------

    def request_stop(self) -> None:
        """Ask :meth:`run` to stop (safe from a signal handler in the loop)."""
        if self._stop is not None:
            self._stop.set()

    async def wait_http(self, timeout_s: float = 10.0) -> None:
        """Wait until the HTTP endpoint listens."""
        await asyncio.wait_for(self._http_ready.wait(), timeout_s)

    async def run(self, stop_timeout_s: float = 20.0) -> None:
        """Run until :meth:`request_stop`; then drain within ``stop_timeout_s`` and return.

        Connection and database failures never end it: they are retried and reported through
        readiness and metrics.  It raises only for configuration errors the feed refuses.
        """
        self._stop = asyncio.Event()
        self._started = time.monotonic()
        log.info(
            "brayscope %s starting: site %r, %d units, %d tags, database %s, broker %s:%s",
            __version__,
            self.site,
            len(self.plant.units),
            self.plant.n_tags,
            redact_url(self.store.url),
            self.plant.broker.host,
            self.plant.broker.port,
        )
        async with asyncio.TaskGroup() as tg:
            http_task = tg.create_task(self._http(), name="http") if self.serve_http else None
            watch = tg.create_task(self._db_watch(), name="db-watch")
            await self._prepare_or_stop()
            tasks: list[asyncio.Task[Any]] = [watch]
            if self._db_prepared:
                await self._warm_start()
                with contextlib.suppress(Exception):
                    await asyncio.to_thread(
                        self.store.write_event, "start", f"brayscope {__version__}"
                    )
                tasks.append(tg.create_task(self._ingest(), name="ingest"))
                tasks.append(tg.create_task(self._ticks(), name="ticks"))
                tasks.append(tg.create_task(self._retention(), name="retention"))
                pub_task = (
                    tg.create_task(self.publisher.run(), name="publisher")
                    if self.publisher is not None
                    else None
                )
                await self._stop.wait()
            else:
                pub_task = None
            log.info("stopping (timeout %.1f s)", stop_timeout_s)
            deadline = time.monotonic() + stop_timeout_s
            await self._shutdown(tasks, pub_task, http_task, deadline)
        log.info("stopped")

    async def _prepare_or_stop(self) -> None:
        assert self._stop is not None
        prep = asyncio.ensure_future(self._prepare_db())
        stop = asyncio.ensure_future(self._stop.wait())
        await asyncio.wait({prep, stop}, return_when=asyncio.FIRST_COMPLETED)
        stop.cancel()
        if not prep.done():
            prep.cancel()
            with contextlib.suppress(asyncio.CancelledError):
                await prep

    async def _shutdown(
        self,
        tasks: list[asyncio.Task[Any]],
        pub_task: asyncio.Task[Any] | None,
        http_task: asyncio.Task[Any] | None,
        deadline: float,
    ) -> None:
        def left() -> float:
            return max(0.1, deadline - time.monotonic())

        # 1. feed and ticks: stop taking messages (unacknowledged ones stay with the broker)
        # A cancellation can be swallowed on Python 3.11 (asyncio.wait_for completing at the
        # moment it is cancelled, CPython gh-86296), so cancel again until the tasks are done.
        pending: set[asyncio.Task[Any]] = set(tasks)
        rounds = 0
        while pending and time.monotonic() < deadline:
            for t in pending:
                t.cancel()
            feed_task = getattr(self.feed, "_task", None)
            if isinstance(feed_task, asyncio.Task) and not feed_task.done():
                feed_task.cancel()
            _, pending = await asyncio.wait(pending, timeout=min(0.5, left()))
            rounds += 1
        if rounds > 1:
            log.info("stop: tasks needed %d cancellation rounds", rounds)
        if pending:
            log.warning(
                "stop: still running after cancel: %s", sorted(t.get_name() for t in pending)
            )
        log.debug("stop: feed and ticks stopped")
        # 2. results still waiting for the database
        with contextlib.suppress(Exception):
            await asyncio.wait_for(self._flush_results(), timeout=left())
        if self._pending:
            log.warning("%d result rows not written at stop", len(self._pending))
        with contextlib.suppress(Exception):
            await asyncio.wait_for(
                asyncio.to_thread(self.store.write_event, "stop", "clean stop"), timeout=left()
            )
        log.debug("stop: results flushed")
        # 3. publisher: send what is pending, then 'offline'
        if pub_task is not None and self.publisher is not None:
            self.publisher.stop()
            _, pending = await asyncio.wait({pub_task}, timeout=min(5.0, left()))
            if pending:
                pub_task.cancel()
                await asyncio.wait({pub_task}, timeout=left())
        log.debug("stop: publisher stopped")
        # 4. http
        if http_task is not None:
            http_task.cancel()
            await asyncio.wait({http_task}, timeout=left())
        log.debug("stop: http stopped")
        # anything still running is abandoned here (the TaskGroup would wait for it forever)
        for t in asyncio.all_tasks():
            if t is not asyncio.current_task() and not t.done() and t.get_name() in _OWN_TASKS:
                log.warning("stop: abandoning task %s", t.get_name())
