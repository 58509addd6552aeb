"""``brayscope bench-live``: the live path measured end to end against a broker on loopback.

One run measures, against the same broker and the same generated plant (100 units × 50 tags:
12 mapped gas-turbine measurements + 38 auxiliary ``aux.<name>`` tags per unit when the plant
file supports them, else the 12 mapped ones; one reading per message, ``{"value": x, "ts": t}``,
QoS 1):

1. **Raw ceiling** — a publisher process (paho-mqtt) sends a fixed count of QoS-1 messages as
   fast as it can; a bare consumer in this process receives them with aiomqtt's socket
   integration, acknowledges each (QoS 1) and decodes each with ``json.loads``.  Nothing is
   stored.  Two consumers are measured: ``callback`` (decode in paho's message callback, the
   same hook the daemon's feed uses: the ceiling the ratio is taken against) and ``iterator``
   (aiomqtt's public ``client.messages`` iterator, for information).  Messages received are
   counted against messages sent; a shortfall is printed as lost.
2. **The daemon end to end** — ``brayscope run -c <bench plant>`` in its own process (feed with
   ack after commit, decode, readings committed to SQLite in a temporary folder, assembly,
   batched compute, results committed, HTTP, results published).  The publisher paces every
   tag at increasing rates; per stage: readings/s stored, results stored, latency, peak RSS of
   the daemon process (psutil, sampled every 0.25 s).  A flat-out stage gives the daemon's own
   throughput.

Latency of a result row of tick ``T`` (tick 1 s): ``created_at`` of the row minus the
``received_at`` of the newest reading of its unit received before ``T`` (the last reading the
tick includes: the daemon closes a tick only once every reading received before the boundary
is committed), "last reading → commit"; and ``created_at − T``, "boundary → commit".  The
publisher sends the tags in tag-major order (tag 0 of every unit, then tag 1 ...), so each
unit's readings are spread over the scan period as independent per-tag scanning gives.

Targets: daemon flat out ≥ 70 % of the raw ceiling, p99 last reading → commit ≤ 250 ms at the
nominal rate (every tag at 1 Hz: 5000 readings/s), daemon peak RSS ≤ 200 MB.

Broker: a private ``mosquitto`` from PATH on a free loopback port with raised queue limits
(``max_queued_messages`` 1 000 000, ``max_inflight_messages`` 1000, so nothing is dropped),
else the loopback broker at 127.0.0.1:1883 (a default Mosquitto drops beyond 1000 queued
messages per client), else the embedded amqtt broker in its own process (MQTT 3.1.1).  The
output says which.  Default total time: about 2½ minutes.

The figures describe this machine and this broker only; docs/benchmarks.md records a run.
"""

from __future__ import annotations

import argparse
import asyncio
import contextlib
import json
import logging
import math
import multiprocessing as mp
import os
import shutil
import socket
import subprocess
import sys
import tempfile
import time
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

__all__ = [
    "BrokerChoice",
    "CeilingResult",
    "StageResult",
    "add_parser",
    "aux_supported",
    "bench_plant_text",
    "run",
]

log = logging.getLogger("brayscope.bench_live")

#: Canonical measurements of the gas-turbine unit type and an SI value for each (a plausible
#: 45 MW-class operating point; the bench measures throughput, not physics).
_POINT: dict[str, tuple[float, str, float, float]] = {
    # measurement: (value, uom, low, high)
    "ambient_temperature": (288.15, "K", 230.0, 330.0),
    "ambient_pressure": (99500.0, "Pa", 85000.0, 107000.0),
    "ambient_relative_humidity": (60.0, "%RH", 0.0, 100.0),
    "compressor_inlet_temperature": (288.15, "K", 230.0, 330.0),
    "compressor_inlet_pressure": (98505.0, "Pa", 80000.0, 106000.0),
    "compressor_discharge_temperature": (667.3, "K", 300.0, 800.0),
    "compressor_discharge_pressure": (1516977.0, "Pa", 100000.0, 3.0e6),
    "exhaust_temperature": (842.9, "K", 400.0, 950.0),
    "exhaust_pressure": (102485.0, "Pa", 85000.0, 115000.0),
    "fuel_mass_flow": (2.97, "kg/s", 0.0, 5.0),
    "fuel_temperature": (318.15, "K", 250.0, 480.0),
    "generator_power": (49.87e6, "W", 0.0, 60e6),
}
#: Mapped measurements per unit (each once).
N_MAPPED = len(_POINT)
#: An auxiliary tag (stored, not computed): a bearing metal temperature.
_AUX_POINT = (65.0, "degC", 0.0, 150.0)


