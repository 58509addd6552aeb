"""MQTT over TLS with password authentication against a real Mosquitto (reliability item 14).

A private CA and a server certificate are generated with the ``openssl`` command line, a
private ``mosquitto`` is started on a free loopback port with a TLS listener, a password file
(``mosquitto_passwd``) and anonymous access off.  Checked:

* anonymous and wrong-password clients are refused with the CONNACK reason codes of MQTT 5.0
  (OASIS standard, 2019, 3.2.2.2: 0x86 "Bad User Name or Password", 0x87 "Not authorized");
* a client that does not trust the private CA fails certificate verification, and a plaintext
  client cannot talk to the TLS listener (TLS 1.2/1.3 handshake first, RFC 8446 §2);
* ``daemon.feeds.mqtt.MqttFeed``, built the way the runtime builds it from the plant file
  (``broker.tls``, ``ca_file``, ``username``, ``password_file`` → ``daemon.config`` and
  ``daemon.runtime.tls_context_for``), receives and commits readings over TLS.

Skipped, with the reason, when ``mosquitto``, ``mosquitto_passwd`` or ``openssl`` is not on
PATH (CI machines without them); the development machines have all three.
"""

from __future__ import annotations

import asyncio
import contextlib
import gc
import shutil
import ssl
import tempfile
import time
import uuid
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import aiomqtt
import pytest
from live_support import (
    free_port,
    make_test_pki,
    mosquitto_running,
    payload,
    plant_toml,
    run_tool,
    topic_of,
)

from daemon.config import load_plant
from daemon.feeds.decode import Batch, Decoder
from daemon.feeds.mqtt import MqttFeed
from daemon.runtime import tls_context_for

TOOLS = ("mosquitto", "mosquitto_passwd", "openssl")
MISSING = [t for t in TOOLS if shutil.which(t) is None]
pytestmark = [
    pytest.mark.services,
    pytest.mark.skipif(bool(MISSING), reason=f"not on PATH: {', '.join(MISSING)}"),
]

USER = "brayscope-kestrel"
PASSWORD = "kestrel-" + uuid.uuid4().hex  # random per run: never a real secret
TIMEOUT_S = 20.0


@dataclass(frozen=True)
class TlsBroker:
    port: int
    ca_file: Path
    directory: Path


@pytest.fixture(scope="module")
def tls_broker() -> Iterator[TlsBroker]:
    # a directory of our own, readable by the unprivileged user mosquitto may drop to
    d = Path(tempfile.mkdtemp(prefix="brayscope-tls-"))
    try:
        make_test_pki(d)
        run_tool("mosquitto_passwd", "-b", "-c", "passwd", USER, PASSWORD, cwd=d)
        port = free_port()
        (d / "mosquitto.conf").write_text(
            "per_listener_settings false\n"
            "allow_anonymous false\n"
            f"password_file {d / 'passwd'}\n"
            "persistence false\n"
            f"listener {port} 127.0.0.1\n"
            f"cafile {d / 'ca.crt'}\n"
            f"certfile {d / 'server.crt'}\n"
            f"keyfile {d / 'server.key'}\n"
            "tls_version tlsv1.2\n"
        )
        with mosquitto_running(d, port, TIMEOUT_S):
            yield TlsBroker(port, d / "ca.crt", d)
    finally:
        shutil.rmtree(d, ignore_errors=True)


def _ctx(ca: Path | None) -> ssl.SSLContext:
    return ssl.create_default_context(cafile=str(ca) if ca is not None else None)


async def _connect(
    b: TlsBroker, ctx: ssl.SSLContext | None, timeout: float = TIMEOUT_S, **kw: Any
) -> None:
    async with aiomqtt.Client(
        "127.0.0.1",
        b.port,
        identifier=f"bs-tls-{uuid.uuid4().hex[:8]}",
        protocol=aiomqtt.ProtocolVersion.V5,
        tls_context=ctx,
        timeout=timeout,
        **kw,
    ) as client:
        await client.publish("kestrel/tls/probe", b"1", qos=1)


def _code(exc: BaseException) -> int | None:
    rc = getattr(exc, "rc", None)
    value = getattr(rc, "value", rc)
    return int(value) if isinstance(value, int) else None


async def test_anonymous_client_is_refused(tls_broker: TlsBroker) -> None:
    with pytest.raises(aiomqtt.MqttError) as info:
        await _connect(tls_broker, _ctx(tls_broker.ca_file))
    # MQTT 5.0 3.2.2.2: 0x86 bad user name or password / 0x87 not authorized
    assert _code(info.value) in (0x86, 0x87), repr(info.value)


async def test_wrong_password_is_refused(tls_broker: TlsBroker) -> None:
    with pytest.raises(aiomqtt.MqttError) as info:
        await _connect(tls_broker, _ctx(tls_broker.ca_file), username=USER, password="wrong")
    assert _code(info.value) in (0x86, 0x87), repr(info.value)


