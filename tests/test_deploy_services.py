"""deploy/ against real services: the Mosquitto ACL, the PostgreSQL roles, backup and restore,
and the disk figures of docs/deployment.md.

What the checks rest on:
- MQTT 5.0 (OASIS standard, 2019): 3.9.3 SUBACK reason codes (0x01 granted QoS 1, 0x87 not
  authorized) and 3.4.2.1 PUBACK reason codes (0x00 success, 0x87 not authorized);
  mosquitto.conf(5) for ``acl_file``, ``password_file``, ``per_listener_settings``.
- PostgreSQL 15 documentation, "Privileges" (5.7), ALTER DEFAULT PRIVILEGES, pg_dump and
  pg_restore (custom format, ``--create``): a restored database has its objects, owners and
  grants back.
- SQLite documentation, "The Online Backup API" and the ``.backup`` command of the sqlite3
  shell: a consistent copy of a database in use; "PRAGMA integrity_check" returns ``ok``.

Each test prints the broker or database it used.  The tools come from the Debian packages
``mosquitto``, ``openssl``, ``postgresql-client`` and ``sqlite3``; a missing one skips the test
with the reason, or fails it in CI (``BRAYSCOPE_REQUIRE_SERVICES=1``).
"""

from __future__ import annotations

import contextlib
import json
import os
import re
import shutil
import signal
import sqlite3
import subprocess
import sys
import tempfile
import threading
import time
import uuid
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import paho.mqtt.client as paho
import pytest
import sqlalchemy as sa
from live_support import (
    ROOT,
    ambient_reading,
    free_port,
    make_test_pki,
    mosquitto_running,
    require_tools,
    run_daemon,
    run_tool,
    wait_daemon_ready,
    wait_for,
)

from daemon.storage import ResultRow, Store

pytestmark = pytest.mark.services

DEPLOY = ROOT / "deploy"
DOC = ROOT / "docs" / "deployment.md"
EXAMPLE = ROOT / "daemon" / "examples" / "kestrel-ridge.toml"
TIMEOUT_S = 20.0

GRANTED_QOS1 = 0x01
NOT_AUTHORIZED = 0x87
SUCCESS = 0x00


# ----------------------------------------------------------------------------------------------
# Mosquitto with deploy/mosquitto/brayscope.conf.example and acl.example
# ----------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class AclBroker:
    port: int
    ca_file: Path
    passwords: dict[str, str]


@pytest.fixture(scope="module")
def acl_broker() -> Iterator[AclBroker]:
    """A Mosquitto started with the shipped example configuration and ACL; only the file
    locations and the port are replaced."""
    require_tools("mosquitto", "mosquitto_passwd", "openssl", debian="mosquitto, openssl")
    # a directory the unprivileged user mosquitto drops to (when started as root) can read
    d = Path(tempfile.mkdtemp(prefix="brayscope-acl-"))
    try:
        (d / "certs").mkdir()
        make_test_pki(d / "certs")
        passwords = {u: f"{u}-{uuid.uuid4().hex}" for u in ("brayscope", "kestrel-gateway")}
        passwords["kestrel-dashboard"] = f"dash-{uuid.uuid4().hex}"
        for i, (user, password) in enumerate(passwords.items()):
            create = ["-c"] if i == 0 else []
            run_tool("mosquitto_passwd", "-b", *create, "passwd", user, password, cwd=d)
        shutil.copy(DEPLOY / "mosquitto" / "acl.example", d / "brayscope.acl")
        port = free_port()
        conf = (DEPLOY / "mosquitto" / "brayscope.conf.example").read_text()
        assert "listener 8883\n" in conf and "/etc/mosquitto/" in conf
        conf = conf.replace("listener 8883\n", f"listener {port} 127.0.0.1\n")
        conf = conf.replace("/etc/mosquitto/", f"{d}/").replace("/var/lib/mosquitto/", f"{d}/")
        (d / "mosquitto.conf").write_text(conf + "log_dest stderr\n")
        with mosquitto_running(d, port, TIMEOUT_S):
            d.chmod(0o777)  # the persistence file, written by the user mosquitto drops to
            print(f"broker: private mosquitto with deploy/mosquitto/*.example at 127.0.0.1:{port}")
            yield AclBroker(port, d / "certs" / "ca.crt", passwords)
    finally:
        shutil.rmtree(d, ignore_errors=True)


