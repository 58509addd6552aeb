"""``brayscope run`` as a real process against a private Mosquitto: crash, stop and restart.

What the checks rest on:
- MQTT 5.0 (OASIS standard, 2019), 4.3.2 (QoS 1, at least once) and 4.4 (message delivery
  retry: unacknowledged PUBLISH packets are re-sent when the session resumes): a message the
  daemon never acknowledged is delivered again after a restart with the same client id and a
  persistent session, so "acknowledge only after commit" means nothing acknowledged is lost.
- SQLite documentation, "PRAGMA integrity_check" (returns the single row ``ok`` for a sound
  database) and "Write-Ahead Logging" (a committed transaction survives a process crash).
- POSIX signals: SIGKILL cannot be caught (no clean-up runs); SIGTERM asks for a clean stop
  (common practice for service managers such as systemd, whose default stop signal it is).
- RFC 6750 section 3.1: 401 without a valid bearer token, 403 for a token lacking the scope.

Every test prints the broker and database it used. Set ``BRAYSCOPE_KILL_RUNS`` for more kill
runs (default 3).
"""

from __future__ import annotations

import json
import os
import random
import signal
import sqlite3
import subprocess
import threading
import time
import uuid
from pathlib import Path
from typing import Any

import httpx
import pytest
from live_support import (
    OPERATING_POINTS,
    PrivateMosquitto,
    Publisher,
    Subscriber,
    free_port,
    http_get,
    payload,
    plant_toml,
    private_mosquitto,
    promtool_check_metrics,
    run_daemon,
    snapshot_messages,
    topic_of,
    wait_for,
)

pytestmark = [pytest.mark.services, pytest.mark.slow]

if not __import__("shutil").which("mosquitto"):  # pragma: no cover - CI has it
    if os.environ.get("BRAYSCOPE_REQUIRE_SERVICES") == "1":
        raise RuntimeError("mosquitto not on PATH and BRAYSCOPE_REQUIRE_SERVICES=1")
    pytest.skip("mosquitto not on PATH", allow_module_level=True)

BURST = 10_000
MEASUREMENTS = list(OPERATING_POINTS["KR-GT1"])


class Site:
    """A plant file, its SQLite database and a daemon process."""

    def __init__(self, tmp: Path, broker: PrivateMosquitto, **plant_kw: Any) -> None:
        self.tmp = tmp
        self.broker = broker
        self.prefix = f"bse2e/{uuid.uuid4().hex[:8]}"
        self.db = tmp / "live.sqlite"
        self.http_port = free_port()
        self.plant = tmp / "plant.toml"
        self.plant.write_text(
            plant_toml(
                prefix=self.prefix,
                broker_port=broker.port,
                database_url=f"sqlite:///{self.db}",
                http_port=self.http_port,
                client_id=f"bs-e2e-{uuid.uuid4().hex[:8]}",
                **plant_kw,
            )
        )
        self.log = tmp / "daemon.log"
        self.proc: subprocess.Popen[bytes] | None = None
        print(f"broker: {broker.describe}; database: sqlite file {self.db}")

    def start(self, *extra: str, env: dict[str, str] | None = None, ready: bool = True) -> None:
        self.proc = run_daemon(self.plant, self.log, *extra, env_extra=env)
        if ready:
            self.wait_ready()

    def wait_ready(self, timeout: float = 30.0) -> float:
        def ready() -> bool:
            assert self.proc is not None
            if self.proc.poll() is not None:
                raise AssertionError(f"daemon exited {self.proc.returncode}:\n{self.tail()}")
            return http_get(self.http_port, "/readyz")[0] == 200

        return wait_for(ready, timeout, 0.1, "daemon ready")

    def tail(self, n: int = 30) -> str:
        return "\n".join(self.log.read_text(errors="replace").splitlines()[-n:])

    def kill(self) -> None:
        assert self.proc is not None
        self.proc.send_signal(signal.SIGKILL)
        self.proc.wait(10)

    def terminate(self, timeout: float) -> tuple[int, float]:
        assert self.proc is not None
        t0 = time.monotonic()
        self.proc.send_signal(signal.SIGTERM)
        rc = self.proc.wait(timeout)
        return rc, time.monotonic() - t0

    def events(self) -> list[tuple[str, str, str | None, str]]:
        """(source, kind, unit, detail) of the stored events, oldest first."""
        if not self.db.exists():
            return []
        with sqlite3.connect(f"file:{self.db}?mode=ro", uri=True, timeout=10) as c:
            try:
                q = "SELECT source, kind, unit, detail FROM events ORDER BY id"
                return [tuple(r) for r in c.execute(q).fetchall()]
            except sqlite3.OperationalError:
                return []

    def readings(self) -> int:
        if not self.db.exists():
            return 0
        with sqlite3.connect(f"file:{self.db}?mode=ro", uri=True, timeout=10) as c:
            try:
                return int(c.execute("SELECT count(*) FROM readings").fetchone()[0])
            except sqlite3.OperationalError:
                return 0

    def keys(self) -> set[tuple[str, str]]:
        with sqlite3.connect(f"file:{self.db}?mode=ro", uri=True, timeout=10) as c:
            return {
                (m, str(ts)) for m, ts in c.execute("SELECT measurement, source_ts FROM readings")
            }

    def integrity(self) -> str:
        with sqlite3.connect(str(self.db), timeout=10) as c:
            return str(c.execute("PRAGMA integrity_check").fetchone()[0])

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
            try:
                self.proc.wait(20)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()