def aux_supported() -> bool:
    """True when the plant file accepts auxiliary tags (``measurement = "aux.<name>"``)."""
    try:
        from daemon import config
    except ImportError:  # pragma: no cover
        return False
    return hasattr(config, "AUX_PREFIX") and hasattr(config.TagConfig, "is_aux")


def _topic(u: int, j: int) -> str:
    return f"bench/u{u:03d}/t{j:02d}"


def _tag_spec(j: int) -> tuple[str, float, str, float, float]:
    """(measurement, value, uom, low, high) of tag ``j`` of a unit."""
    if j < N_MAPPED:
        m = list(_POINT)[j]
        v, uom, lo, hi = _POINT[m]
        return m, v, uom, lo, hi
    v, uom, lo, hi = _AUX_POINT
    return f"aux.bearing_{j:02d}", v, uom, lo, hi


def bench_plant_text(
    *, n_units: int, n_tags: int, mqtt_port: int, protocol: str, database_url: str, tick_s: float
) -> str:
    """Plant file of the benchmark: ``n_units`` gas turbines × ``n_tags`` tags.

    The first 12 tags of a unit map the gas-turbine measurements; tags 12.. are auxiliary
    (``aux.bearing_NN``, degC), which needs :func:`aux_supported`.
    """
    from daemon.demo_cmd import _toml_table

    units: dict[str, Any] = {}
    for u in range(n_units):
        tags = []
        for j in range(n_tags):
            m, _, uom, lo, hi = _tag_spec(j)
            tags.append(
                {"topic": _topic(u, j), "measurement": m, "uom": uom, "low": lo, "high": hi,
                 "max_age_s": 30.0}
            )  # fmt: skip
        units[f"B{u:03d}"] = {
            "unit_type": "gas_turbine",
            "description": "benchmark unit (synthetic)",
            "fuel": {"composition": {"CH4": 0.931, "C2H6": 0.032, "C3H8": 0.007,
                                     "n-C4H10": 0.002, "N2": 0.016, "CO2": 0.012}},
            "parameters": {"generator_efficiency": 0.985, "combustor_pressure_loss": 0.04},
            "tags": tags,
        }  # fmt: skip
    raw = {
        "site": {"name": "brayscope live benchmark (synthetic)"},
        "broker": {
            "host": "127.0.0.1",
            "port": mqtt_port,
            "protocol": protocol,
            "client_id": f"brayscope-bench-{os.getpid()}",
            "qos": 1,
            "queue_size": 20000,
            "session_expiry_s": 300,
        },
        "database": {"url": database_url},
        "http": {"bind": f"127.0.0.1:{_free_port()}"},
        "daemon": {
            "tick_s": tick_s,
            "results_topic_prefix": "brayscope-bench",
        },
        "units": units,
    }
    out: list[str] = ["# generated by brayscope bench-live (synthetic benchmark plant)"]
    _toml_table([], raw, out)
    return "\n".join(out) + "\n"


# --------------------------------------------------------------------------------------------
# Broker choice
# --------------------------------------------------------------------------------------------


def _reachable(host: str, port: int, timeout: float = 1.0) -> bool:
    try:
        with socket.create_connection((host, port), timeout=timeout):
            return True
    except OSError:
        return False


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _amqtt_process(port: int, ready: Any) -> None:  # pragma: no cover - child process
    from daemon.demo_cmd import EmbeddedBroker

    async def main() -> None:
        broker = EmbeddedBroker("127.0.0.1", port, max_connections=64)
        await broker.start()
        ready.set()
        await asyncio.Event().wait()

    with contextlib.suppress(KeyboardInterrupt):
        asyncio.run(main())


