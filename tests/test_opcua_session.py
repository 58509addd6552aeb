"""OPC UA: NodeId forms, and a client session against a real asyncua server in the test.

Sources of the check values:

* NodeId text forms ``ns=<idx>;i=|s=|g=|b=`` and ``nsu=<uri>;``: OPC 10000-6 (OPC UA Part 6),
  sections 5.3.1.10 and 5.3.1.11 (from memory); identifiers i= UInt32, namespace UInt16.
* StatusCode severity: the top two bits, 00 Good, 01 Uncertain, 10 Bad (OPC 10000-4, 7.39;
  from memory); the codes themselves (UncertainLastUsableValue, BadSensorFailure) are taken from the
  StatusCode table shipped in asyncua's ``ua.StatusCodes``.
* AccessLevel bit 2 (0x04) = HistoryRead (OPC 10000-3, 8.57; from memory).
* Unit conversions are exact definitions (BIPM SI Brochure, 9th edition): T/K = t/°C +
  273.15; 1 bar = 1e5 Pa; 1 MW = 1e6 W; 1 kg/h = 1/3600 kg/s.
* Server, address space and values: the invented Kestrel Ridge unit KR-GT1 (``opcua_support``).
"""

from __future__ import annotations

import asyncio
import sys
import time
import uuid
from pathlib import Path

import pytest
from asyncua import ua
from opcua_support import NS_URI, CutProxy, KestrelServer, free_port, make_cert
from typed_feed_support import kestrel_routes

from daemon.feeds.opcua import (
    ConnectionLost,
    HistoryRecovered,
    MonitoredItemFailed,
    MonitoredTag,
    MonitoredTagSpec,
    NodeIdError,
    OpcUaBatch,
    OpcUaEndpoint,
    OpcUaSecurity,
    OpcUaSecurityError,
    OpcUaSession,
    parse_node_id,
)
from daemon.types import Quarantined, Reading

UNIT = "KR-GT1"

#: NodeId → measurement of the test tags
TAGS = {
    f"nsu={NS_URI};s=KR-GT1.TT-CD": "compressor_discharge_temperature",
    f"nsu={NS_URI};s=KR-GT1.PT-CD": "compressor_discharge_pressure",
    f"nsu={NS_URI};s=KR-GT1.JT-GEN": "generator_power",
    f"nsu={NS_URI};s=KR-GT1.FQ-GAS": "fuel_mass_flow",
}


# -- NodeIds ------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "kind", "ident", "ns", "uri"),
    [
        ("i=2258", "i", 2258, 0, None),
        ("ns=2;i=4294967295", "i", 4294967295, 2, None),
        ("ns=2;s=KR-GT1.TT-CD", "s", "KR-GT1.TT-CD", 2, None),
        ("ns=3;s=a;b=c", "s", "a;b=c", 3, None),
        ("nsu=urn:kestrel-ridge:gt;s=KR-GT1.TT-CD", "s", "KR-GT1.TT-CD", None, NS_URI),
        (
            "ns=1;g=09087e75-8e5e-499b-954f-f2a9603db28a",
            "g",
            uuid.UUID("09087e75-8e5e-499b-954f-f2a9603db28a"),
            1,
            None,
        ),
        ("ns=4;b=S1ItR1Qx", "b", b"KR-GT1", 4, None),
    ],
)
def test_node_id_forms(
    text: str, kind: str, ident: object, ns: int | None, uri: str | None
) -> None:
    n = parse_node_id(text)
    assert (n.kind, n.identifier, n.namespace_index, n.namespace_uri) == (kind, ident, ns, uri)
    assert parse_node_id(str(n)) == n


@pytest.mark.parametrize(
    ("text", "why"),
    [
        ("KR-GT1.TT-CD", "must start with i=, s=, g= or b="),
        ("ns=x;s=a", "'ns=' needs a number"),
        ("ns=70000;i=1", "above 65535"),
        ("ns=2;i=-1", "integer 0..4294967295"),
        ("i=4294967296", "integer 0..4294967295"),
        ("ns=1;g=not-a-guid", "needs a GUID"),
        ("ns=1;b=***", "base64"),
        ("ns=1;s=", "empty identifier"),
        ("nsu=;s=a", "'nsu=' needs a URI"),
    ],
)
def test_node_id_errors(text: str, why: str) -> None:
    with pytest.raises(NodeIdError, match=why):
        parse_node_id(text)


