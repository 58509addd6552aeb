"""Helpers of the live-daemon tests: plant files, a private Mosquitto, a QoS-1 publisher.

The plant and its numbers are the invented Kestrel Ridge demonstration units; the unit
conversions used to write payloads in plant units are exact definitions (0 degC = 273.15 K,
1 bar = 1e5 Pa, 1 kPa = 1e3 Pa, 1 h = 3600 s, 1 MW = 1e6 W, 1 % = 0.01).
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import signal
import socket
import stat
import subprocess
import sys
import threading
import time
import uuid
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import paho.mqtt.client as paho

ROOT = Path(__file__).resolve().parents[1]

#: measurement → (plant uom, SI → uom, low, high) for the test tag map.
TAGS: dict[str, tuple[str, Callable[[float], float], float, float]] = {
    "ambient_temperature": ("degC", lambda k: k - 273.15, -40.0, 55.0),
    "ambient_pressure": ("kPa", lambda p: p / 1e3, 80.0, 108.0),
    "ambient_relative_humidity": ("%RH", lambda f: f * 100.0, 0.0, 100.0),
    "compressor_inlet_temperature": ("degC", lambda k: k - 273.15, -40.0, 55.0),
    "compressor_inlet_pressure": ("kPa", lambda p: p / 1e3, 80.0, 108.0),
    "compressor_discharge_temperature": ("degC", lambda k: k - 273.15, 100.0, 560.0),
    "compressor_discharge_pressure": ("bar", lambda p: p / 1e5, 1.0, 30.0),
    "exhaust_temperature": ("degC", lambda k: k - 273.15, 200.0, 700.0),
    "exhaust_pressure": ("kPa", lambda p: p / 1e3, 85.0, 120.0),
    "fuel_mass_flow": ("kg/h", lambda m: m * 3600.0, 0.0, 20000.0),
    "fuel_temperature": ("degC", lambda k: k - 273.15, -20.0, 200.0),
    "generator_power": ("MW", lambda w: w / 1e6, 0.0, 60.0),
}

#: Invented operating points of the demo units [SI] (KR-GT1 as in daemon/examples).
OPERATING_POINTS: dict[str, dict[str, float]] = {
    "KR-GT1": {
        "ambient_temperature": 291.45,
        "ambient_pressure": 100850.0,
        "ambient_relative_humidity": 0.62,
        "compressor_inlet_temperature": 291.05,
        "compressor_inlet_pressure": 99900.0,
        "compressor_discharge_temperature": 672.0,
        "compressor_discharge_pressure": 1498500.0,
        "exhaust_temperature": 820.0,
        "exhaust_pressure": 103900.0,
        "fuel_mass_flow": 2.70,
        "fuel_temperature": 305.0,
        "generator_power": 44.4e6,
    },
    "KR-GT2": {
        "ambient_temperature": 291.45,
        "ambient_pressure": 100850.0,
        "ambient_relative_humidity": 0.62,
        "compressor_inlet_temperature": 291.30,
        "compressor_inlet_pressure": 99750.0,
        "compressor_discharge_temperature": 681.0,
        "compressor_discharge_pressure": 1452000.0,
        "exhaust_temperature": 829.0,
        "exhaust_pressure": 104100.0,
        "fuel_mass_flow": 2.69,
        "fuel_temperature": 304.0,
        "generator_power": 42.6e6,
    },
}

FUEL = (
    '{ composition = { CH4 = 0.931, C2H6 = 0.032, C3H8 = 0.007, "n-C4H10" = 0.002, '
    "N2 = 0.016, CO2 = 0.012 } }"
)
PARAMETERS = {
    "KR-GT1": "{ generator_efficiency = 0.985, combustor_pressure_loss = 0.04 }",
    "KR-GT2": "{ generator_efficiency = 0.982, combustor_pressure_loss = 0.045 }",
}


def require_tools(*tools: str, debian: str) -> dict[str, str]:
    """Paths of command-line tools a test needs; skip (saying which are missing and the Debian
    package that has them), or fail when ``BRAYSCOPE_REQUIRE_SERVICES=1`` (CI installs them)."""
    import pytest

    found = {t: shutil.which(t) for t in tools}
    missing = [t for t, path in found.items() if path is None]
    if missing:
        msg = f"not on PATH: {', '.join(missing)} (Debian package {debian})"
        if os.environ.get("BRAYSCOPE_REQUIRE_SERVICES") == "1":
            pytest.fail(msg + "; BRAYSCOPE_REQUIRE_SERVICES=1, so this is a failure")
        pytest.skip(msg)
    return {t: str(path) for t, path in found.items()}


def run_tool(*cmd: str, cwd: Path) -> None:
    subprocess.run(cmd, cwd=cwd, check=True, capture_output=True, timeout=60)


def make_test_pki(d: Path) -> None:
    """Write ``ca.crt``/``ca.key`` (a self-signed CA, CA:TRUE) and ``server.crt``/``server.key``
    (for 127.0.0.1 and localhost, signed by it) into ``d`` with the ``openssl`` command."""
    run_tool(
        "openssl", "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-sha256", "-days", "2",
        "-keyout", "ca.key", "-out", "ca.crt", "-subj", "/CN=Kestrel Ridge test CA",
        "-addext", "basicConstraints=critical,CA:TRUE",
        "-addext", "keyUsage=critical,keyCertSign,cRLSign",
        cwd=d,
    )  # fmt: skip
    run_tool(
        "openssl", "req", "-newkey", "rsa:2048", "-nodes", "-sha256", "-keyout", "server.key",
        "-out", "server.csr", "-subj", "/CN=localhost",
        cwd=d,
    )  # fmt: skip
    (d / "server.ext").write_text(
        "basicConstraints=CA:FALSE\n"
        "keyUsage=critical,digitalSignature,keyEncipherment\n"
        "extendedKeyUsage=serverAuth\n"
        "subjectAltName=IP:127.0.0.1,DNS:localhost\n"
        "subjectKeyIdentifier=hash\n"
        "authorityKeyIdentifier=keyid,issuer\n"
    )
    run_tool(
        "openssl", "x509", "-req", "-in", "server.csr", "-CA", "ca.crt", "-CAkey", "ca.key",
        "-CAcreateserial", "-out", "server.crt", "-days", "2", "-sha256",
        "-extfile", "server.ext",
        cwd=d,
    )  # fmt: skip


@contextlib.contextmanager
def mosquitto_running(directory: Path, port: int, timeout: float = 20.0) -> Iterator[Path]:
    """Run ``mosquitto -c directory/mosquitto.conf`` until the block ends; yields its log.

    Everything in ``directory`` is made readable for the unprivileged user mosquitto drops to
    when started as root."""
    for p in [directory, *directory.rglob("*")]:
        p.chmod(p.stat().st_mode | stat.S_IRGRP | stat.S_IROTH | stat.S_IXOTH * p.is_dir())
    log = directory / "mosquitto.log"
    with log.open("wb") as out:
        proc = subprocess.Popen(
            [shutil.which("mosquitto") or "mosquitto", "-c", str(directory / "mosquitto.conf")],
            cwd=directory,
            stdout=out,
            stderr=subprocess.STDOUT,
        )
    try:

        def up() -> bool:
            if proc.poll() is not None:
                raise RuntimeError(f"mosquitto exited: {log.read_text(errors='replace')[-2000:]}")
            return reachable("127.0.0.1", port, 0.5)

        wait_for(up, timeout, 0.05, f"mosquitto to listen on {port}")
        yield log
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


def wait_daemon_ready(
    proc: subprocess.Popen[bytes], http_port: int, log: Path, timeout: float = 60.0
) -> float:
    """Wait until the daemon's /readyz answers 200; fail at once if the process exits."""

    def ready() -> bool:
        if proc.poll() is not None:
            raise AssertionError(f"daemon exited {proc.returncode}:\n{log.read_text()[-3000:]}")
        return http_get(http_port, "/readyz")[0] == 200

    return wait_for(ready, timeout, 0.1, "daemon ready")