class Client:
    """A paho MQTT 5 client over TLS that records SUBACK/PUBACK reason codes and messages."""

    def __init__(self, broker: AclBroker, user: str | None, password: str | None = None) -> None:
        self.client = paho.Client(
            paho.CallbackAPIVersion.VERSION2,
            client_id=f"bs-acl-{uuid.uuid4().hex[:8]}",
            protocol=paho.MQTTv5,
        )
        self.client.tls_set(ca_certs=str(broker.ca_file))
        if user is not None:
            self.client.username_pw_set(user, password or broker.passwords[user])
        self.connack: list[int] = []
        self.subacks: dict[int, list[int]] = {}
        self.pubacks: dict[int, int] = {}
        self.messages: list[tuple[str, bytes, bool]] = []
        self._cv = threading.Condition()

        def on_connect(_c: Any, _u: Any, _f: Any, rc: Any, _p: Any) -> None:
            with self._cv:
                self.connack.append(int(rc.value))
                self._cv.notify_all()

        def on_subscribe(_c: Any, _u: Any, mid: int, codes: list[Any], _p: Any) -> None:
            with self._cv:
                self.subacks[mid] = [int(c.value) for c in codes]
                self._cv.notify_all()

        def on_publish(_c: Any, _u: Any, mid: int, rc: Any, _p: Any) -> None:
            with self._cv:
                self.pubacks[mid] = int(rc.value)
                self._cv.notify_all()

        def on_message(_c: Any, _u: Any, m: paho.MQTTMessage) -> None:
            with self._cv:
                self.messages.append((m.topic, bytes(m.payload), bool(m.retain)))
                self._cv.notify_all()

        self.client.on_connect = on_connect
        self.client.on_subscribe = on_subscribe
        self.client.on_publish = on_publish
        self.client.on_message = on_message
        self.client.connect("127.0.0.1", broker.port, keepalive=30)
        self.client.loop_start()
        self._wait(lambda: bool(self.connack), "CONNACK")

    def _wait(self, pred: Any, what: str) -> None:
        with self._cv:
            if not self._cv.wait_for(pred, TIMEOUT_S):
                raise AssertionError(f"no {what} within {TIMEOUT_S} s")

    def subscribe(self, *filters: str) -> list[int]:
        _, mid = self.client.subscribe([(f, 1) for f in filters])
        self._wait(lambda: mid in self.subacks, "SUBACK")
        return self.subacks[mid]

    def publish(self, topic: str, data: bytes, retain: bool = False) -> int:
        info = self.client.publish(topic, data, qos=1, retain=retain)
        self._wait(lambda: info.mid in self.pubacks, "PUBACK")
        return self.pubacks[info.mid]

    def received(self, topic: str, data: bytes | None = None) -> bool:
        with self._cv:
            return any(t == topic and (data is None or p == data) for t, p, _ in self.messages)

    def wait_message(self, topic: str, data: bytes | None = None) -> None:
        self._wait(
            lambda: any(t == topic and (data is None or p == data) for t, p, _ in self.messages),
            f"message on {topic}",
        )

    def close(self) -> None:
        self.client.disconnect()
        self.client.loop_stop()


@contextlib.contextmanager
def clients(broker: AclBroker, *users: str) -> Iterator[list[Client]]:
    made: list[Client] = []
    try:
        made.extend(Client(broker, u) for u in users)
        yield made
    finally:
        for c in made:
            c.close()


def test_mosquitto_refuses_anonymous_and_wrong_passwords(acl_broker: AclBroker) -> None:
    # MQTT 5.0 3.2.2.2: 0x86 bad user name or password, 0x87 not authorized
    for user, password in ((None, None), ("brayscope", "not-the-password")):
        c = Client(acl_broker, user, password)
        try:
            assert c.connack[0] in (0x86, 0x87), c.connack
        finally:
            c.close()