def test_node_id_in_a_plant_file_model() -> None:
    spec = MonitoredTagSpec.model_validate({"node_id": "ns=2;s=KR-GT1.TT-CD", "deadband_abs": 0.5})
    assert spec.node_id.identifier == "KR-GT1.TT-CD"
    assert spec.model_dump()["node_id"] == "ns=2;s=KR-GT1.TT-CD"
    with pytest.raises(ValueError, match="must start with"):
        MonitoredTagSpec.model_validate({"node_id": "TT-CD"})
    assert parse_node_id("nsu=urn:x;i=5").namespace(["http://opcfoundation.org/UA/", "urn:x"]) == 1
    with pytest.raises(NodeIdError, match="has no namespace"):
        parse_node_id("nsu=urn:y;i=5").namespace(["http://opcfoundation.org/UA/"])


def test_security_settings_refuse_unsafe_combinations() -> None:
    with pytest.raises(ValueError, match="never trusted on first use"):
        OpcUaSecurity(
            policy="Basic256Sha256",
            mode="SignAndEncrypt",
            certificate_file="c",
            private_key_file="k",
        )
    with pytest.raises(ValueError, match="policy 'None' with mode 'None'"):
        OpcUaSecurity(policy="None", mode="SignAndEncrypt")
    with pytest.raises(ValueError, match="never inline"):
        OpcUaSecurity(username="kr-operator")
    with pytest.raises(ValueError, match="Extra inputs"):
        OpcUaSecurity.model_validate({"username": "u", "password": "inline"})


# -- sessions against a real server ---------------------------------------------------------------


def make_tags(tmp_path: Path, **kw: float) -> list[MonitoredTag]:
    routes, _ = kestrel_routes(tmp_path)
    return [
        MonitoredTag(parse_node_id(nid), routes[m], sampling_interval_ms=0.0, **kw)  # type: ignore[arg-type]
        for nid, m in TAGS.items()
    ]


class Collector:
    """Consume a session's batches in the background."""

    def __init__(self, session: OpcUaSession) -> None:
        self.session = session
        self.batches: list[OpcUaBatch] = []
        self.task = asyncio.create_task(self._run())

    async def _run(self) -> None:
        async for b in self.session.batches():
            self.batches.append(b)

    @property
    def readings(self) -> list[Reading]:
        return [r for b in self.batches for r in b.batch.readings]

    @property
    def quarantined(self) -> list[Quarantined]:
        return [q for b in self.batches for q in b.batch.quarantined]

    def events(self, kind: type) -> list:
        return [e for b in self.batches for e in b.events if isinstance(e, kind)]

    def values(self, measurement: str) -> list[float]:
        return [r.value for r in self.readings if r.measurement == measurement]

    async def until(self, pred, timeout: float = 8.0) -> None:  # type: ignore[no-untyped-def]
        deadline = time.monotonic() + timeout
        while not pred():
            if self.task.done():
                self.task.result()
            if time.monotonic() > deadline:
                raise AssertionError(f"not reached within {timeout} s")
            await asyncio.sleep(0.02)


def endpoint(url: str, **kw: object) -> OpcUaEndpoint:
    return OpcUaEndpoint(
        url=url, publishing_interval_ms=50, watchdog_s=0.3, request_timeout_s=2, **kw
    )