def ambient_reading(ts: float, unit: str = "KR-GT1", topic: str = "kestrel/gt1/TT-AMB") -> Any:
    """A stored-reading record: ambient temperature 15 degC (288.15 K) at ``ts``."""
    from daemon.types import Reading

    return Reading(
        unit=unit,
        measurement="ambient_temperature",
        value=288.15,
        source_ts=ts,
        received_ts=ts + 0.05,
        quality="good",
        topic=topic,
        raw_value=15.0,
        raw_uom="degC",
    )


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def reachable(host: str, port: int, timeout: float = 0.5) -> bool:
    try:
        with socket.create_connection((host, port), timeout=timeout):
            return True
    except OSError:
        return False


def wait_for(pred: Callable[[], bool], timeout: float, step: float = 0.1, what: str = "") -> float:
    """Poll ``pred`` until true; return the seconds it took (AssertionError on timeout)."""
    t0 = time.monotonic()
    while True:
        if pred():
            return time.monotonic() - t0
        if time.monotonic() - t0 > timeout:
            raise AssertionError(f"timed out after {timeout} s waiting for {what or pred}")
        time.sleep(step)


def topic_of(prefix: str, unit: str, measurement: str) -> str:
    return f"{prefix}/{unit.lower()}/{measurement}"


def plant_toml(
    *,
    prefix: str,
    broker_port: int,
    database_url: str,
    http_port: int,
    client_id: str,
    units: tuple[str, ...] = ("KR-GT1",),
    tick_s: float = 1.0,
    max_age_s: float = 600.0,
    queue_size: int = 10000,
    subscriptions: str = "exact",
    session_expiry_s: int = 3600,
    protocol: str = "5",
) -> str:
    """A plant file for tests: every measurement of the contract on its own topic."""
    out = [
        "[site]",
        'name = "Kestrel Ridge Energy Park"',
        "",
        "[broker]",
        'host = "127.0.0.1"',
        f"port = {broker_port}",
        f'protocol = "{protocol}"',
        f'client_id = "{client_id}"',
        "qos = 1",
        "keepalive_s = 5",
        f"session_expiry_s = {session_expiry_s}",
        f"queue_size = {queue_size}",
        "",
        "[database]",
        f'url = "{database_url}"',
        "",
        "[http]",
        f'bind = "127.0.0.1:{http_port}"',
        "",
        "[daemon]",
        f"tick_s = {tick_s}",
        f'results_topic_prefix = "{prefix}/out"',
        "future_tolerance_s = 300",
        "past_tolerance_s = 86400",
        f'subscriptions = "{subscriptions}"',
        "",
    ]
    for unit in units:
        out += [
            f"[units.{unit}]",
            'unit_type = "gas_turbine"',
            f'description = "test unit {unit}"',
            f"fuel = {FUEL}",
            f"parameters = {PARAMETERS.get(unit, PARAMETERS['KR-GT1'])}",
            "baseline = { compressor_isentropic_efficiency = 0.87 }",
            "",
        ]
        for m, (uom, _, lo, hi) in TAGS.items():
            out += [
                f"  [[units.{unit}.tags]]",
                f'  topic = "{topic_of(prefix, unit, m)}"',
                f'  measurement = "{m}"',
                f'  uom = "{uom}"',
                f"  low = {lo}",
                f"  high = {hi}",
                f"  max_age_s = {max_age_s}",
                "",
            ]
    return "\n".join(out) + "\n"