def test_acl_daemon_reads_sensors_and_writes_only_its_results(acl_broker: AclBroker) -> None:
    with clients(acl_broker, "brayscope", "kestrel-gateway", "kestrel-dashboard") as (
        daemon,
        gateway,
        dashboard,
    ):
        # the daemon's subscriptions: exact topics, one "+" filter per unit, the whole tree
        assert (
            daemon.subscribe("kestrel/gt1/TT-AMB", "kestrel/gt1/+", "kestrel/#")
            == [GRANTED_QOS1] * 3
        )
        # Mosquitto 2.0 grants a wider filter and applies the read rules to each message: with
        # "#" the daemon still gets nothing outside the sensor tree, not even its own results
        daemon.subscribe("#")
        assert dashboard.subscribe("brayscope/kestrel-ridge/#") == [GRANTED_QOS1]
        # the plant's gateway writes sensor values, the daemon receives them
        value = json.dumps({"value": 15.2, "ts": time.time()}).encode()
        assert gateway.publish("kestrel/gt1/TT-AMB", value) == SUCCESS
        daemon.wait_message("kestrel/gt1/TT-AMB", value)
        # the daemon writes results and status under its prefix; dashboards read them
        result = b'{"unit": "KR-GT1", "advisory": "test"}'
        assert daemon.publish("brayscope/kestrel-ridge/KR-GT1/results", result) == SUCCESS
        assert daemon.publish("brayscope/kestrel-ridge/status", b"online", retain=True) == 0
        dashboard.wait_message("brayscope/kestrel-ridge/KR-GT1/results", result)
        dashboard.wait_message("brayscope/kestrel-ridge/status", b"online")
        # writes anywhere else are refused and delivered to nobody
        forged = b'{"value": 99.0}'
        for topic in ("kestrel/gt1/TT-AMB", "other/plant/x", "brayscope/other-site/status"):
            assert daemon.publish(topic, forged) == NOT_AUTHORIZED, topic
        # the gateway may not write results nor read anything (not even the sensor values)
        assert gateway.publish("brayscope/kestrel-ridge/status", b"offline") == NOT_AUTHORIZED
        gateway.subscribe("#")
        assert dashboard.publish("brayscope/kestrel-ridge/status", b"offline") == NOT_AUTHORIZED
        # a round trip after the refusals proves they had time to arrive, had they passed
        marker = b"after-refusals"
        assert gateway.publish("kestrel/gt1/TT-CIT", marker) == SUCCESS
        daemon.wait_message("kestrel/gt1/TT-CIT", marker)
        assert not daemon.received("kestrel/gt1/TT-AMB", forged)
        assert not dashboard.received("brayscope/kestrel-ridge/status", b"offline")
        assert {t for t, _, _ in daemon.messages} == {"kestrel/gt1/TT-AMB", "kestrel/gt1/TT-CIT"}
        assert gateway.messages == []


