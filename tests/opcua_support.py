"""A real asyncua server with an invented Kestrel Ridge address space, certificates made in the
test, and a TCP proxy whose connections can be cut (a network outage while the server runs).

Address space (namespace ``urn:kestrel-ridge:gt``)::

    Objects/KR-GT1/            (ns;s=KR-GT1)
        TT-CD   Double  degC   compressor discharge temperature   (historized)
        PT-CD   Double  bar    compressor discharge pressure      (historized)
        JT-GEN  Float   MW     generator power                    (historized)
        FQ-GAS  UInt32  kg/h   fuel flow                          (not historized)
"""

from __future__ import annotations

import asyncio
import contextlib
import datetime as dt
import ipaddress
import socket
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from asyncua import Server, ua
from asyncua.crypto.permission_rules import User, UserRole
from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import rsa
from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID

NS_URI = "urn:kestrel-ridge:gt"
UTC = dt.UTC

#: name → (variant type, initial value, historized)
VARIABLES: dict[str, tuple[ua.VariantType, Any, bool]] = {
    "TT-CD": (ua.VariantType.Double, 398.85, True),
    "PT-CD": (ua.VariantType.Double, 14.985, True),
    "JT-GEN": (ua.VariantType.Float, 44.4, True),
    "FQ-GAS": (ua.VariantType.UInt32, 9720, False),
}


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def make_cert(directory: Path, name: str, uri: str) -> tuple[Path, Path]:
    """A self-signed application instance certificate (RSA 2048, SHA-256, SAN URI + host),
    as OPC 10000-6 6.2.2 asks for Basic256Sha256; returns (cert.der, key.pem)."""
    key = rsa.generate_private_key(public_exponent=65537, key_size=2048)
    subject = x509.Name(
        [
            x509.NameAttribute(NameOID.COMMON_NAME, name),
            x509.NameAttribute(NameOID.ORGANIZATION_NAME, "Kestrel Ridge Energy Park"),
        ]
    )
    now = dt.datetime.now(UTC)
    cert = (
        x509.CertificateBuilder()
        .subject_name(subject)
        .issuer_name(subject)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - dt.timedelta(minutes=5))
        .not_valid_after(now + dt.timedelta(days=2))
        .add_extension(
            x509.SubjectAlternativeName(
                [
                    x509.UniformResourceIdentifier(uri),
                    x509.DNSName("localhost"),
                    x509.DNSName(socket.gethostname()),
                    x509.IPAddress(ipaddress.ip_address("127.0.0.1")),
                ]
            ),
            critical=False,
        )
        .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
        .add_extension(
            x509.KeyUsage(
                digital_signature=True,
                content_commitment=True,
                key_encipherment=True,
                data_encipherment=True,
                key_agreement=False,
                key_cert_sign=False,
                crl_sign=False,
                encipher_only=False,
                decipher_only=False,
            ),
            critical=True,
        )
        .add_extension(
            x509.ExtendedKeyUsage(
                [ExtendedKeyUsageOID.SERVER_AUTH, ExtendedKeyUsageOID.CLIENT_AUTH]
            ),
            critical=False,
        )
        .sign(key, hashes.SHA256())
    )
    cert_path = directory / f"{name}.der"
    key_path = directory / f"{name}-key.pem"
    cert_path.write_bytes(cert.public_bytes(serialization.Encoding.DER))
    key_path.write_bytes(
        key.private_bytes(
            serialization.Encoding.PEM,
            serialization.PrivateFormat.TraditionalOpenSSL,
            serialization.NoEncryption(),
        )
    )
    return cert_path, key_path


class PasswordUsers:
    """User manager of the test server: user name and password from a table."""

    def __init__(self, users: dict[str, str]) -> None:
        self.users = users

    def get_user(
        self,
        iserver: Any,
        username: str | None = None,
        password: str | None = None,
        certificate: Any = None,
    ) -> User | None:
        if username is not None and self.users.get(username) == password:
            return User(role=UserRole.User, name=username)
        return None