#: Configuration of the private mosquitto: queue limits raised so that nothing is dropped.
MOSQUITTO_CONF = """\
listener {port} 127.0.0.1
allow_anonymous true
persistence false
max_queued_messages 1000000
max_queued_bytes 0
max_inflight_messages 1000
set_tcp_nodelay true
"""


@dataclass
class BrokerChoice:
    """The broker used: where, what, which protocol, whether it may drop, how to stop it."""

    host: str
    port: int
    kind: str
    protocol: str
    private: bool = False
    _proc: Any = None
    _tmp: str | None = None

    @classmethod
    def pick(cls, host: str = "127.0.0.1", port: int = 1883) -> BrokerChoice:
        """Private ``mosquitto`` from PATH, else the loopback broker, else embedded amqtt."""
        exe = shutil.which("mosquitto") or (
            "/usr/sbin/mosquitto" if Path("/usr/sbin/mosquitto").exists() else None
        )
        if exe:
            p = _free_port()
            tmp = tempfile.mkdtemp(prefix="brayscope-bench-mosq-")
            conf = Path(tmp) / "mosquitto.conf"
            conf.write_text(MOSQUITTO_CONF.format(port=p), encoding="utf-8")
            proc = subprocess.Popen(
                [exe, "-c", str(conf)], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
            )
            for _ in range(50):
                if _reachable("127.0.0.1", p, 0.2):
                    kind = (
                        f"private mosquitto ({exe}) on 127.0.0.1:{p}, max_queued_messages "
                        "1000000, max_inflight_messages 1000"
                    )
                    return cls("127.0.0.1", p, kind, "5", True, proc, tmp)
                time.sleep(0.1)
            proc.terminate()
            proc.wait(5)
            shutil.rmtree(tmp, ignore_errors=True)
        if _reachable(host, port):
            kind = (
                f"loopback broker at {host}:{port} (its own settings; a default Mosquitto drops "
                "beyond 1000 queued messages per client)"
            )
            return cls(host, port, kind, "5")
        p = _free_port()
        ctx = mp.get_context("spawn")
        ready = ctx.Event()
        child = ctx.Process(target=_amqtt_process, args=(p, ready), daemon=True)
        child.start()
        ready.wait(20)
        return cls(
            "127.0.0.1", p, f"embedded amqtt broker (own process) on port {p}", "3.1.1", True,
            child,
        )  # fmt: skip

    def close(self) -> None:
        """Stop a broker this run started."""
        if self._proc is not None:
            self._proc.terminate()
            with contextlib.suppress(Exception):
                if hasattr(self._proc, "wait"):
                    self._proc.wait(10)
                else:
                    self._proc.join(10)
            self._proc = None
        if self._tmp:
            shutil.rmtree(self._tmp, ignore_errors=True)


# --------------------------------------------------------------------------------------------
# The publisher process
# --------------------------------------------------------------------------------------------


def _publisher(  # noqa: PLR0917 # pragma: no cover - child process
    host: str,
    port: int,
    protocol: str,
    topics: list[str],
    rate: float,
    duration: float,
    count: int,
    result: Any,
    values: list[float],
) -> None:
    """Publish ``{"value", "ts"}`` to ``topics`` in turn at ``rate`` msg/s (0: flat out), for
    ``duration`` s or ``count`` messages; put (sent, first send, last send) on ``result``."""
    import paho.mqtt.client as paho
    from paho.mqtt.enums import CallbackAPIVersion

    proto = paho.MQTTv5 if protocol == "5" else paho.MQTTv311
    c = paho.Client(CallbackAPIVersion.VERSION2, client_id="", protocol=proto)
    c.max_inflight_messages_set(1000)
    c.max_queued_messages_set(0)
    c.connect(host, port, keepalive=30)
    c.loop_start()
    sent = 0
    n = len(topics)
    t0 = time.time()
    last: Any = None
    try:
        while True:
            now = time.time()
            if (duration and now - t0 >= duration) or (count and sent >= count):
                break
            if rate > 0:
                due = int((now - t0) * rate) + 1
                if sent >= due:
                    time.sleep(min(0.002, max(0.0, (sent + 1) / rate - (now - t0))))
                    continue
                burst = min(due - sent, 200)
            else:
                burst = 200
            for _ in range(burst):
                k = sent % n
                v = values[k] * (1.0 + (sent % 7) * 1e-5)
                payload = json.dumps({"value": v, "ts": time.time()})
                last = c.publish(topics[k], payload, qos=1)
                sent += 1
        t_end = time.time()
        if last is not None:
            with contextlib.suppress(Exception):
                last.wait_for_publish(60)
    finally:
        c.loop_stop()
        c.disconnect()
        result.put((sent, t0, locals().get("t_end", time.time())))