def write_plant(
    directory: Path,
    *,
    database_url: str,
    broker_port: int = 1883,
    name: str = "plant.toml",
    prefix: str | None = None,
    client_id: str | None = None,
    edit: Callable[[str], str] | None = None,
    **kw: Any,
) -> tuple[Path, str, str]:
    """Write a :func:`plant_toml` file (a fresh topic prefix and client id unless given, a free
    HTTP port, sessions the shared broker forgets after 120 s); ``edit`` may change the text.

    Returns
    -------
    (Path, str, str)
        The file, the topic prefix and the client id.
    """
    prefix = prefix or f"bstest/{uuid.uuid4().hex[:10]}"
    client_id = client_id or f"bs-test-{uuid.uuid4().hex[:8]}"
    kw.setdefault("http_port", free_port())
    kw.setdefault("session_expiry_s", 120)
    text = plant_toml(
        prefix=prefix, broker_port=broker_port, database_url=database_url, client_id=client_id, **kw
    )
    path = directory / name
    path.write_text(edit(text) if edit is not None else text)
    return path, prefix, client_id


def payload(measurement: str, si_value: float, ts: float, **extra: Any) -> bytes:
    """A ``{"value": .., "ts": ..}`` payload in the test tag's plant unit."""
    _uom, conv, _, _ = TAGS[measurement]
    return json.dumps({"value": conv(si_value), "ts": ts, **extra}).encode()