@dataclass
class KestrelServer:
    """The test server; ``async with`` starts it, ``stop()``/``start()`` restart it."""

    port: int = field(default_factory=free_port)
    secure: tuple[Path, Path] | None = None  # (cert, key): SignAndEncrypt only, users
    application_uri: str = "urn:kestrel-ridge:opcua-server"
    users: dict[str, str] | None = None
    server: Server | None = None
    nodes: dict[str, Any] = field(default_factory=dict)
    ns: int = 0

    @property
    def url(self) -> str:
        return f"opc.tcp://127.0.0.1:{self.port}/kestrel-ridge/"

    async def __aenter__(self) -> KestrelServer:
        srv = Server(user_manager=PasswordUsers(self.users) if self.users else None)
        await srv.init()
        srv.set_endpoint(self.url)
        srv.set_server_name("Kestrel Ridge test server")
        if self.secure is not None:
            srv.set_security_policy([ua.SecurityPolicyType.Basic256Sha256_SignAndEncrypt])
            await srv.load_certificate(str(self.secure[0]))
            await srv.load_private_key(str(self.secure[1]))
            await srv.set_application_uri(self.application_uri)
            srv.set_identity_tokens([ua.UserNameIdentityToken])
        else:
            srv.set_security_policy([ua.SecurityPolicyType.NoSecurity])
        self.ns = await srv.register_namespace(NS_URI)
        obj = await srv.nodes.objects.add_object(
            ua.NodeId("KR-GT1", self.ns), ua.QualifiedName("KR-GT1", self.ns)
        )
        for name, (vtype, value, hist) in VARIABLES.items():
            var = await obj.add_variable(
                ua.NodeId(f"KR-GT1.{name}", self.ns),
                ua.QualifiedName(name, self.ns),
                ua.Variant(value, vtype),
            )
            if hist:
                await srv.historize_node_data_change(var, period=None, count=10000)
            self.nodes[name] = var
        self.server = srv
        await srv.start()
        return self

    async def __aexit__(self, *exc: object) -> None:
        if self.server is not None:
            with contextlib.suppress(Exception):
                await self.server.stop()

    async def stop(self) -> None:
        assert self.server is not None
        await self.server.stop()

    async def start(self) -> None:
        assert self.server is not None
        await self.server.start()

    async def write(
        self,
        name: str,
        value: Any,
        *,
        status: int = ua.StatusCodes.Good,
        ts: dt.datetime | None = None,
    ) -> dt.datetime:
        """Write a value with a source timestamp (now by default); returns the timestamp."""
        vtype = VARIABLES[name][0]
        when = ts or dt.datetime.now(UTC)
        await self.nodes[name].write_value(
            ua.DataValue(
                ua.Variant(value, vtype),
                ua.StatusCode(status),
                SourceTimestamp=when,
                ServerTimestamp=when,
            )
        )
        return when


class CutProxy:
    """A TCP proxy; ``cut()`` drops every connection and refuses new ones until ``restore()``."""

    def __init__(self, target_port: int) -> None:
        self.target_port = target_port
        self.port = free_port()
        self._open = True
        self._writers: set[asyncio.StreamWriter] = set()
        self._server: asyncio.AbstractServer | None = None

    @property
    def url(self) -> str:
        return f"opc.tcp://127.0.0.1:{self.port}/kestrel-ridge/"

    async def __aenter__(self) -> CutProxy:
        self._server = await asyncio.start_server(self._handle, "127.0.0.1", self.port)
        return self

    async def __aexit__(self, *exc: object) -> None:
        self.cut()
        if self._server is not None:
            self._server.close()

    def cut(self) -> None:
        self._open = False
        for w in list(self._writers):
            w.transport.abort()
        self._writers.clear()

    def restore(self) -> None:
        self._open = True

    async def _handle(self, r: asyncio.StreamReader, w: asyncio.StreamWriter) -> None:
        if not self._open:
            w.transport.abort()
            return
        try:
            ur, uw = await asyncio.open_connection("127.0.0.1", self.target_port)
        except OSError:
            w.transport.abort()
            return
        self._writers.update({w, uw})

        async def pipe(src: asyncio.StreamReader, dst: asyncio.StreamWriter) -> None:
            try:
                while data := await src.read(65536):
                    dst.write(data)
                    await dst.drain()
            except (OSError, ConnectionError):
                pass
            finally:
                dst.transport.abort()

        await asyncio.gather(pipe(r, uw), pipe(ur, w))