def _start_publisher(  # noqa: PLR0917
    broker: BrokerChoice,
    topics: list[str],
    values: list[float],
    rate: float,
    duration: float,
    count: int = 0,
) -> tuple[Any, Any]:
    ctx = mp.get_context("spawn")
    q = ctx.Queue()
    p = ctx.Process(
        target=_publisher,
        args=(broker.host, broker.port, broker.protocol, topics, rate, duration, count, q, values),
        daemon=True,
    )
    p.start()
    return p, q


def _publisher_result(q: Any) -> tuple[int, float, float]:
    with contextlib.suppress(Exception):
        sent, t0, t1 = q.get(timeout=10)
        return int(sent), float(t0), float(t1)
    return 0, math.nan, math.nan


# --------------------------------------------------------------------------------------------
# Raw ceiling
# --------------------------------------------------------------------------------------------


@dataclass
class CeilingResult:
    """One raw-ceiling run."""

    consumer: str
    sent: int
    received: int
    rate: float
    publish_rate: float
    max_backlog: int

    @property
    def lost(self) -> int:
        """Messages sent but not received."""
        return max(0, self.sent - self.received)


async def measure_ceiling(
    broker: BrokerChoice,
    topics: list[str],
    values: list[float],
    count: int,
    *,
    consumer: str = "callback",
    timeout_s: float = 40.0,
) -> CeilingResult:
    """Readings/s a bare aiomqtt consumer receives (QoS 1) and JSON-decodes.

    ``consumer = "callback"``: decode in paho's message callback (the hook the daemon's feed
    uses; paho acknowledges when it returns).  ``"iterator"``: aiomqtt's ``client.messages``.
    """
    import aiomqtt

    proto = aiomqtt.ProtocolVersion.V5 if broker.protocol == "5" else aiomqtt.ProtocolVersion.V311
    n = 0
    first = last = 0.0
    backlog = 0
    done = asyncio.Event()

    def seen() -> None:
        nonlocal n, first, last
        now = time.perf_counter()
        if n == 0:
            first = now
        last = now
        n += 1
        if n >= count:
            done.set()

    async with aiomqtt.Client(broker.host, broker.port, protocol=proto) as client:
        if consumer == "callback":

            def on_message(_c: Any, _u: Any, m: Any) -> None:
                json.loads(m.payload)
                seen()

            client._client.on_message = on_message
        await client.subscribe("bench/#", qos=1)
        proc, q = _start_publisher(broker, topics, values, 0.0, 0.0, count)
        try:
            async with asyncio.timeout(timeout_s):
                if consumer == "callback":
                    await done.wait()
                else:
                    async for msg in client.messages:
                        json.loads(msg.payload)  # type: ignore[arg-type,unused-ignore]
                        seen()
                        backlog = max(backlog, len(client.messages))
                        if n >= count:
                            break
        except TimeoutError:
            pass
        await asyncio.to_thread(proc.join, 60)
        sent, t0, t1 = _publisher_result(q)
    rate = (n - 1) / (last - first) if n > 1 and last > first else 0.0
    prate = sent / (t1 - t0) if sent and t1 > t0 else math.nan
    return CeilingResult(consumer, sent, n, rate, prate, backlog)


# --------------------------------------------------------------------------------------------
# The daemon
# --------------------------------------------------------------------------------------------