async def test_values_timestamps_and_status_codes(tmp_path: Path) -> None:
    async with KestrelServer() as srv:
        session = OpcUaSession(endpoint(srv.url), make_tags(tmp_path), backoff_initial_s=0.1)
        async with session:
            c = Collector(session)
            await session.wait_connected(5)
            # current values read on connect, in SI (exact unit definitions)
            await c.until(lambda: len(c.readings) >= 4)
            got = {r.measurement: r for r in c.readings}
            assert got["compressor_discharge_temperature"].value == pytest.approx(398.85 + 273.15)
            assert got["compressor_discharge_pressure"].value == pytest.approx(14.985e5)
            assert got["fuel_mass_flow"].value == pytest.approx(9720 / 3600)
            assert got["generator_power"].value == pytest.approx(44.4e6, rel=1e-6)  # a Float
            ts = await srv.write("TT-CD", 401.5)
            await srv.write("PT-CD", 15.0, status=ua.StatusCodes.UncertainLastUsableValue)
            await srv.write("FQ-GAS", 9800, status=ua.StatusCodes.BadSensorFailure)
            await c.until(lambda: len(c.readings) >= 6 and c.quarantined)
            assert session.healthy
    cdt = [r for r in c.readings if r.measurement == "compressor_discharge_temperature"][-1]
    assert cdt.value == pytest.approx(401.5 + 273.15)
    assert cdt.source_ts == pytest.approx(ts.timestamp(), abs=1e-6)
    assert cdt.topic == f"{srv.url}#nsu={NS_URI};s=KR-GT1.TT-CD"
    pcd = [r for r in c.readings if r.measurement == "compressor_discharge_pressure"][-1]
    assert pcd.quality == "uncertain" and pcd.value == pytest.approx(15.0e5)
    (bad,) = c.quarantined
    assert (bad.reason, bad.unit, bad.measurement) == ("bad_quality", UNIT, "fuel_mass_flow")
    assert "BadSensorFailure" in bad.detail
    assert f"0x{ua.StatusCodes.BadSensorFailure:08X}" in bad.detail
    assert len(c.values("compressor_discharge_temperature")) == 2  # read + change, no duplicate


async def test_absolute_deadband_and_unknown_node(tmp_path: Path) -> None:
    async with KestrelServer() as srv:
        routes, _ = kestrel_routes(tmp_path)
        tags = [
            MonitoredTag(
                parse_node_id(f"nsu={NS_URI};s=KR-GT1.TT-CD"),
                routes["compressor_discharge_temperature"],
                0.0,
                0.5,
            ),
            MonitoredTag(
                parse_node_id(f"nsu={NS_URI};s=KR-GT1.NOPE"), routes["exhaust_temperature"], 0.0
            ),
        ]
        async with OpcUaSession(endpoint(srv.url), tags) as session:
            c = Collector(session)
            await session.wait_connected(5)
            for v in (400.0, 400.2, 400.4, 401.0):  # 400.2 and 400.4 are within 0.5 of 400.0
                await srv.write("TT-CD", v)
                await asyncio.sleep(0.08)
            await c.until(
                lambda: (
                    401.0 + 273.15
                    in [round(x, 6) for x in c.values("compressor_discharge_temperature")]
                )
            )
            assert not session.healthy  # a monitored item is missing
    assert c.values("compressor_discharge_temperature") == pytest.approx(
        [398.85 + 273.15, 400.0 + 273.15, 401.0 + 273.15]
    )
    (failed,) = c.events(MonitoredItemFailed)
    assert failed.measurement == "exhaust_temperature" and failed.status == "BadNodeIdUnknown"


async def test_server_restart_reconnects_and_resubscribes(tmp_path: Path) -> None:
    async with KestrelServer() as srv:
        session = OpcUaSession(
            endpoint(srv.url), make_tags(tmp_path), backoff_initial_s=0.1, backoff_cap_s=0.5
        )
        async with session:
            c = Collector(session)
            await session.wait_connected(5)
            await srv.write("TT-CD", 402.0)
            await c.until(
                lambda: (
                    402.0 + 273.15
                    in [round(x, 6) for x in c.values("compressor_discharge_temperature")]
                )
            )
            await srv.stop()
            await c.until(lambda: bool(c.events(ConnectionLost)))
            assert not session.connected
            await srv.start()
            await session.wait_connected(10)
            await srv.write("TT-CD", 403.0)
            await c.until(
                lambda: (
                    403.0 + 273.15
                    in [round(x, 6) for x in c.values("compressor_discharge_temperature")]
                )
            )
    (lost,) = c.events(ConnectionLost)
    assert (UNIT, "compressor_discharge_temperature") in lost.inputs
    assert session.stats.connects == 2 and session.stats.reconnects >= 1


