"""``brayscope bench-live``: the live path measured end to end against a broker on loopback.

One run measures, against the same broker:

1. **Raw ceiling** — a publisher process (multiprocessing, paho-mqtt) sends QoS-1 messages as
   fast as it can; a bare aiomqtt consumer in this process receives them and decodes each
   with ``json.loads``.  Nothing is stored.  Readings/s from the first message to the last.
2. **The daemon end to end** — :class:`daemon.runtime.Runtime` in this process, on a generated
   plant of 100 units × 50 tags (one reading per message, ``{"value": x, "ts": t}``), SQLite
   in a temporary folder.  The publisher paces the tags at increasing rates; for each stage:
   readings/s committed to the database, results committed, and the latency from the last
   reading a tick could use (the newest reading of the unit received before the tick time)
   to the commit of that tick's result row (p50, p99).  A final flat-out stage gives the
   daemon's own ceiling.  Peak RSS of this process (daemon + harness) is sampled throughout.

Targets: daemon flat-out ≥ 70 % of the raw ceiling, p99 ≤ 250 ms at the nominal rate (every
tag at 1 Hz, 5000 readings/s), peak RSS ≤ 200 MB.  PASS/FAIL is printed per target.

Broker: the loopback Mosquitto at 127.0.0.1:1883 if it answers, else a private ``mosquitto``
from PATH on a free port (default settings), else the embedded amqtt broker in a separate
process (MQTT 3.1.1).  The output says which.  Default total time: about 2½ minutes.

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

__all__ = ["BrokerChoice", "StageResult", "add_parser", "bench_plant_text", "run"]

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
#: The plant file maps each measurement of a unit exactly once, so a gas-turbine unit has at
#: most len(_POINT) tags; the volume of "50 tags per unit at 1 Hz" (5000 readings/s for 100
#: units) is reached by scanning those tags faster (rate / n_tags_used per tag).
MAX_TAGS = len(_POINT)


def _topic(u: int, j: int) -> str:
    return f"bench/u{u:03d}/t{j:02d}"


#: tag index ("00".."11") → measurement
_MEAS_OF_TOPIC = {f"{j:02d}": m for j, m in enumerate(_POINT)}


def _tag_measurements(n_tags: int) -> list[str]:
    return list(_POINT)[: min(n_tags, MAX_TAGS)]


def bench_plant_text(
    *, n_units: int, n_tags: int, mqtt_port: int, protocol: str, database_url: str, tick_s: float
) -> str:
    """Plant file of the benchmark: ``n_units`` gas turbines × ``n_tags`` tags, SI units."""
    from daemon.demo_cmd import _toml_table

    meas = _tag_measurements(n_tags)
    units: dict[str, Any] = {}
    for u in range(n_units):
        tags = []
        for j, m in enumerate(meas):
            _, uom, lo, hi = _POINT[m]
            tags.append(
                {"topic": _topic(u, j), "measurement": m, "uom": uom, "low": lo, "high": hi,
                 "max_age_s": 30.0}
            )  # fmt: skip
        units[f"B{u:03d}"] = {
            "type": "gas_turbine",
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
        },
        "database": {"url": database_url},
        "http": {"bind": f"127.0.0.1:{_free_port()}"},
        "daemon": {
            "tick_s": tick_s,
            "results_topic_prefix": "brayscope-bench",
            "steady_window": 10,
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


@dataclass
class BrokerChoice:
    """The broker used: where, what, which protocol, and how to stop it."""

    host: str
    port: int
    kind: str
    protocol: str
    _proc: Any = None
    _tmp: str | None = None

    @classmethod
    def pick(cls, host: str = "127.0.0.1", port: int = 1883) -> BrokerChoice:
        """Loopback Mosquitto, else a private ``mosquitto`` from PATH, else embedded amqtt."""
        if _reachable(host, port):
            return cls(host, port, f"loopback broker at {host}:{port} (Mosquitto expected)", "5")
        exe = shutil.which("mosquitto")
        if exe:
            p = _free_port()
            tmp = tempfile.mkdtemp(prefix="brayscope-bench-mosq-")
            conf = Path(tmp) / "mosquitto.conf"
            conf.write_text(f"listener {p} 127.0.0.1\nallow_anonymous true\n", encoding="utf-8")
            proc = subprocess.Popen(
                [exe, "-c", str(conf)], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
            )
            for _ in range(50):
                if _reachable("127.0.0.1", p, 0.2):
                    break
                time.sleep(0.1)
            return cls("127.0.0.1", p, f"private mosquitto from PATH on port {p}", "5", proc, tmp)
        p = _free_port()
        ctx = mp.get_context("spawn")
        ready = ctx.Event()
        child = ctx.Process(target=_amqtt_process, args=(p, ready), daemon=True)
        child.start()
        ready.wait(20)
        return cls(
            "127.0.0.1", p, f"embedded amqtt broker (own process) on port {p}", "3.1.1", proc
        )

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
    values: list[float] | None = None,
) -> None:
    """Publish ``{"value", "ts"}`` to ``topics`` round-robin at ``rate`` msg/s (0: flat out),
    for ``duration`` s or ``count`` messages; put the number sent on ``result``."""
    import paho.mqtt.client as paho

    proto = paho.MQTTv5 if protocol == "5" else paho.MQTTv311
    from paho.mqtt.enums import CallbackAPIVersion

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
                ts = time.time()
                k = sent % n
                v = (values[k] if values else 1.0) * (1.0 + (sent % 7) * 1e-5)
                payload = json.dumps({"value": v, "ts": ts})
                last = c.publish(topics[k], payload, qos=1)
                sent += 1
        if last is not None:
            with contextlib.suppress(Exception):
                last.wait_for_publish(30)
    finally:
        c.loop_stop()
        c.disconnect()
        result.put(sent)


def _start_publisher(
    broker: BrokerChoice, topics: list[str], rate: float, duration: float, count: int = 0
) -> tuple[Any, Any]:
    ctx = mp.get_context("spawn")
    q = ctx.Queue()
    p = ctx.Process(
        target=_publisher,
        args=(
            broker.host,
            broker.port,
            broker.protocol,
            topics,
            rate,
            duration,
            count,
            q,
            [_POINT[_MEAS_OF_TOPIC[t.rsplit("/t", 1)[1]]][0] for t in topics],
        ),
        daemon=True,
    )
    p.start()
    return p, q


# --------------------------------------------------------------------------------------------
# Measurements
# --------------------------------------------------------------------------------------------


class _Rss:
    """Peak resident set size of this process, sampled."""

    def __init__(self) -> None:
        try:
            import psutil

            self._proc: Any = psutil.Process()
        except ImportError:  # pragma: no cover
            self._proc = None
        self.peak = 0.0

    def sample(self) -> float:
        if self._proc is not None:
            rss = float(self._proc.memory_info().rss)
        else:  # pragma: no cover
            import resource

            rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024.0
        self.peak = max(self.peak, rss)
        return rss


async def measure_ceiling(
    broker: BrokerChoice, topics: list[str], count: int, timeout_s: float = 40.0
) -> tuple[float, int]:
    """Raw ceiling: readings/s an aiomqtt consumer receives and JSON-decodes; and the count."""
    import aiomqtt

    proto = aiomqtt.ProtocolVersion.V5 if broker.protocol == "5" else aiomqtt.ProtocolVersion.V311
    n = 0
    first = last = 0.0
    async with aiomqtt.Client(broker.host, broker.port, protocol=proto) as client:
        await client.subscribe("bench/#", qos=1)
        proc, _q = _start_publisher(broker, topics, 0.0, 0.0, count)
        deadline = time.monotonic() + timeout_s
        try:
            async with asyncio.timeout(timeout_s):
                async for msg in client.messages:
                    if not str(msg.topic).startswith("bench/u"):
                        continue
                    json.loads(msg.payload)  # type: ignore[arg-type,unused-ignore]
                    now = time.perf_counter()
                    if n == 0:
                        first = now
                    last = now
                    n += 1
                    if n >= count or time.monotonic() > deadline:
                        break
        except TimeoutError:
            pass
        await asyncio.to_thread(proc.join, 30)
    rate = (n - 1) / (last - first) if n > 1 and last > first else 0.0
    return rate, n


@dataclass
class StageResult:
    """One stage of the daemon measurement."""

    name: str
    target_rate: float
    sent: int
    committed: int
    seconds: float
    results: int
    latency_p50_ms: float
    latency_p99_ms: float
    tick_to_commit_p99_ms: float
    rss_mb: float
    notes: list[str] = field(default_factory=list)

    @property
    def rate(self) -> float:
        """Committed readings per second."""
        return self.committed / self.seconds if self.seconds > 0 else 0.0


def _db_window(store: Any, t0: float, t1: float) -> tuple[int, Any, Any]:
    """Readings committed with received_at in [t0, t1), their (unit, received) arrays, and
    result (unit, ts, created_at) arrays of ticks in [t0, t1)."""
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
    n_in = sum(1 for _, r in rd if r.timestamp() >= t0)
    return n_in, rd, rs


def _latencies(rd: Sequence[Any], rs: Sequence[Any]) -> tuple[Any, Any]:
    """Per result: commit − newest reading of its unit received before the tick; and
    commit − tick time [s]."""
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
        i = int(np.searchsorted(a, t, side="right"))
        if i > 0:
            lat.append(c - float(a[i - 1]))
    return np.asarray(lat), np.asarray(tick)


def _pct(a: Any, q: float) -> float:
    return float(np.percentile(a, q)) * 1e3 if len(a) else math.nan


async def _daemon_stage(  # noqa: PLR0917
    runtime: Any,
    broker: BrokerChoice,
    topics: list[str],
    name: str,
    rate: float,
    duration: float,
    rss: _Rss,
    count: int = 0,
    settle_s: float = 3.0,
) -> StageResult:
    store = runtime.store
    t0 = time.time()
    proc, q = _start_publisher(broker, topics, rate, duration, count)
    while proc.is_alive():
        rss.sample()
        await asyncio.sleep(0.25)
    sent = int(q.get(timeout=10)) if not q.empty() else 0
    t_pub_end = time.time()
    # let the daemon drain: wait until the committed count stops growing
    last_n, stable = -1, 0
    deadline = time.monotonic() + max(settle_s, 30.0 if rate == 0 else settle_s)
    while time.monotonic() < deadline:
        rss.sample()
        n = await asyncio.to_thread(lambda: store.count("readings"))
        if n == last_n:
            stable += 1
            if stable >= 4:
                break
        else:
            stable = 0
        last_n = n
        await asyncio.sleep(0.25)
    t1 = time.time()
    n_in, rd, rs = await asyncio.to_thread(_db_window, store, t0, t1)
    # for the rate use the span of the committed readings of this stage
    recv = np.sort(np.asarray([r.timestamp() for _, r in rd if r.timestamp() >= t0]))
    span = float(recv[-1] - recv[0]) if recv.size > 1 else t_pub_end - t0
    # ticks while this stage's readings were flowing (not the first tick after the stage
    # began, whose newest reading may belong to the stage before, nor the drain after it)
    lo_t = float(recv[0]) + 1.0 if recv.size else t0
    hi_t = float(recv[-1]) if recv.size else t_pub_end
    rs_pub = [r for r in rs if lo_t <= r[1].timestamp() <= hi_t]
    lat, tick = _latencies(rd, rs_pub)
    notes = []
    if n_in < sent:
        notes.append(f"{sent - n_in} sent readings not stored (broker drop or still queued)")
    return StageResult(
        name=name,
        target_rate=rate,
        sent=sent,
        committed=n_in,
        seconds=span,
        results=len(rs),
        latency_p50_ms=_pct(lat, 50),
        latency_p99_ms=_pct(lat, 99),
        tick_to_commit_p99_ms=_pct(tick, 99),
        rss_mb=rss.peak / 2**20,
        notes=notes,
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
    from daemon.config import EnvOverrides, load_plant
    from daemon.runtime import Runtime

    out = out if out is not None else sys.stdout

    def say(text: str) -> None:
        print(text, file=out, flush=True)

    rss = _Rss()
    rss.sample()
    broker = BrokerChoice.pick()
    say(f"broker: {broker.kind}, MQTT {broker.protocol}")
    used = min(n_tags, MAX_TAGS)
    topics = [_topic(u, j) for u in range(n_units) for j in range(used)]
    if used < n_tags:
        say(
            f"note: a gas-turbine unit maps each of its {MAX_TAGS} measurements once; "
            f"{n_units} units x {used} tags are scanned faster to carry the reading volume "
            f"of {n_units} x {n_tags} tags (rates below are readings/s)"
        )
    tmp = Path(tempfile.mkdtemp(prefix="brayscope-bench-live-"))
    try:
        say(f"[1] raw ceiling: aiomqtt consumer + json.loads, {ceiling_count} QoS-1 messages ...")
        ceiling, got = await measure_ceiling(broker, topics, ceiling_count)
        say(f"    {ceiling:,.0f} readings/s ({got} received)")

        db_url = f"sqlite:///{tmp / 'bench.sqlite'}"
        path = tmp / "bench-plant.toml"
        path.write_text(
            bench_plant_text(
                n_units=n_units, n_tags=n_tags, mqtt_port=broker.port,
                protocol=broker.protocol, database_url=db_url, tick_s=1.0,
            ),
            encoding="utf-8",
        )  # fmt: skip
        env = EnvOverrides.model_construct(
            database_url=db_url, broker_host=broker.host, broker_port=broker.port
        )
        plant = load_plant(path, env=env)
        # publish=False: no retained result topics left behind on a shared broker
        runtime = Runtime(plant, serve_http=False, publish=False)
        run_task = asyncio.create_task(runtime.run())
        await asyncio.wait_for(runtime.feed.wait_connected(30.0), 40.0)
        await asyncio.sleep(1.0)
        say(
            f"[2] daemon end to end: {n_units} units x {used} tags, one reading per "
            f"message, SQLite, tick 1 s"
        )
        stages: list[StageResult] = []
        try:
            for r in rates:
                st = await _daemon_stage(runtime, broker, topics, f"{r:g}/s", r, stage_s, rss)
                stages.append(st)
                say(_stage_line(st))
            st = await _daemon_stage(
                runtime, broker, topics, "flat out", 0.0, 0.0, rss, count=flat_out_count
            )
            stages.append(st)
            say(_stage_line(st))
        finally:
            runtime.request_stop()
            with contextlib.suppress(Exception):
                await asyncio.wait_for(run_task, 30.0)
            runtime.store.close()
        rss.sample()
        return _verdict(ceiling, stages, rss, say)
    finally:
        broker.close()
        shutil.rmtree(tmp, ignore_errors=True)


def _stage_line(st: StageResult) -> str:
    note = f"  [{'; '.join(st.notes)}]" if st.notes else ""
    return (
        f"    {st.name:>9}: sent {st.sent:6d}, stored {st.committed:6d} in {st.seconds:5.1f} s "
        f"= {st.rate:8,.0f} readings/s; results {st.results:5d}; last reading → commit "
        f"p50 {st.latency_p50_ms:6.0f} ms, p99 {st.latency_p99_ms:6.0f} ms; tick → commit "
        f"p99 {st.tick_to_commit_p99_ms:5.0f} ms; peak RSS {st.rss_mb:5.0f} MB{note}"
    )


def _verdict(ceiling: float, stages: list[StageResult], rss: _Rss, say: Any) -> int:
    flat = stages[-1]
    ratio = flat.rate / ceiling if ceiling > 0 else math.nan
    nominal = [s for s in stages[:-1] if s.target_rate >= 5000.0]
    p99 = nominal[0].latency_p99_ms if nominal else math.nan
    peak_mb = rss.peak / 2**20
    checks = [
        (f"daemon flat out / raw ceiling = {ratio:.0%} (target ≥ 70 %)", ratio >= 0.70),
        (f"p99 last reading → commit at 5000 readings/s = {p99:.0f} ms (target ≤ 250 ms)",
         p99 <= 250.0),
        (f"peak RSS = {peak_mb:.0f} MB (target ≤ 200 MB)", peak_mb <= 200.0),
    ]  # fmt: skip
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
            "Raw MQTT ceiling vs the daemon end to end (readings/s committed, latency from "
            "the last reading of a tick to the commit of its result, peak RSS) for 100 units "
            "x 50 tags at increasing rates; prints PASS/FAIL against the targets."
        ),
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