class _Rss:
    """Peak resident set size of one process (the daemon), sampled with psutil."""

    def __init__(self, pid: int) -> None:
        import psutil

        self._proc: Any = psutil.Process(pid)
        self.peak = 0.0

    def sample(self) -> float:
        try:
            rss = float(self._proc.memory_info().rss)
        except Exception:  # process gone
            return 0.0
        self.peak = max(self.peak, rss)
        return rss


def _harness_rss_mb() -> float:
    import psutil

    return float(psutil.Process().memory_info().rss) / 2**20


@dataclass
class StageResult:
    """One stage of the daemon measurement."""

    name: str
    target_rate: float
    sent: int
    committed: int
    quarantined: int
    seconds: float
    results: int
    latency_p50_ms: float
    latency_p99_ms: float
    boundary_p50_ms: float
    boundary_p99_ms: float
    rss_mb: float
    notes: list[str] = field(default_factory=list)

    @property
    def rate(self) -> float:
        """Stored readings per second."""
        return self.committed / self.seconds if self.seconds > 0 else 0.0


def _db_window(store: Any, t0: float, t1: float) -> tuple[Any, Any, int]:
    """(unit, received) of readings received in [t0 − 5 s, t1), (unit, ts, created_at) of
    results of ticks in [t0, t1), and quarantined items received in [t0, t1)."""
    import sqlalchemy as sa

    from daemon.storage import schema as s

    d0, d1 = s.to_utc_datetime(t0), s.to_utc_datetime(t1)
    with store.engine.connect() as conn:
        rd = conn.execute(
            sa.select(s.readings.c.unit, s.readings.c.received_at).where(
                s.readings.c.received_at >= s.to_utc_datetime(t0 - 5.0),
                s.readings.c.received_at < d1,
            )
        ).all()
        rs = conn.execute(
            sa.select(s.results.c.unit, s.results.c.ts, s.results.c.created_at).where(
                s.results.c.ts >= d0, s.results.c.ts < d1
            )
        ).all()
        qcol = getattr(s.quarantine.c, "received_at", None)
        nq = 0
        if qcol is not None:
            nq = int(
                conn.execute(sa.select(sa.func.count()).where(qcol >= d0, qcol < d1)).scalar_one()
            )
    return rd, rs, nq


def _latencies(rd: Sequence[Any], rs: Sequence[Any]) -> tuple[Any, Any]:
    """Per result row: ``created_at`` − newest reading of its unit received before the tick;
    and ``created_at`` − tick time [s]."""
    by_unit: dict[str, list[float]] = {}
    for u, r in rd:
        by_unit.setdefault(u, []).append(r.timestamp())
    arrs = {u: np.sort(np.asarray(v)) for u, v in by_unit.items()}
    lat: list[float] = []
    tick: list[float] = []
    for u, ts, created in rs:
        a = arrs.get(u)
        t = ts.timestamp()
        c = created.timestamp()
        tick.append(c - t)
        if a is None:
            continue
        i = int(np.searchsorted(a, t, side="left"))
        if i > 0:
            lat.append(c - float(a[i - 1]))
    return np.asarray(lat), np.asarray(tick)


def _pct(a: Any, q: float) -> float:
    return float(np.percentile(a, q)) * 1e3 if len(a) else math.nan