def snapshot_messages(
    prefix: str, unit: str, ts: float, scale: float = 1.0
) -> list[tuple[str, bytes]]:
    """One message per measurement of ``unit``'s operating point (flows and power scaled)."""
    pt = OPERATING_POINTS[unit]
    msgs = []
    for m, v in pt.items():
        value = v * scale if m in ("fuel_mass_flow", "generator_power") else v
        msgs.append((topic_of(prefix, unit, m), payload(m, value, ts)))
    return msgs


# --------------------------------------------------------------------------------------------
# A private Mosquitto (can be killed and restarted without touching the shared one)
# --------------------------------------------------------------------------------------------


@dataclass
class PrivateMosquitto:
    directory: Path
    port: int = field(default_factory=free_port)
    proc: subprocess.Popen[bytes] | None = None

    @property
    def describe(self) -> str:
        return f"private mosquitto (from PATH) at 127.0.0.1:{self.port}"

    def start(self) -> None:
        exe = shutil.which("mosquitto")
        if exe is None:
            raise RuntimeError("mosquitto not on PATH")
        self.directory.mkdir(parents=True, exist_ok=True)
        conf = self.directory / "mosquitto.conf"
        conf.write_text(
            f"listener {self.port} 127.0.0.1\n"
            "allow_anonymous true\n"
            "persistence true\n"
            f"persistence_location {self.directory}/\n"
            "autosave_interval 1\n"
            "max_queued_messages 0\n"
            "max_inflight_messages 0\n"
            "log_dest none\n"
        )
        self.proc = subprocess.Popen(
            [exe, "-c", str(conf)],
            cwd=self.directory,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        wait_for(lambda: reachable("127.0.0.1", self.port), 10, 0.05, "mosquitto to listen")

    def stop(self, sig: int = signal.SIGTERM) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.send_signal(sig)
            try:
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
        self.proc = None


@contextlib.contextmanager
def private_mosquitto(directory: Path) -> Iterator[PrivateMosquitto]:
    b = PrivateMosquitto(directory)
    b.start()
    try:
        yield b
    finally:
        b.stop()


class Publisher:
    """Blocking QoS-1 publisher (paho, MQTT 5) used by the tests to play the plant."""

    def __init__(self, port: int, client_id: str) -> None:
        self.client = paho.Client(
            paho.CallbackAPIVersion.VERSION2, client_id=client_id, protocol=paho.MQTTv5
        )
        self.client.max_inflight_messages_set(500)
        self.client.max_queued_messages_set(0)
        self.client.connect("127.0.0.1", port, keepalive=30)
        self.client.loop_start()
        self._infos: list[paho.MQTTMessageInfo] = []

    def publish(self, topic: str, data: bytes, qos: int = 1, retain: bool = False) -> None:
        self._infos.append(self.client.publish(topic, data, qos=qos, retain=retain))

    def flush(self, timeout: float = 60.0) -> None:
        deadline = time.monotonic() + timeout
        for info in self._infos:
            info.wait_for_publish(max(0.1, deadline - time.monotonic()))
        self._infos.clear()

    def close(self) -> None:
        with contextlib.suppress(Exception):
            self.flush(10)
        self.client.loop_stop()
        self.client.disconnect()


class Subscriber:
    """Collects messages of a topic filter (paho, MQTT 5)."""

    def __init__(self, port: int, topic: str) -> None:
        self.messages: dict[str, list[bytes]] = {}
        self.retained: dict[str, bytes] = {}
        self._lock = threading.Lock()
        self.client = paho.Client(paho.CallbackAPIVersion.VERSION2, protocol=paho.MQTTv5)

        def on_message(_c: Any, _u: Any, m: paho.MQTTMessage) -> None:
            with self._lock:
                self.messages.setdefault(m.topic, []).append(bytes(m.payload))
                if m.retain:
                    self.retained[m.topic] = bytes(m.payload)

        self.client.on_message = on_message
        self.client.connect("127.0.0.1", port, keepalive=30)
        self.client.subscribe(topic, qos=1)
        self.client.loop_start()

    def last(self, topic: str) -> bytes | None:
        with self._lock:
            got = self.messages.get(topic)
            return got[-1] if got else None

    def close(self) -> None:
        self.client.loop_stop()
        self.client.disconnect()


def run_daemon(
    plant: Path,
    log: Path,
    *extra: str,
    env_extra: dict[str, str] | None = None,
    launcher: tuple[str, ...] = (),
) -> subprocess.Popen[bytes]:
    """Start ``brayscope run -c plant`` as a child process (logs to ``log``); ``launcher`` is
    a command that runs it (e.g. one that restricts the process as its service unit does)."""
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + (
        os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else ""
    )
    for k in list(env):
        if k.startswith("BRAYSCOPE_") and k not in ("BRAYSCOPE_REQUIRE_SERVICES",):
            del env[k]
    env.update(env_extra or {})
    with log.open("ab") as fh:
        return subprocess.Popen(
            [*launcher, sys.executable, "-m", "daemon.cli", "run", "-c", str(plant), *extra],
            cwd=plant.parent,
            env=env,
            stdout=fh,
            stderr=fh,
        )


def http_get(port: int, path: str, timeout: float = 2.0) -> tuple[int, str]:
    import httpx

    try:
        r = httpx.get(f"http://127.0.0.1:{port}{path}", timeout=timeout)
    except httpx.HTTPError:
        return 0, ""
    return r.status_code, r.text


def promtool_check_metrics(text: str) -> bool:
    """Run Prometheus' own linter, ``promtool check metrics`` (Debian package ``prometheus``),
    on a scrape; assert that it passes clean.  Returns False, saying why, when promtool is
    not installed (a failure with BRAYSCOPE_REQUIRE_SERVICES=1, as in CI)."""
    import pytest

    exe = shutil.which("promtool")
    if exe is None:
        why = "promtool not installed (Debian package prometheus): metrics lint not run"
        if os.environ.get("BRAYSCOPE_REQUIRE_SERVICES") == "1":
            pytest.fail(why + " and BRAYSCOPE_REQUIRE_SERVICES=1")
        print(why)
        return False
    proc = subprocess.run(
        [exe, "check", "metrics"],
        check=False,
        input=text,
        capture_output=True,
        text=True,
        timeout=60,
    )
    print(f"promtool check metrics ({exe}): exit {proc.returncode}")
    assert proc.returncode == 0 and not proc.stdout.strip() and not proc.stderr.strip(), (
        proc.stdout + proc.stderr
    )
    return True
