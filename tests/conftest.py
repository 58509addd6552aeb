"""Shared pytest configuration for brayscope's tests (helpers may append fixtures here)."""

from __future__ import annotations

# --------------------------------------------------------------------------------------------
# MQTT broker for tests (appended by the feed helper)
#
# Order: env BRAYSCOPE_TEST_MQTT=host:port, else the loopback Mosquitto at 127.0.0.1:1883;
# when that is unreachable: BRAYSCOPE_REQUIRE_SERVICES=1 (CI) fails the test, otherwise a
# private `mosquitto -p PORT` from PATH is started in a temporary directory, else the embedded
# amqtt broker (MQTT 3.1.1 only; MQTT 5 tests skip).  Each test using the `mqtt_broker`
# fixture records the broker in its user_properties; the run header names it too.
# --------------------------------------------------------------------------------------------
import dataclasses as _dc
import os as _os
import shutil as _shutil
import socket as _socket
import subprocess as _subprocess
import sys as _sys
import time as _time
from collections.abc import Iterator as _Iterator
from pathlib import Path as _Path

import pytest as _pytest


@_dc.dataclass(frozen=True)
class MqttBroker:
    """A broker the tests may use: address, what it is, whether it speaks MQTT 5, and whether
    it redelivers unacknowledged QoS-1 messages of a persistent session after a reconnect
    (Mosquitto does; the embedded amqtt fallback was seen not to)."""

    host: str
    port: int
    kind: str
    supports_v5: bool
    redelivers: bool = True

    def require(self, *, v5: bool = False, redelivery: bool = False) -> None:
        """Skip the calling test, saying why, when this broker lacks what it needs."""
        if v5 and not self.supports_v5:
            _pytest.skip(f"needs MQTT 5; {self.describe()} does not speak it (install Mosquitto)")
        if redelivery and not self.redelivers:
            _pytest.skip(
                f"needs redelivery of unacknowledged QoS-1 messages after a reconnect; "
                f"{self.describe()} does not redeliver them (install Mosquitto)"
            )

    def describe(self) -> str:
        return f"{self.kind} at {self.host}:{self.port} (MQTT 5: {'yes' if self.supports_v5 else 'no'})"


def _mqtt_target() -> tuple[str, int, str]:
    env = _os.environ.get("BRAYSCOPE_TEST_MQTT", "").strip()
    if env:
        host, _, port = env.rpartition(":")
        return host or "127.0.0.1", int(port), "broker from BRAYSCOPE_TEST_MQTT"
    return "127.0.0.1", 1883, "loopback broker"


def _reachable(host: str, port: int, timeout: float = 1.0) -> bool:
    try:
        with _socket.create_connection((host, port), timeout=timeout):
            return True
    except OSError:
        return False


def _free_port() -> int:
    with _socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _wait_port(host: str, port: int, proc: _subprocess.Popen[bytes], seconds: float = 10.0) -> None:
    deadline = _time.monotonic() + seconds
    while _time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"broker process exited with {proc.returncode}")
        if _reachable(host, port, 0.2):
            return
        _time.sleep(0.05)
    raise RuntimeError(f"broker did not listen on {host}:{port} within {seconds} s")


def pytest_report_header(config: _pytest.Config) -> list[str]:
    host, port, what = _mqtt_target()
    if _reachable(host, port):
        return [f"mqtt: {what} at {host}:{port} is reachable and used"]
    if _os.environ.get("BRAYSCOPE_REQUIRE_SERVICES") == "1":
        return [f"mqtt: {what} at {host}:{port} UNREACHABLE (BRAYSCOPE_REQUIRE_SERVICES=1: fail)"]
    fallback = "private mosquitto from PATH" if _shutil.which("mosquitto") else "embedded amqtt"
    return [f"mqtt: {what} at {host}:{port} unreachable; using a {fallback}"]


@_pytest.fixture(scope="session")
def _mqtt_broker_session(tmp_path_factory: _pytest.TempPathFactory) -> _Iterator[MqttBroker]:
    host, port, what = _mqtt_target()
    if _reachable(host, port):
        yield MqttBroker(host, port, what, supports_v5=True)
        return
    if _os.environ.get("BRAYSCOPE_REQUIRE_SERVICES") == "1":
        _pytest.fail(f"{what} at {host}:{port} is unreachable and BRAYSCOPE_REQUIRE_SERVICES=1")
    tmp: _Path = tmp_path_factory.mktemp("mqtt-broker")
    port = _free_port()
    mosquitto = _shutil.which("mosquitto")
    if mosquitto:
        conf = tmp / "mosquitto.conf"
        conf.write_text(
            f"listener {port} 127.0.0.1\nallow_anonymous true\npersistence false\n"
            "max_queued_messages 100000\n"
        )
        proc = _subprocess.Popen(
            [mosquitto, "-c", str(conf)],
            cwd=tmp,
            stdout=_subprocess.DEVNULL,
            stderr=_subprocess.DEVNULL,
        )
        broker = MqttBroker("127.0.0.1", port, "private mosquitto", supports_v5=True)
    else:
        conf = tmp / "amqtt.yaml"
        conf.write_text(
            f"listeners:\n  default:\n    type: tcp\n    bind: 127.0.0.1:{port}\n"
            "plugins:\n  amqtt.plugins.authentication.AnonymousAuthPlugin:\n"
            "    allow_anonymous: true\n"
        )
        amqtt = _Path(_sys.executable).with_name("amqtt")
        proc = _subprocess.Popen(
            [str(amqtt), "-c", str(conf)],
            cwd=tmp,
            stdout=_subprocess.DEVNULL,
            stderr=_subprocess.DEVNULL,
        )
        broker = MqttBroker(
            "127.0.0.1", port, "embedded amqtt (3.1.1 only)", supports_v5=False, redelivers=False
        )
    try:
        _wait_port("127.0.0.1", port, proc)
        yield broker
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=10)
        except _subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