def test_daemon_with_the_example_plant_file_works_under_the_acl(
    acl_broker: AclBroker, tmp_path: Path
) -> None:
    """`brayscope run` with the shipped plant file (TLS and the daemon's user added): it
    subscribes, stores a reading from the gateway, announces online and, on stop, offline."""
    text = EXAMPLE.read_text(encoding="utf-8")
    for old, new in (
        ("tls = false", f'tls = true\nca_file = "{acl_broker.ca_file}"'),
        ('username = ""', 'username = "brayscope"'),
        ('client_id = "brayscope-kestrel"', f'client_id = "bs-acl-{uuid.uuid4().hex[:8]}"'),
    ):
        assert old in text, old
        text = text.replace(old, new, 1)
    plant = tmp_path / "plant.toml"
    plant.write_text(text, encoding="utf-8")
    db = tmp_path / "acl.sqlite"
    http_port = free_port()
    log = tmp_path / "daemon.log"
    env = {
        "BRAYSCOPE_BROKER_PORT": str(acl_broker.port),
        "BRAYSCOPE_BROKER_PASSWORD": acl_broker.passwords["brayscope"],
        "BRAYSCOPE_DATABASE_URL": f"sqlite:///{db}",
        "BRAYSCOPE_HTTP_BIND": f"127.0.0.1:{http_port}",
    }
    print(f"database: sqlite file {db}")
    with clients(acl_broker, "kestrel-gateway", "kestrel-dashboard") as (gateway, dashboard):
        assert dashboard.subscribe("brayscope/kestrel-ridge/status") == [GRANTED_QOS1]
        proc = run_daemon(plant, log, env_extra=env)
        try:
            wait_daemon_ready(proc, http_port, log)
            dashboard.wait_message("brayscope/kestrel-ridge/status", b"online")
            ts = time.time()
            body = json.dumps({"value": 14.75, "ts": ts}).encode()
            assert gateway.publish("kestrel/gt1/TT-AMB", body) == SUCCESS

            def stored() -> bool:
                with sqlite3.connect(f"file:{db}?mode=ro", uri=True, timeout=10) as c:
                    row = c.execute(
                        "SELECT value FROM readings WHERE unit = 'KR-GT1' "
                        "AND measurement = 'ambient_temperature'"
                    ).fetchone()
                return row is not None and abs(row[0] - (14.75 + 273.15)) < 1e-9

            wait_for(stored, 30, 0.1, "the gateway's reading in the database")
            proc.send_signal(signal.SIGTERM)
            assert proc.wait(30) == 0, log.read_text()[-2000:]
            dashboard.wait_message("brayscope/kestrel-ridge/status", b"offline")
        finally:
            if proc.poll() is None:
                proc.kill()
                proc.wait()
    assert "not authorized" not in log.read_text().lower()


# ----------------------------------------------------------------------------------------------
# PostgreSQL: deploy/postgresql/setup.sql, least privilege, pg_dump / pg_restore
# ----------------------------------------------------------------------------------------------


def _pg_admin_url() -> str:
    return (
        os.environ.get("BRAYSCOPE_TEST_POSTGRES_URL", "").strip()
        or "postgresql+psycopg://postgres@127.0.0.1:5432/test"
    )


def _libpq(url: str, database: str | None = None, user: str | None = None) -> str:
    """The SQLAlchemy URL as a libpq URI for psql/pg_dump, with another database or user."""
    u = sa.engine.make_url(url)
    if database is not None:
        u = u.set(database=database)
    if user is not None:
        u = u.set(username=user, password=None)
    return u.set(drivername="postgresql").render_as_string(hide_password=False)


def _sa(url: str, database: str, user: str) -> str:
    u = sa.engine.make_url(url).set(database=database, username=user, password=None)
    return u.render_as_string(hide_password=False)


@dataclass(frozen=True)
class PgSite:
    admin: str
    db: str
    owner: str
    daemon: str

    def url(self, role: str) -> str:
        return _sa(self.admin, self.db, role)


@pytest.fixture
def pg_site(_pg_session: str | None) -> Iterator[PgSite]:
    """Roles and a database made by deploy/postgresql/setup.sql (names unique to this test:
    roles are cluster-wide and other test runs share the cluster)."""
    require_tools("psql", "pg_dump", "pg_restore", debian="postgresql-client")
    if _pg_session is not None:
        msg = f"postgresql unreachable: {_pg_session}"
        if os.environ.get("BRAYSCOPE_REQUIRE_SERVICES") == "1":
            pytest.fail(msg + " (BRAYSCOPE_REQUIRE_SERVICES=1)")
        pytest.skip(msg)
    tag = uuid.uuid4().hex[:8]
    site = PgSite(_pg_admin_url(), f"bs_deploy_{tag}", f"bs_owner_{tag}", f"bs_daemon_{tag}")
    admin = sa.engine.make_url(site.admin)
    if admin.password:
        pytest.skip("the deploy test needs a trust or peer PostgreSQL (no password in the URL)")
    print(f"database: postgresql {admin.host}:{admin.port} database {site.db} (setup.sql)")
    try:
        done = subprocess.run(
            [
                "psql", "-X", "-q", _libpq(site.admin), "-v", f"db={site.db}",
                "-v", f"owner={site.owner}", "-v", f"daemon={site.daemon}",
                "-f", str(DEPLOY / "postgresql" / "setup.sql"),
            ],
            capture_output=True, text=True, timeout=120, check=False,
        )  # fmt: skip
        assert done.returncode == 0, done.stderr
        yield site
    finally:
        engine = sa.create_engine(site.admin, isolation_level="AUTOCOMMIT")
        with engine.connect() as conn:
            conn.execute(sa.text(f'DROP DATABASE IF EXISTS "{site.db}" WITH (FORCE)'))
            for role in (site.daemon, site.owner):
                conn.execute(sa.text(f'DROP ROLE IF EXISTS "{role}"'))
        engine.dispose()