def burst_messages(prefix: str, n: int, t0: float) -> list[tuple[str, bytes]]:
    """``n`` distinct readings of KR-GT1 (cycling over its measurements, 1 ms apart)."""
    pt = OPERATING_POINTS["KR-GT1"]
    out = []
    for i in range(n):
        m = MEASUREMENTS[i % len(MEASUREMENTS)]
        out.append((topic_of(prefix, "KR-GT1", m), payload(m, pt[m], t0 + i * 1e-3)))
    return out


def publish_in_background(port: int, msgs: list[tuple[str, bytes]]) -> threading.Thread:
    def go() -> None:
        pub = Publisher(port, f"bs-e2e-plant-{uuid.uuid4().hex[:6]}")
        try:
            for t, p in msgs:
                pub.publish(t, p)
            pub.flush(120)
        finally:
            pub.close()

    th = threading.Thread(target=go, daemon=True)
    th.start()
    return th


def test_kill9_mid_burst_then_restart_stores_every_reading_once(tmp_path: Path) -> None:
    runs = int(os.environ.get("BRAYSCOPE_KILL_RUNS", "3"))
    seed = int(os.environ.get("BRAYSCOPE_KILL_SEED", str(time.time_ns() % 100_000)))
    print(f"kill runs: {runs}, seed {seed} (BRAYSCOPE_KILL_SEED to repeat)")
    rng = random.Random(seed)
    with private_mosquitto(tmp_path / "broker") as broker:
        site = Site(tmp_path, broker)
        status = f"{site.prefix}/out/status"
        watch = Subscriber(broker.port, status)
        try:
            site.start()
            wait_for(lambda: watch.last(status) == b"online", 10, 0.05, "status online")
            base = time.time() - 3600.0
            sent = 0
            for run in range(runs):
                msgs = burst_messages(site.prefix, BURST, base + run * 20.0)
                th = publish_in_background(broker.port, msgs)
                kill_after = rng.uniform(0.05, 1.1)  # a 10,000 burst takes about 1.5 s here
                time.sleep(kill_after)
                stored_at_kill = site.readings()
                site.kill()
                # MQTT 5.0 3.1.2.5: the broker publishes the Will when the network connection
                # closes without a DISCONNECT, as after SIGKILL
                wait_for(lambda: watch.last(status) == b"offline", 10, 0.05, "last will")
                site.start(ready=False)
                th.join(120)
                assert not th.is_alive()
                sent += len(msgs)
                took = wait_for(lambda n=sent: site.readings() >= n, 90, 0.2, "all readings")
                time.sleep(0.5)
                n = site.readings()
                print(
                    f"run {run + 1}: SIGKILL after {kill_after:.2f} s with {stored_at_kill} "
                    f"rows stored; after restart {n} rows of {sent} sent ({took:.1f} s)"
                )
                assert n == sent, "a reading was lost or stored twice"
                assert site.integrity() == "ok"
            assert len(site.keys()) == sent
            wait_for(lambda: watch.last(status) == b"online", 10, 0.05, "online again")
            rc, _ = site.terminate(30)
            assert rc == 0, site.tail()
            wait_for(lambda: watch.last(status) == b"offline", 10, 0.05, "offline on stop")
        finally:
            watch.close()
            site.stop()


def test_sigterm_under_load_exits_zero_within_stop_timeout_and_loses_nothing(
    tmp_path: Path,
) -> None:
    stop_timeout = 10.0
    with private_mosquitto(tmp_path / "broker") as broker:
        site = Site(tmp_path, broker)
        try:
            site.start("--stop-timeout", str(stop_timeout))
            msgs = burst_messages(site.prefix, BURST, time.time() - 1800.0)
            th = publish_in_background(broker.port, msgs)
            time.sleep(0.6)
            rc, dt = site.terminate(stop_timeout + 5.0)
            print(f"SIGTERM under load: exit {rc} after {dt:.2f} s (stop timeout {stop_timeout} s)")
            assert rc == 0, site.tail()
            assert dt <= stop_timeout + 1.0
            th.join(120)
            site.start()
            wait_for(lambda: site.readings() >= len(msgs), 90, 0.2, "all readings after restart")
            time.sleep(0.5)
            assert site.readings() == len(msgs)
            assert site.integrity() == "ok"
            rc, dt = site.terminate(stop_timeout + 5.0)
            assert rc == 0
        finally:
            site.stop()