async def _daemon_stage(  # noqa: PLR0917
    store: Any,
    broker: BrokerChoice,
    topics: list[str],
    values: list[float],
    name: str,
    rate: float,
    duration: float,
    rss: _Rss,
    count: int = 0,
) -> StageResult:
    t0 = time.time()
    rss.peak = 0.0
    proc, q = _start_publisher(broker, topics, values, rate, duration, count)
    while proc.is_alive():
        rss.sample()
        await asyncio.sleep(0.25)
    sent, _, t_pub_end = _publisher_result(q)
    # let the daemon drain: wait until the stored count stops growing
    last_n, stable = -1, 0
    deadline = time.monotonic() + 45.0
    while time.monotonic() < deadline:
        rss.sample()
        n = await asyncio.to_thread(store.count, "readings")
        stable = stable + 1 if n == last_n else 0
        if stable >= 6:
            break
        last_n = n
        await asyncio.sleep(0.25)
    t1 = time.time()
    rd, rs, nq = await asyncio.to_thread(_db_window, store, t0, t1)
    recv = np.sort(np.asarray([r.timestamp() for _, r in rd if r.timestamp() >= t0]))
    n_in = int(recv.size)
    span = float(recv[-1] - recv[0]) if recv.size > 1 else max(1e-9, t_pub_end - t0)
    # ticks while this stage's readings were flowing: from one tick after the first reading
    # (the first tick's newest reading may belong to the stage before) to the last reading
    lo_t = float(recv[0]) + 1.0 if recv.size else t0
    hi_t = float(recv[-1]) if recv.size else t_pub_end
    rs_pub = [r for r in rs if lo_t <= r[1].timestamp() <= hi_t]
    lat, tick = _latencies(rd, rs_pub)
    notes = []
    if n_in + nq < sent:
        notes.append(f"{sent - n_in - nq} sent readings neither stored nor quarantined")
    if nq:
        notes.append(f"{nq} quarantined")
    return StageResult(
        name=name,
        target_rate=rate,
        sent=sent,
        committed=n_in,
        quarantined=nq,
        seconds=span,
        results=len(rs_pub),
        latency_p50_ms=_pct(lat, 50),
        latency_p99_ms=_pct(lat, 99),
        boundary_p50_ms=_pct(tick, 50),
        boundary_p99_ms=_pct(tick, 99),
        rss_mb=rss.peak / 2**20,
        notes=notes,
    )


async def _wait_ready(url: str, proc: subprocess.Popen[bytes], timeout_s: float) -> None:
    import httpx

    deadline = time.monotonic() + timeout_s
    async with httpx.AsyncClient(timeout=2.0) as client:
        while time.monotonic() < deadline:
            if proc.poll() is not None:
                raise RuntimeError(f"the daemon exited with code {proc.returncode}")
            with contextlib.suppress(httpx.HTTPError):
                if (await client.get(url)).status_code == 200:
                    return
            await asyncio.sleep(0.2)
    raise TimeoutError(f"the daemon was not ready within {timeout_s:.0f} s")


def _start_daemon(plant_path: Path, log_path: Path, publish: bool) -> subprocess.Popen[bytes]:
    env = {k: v for k, v in os.environ.items() if not k.startswith("BRAYSCOPE_")}
    cmd = [sys.executable, "-m", "daemon.cli", "run", "-c", str(plant_path)]
    cmd += ["--log-level", "warning", "--log-format", "text"]
    if not publish:
        cmd.append("--no-publish")
    with log_path.open("wb") as fh:
        return subprocess.Popen(
            cmd, stdout=fh, stderr=subprocess.STDOUT, env=env, cwd=str(plant_path.parent)
        )