def _denied(url: str, sql: str) -> bool:
    engine = sa.create_engine(url)
    try:
        with engine.begin() as conn:
            conn.execute(sa.text(sql))
        return False
    except sa.exc.ProgrammingError as exc:
        return "permission denied" in str(exc) or "must be owner" in str(exc)
    finally:
        engine.dispose()


def test_postgres_owner_migrates_and_the_daemon_role_only_reads_and_writes_rows(
    pg_site: PgSite,
) -> None:
    daemon_url = pg_site.url(pg_site.daemon)
    # before the owner migrates, the daemon cannot create the schema (it waits, not ready)
    with Store(daemon_url) as st, pytest.raises(sa.exc.ProgrammingError, match="permission"):
        st.upgrade()
    # the operator's step: `brayscope db upgrade` as the owner
    env = {k: v for k, v in os.environ.items() if not k.startswith("BRAYSCOPE_")}
    env.update(PYTHONPATH=str(ROOT), BRAYSCOPE_DATABASE_URL=pg_site.url(pg_site.owner))
    done = subprocess.run(
        [sys.executable, "-m", "daemon.cli", "db", "upgrade", "-c", str(EXAMPLE)],
        env=env, capture_output=True, text=True, timeout=120, check=False,
    )  # fmt: skip
    assert done.returncode == 0 and "-> " in done.stdout, done.stderr
    # what the daemon does at start and then all the time, as the daemon role
    now = time.time()
    with Store(daemon_url) as st:
        st.upgrade()  # at head already: migrates nothing, needs no DDL privilege
        st.ensure_unit("KR-GT1", "gas_turbine", "45 MW class")
        assert st.write_readings([ambient_reading(now - 86400.0 * 10), ambient_reading(now)]) == 2
        assert st.write_results([ResultRow(unit="KR-GT1", ts=now, values={"shaft_power": 4e7})])
        st.write_event("start", "deploy test")
        assert st.purge({"readings": now - 86400.0}) == {"readings": 1}
    for sql in (
        "CREATE TABLE intruder (x int)",
        "DROP TABLE readings",
        "ALTER TABLE results ADD COLUMN x int",
        "TRUNCATE readings",
    ):
        assert _denied(daemon_url, sql), sql
    # a later migration by the owner: the daemon may use the new table at once
    owner = sa.create_engine(pg_site.url(pg_site.owner))
    with owner.begin() as conn:
        conn.execute(sa.text("CREATE TABLE later_migration (id bigserial PRIMARY KEY, v int)"))
    owner.dispose()
    d = sa.create_engine(daemon_url)
    with d.begin() as conn:
        conn.execute(sa.text("INSERT INTO later_migration (v) VALUES (1)"))
    d.dispose()