def test_broker_restart_http_endpoints_and_tokens(tmp_path: Path) -> None:
    write, read = "w-" + uuid.uuid4().hex, "r-" + uuid.uuid4().hex
    with private_mosquitto(tmp_path / "broker") as broker:
        site = Site(tmp_path, broker, units=("KR-GT1",))
        try:
            site.start(env={"BRAYSCOPE_API_TOKEN": write, "BRAYSCOPE_API_READ_TOKEN": read})
            base = f"http://127.0.0.1:{site.http_port}"
            first = snapshot_messages(site.prefix, "KR-GT1", time.time() - 5)
            publish_in_background(broker.port, first).join(30)
            wait_for(lambda: site.readings() == len(first), 20, 0.1, "first readings")

            # HTTP endpoints over the real socket
            assert http_get(site.http_port, "/healthz")[0] == 200
            code, metrics = http_get(site.http_port, "/metrics")
            assert code == 200
            assert "brayscope_broker_connected 1.0" in metrics
            assert write not in metrics and read not in metrics
            assert httpx.get(base + "/api/units").status_code == 401
            ok = httpx.get(base + "/api/units", headers={"Authorization": f"Bearer {read}"})
            assert ok.status_code == 200
            auth = {"Authorization": f"Bearer {read}"}

            def stored_result() -> bool:
                r = httpx.get(base + "/api/units/KR-GT1/latest", headers=auth)
                return r.status_code == 200 and bool(r.json())

            wait_for(stored_result, 10, 0.2, "a stored result through the API")
            latest = httpx.get(base + "/api/units/KR-GT1/latest", headers=auth).json()[0]
            assert latest["unit"] == "KR-GT1"
            assert 0.5 < latest["results"]["compressor_isentropic_efficiency"] < 1.0
            assert latest["inputs"]["generator_power"] == pytest.approx(44.4e6)
            hist = httpx.get(
                base + "/api/units/KR-GT1/results",
                params={"since": time.time() - 600, "until": time.time() + 60},
                headers=auth,
            ).json()
            assert hist["count"] >= 1 and hist["results"][-1]["unit"] == "KR-GT1"
            ev = {"kind": "note", "unit": "KR-GT1", "detail": "restart test"}
            r = httpx.post(
                base + "/api/events", json=ev, headers={"Authorization": f"Bearer {read}"}
            )
            assert r.status_code == 403
            r = httpx.post(
                base + "/api/events", json=ev, headers={"Authorization": f"Bearer {write}"}
            )
            assert r.status_code == 201
            assert ("operator", "note", "KR-GT1", "restart test") in site.events()
            assert write not in site.log.read_text() and read not in site.log.read_text()
            # the scrape of the running daemon passes Prometheus' own linter
            promtool_check_metrics(metrics)

            # broker restart while the daemon runs
            broker.stop()
            wait_for(lambda: http_get(site.http_port, "/readyz")[0] == 503, 15, 0.1, "not ready")
            assert http_get(site.http_port, "/healthz")[0] == 200
            time.sleep(2.0)
            broker.start()
            took = wait_for(
                lambda: http_get(site.http_port, "/readyz")[0] == 200, 30, 0.1, "reconnected"
            )
            print(f"broker back: daemon ready again after {took:.1f} s")
            assert took <= 30.0
            second = snapshot_messages(site.prefix, "KR-GT1", time.time() - 1)
            publish_in_background(broker.port, second).join(30)
            wait_for(
                lambda: site.readings() == len(first) + len(second), 20, 0.1, "second readings"
            )
            code, metrics = http_get(site.http_port, "/metrics")
            line = next(
                x for x in metrics.splitlines() if x.startswith("brayscope_broker_reconnects_total")
            )
            assert float(line.split()[-1]) >= 1.0
            # the outage is recorded once the connection is back (written with a tick)
            wait_for(
                lambda: any(k == "reconnect" for _, k, _, _ in site.events()), 10, 0.2,
                "reconnect event",
            )  # fmt: skip
            src, _, unit, detail = next(e for e in site.events() if e[1] == "reconnect")
            outage = json.loads(detail)
            assert src == "daemon" and unit is None
            assert 1.5 <= outage["duration_s"] <= 40.0, outage
            assert site.proc is not None and site.proc.poll() is None
            rc, _ = site.terminate(30)
            assert rc == 0, site.tail()
        finally:
            site.stop()