async def bench_live(
    *,
    n_units: int = 100,
    n_tags: int = 50,
    rates: Sequence[float] = (1000.0, 2500.0, 5000.0, 10000.0),
    stage_s: float = 15.0,
    ceiling_count: int = 40000,
    flat_out_count: int = 40000,
    out: Any = None,
) -> int:
    """Run the benchmark (see the module docstring); returns 0 on PASS, 1 on FAIL."""
    from daemon.config import load_plant
    from daemon.storage import Store

    out = out if out is not None else sys.stdout

    def say(text: str) -> None:
        print(text, file=out, flush=True)

    broker = BrokerChoice.pick()
    say(f"broker: {broker.kind}, MQTT {broker.protocol}")
    used = n_tags if aux_supported() else min(n_tags, N_MAPPED)
    if used < n_tags:
        say(
            f"note: this plant file has no auxiliary tags; {n_units} units x {used} mapped tags "
            f"are scanned faster to carry the reading volume of {n_units} x {n_tags} tags"
        )
    else:
        say(
            f"plant: {n_units} units x {used} tags ({min(used, N_MAPPED)} mapped, "
            f"{max(0, used - N_MAPPED)} auxiliary aux.<name>), one reading per message, QoS 1"
        )
    # tag-major order: each unit's readings spread over the scan period
    order = [(u, j) for j in range(used) for u in range(n_units)]
    topics = [_topic(u, j) for u, j in order]
    values = [_tag_spec(j)[1] for _, j in order]
    tmp = Path(tempfile.mkdtemp(prefix="brayscope-bench-live-"))
    daemon: subprocess.Popen[bytes] | None = None
    try:
        say(f"[1] raw ceiling: {ceiling_count} QoS-1 messages flat out, aiomqtt + json.loads")
        ceilings: list[CeilingResult] = []
        for consumer in ("callback", "iterator"):
            c = await measure_ceiling(broker, topics, values, ceiling_count, consumer=consumer)
            ceilings.append(c)
            say(
                f"    {consumer:>8}: {c.rate:8,.0f} readings/s; received {c.received} of "
                f"{c.sent} sent ({c.lost} lost); publisher sent at {c.publish_rate:,.0f}/s"
                + (f"; largest iterator backlog {c.max_backlog}" if consumer == "iterator" else "")
            )
        db_path = tmp / "bench.sqlite"
        db_url = f"sqlite:///{db_path}"
        path = tmp / "bench-plant.toml"
        path.write_text(
            bench_plant_text(
                n_units=n_units, n_tags=used, mqtt_port=broker.port,
                protocol=broker.protocol, database_url=db_url, tick_s=1.0,
            ),
            encoding="utf-8",
        )  # fmt: skip
        plant = load_plant(path)  # refuses a bad generated file here, with the reason
        daemon = _start_daemon(path, tmp / "daemon.log", publish=broker.private)
        await _wait_ready(f"http://{plant.http.bind}/readyz", daemon, 60.0)
        await asyncio.sleep(1.0)
        rss = _Rss(daemon.pid)
        store = Store(db_url)
        say(
            f"[2] daemon end to end: 'brayscope run' process {daemon.pid}, SQLite, tick 1 s, "
            f"results {'published' if broker.private else 'not published (shared broker)'}"
        )
        stages: list[StageResult] = []
        try:
            for r in rates:
                st = await _daemon_stage(store, broker, topics, values, f"{r:g}/s", r, stage_s, rss)
                stages.append(st)
                say(_stage_line(st))
            st = await _daemon_stage(
                store, broker, topics, values, "flat out", 0.0, 0.0, rss, count=flat_out_count
            )
            stages.append(st)
            say(_stage_line(st))
        finally:
            store.close()
        peak = max(s.rss_mb for s in stages)
        say(f"    harness process RSS (not counted): {_harness_rss_mb():.0f} MB")
        _table(ceilings, stages, say)
        return _verdict(ceilings[0], stages, peak, say)
    finally:
        if daemon is not None and daemon.poll() is None:
            daemon.terminate()
            try:
                daemon.wait(30)
            except subprocess.TimeoutExpired:
                daemon.kill()
        broker.close()
        shutil.rmtree(tmp, ignore_errors=True)


def _stage_line(st: StageResult) -> str:
    note = f"  [{'; '.join(st.notes)}]" if st.notes else ""
    return (
        f"    {st.name:>9}: sent {st.sent:6d}, stored {st.committed:6d} in {st.seconds:5.1f} s "
        f"= {st.rate:7,.0f}/s; results {st.results:5d}; last reading → commit p50/p99 "
        f"{st.latency_p50_ms:4.0f}/{st.latency_p99_ms:4.0f} ms; boundary → commit p99 "
        f"{st.boundary_p99_ms:4.0f} ms; daemon RSS {st.rss_mb:4.0f} MB{note}"
    )