def test_postgres_dump_and_restore_round_trip(pg_site: PgSite, tmp_path: Path) -> None:
    """The documented disaster recovery: pg_dump -Fc, the database is lost, pg_restore -C
    brings back rows, owners and the daemon's grants."""
    owner_url = pg_site.url(pg_site.owner)
    now = time.time()
    with Store(owner_url) as st:
        st.upgrade()
        st.ensure_unit("KR-GT1", "gas_turbine")
        st.write_readings([ambient_reading(now - i) for i in range(500)])
        st.write_results([ResultRow(unit="KR-GT1", ts=now - 10 * i) for i in range(50)])
        before = {t: st.count(t) for t in ("units", "results", "readings", "events")}
        revision = st.current_revision()
    dump = tmp_path / "brayscope.dump"
    run: dict[str, Any] = {"capture_output": True, "text": True, "timeout": 120}
    done = subprocess.run(
        ["pg_dump", "-Fc", "-f", str(dump), _libpq(pg_site.admin, pg_site.db, pg_site.owner)],
        check=False,
        **run,
    )
    assert done.returncode == 0 and dump.stat().st_size > 0, done.stderr
    engine = sa.create_engine(pg_site.admin, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(sa.text(f'DROP DATABASE "{pg_site.db}" WITH (FORCE)'))
    engine.dispose()
    done = subprocess.run(
        ["pg_restore", "-C", "--exit-on-error", "-d", _libpq(pg_site.admin), str(dump)],
        check=False,
        **run,
    )
    assert done.returncode == 0, done.stderr
    with Store(pg_site.url(pg_site.daemon)) as st:
        assert {t: st.count(t) for t in before} == before
        assert st.current_revision() == revision
        assert st.write_readings([ambient_reading(now + 1)]) == 1  # grants came back
    assert _denied(pg_site.url(pg_site.daemon), "CREATE TABLE intruder (x int)")


# ----------------------------------------------------------------------------------------------
# SQLite: online backup while the daemon writes
# ----------------------------------------------------------------------------------------------


def test_sqlite_online_backup_while_writing_and_restore(tmp_path: Path) -> None:
    sqlite3_cli = require_tools("sqlite3", debian="sqlite3")["sqlite3"]
    live = tmp_path / "brayscope.sqlite"
    print(f"database: sqlite file {live} (backup with {sqlite3_cli} .backup)")
    store = Store(f"sqlite:///{live}")
    store.upgrade()
    store.ensure_unit("KR-GT1", "gas_turbine")
    t0 = time.time()
    stop = threading.Event()
    written = [0]

    def writer() -> None:  # the daemon committing batches meanwhile
        i = 0
        while not stop.is_set():
            store.write_readings([ambient_reading(t0 + i * 10 + k) for k in range(10)])
            i += 1
            written[0] = i * 10

    th = threading.Thread(target=writer)
    th.start()
    try:
        wait_for(lambda: written[0] >= 2000, 60, 0.01, "rows written before the backup")
        backup = tmp_path / "backup.sqlite"
        done = subprocess.run(
            [sqlite3_cli, str(live), f".backup '{backup}'"],
            capture_output=True,
            text=True,
            timeout=120,
            check=False,
        )
        assert done.returncode == 0 and done.stderr == "", done.stderr
    finally:
        stop.set()
        th.join()
    total = store.count("readings")
    store.close()
    with sqlite3.connect(backup) as c:
        assert c.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        n = c.execute("SELECT count(*) FROM readings").fetchone()[0]
    # a consistent snapshot: whole batches (commits) only, some of them, not more than written
    assert 2000 <= n <= total and n % 10 == 0
    # restore (daemon stopped): the copy replaces the file and its WAL
    for suffix in ("", "-wal", "-shm"):
        Path(f"{live}{suffix}").unlink(missing_ok=True)
    shutil.copy(backup, live)
    with Store(f"sqlite:///{live}") as st:
        assert st.current_revision() == st.head_revision()
        assert st.count("readings") == n


# ----------------------------------------------------------------------------------------------
# Disk sizing: the figures in docs/deployment.md
# ----------------------------------------------------------------------------------------------


def _documented_bytes_per_row() -> dict[tuple[str, str], float]:
    """The "measured bytes per row" table of docs/deployment.md."""
    out = {}
    for m in re.finditer(r"^\| (readings|results) \| (\d+) \| (\d+) \|", DOC.read_text(), re.M):
        out[("sqlite", m.group(1))] = float(m.group(2))
        out[("postgresql", m.group(1))] = float(m.group(3))
    assert len(out) == 4, "docs/deployment.md: bytes-per-row table not found"
    return out


def test_bytes_per_row_match_the_documented_figures(store_url: str) -> None:
    """tools/measure_storage.py, small: within 10 % of the figures measured with 100 000 rows
    (page granularity and B-tree depth explain the rest)."""
    import importlib.util

    spec = importlib.util.spec_from_file_location(
        "measure_storage", ROOT / "tools/measure_storage.py"
    )
    assert spec is not None and spec.loader is not None
    tool = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("measure_storage", tool)  # dataclasses look their module up
    spec.loader.exec_module(tool)
    documented = _documented_bytes_per_row()
    if store_url.startswith("sqlite"):
        figures = tool.measure_sqlite(10_000, 4000)
    else:
        figures = tool.measure_postgres(_pg_admin_url(), 10_000, 4000)
    for f in figures:
        doc = documented[(f.backend, f.table)]
        print(f"{f.backend} {f.table}: {f.bytes_per_row:.1f} B/row (documented {doc:g})")
        assert abs(f.bytes_per_row / doc - 1.0) < 0.10, (f, doc)


# ----------------------------------------------------------------------------------------------
# nginx: deploy/nginx/brayscope.conf.example
# ----------------------------------------------------------------------------------------------


def _nginx_test(tmp_path: Path, site: str) -> subprocess.CompletedProcess[str]:
    """`nginx -t` of a main configuration that includes ``site`` as Debian's does.  nginx -t
    binds the listen addresses, so ports 80/443 become free loopback ports (and the IPv6
    listeners are left out: a test host may have no IPv6); logs and temporary files go to
    ``tmp_path`` so that it runs without root too."""
    nginx = require_tools("nginx", "openssl", debian="nginx, openssl")["nginx"]
    certs = tmp_path / "certs"
    if not (certs / "server.crt").exists():
        certs.mkdir()
        make_test_pki(certs)
    for old, new in (
        ("/etc/nginx/tls/brayscope.crt", str(certs / "server.crt")),
        ("/etc/nginx/tls/brayscope.key", str(certs / "server.key")),
        ("listen 80;", f"listen 127.0.0.1:{free_port()};"),
        ("listen 443 ssl;", f"listen 127.0.0.1:{free_port()} ssl;"),
        ("listen [::]:80;", ""),
        ("listen [::]:443 ssl;", ""),
    ):
        assert old in site, old
        site = site.replace(old, new)
    (tmp_path / "site.conf").write_text(site)
    temp = "".join(
        f"    {kind}_temp_path {tmp_path}/{kind};\n"
        for kind in ("client_body", "proxy", "fastcgi", "uwsgi", "scgi")
    )
    (tmp_path / "nginx.conf").write_text(
        f"pid {tmp_path}/nginx.pid;\nevents {{}}\nhttp {{\n    access_log {tmp_path}/access.log;\n"
        f"{temp}    include {tmp_path}/site.conf;\n}}\n"
    )
    return subprocess.run(
        [
            nginx,
            "-t",
            "-q",
            "-e",
            "stderr",
            "-p",
            str(tmp_path),
            "-c",
            str(tmp_path / "nginx.conf"),
        ],
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )


def test_nginx_example_passes_nginx_t(tmp_path: Path) -> None:
    text = (DEPLOY / "nginx" / "brayscope.conf.example").read_text()
    assert "/etc/nginx/tls/brayscope.crt" in text and "server 127.0.0.1:9478" in text
    done = _nginx_test(tmp_path, text)
    print(f"nginx -t: {done.returncode} {done.stderr.strip()}")
    assert done.returncode == 0, done.stderr
    assert "client_max_body_size 64k;" in text and "deny all;" in text
    # and nginx -t does fail on a broken copy
    broken = _nginx_test(
        tmp_path, text.replace("client_max_body_size 64k;", "client_max_body 64k;")
    )
    assert broken.returncode != 0 and "client_max_body" in broken.stderr