async def test_outage_is_read_back_from_history(tmp_path: Path) -> None:
    async with KestrelServer() as srv, CutProxy(srv.port) as proxy:
        ep = endpoint(proxy.url)
        session = OpcUaSession(ep, make_tags(tmp_path), backoff_initial_s=0.2, backoff_cap_s=0.4)
        async with session:
            c = Collector(session)
            await session.wait_connected(5)
            await c.until(lambda: len(c.readings) >= 4)
            proxy.cut()
            await c.until(lambda: bool(c.events(ConnectionLost)))
            during = [await srv.write("TT-CD", 410.0 + i) for i in range(3)]
            await srv.write("FQ-GAS", 9900)  # not historized: only its current value comes back
            proxy.restore()
            await session.wait_connected(10)
            await c.until(
                lambda: bool(c.events(HistoryRecovered)) and len(c.values("fuel_mass_flow")) >= 2
            )
    cdt = [r for r in c.readings if r.measurement == "compressor_discharge_temperature"]
    assert [r.value for r in cdt] == pytest.approx(
        [398.85 + 273.15] + [410.0 + i + 273.15 for i in range(3)]
    )
    assert [r.source_ts for r in cdt[1:]] == pytest.approx(
        [t.timestamp() for t in during], abs=1e-6
    )
    (rec,) = c.events(HistoryRecovered)
    assert rec.values == 3 and rec.node_id.endswith("TT-CD")
    assert c.values("fuel_mass_flow")[-1] == pytest.approx(9900 / 3600)


# -- security -------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def certs(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("opcua-pki")
    server_cert, server_key = make_cert(d, "kr-opcua-server", "urn:kestrel-ridge:opcua-server")
    client_cert, client_key = make_cert(d, "brayscope-client", "urn:kestrel-ridge:brayscope")
    other_cert, _ = make_cert(d, "someone-else", "urn:elsewhere:server")
    trust = d / "trusted"
    trust.mkdir()
    (trust / "kr-opcua-server.der").write_bytes(server_cert.read_bytes())
    untrusted = d / "untrusted"
    untrusted.mkdir()
    (untrusted / "someone-else.der").write_bytes(other_cert.read_bytes())
    return {
        "server_cert": server_cert, "server_key": server_key, "client_cert": client_cert,
        "client_key": client_key, "trust": trust, "untrusted": untrusted,
    }  # fmt: skip


def secure(certs: dict[str, Path], trust: str = "trust", **kw: object) -> OpcUaSecurity:
    return OpcUaSecurity(
        policy="Basic256Sha256",
        mode="SignAndEncrypt",
        certificate_file=str(certs["client_cert"]),
        private_key_file=str(certs["client_key"]),
        trusted_certificates_dir=str(certs[trust]),
        username="kr-operator",
        password_env="KR_OPCUA_PASSWORD",
        **kw,  # type: ignore[arg-type]
    )