@_pytest.fixture
def mqtt_broker(_mqtt_broker_session: MqttBroker, request: _pytest.FixtureRequest) -> MqttBroker:
    """The MQTT broker for this test (recorded in the test's user_properties)."""
    request.node.user_properties.append(("mqtt_broker", _mqtt_broker_session.describe()))
    return _mqtt_broker_session


# --------------------------------------------------------------------------------------------
# Databases for tests (appended by the storage helper)
#
# `store_url` is parametrised over SQLite (a file in tmp_path) and PostgreSQL at
# BRAYSCOPE_TEST_POSTGRES_URL (default postgresql+psycopg://postgres@127.0.0.1:5432/test).  On
# PostgreSQL each test gets a fresh schema (search_path set in the URL), dropped afterwards, so
# parallel runs never collide.  PostgreSQL unreachable: the test is skipped with the reason,
# unless BRAYSCOPE_REQUIRE_SERVICES=1 (CI), which fails it.  Each test records the database it
# used in its user_properties; the run header says whether PostgreSQL was reachable.
# --------------------------------------------------------------------------------------------
_PG_DEFAULT_URL = "postgresql+psycopg://postgres@127.0.0.1:5432/test"


def _pg_url() -> str:
    return _os.environ.get("BRAYSCOPE_TEST_POSTGRES_URL", "").strip() or _PG_DEFAULT_URL


def _pg_probe() -> str | None:
    """None when PostgreSQL answers, else the reason it does not."""
    import sqlalchemy as _sa

    engine = _sa.create_engine(_pg_url(), connect_args={"connect_timeout": 3})
    try:
        with engine.connect() as conn:
            conn.execute(_sa.text("SELECT 1"))
        return None
    except Exception as exc:  # any failure means "not usable for tests"
        return f"{exc.__class__.__name__}: {str(exc).splitlines()[0] if str(exc) else ''}"
    finally:
        engine.dispose()


def _pg_shown() -> str:
    from sqlalchemy.engine import make_url as _make_url

    return _make_url(_pg_url()).render_as_string(hide_password=True)


class _PostgresHeader:
    """Adds the PostgreSQL line to the run header (a plug-in object, so the MQTT header
    function above stays the only module-level ``pytest_report_header``)."""

    def pytest_report_header(self, config: _pytest.Config) -> list[str]:
        why = _pg_probe()
        if why is None:
            return [f"services: postgresql at {_pg_shown()} reachable and used"]
        if _os.environ.get("BRAYSCOPE_REQUIRE_SERVICES") == "1":
            return [f"services: postgresql at {_pg_shown()} UNREACHABLE ({why}; tests fail)"]
        return [f"services: postgresql at {_pg_shown()} unreachable ({why}; tests skip)"]


def pytest_configure(config: _pytest.Config) -> None:
    config.pluginmanager.register(_PostgresHeader(), "brayscope-postgres-header")


@_pytest.fixture(scope="session")
def _pg_session() -> str | None:
    """Probe PostgreSQL once per session: None when reachable, else the reason."""
    return _pg_probe()


@_pytest.fixture(params=["sqlite", "postgresql"])
def store_url(
    request: _pytest.FixtureRequest, tmp_path: _Path, _pg_session: str | None
) -> _Iterator[str]:
    """A SQLAlchemy URL of an empty database: SQLite file or a fresh PostgreSQL schema."""
    if request.param == "sqlite":
        path = tmp_path / "brayscope-test.sqlite"
        request.node.user_properties.append(("database", f"sqlite file {path}"))
        print(f"database: sqlite file {path}")
        yield f"sqlite:///{path}"
        return
    if _pg_session is not None:
        msg = f"postgresql at {_pg_shown()} unreachable: {_pg_session}"
        if _os.environ.get("BRAYSCOPE_REQUIRE_SERVICES") == "1":
            _pytest.fail(msg + " (BRAYSCOPE_REQUIRE_SERVICES=1)")
        _pytest.skip(msg)
    import uuid as _uuid

    import sqlalchemy as _sa
    from sqlalchemy.engine import make_url as _make_url

    schema = f"bs_test_{_os.getpid()}_{_uuid.uuid4().hex[:10]}"
    admin = _sa.create_engine(_pg_url())
    with admin.begin() as conn:
        conn.execute(_sa.text(f'CREATE SCHEMA "{schema}"'))
    url = _make_url(_pg_url()).update_query_dict({"options": f"-c search_path={schema}"})
    request.node.user_properties.append(
        ("database", f"postgresql at {_pg_shown()} schema {schema}")
    )
    print(f"database: postgresql at {_pg_shown()} schema {schema}")
    try:
        yield url.render_as_string(hide_password=False)
    finally:
        with admin.begin() as conn:
            conn.execute(_sa.text(f'DROP SCHEMA IF EXISTS "{schema}" CASCADE'))
        admin.dispose()