def _table(ceilings: list[CeilingResult], stages: list[StageResult], say: Any) -> None:
    say("")
    say(
        "| stage | sent | stored | readings/s | last reading → commit p50 / p99 | "
        "boundary → commit p50 / p99 | daemon peak RSS |"
    )
    say("|---|---:|---:|---:|---:|---:|---:|")
    for s in stages:
        say(
            f"| {s.name} | {s.sent:,} | {s.committed:,} | {s.rate:,.0f} | "
            f"{s.latency_p50_ms:.0f} / {s.latency_p99_ms:.0f} ms | "
            f"{s.boundary_p50_ms:.0f} / {s.boundary_p99_ms:.0f} ms | {s.rss_mb:.0f} MB |"
        )
    for c in ceilings:
        say(
            f"| raw ceiling ({c.consumer}) | {c.sent:,} | {c.received:,} received | "
            f"{c.rate:,.0f} | | | |"
        )
    say("")


def _verdict(ceiling: CeilingResult, stages: list[StageResult], peak_mb: float, say: Any) -> int:
    flat = stages[-1]
    ratio = flat.rate / ceiling.rate if ceiling.rate > 0 else math.nan
    nominal = [s for s in stages[:-1] if s.target_rate >= 5000.0]
    p99 = nominal[0].latency_p99_ms if nominal else math.nan
    rate_name = nominal[0].name if nominal else "5000/s"
    lost = sum(s.sent - s.committed - s.quarantined for s in stages)
    checks = [
        (f"daemon flat out / raw ceiling = {flat.rate:,.0f} / {ceiling.rate:,.0f} = "
         f"{ratio:.0%} (target ≥ 70 %)", ratio >= 0.70),
        (f"p99 last reading → commit at {rate_name} = {p99:.0f} ms (target ≤ 250 ms)",
         p99 <= 250.0),
        (f"daemon peak RSS = {peak_mb:.0f} MB (target ≤ 200 MB)", peak_mb <= 200.0),
        (f"readings lost on the daemon path = {max(0, lost)} (target 0)", lost <= 0),
    ]  # fmt: skip
    if ceiling.lost:
        say(f"note: the raw ceiling lost {ceiling.lost} messages; its rate is not a ceiling")
    ok = True
    for text, passed in checks:
        say(f"{'PASS' if passed else 'FAIL'}  {text}")
        ok &= bool(passed)
    say("bench-live: PASS" if ok else "bench-live: FAIL")
    return 0 if ok else 1


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``brayscope bench-live``."""
    p: argparse.ArgumentParser = subparsers.add_parser(
        "bench-live",
        help="measure the live path end to end against a broker on loopback",
        description=(
            "Raw MQTT ceiling vs the daemon end to end (readings/s stored, latency from "
            "the last reading of a tick to the commit of its result, daemon peak RSS) for "
            "100 units x 50 tags at increasing rates; prints PASS/FAIL against the targets."
        ),
        epilog=(
            "Needs an MQTT broker on 127.0.0.1 (Mosquitto; BRAYSCOPE_TEST_MQTT=host:port\n"
            "names another) and takes a few minutes; figures are in docs/benchmarks.md.\n\n"
            "examples:\n"
            "  brayscope bench-live                            every stage, 100 units x 50 tags\n"
            "  brayscope bench-live --rates 1000,2500 --stage-s 10   a quicker look\n"
            "  brayscope bench-live --units 10 --tags 20 --count 5000   a small plant"
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--units", type=int, default=100, help="number of units (default 100)")
    p.add_argument("--tags", type=int, default=50, help="tags per unit (default 50)")
    p.add_argument(
        "--rates", default="1000,2500,5000,10000",
        help="paced stages, readings/s, comma separated (default 1000,2500,5000,10000)",
    )  # fmt: skip
    p.add_argument("--stage-s", type=float, default=15.0, help="seconds per paced stage")
    p.add_argument(
        "--count", type=int, default=40000, help="messages of the ceiling and flat-out stages"
    )
    return p


def run(args: argparse.Namespace) -> int:
    """Entry point of ``brayscope bench-live``."""
    logging.basicConfig(level=logging.WARNING, stream=sys.stderr)
    rates = tuple(float(x) for x in str(args.rates).split(",") if x.strip())
    return asyncio.run(
        bench_live(
            n_units=args.units,
            n_tags=args.tags,
            rates=rates,
            stage_s=args.stage_s,
            ceiling_count=args.count,
            flat_out_count=args.count,
        )
    )