async def test_security_policies(tmp_path: Path, certs: dict[str, Path]) -> None:
    tags = make_tags(tmp_path)
    env = {"KR_OPCUA_PASSWORD": "kestrel-ridge-1"}
    async with KestrelServer(
        secure=(certs["server_cert"], certs["server_key"]), users={"kr-operator": "kestrel-ridge-1"}
    ) as srv:
        # SignAndEncrypt with a user name and the password from the environment: works
        async with OpcUaSession(endpoint(srv.url, security=secure(certs)), tags, environ=env) as s:
            c = Collector(s)
            await s.wait_connected(10)
            await c.until(lambda: len(c.readings) >= 4)
        # no security against a server that requires encryption: refused
        async with OpcUaSession(endpoint(srv.url), tags, environ=env) as s:
            with pytest.raises(OpcUaSecurityError, match="refused"):
                await s.wait_connected(10)
        # the wrong password: refused
        wrong = {"KR_OPCUA_PASSWORD": "not-the-password"}
        async with OpcUaSession(
            endpoint(srv.url, security=secure(certs)), tags, environ=wrong
        ) as s:
            with pytest.raises(OpcUaSecurityError, match="BadUserAccessDenied"):
                await s.wait_connected(10)
        # a server certificate outside the trust list: we refuse it
        untrusted = endpoint(srv.url, security=secure(certs, trust="untrusted"))
        async with OpcUaSession(untrusted, tags, environ=env) as s:
            with pytest.raises(OpcUaSecurityError, match="not in the trust list"):
                await s.wait_connected(10)
    # encryption asked for, but the server offers only None: we refuse before any credentials
    async with (
        KestrelServer() as plain,
        OpcUaSession(endpoint(plain.url, security=secure(certs)), tags, environ=env) as s,
    ):
        with pytest.raises(OpcUaSecurityError, match="offers no Basic256Sha256/SignAndEncrypt"):
            await s.wait_connected(10)


def test_password_sources(tmp_path: Path) -> None:
    pw = tmp_path / "opcua.pw"
    pw.write_text("from-a-file\n")
    assert OpcUaSecurity(username="u", password_file=str(pw)).password({}) == "from-a-file"
    assert OpcUaSecurity(username="u", password_env="X").password({"X": "env"}) == "env"
    with pytest.raises(ValueError, match="not set"):
        OpcUaSecurity(username="u", password_env="X").password({})


# -- browsing -------------------------------------------------------------------------------------


async def test_browse_lists_the_kestrel_nodes(tmp_path: Path) -> None:
    from daemon.feeds.opcua.browse import browse

    async with KestrelServer() as srv:
        rows = await browse(endpoint(srv.url), start=f"nsu={NS_URI};s=KR-GT1", depth=1)
        by_name = {r.browse_name.split(":", 1)[1]: r for r in rows}
        assert set(by_name) == {"TT-CD", "PT-CD", "JT-GEN", "FQ-GAS"}
        tt = by_name["TT-CD"]
        assert (tt.node_id, tt.node_class, tt.data_type) == (
            f"nsu={NS_URI};s=KR-GT1.TT-CD",
            "Variable",
            "Double",
        )
        assert (tt.value, tt.status) == ("398.85", "Good")
        # the command a user runs, in its own process, against the same server
        proc = await asyncio.create_subprocess_exec(
            sys.executable, "-m", "daemon.cli", "opcua", "browse", "--endpoint", srv.url,
            "--depth", "2", "--tsv",
            stdout=asyncio.subprocess.PIPE, stderr=asyncio.subprocess.PIPE,
        )  # fmt: skip
        out, errs = await asyncio.wait_for(proc.communicate(), 60)
    assert proc.returncode == 0, errs.decode()
    lines = out.decode().splitlines()
    assert lines[0].split("\t") == [
        "depth", "node_id", "browse_name", "node_class", "data_type", "value", "status",
    ]  # fmt: skip
    fq = [x for x in lines if "FQ-GAS" in x]
    assert fq == [f"1\tnsu={NS_URI};s=KR-GT1.FQ-GAS\t2:FQ-GAS\tVariable\tUInt32\t9720\tGood"]


def test_browse_command_errors(capsys: pytest.CaptureFixture[str]) -> None:
    from daemon.cli import main

    assert main(["opcua", "browse", "--endpoint", "http://x", "--depth", "1"]) == 2
    assert "opc.tcp" in capsys.readouterr().err
    assert main(["opcua", "browse", "--endpoint", "opc.tcp://x:1/", "--username", "u"]) == 2
    assert "never inline" in capsys.readouterr().err
    port = free_port()  # nothing listens there
    assert main(["opcua", "browse", "--endpoint", f"opc.tcp://127.0.0.1:{port}/"]) == 1
    assert "cannot browse" in capsys.readouterr().err