async def test_right_credentials_connect(tls_broker: TlsBroker) -> None:
    await _connect(tls_broker, _ctx(tls_broker.ca_file), username=USER, password=PASSWORD)


async def test_untrusted_ca_fails_verification(tls_broker: TlsBroker) -> None:
    # the system trust store does not know our private CA: certificate verification fails
    with pytest.raises((aiomqtt.MqttError, ssl.SSLError)) as info:
        await _connect(tls_broker, _ctx(None), username=USER, password=PASSWORD)
    assert "certificate verify failed" in str(info.value).lower(), repr(info.value)
    # paho-mqtt 2.2 does not close the socket of a failed TLS handshake (a ResourceWarning
    # later): close what it left behind towards our broker
    _close_leaked_sockets(tls_broker.port)


def _close_leaked_sockets(port: int) -> None:
    for obj in gc.get_objects():
        if isinstance(obj, ssl.SSLSocket) and obj.fileno() != -1:
            with contextlib.suppress(OSError):
                if obj.getpeername()[1] == port:
                    obj.close()


async def test_plaintext_client_gets_no_connack(tls_broker: TlsBroker) -> None:
    # a plaintext MQTT client gets no CONNACK from a TLS listener
    with pytest.raises(aiomqtt.MqttError):
        await asyncio.wait_for(
            _connect(tls_broker, None, timeout=3.0, username=USER, password=PASSWORD),
            TIMEOUT_S,
        )


def _tls_plant(tmp_path: Path, b: TlsBroker) -> Any:
    prefix = f"bstls/{uuid.uuid4().hex[:10]}"
    text = plant_toml(
        prefix=prefix,
        broker_port=b.port,
        database_url="sqlite://",
        http_port=free_port(),
        client_id=f"bs-tls-{uuid.uuid4().hex[:8]}",
        session_expiry_s=60,
    )
    pw = tmp_path / "broker.pw"
    pw.write_text(PASSWORD + "\n")
    pw.chmod(0o600)
    shutil.copy(b.ca_file, tmp_path / "kestrel-ca.crt")
    broker_lines = (
        "tls = true\n"
        'ca_file = "kestrel-ca.crt"\n'  # relative to the plant file
        f'username = "{USER}"\n'
        'password_file = "broker.pw"\n'
    )
    assert "[broker]\n" in text
    text = text.replace("[broker]\n", "[broker]\n" + broker_lines, 1)
    path = tmp_path / "plant.toml"
    path.write_text(text)
    plant = load_plant(path)
    return plant, prefix, path.parent


async def test_feed_receives_over_tls_with_the_plant_file_credentials(
    tls_broker: TlsBroker, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.delenv("BRAYSCOPE_BROKER_PASSWORD", raising=False)
    monkeypatch.delenv("BRAYSCOPE_BROKER_PASSWORD_FILE", raising=False)
    plant, prefix, base_dir = _tls_plant(tmp_path, tls_broker)
    assert plant.broker.tls and plant.broker.password is not None
    assert PASSWORD not in repr(plant.broker)  # a SecretStr, never shown
    ctx = tls_context_for(plant.broker, base_dir)  # what the runtime passes to the feed
    assert ctx is not None and ctx.verify_mode == ssl.CERT_REQUIRED and ctx.check_hostname
    committed: list[Batch] = []

    async def commit(batch: Batch) -> None:
        committed.append(batch)

    feed = MqttFeed(
        plant.broker,
        Decoder.from_plant(plant),
        commit=commit,
        username=plant.broker.username or None,
        password=plant.broker.password.get_secret_value(),
        tls_context=ctx,
        filters=plant.subscriptions(),
    )
    ts = time.time()
    values = {"generator_power": 44.4e6, "ambient_temperature": 291.45}
    got: dict[str, float] = {}
    async with feed:
        await feed.wait_connected(TIMEOUT_S)
        assert feed.connected
        await _publish(
            tls_broker,
            [(topic_of(prefix, "KR-GT1", m), payload(m, v, ts)) for m, v in values.items()],
        )

        async def collect() -> None:
            async for batch in feed.batches():
                for r in batch.readings:
                    got[r.measurement] = r.value
                if set(got) >= set(values):
                    return

        await asyncio.wait_for(collect(), TIMEOUT_S)
    assert got["generator_power"] == pytest.approx(44.4e6, rel=1e-5)
    assert got["ambient_temperature"] == pytest.approx(291.45, abs=0.01)
    assert sum(len(b.readings) for b in committed) >= 2


async def _publish(b: TlsBroker, msgs: list[tuple[str, bytes]]) -> None:
    async with aiomqtt.Client(
        "127.0.0.1",
        b.port,
        identifier=f"bs-tls-pub-{uuid.uuid4().hex[:8]}",
        protocol=aiomqtt.ProtocolVersion.V5,
        tls_context=_ctx(b.ca_file),
        username=USER,
        password=PASSWORD,
        timeout=TIMEOUT_S,
    ) as client:
        for topic, data in msgs:
            await client.publish(topic, data, qos=1)
