"""deploy/: the systemd units, sysusers.d and tmpfiles.d entries, exit codes, constraints.

What the checks rest on:
- systemd.service(5) and systemd.exec(5) (systemd 252): ``RestartPreventExitStatus=`` applies
  to the exit status of the main process; ``Restart=on-failure`` restarts on an unclean exit
  code; ``TimeoutStopSec=`` is how long systemd waits after the stop signal before SIGKILL.
- ``systemd-analyze verify`` (loads the units as the service manager would and reports bad
  keys, values, specifiers and missing executables) and ``systemd-analyze security
  --offline=true`` (systemd-analyze(1): the exposure score, 0 = fully sandboxed, 10 = not at
  all; "OK" below 2 in systemd's own scale), run on a private root that holds the files exactly
  as docs/deployment.md installs them.
- systemd-sysusers(8) and systemd-tmpfiles(8) with ``--root``: the user and the directories
  they would create on the host, created inside a scratch root and inspected.
- prctl(2), PR_SET_MDWE (Linux 6.3): the kernel's "memory deny write execute", which
  ``MemoryDenyWriteExecute=yes`` asks for; the daemon must run under it.
- PEP 508 / the packaging library: a dependency's name and version specifier.

The tools come from the Debian package ``systemd``; without it the tests skip with the
reason (and fail in CI, ``BRAYSCOPE_REQUIRE_SERVICES=1``, whose .ci/run installs it).
"""

from __future__ import annotations

import os
import re
import shlex
import shutil
import signal
import sqlite3
import subprocess
import sys
import time
import tomllib
import uuid
from pathlib import Path

import pytest
from live_support import (
    ROOT,
    Publisher,
    free_port,
    plant_toml,
    private_mosquitto,
    require_tools,
    run_daemon,
    snapshot_messages,
    wait_daemon_ready,
    wait_for,
)

DEPLOY = ROOT / "deploy"
UNIT = DEPLOY / "brayscope.service"
TEMPLATE = DEPLOY / "brayscope@.service"
DROPIN = DEPLOY / "brayscope.service.d" / "credentials.conf.example"
SYSUSERS = DEPLOY / "sysusers.d" / "brayscope.conf"
TMPFILES = DEPLOY / "tmpfiles.d" / "brayscope.conf"
CONSTRAINTS = DEPLOY / "constraints.txt"
DOC = ROOT / "docs" / "deployment.md"

#: Highest exposure score accepted for the units (systemd-analyze security; 1.1 measured with
#: systemd 252, docs/deployment.md).  Dropping one of the larger options (ProtectSystem=,
#: PrivateUsers=, CapabilityBoundingSet=, SystemCallFilter=) pushes the score over it.
EXPOSURE_LIMIT = 1.5

EXAMPLE_INSTANCE = "kestrel-north"


# ----------------------------------------------------------------------------------------------
# Unit files as data
# ----------------------------------------------------------------------------------------------


def entries(path: Path) -> list[tuple[str, str, str]]:
    """(section, key, value) of every assignment of a unit file, in order."""
    out = []
    section = ""
    for raw in path.read_text(encoding="utf-8").splitlines():
        line = raw.strip()
        if not line or line[0] in "#;":
            continue
        if line.startswith("["):
            section = line.strip("[]")
            continue
        key, sep, value = line.partition("=")
        assert sep, f"{path.name}: not an assignment: {raw!r}"
        out.append((section, key.strip(), value.strip()))
    return out


def values(path: Path, key: str, section: str = "Service") -> list[str]:
    return [v for s, k, v in entries(path) if s == section and k == key]


def one(path: Path, key: str, section: str = "Service") -> str:
    found = values(path, key, section)
    assert len(found) == 1, f"{path.name}: {key}= set {len(found)} times"
    return found[0]


def seconds(text: str) -> float:
    """A systemd time span ("30s", "1min 30s", "90") in seconds."""
    scale = {"": 1.0, "s": 1.0, "sec": 1.0, "min": 60.0, "m": 60.0, "ms": 1e-3, "h": 3600.0}
    total = 0.0
    for number, unit in re.findall(r"([\d.]+)\s*([a-z]*)", text):
        total += float(number) * scale[unit]
    return total


@pytest.mark.parametrize("unit", [UNIT, TEMPLATE], ids=lambda p: p.name)
def test_unit_runs_unprivileged_checks_first_and_restarts_only_after_a_crash(unit: Path) -> None:
    assert one(unit, "User") == "brayscope" and one(unit, "Group") == "brayscope"
    start = shlex.split(one(unit, "ExecStart"))
    pre = shlex.split(one(unit, "ExecStartPre"))
    assert start[1:2] == ["run"] and pre[1:2] == ["check"]
    assert pre[0] == start[0], "check and run must be the same installation"
    config = start[start.index("-c") + 1]
    assert pre[pre.index("-c") + 1] == config, "ExecStartPre checks another plant file"
    assert one(unit, "Restart") == "on-failure"
    assert one(unit, "RestartPreventExitStatus") == "2"
    assert seconds(one(unit, "RestartSec")) >= 5.0
    assert int(one(unit, "StartLimitBurst", "Unit")) >= 3
    # the stop timeout covers the daemon's drain with a margin for the interpreter to exit
    drain = float(start[start.index("--stop-timeout") + 1])
    assert seconds(one(unit, "TimeoutStopSec")) >= drain + 5.0
    # writable: the state directory only, which is also the working directory (relative
    # SQLite URLs such as the example's ./brayscope-data/ land there)
    state = "/var/lib/" + one(unit, "StateDirectory")
    assert values(unit, "ReadWritePaths") == [state]
    assert one(unit, "WorkingDirectory") == state
    assert one(unit, "ProtectSystem") == "strict"
    assert one(unit, "CapabilityBoundingSet") == ""
    assert one(unit, "NoNewPrivileges") == "yes"
    assert one(unit, "MemoryDenyWriteExecute") == "yes"


@pytest.mark.parametrize("unit", [UNIT, TEMPLATE], ids=lambda p: p.name)
def test_unit_names_no_secret_file(unit: Path) -> None:
    """The unit starts on a host that has only what its plant file uses: no secret is named
    here (the drop-in adds those the plant file needs), the environment file is optional."""
    text = "\n".join(f"{k}={v}" for _, k, v in entries(unit))
    assert "secrets" not in text and "LoadCredential" not in text and "_FILE=" not in text
    env_files = values(unit, "EnvironmentFile")
    assert env_files and all(f.startswith("-") for f in env_files)


def test_template_is_the_unit_with_an_instance_name() -> None:
    """Both units carry the same sandbox and restart policy; only paths differ by ``%i``."""
    per_instance = {
        "/etc/brayscope/plant.toml": "/etc/brayscope/%i.toml",
        "/etc/brayscope/brayscope.env": "/etc/brayscope/%i.env",
        "/var/lib/brayscope": "/var/lib/brayscope/%i",
    }

    def instanced(v: str) -> str:
        for a, b in per_instance.items():
            v = v.replace(a, b)
        return v

    main = [(s, k, instanced(v)) for s, k, v in entries(UNIT) if k != "Description"]
    main = [(s, k, "brayscope/%i" if k == "StateDirectory" else v) for s, k, v in main]
    template = [(s, k, v) for s, k, v in entries(TEMPLATE) if k != "Description"]
    assert template == main
    assert "%i" in one(TEMPLATE, "Description", "Unit")


# ----------------------------------------------------------------------------------------------
# systemd-analyze on a private root
# ----------------------------------------------------------------------------------------------


@pytest.fixture
def systemd_root(tmp_path: Path) -> Path:
    """A root with the host's system units and ours installed as docs/deployment.md says."""
    require_tools("systemd-analyze", debian="systemd")
    host_units = Path("/usr/lib/systemd/system")
    if not host_units.is_dir():
        pytest.fail(f"{host_units} missing although systemd-analyze is installed")
    root = tmp_path / "root"
    shutil.copytree(host_units, root / "usr/lib/systemd/system", symlinks=True)
    etc = root / "etc/systemd/system"
    etc.mkdir(parents=True)
    for unit in (UNIT, TEMPLATE):
        shutil.copy(unit, etc / unit.name)
        dropins = etc / f"{unit.name}.d"
        dropins.mkdir()
        shutil.copy(DROPIN, dropins / "credentials.conf")
    exe = root / "opt/brayscope/venv/bin/brayscope"
    exe.parent.mkdir(parents=True)
    exe.write_text("#!/bin/sh\n")
    exe.chmod(0o755)
    return root


def _verify(root: Path, *units: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        ["systemd-analyze", "verify", f"--root={root}", *units],
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )


def test_systemd_analyze_verify_is_clean(systemd_root: Path) -> None:
    units = ("brayscope.service", f"brayscope@{EXAMPLE_INSTANCE}.service")
    done = _verify(systemd_root, *units)
    print(f"systemd-analyze verify {' '.join(units)} (with the credentials drop-in)")
    # verify exits 0 on an unknown key or an unparsable value; it only warns: any output fails
    assert done.returncode == 0 and done.stdout + done.stderr == "", done.stdout + done.stderr


def test_systemd_analyze_verify_reports_a_broken_unit(systemd_root: Path) -> None:
    """The check above can fail: a misspelt value and key are reported."""
    unit = systemd_root / "etc/systemd/system/brayscope.service"
    text = unit.read_text().replace("Restart=on-failure", "Restart=sometimes")
    unit.write_text(text.replace("[Install]", "ProtectSystm=strict\n[Install]"))
    out = _verify(systemd_root, "brayscope.service").stderr
    assert "Failed to parse service restart specifier" in out and "ProtectSystm" in out


@pytest.mark.parametrize("unit", ["brayscope.service", f"brayscope@{EXAMPLE_INSTANCE}.service"])
def test_systemd_analyze_security_exposure(systemd_root: Path, unit: str) -> None:
    done = subprocess.run(
        [
            "systemd-analyze", "security", "--offline=true", f"--root={systemd_root}",
            f"--threshold={EXPOSURE_LIMIT * 10:.0f}", "--no-pager", unit,
        ],
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )  # fmt: skip
    m = re.search(r"Overall exposure level for \S+: ([\d.]+) (\w+)", done.stdout + done.stderr)
    assert m, done.stdout + done.stderr
    exposure = float(m.group(1))
    print(f"{unit}: exposure {exposure} {m.group(2)} (limit {EXPOSURE_LIMIT})")
    assert exposure <= EXPOSURE_LIMIT, done.stdout
    assert done.returncode == 0, done.stderr
    assert f"exposure level {exposure}" in DOC.read_text(), "docs/deployment.md: update it"


# ----------------------------------------------------------------------------------------------
# sysusers.d and tmpfiles.d
# ----------------------------------------------------------------------------------------------


def test_sysusers_and_tmpfiles_create_the_user_and_its_directories(tmp_path: Path) -> None:
    require_tools("systemd-sysusers", "systemd-tmpfiles", debian="systemd")
    root = tmp_path / "root"
    for src, where in ((SYSUSERS, "usr/lib/sysusers.d"), (TMPFILES, "usr/lib/tmpfiles.d")):
        (root / where).mkdir(parents=True)
        shutil.copy(src, root / where / "brayscope.conf")
    (root / "etc").mkdir()
    dry = subprocess.run(
        ["systemd-sysusers", f"--root={root}", "--dry-run"],
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert dry.returncode == 0, dry.stderr
    assert "Creating user 'brayscope'" in dry.stdout + dry.stderr
    if os.geteuid() != 0:
        msg = "creating users and chowning directories in a scratch root needs root"
        if os.environ.get("BRAYSCOPE_REQUIRE_SERVICES") == "1":
            pytest.fail(msg + " (BRAYSCOPE_REQUIRE_SERVICES=1)")
        pytest.skip(msg + "; the dry run above passed")
    for cmd in (["systemd-sysusers"], ["systemd-tmpfiles", "--create"]):
        done = subprocess.run(
            [*cmd, f"--root={root}"], capture_output=True, text=True, timeout=60, check=False
        )
        assert done.returncode == 0 and "Failed" not in done.stderr, done.stderr
    passwd = {
        f[0]: f for f in (ln.split(":") for ln in (root / "etc/passwd").read_text().splitlines())
    }
    _, _, uid, gid, _gecos, home, shell = passwd["brayscope"]
    assert 0 < int(uid) < 1000, "a system user"
    assert home == "/var/lib/brayscope" and shell == "/usr/sbin/nologin"
    groups = {
        f[0]: f for f in (ln.split(":") for ln in (root / "etc/group").read_text().splitlines())
    }
    assert groups["brayscope"][2] == gid

    def owner_mode(rel: str) -> tuple[int, int, int]:
        st = (root / rel).stat()
        return st.st_uid, st.st_gid, st.st_mode & 0o7777

    assert owner_mode("var/lib/brayscope") == (int(uid), int(gid), 0o750)
    assert owner_mode("etc/brayscope") == (0, int(gid), 0o750)
    assert owner_mode("etc/brayscope/secrets") == (0, 0, 0o700)
    # the unit's state directory is the one tmpfiles creates
    assert "/var/lib/" + one(UNIT, "StateDirectory") == "/var/lib/brayscope"


# ----------------------------------------------------------------------------------------------
# Exit codes the unit relies on
# ----------------------------------------------------------------------------------------------


def _brayscope(*args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith("BRAYSCOPE_")}
    env["PYTHONPATH"] = str(ROOT)
    return subprocess.run(
        [sys.executable, "-m", "daemon.cli", *args],
        cwd=cwd,
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )


def test_configuration_errors_exit_2_in_check_and_run(tmp_path: Path) -> None:
    """Exit 2 means "do not restart" to the unit (RestartPreventExitStatus=2)."""
    bad = tmp_path / "bad.toml"
    bad.write_text(
        plant_toml(
            prefix="kestrel-exit",
            broker_port=free_port(),
            database_url="sqlite:///./db.sqlite",
            http_port=free_port(),
            client_id="brayscope-exit-test",
        ).replace("tick_s = 1.0", "tick_s = -1.0")
    )
    for args in (("check", "-c", str(bad)), ("run", "-c", str(bad))):
        done = _brayscope(*args, cwd=tmp_path)
        assert done.returncode == 2, (args, done.stderr)
        assert "daemon.tick_s" in done.stderr
    missing = _brayscope("check", "--quiet", "-c", str(tmp_path / "absent.toml"), cwd=tmp_path)
    assert missing.returncode == 2 and "file not found" in missing.stderr
    assert not (tmp_path / "db.sqlite").exists(), "run must not touch the database first"


def test_runtime_failure_exits_1_so_the_unit_restarts_it(tmp_path: Path) -> None:
    """A failure of the environment (here the HTTP port is taken) is worth a restart."""
    import socket

    with socket.socket() as taken:
        taken.bind(("127.0.0.1", 0))
        taken.listen()
        port = taken.getsockname()[1]
        plant = tmp_path / "plant.toml"
        plant.write_text(
            plant_toml(
                prefix="kestrel-exit",
                broker_port=free_port(),
                database_url=f"sqlite:///{tmp_path / 'db.sqlite'}",
                http_port=port,
                client_id=f"brayscope-exit-{uuid.uuid4().hex[:8]}",
            )
        )
        done = _brayscope("run", "-c", str(plant), cwd=tmp_path)
    assert done.returncode == 1, done.stderr[-2000:]
    assert "cannot listen on" in done.stderr


# ----------------------------------------------------------------------------------------------
# The daemon under MemoryDenyWriteExecute
# ----------------------------------------------------------------------------------------------

#: Runs argv[1:] with the kernel's "memory deny write execute" (prctl PR_SET_MDWE = 65 with
#: PR_MDWE_REFUSE_EXEC_GAIN = 1, linux/prctl.h, Linux 6.3), inherited across execve; exit 97
#: when the kernel refuses it.
DENY_WRITE_EXECUTE = (
    sys.executable,
    "-c",
    "import ctypes, os, sys\n"
    "if ctypes.CDLL(None).prctl(65, 1, 0, 0, 0) != 0: sys.exit(97)\n"
    "os.execv(sys.argv[1], sys.argv[1:])",
)


def _kernel_has_mdwe() -> bool:
    """PR_GET_MDWE (66) reports the flag in the exec'd program: the kernel has it."""
    probe = "import ctypes, sys; sys.exit(ctypes.CDLL(None).prctl(66, 0, 0, 0, 0) != 1)"
    done = subprocess.run(
        [*DENY_WRITE_EXECUTE, sys.executable, "-c", probe], timeout=30, check=False
    )
    return done.returncode == 0


@pytest.mark.services
def test_daemon_computes_under_memory_deny_write_execute(tmp_path: Path) -> None:
    """MemoryDenyWriteExecute=yes kills a process that maps memory writable and executable
    (a JIT, some FFI callbacks).  The daemon, every library it loads and one computed result
    under the kernel's own version of that rule."""
    require_tools("mosquitto", debian="mosquitto")
    if not _kernel_has_mdwe():
        pytest.skip(f"kernel {os.uname().release} has no PR_SET_MDWE (Linux >= 6.3)")
    db = tmp_path / "live.sqlite"
    http_port = free_port()
    prefix = f"bsdeploy/{uuid.uuid4().hex[:8]}"
    with private_mosquitto(tmp_path / "broker") as broker:
        print(f"broker: {broker.describe}; database: sqlite file {db}")
        plant = tmp_path / "plant.toml"
        plant.write_text(
            plant_toml(
                prefix=prefix,
                broker_port=broker.port,
                database_url=f"sqlite:///{db}",
                http_port=http_port,
                client_id=f"bs-mdwe-{uuid.uuid4().hex[:8]}",
            )
        )
        log = tmp_path / "daemon.log"
        proc = run_daemon(plant, log, "--stop-timeout", "20", launcher=DENY_WRITE_EXECUTE)
        try:
            wait_daemon_ready(proc, http_port, log)
            pub = Publisher(broker.port, f"bs-mdwe-pub-{uuid.uuid4().hex[:6]}")
            try:

                def results() -> int:
                    for topic, data in snapshot_messages(prefix, "KR-GT1", time.time()):
                        pub.publish(topic, data)
                    pub.flush()
                    with sqlite3.connect(f"file:{db}?mode=ro", uri=True, timeout=10) as c:
                        n = c.execute("SELECT count(*) FROM results WHERE status = 0").fetchone()
                    return int(n[0])

                wait_for(lambda: results() > 0, 60, 0.5, "a clean result")
            finally:
                pub.close()
            proc.send_signal(signal.SIGTERM)
            assert proc.wait(30) == 0, log.read_text()[-2000:]
        finally:
            if proc.poll() is None:
                proc.kill()
                proc.wait()


# ----------------------------------------------------------------------------------------------
# Constraints: a reproducible install
# ----------------------------------------------------------------------------------------------


def _pins() -> dict[str, str]:
    from packaging.utils import canonicalize_name

    pins: dict[str, str] = {}
    for raw in CONSTRAINTS.read_text(encoding="utf-8").splitlines():
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        m = re.fullmatch(r"([A-Za-z0-9][A-Za-z0-9._-]*)==([A-Za-z0-9.+!-]+)", line)
        assert m, f"deploy/constraints.txt: not 'name==version': {raw!r}"
        name = canonicalize_name(m.group(1))
        assert name not in pins, f"deploy/constraints.txt: {name} pinned twice"
        pins[name] = m.group(2)
    return pins


def test_constraints_pin_every_runtime_dependency() -> None:
    """Every dependency in pyproject.toml, and what its requested extras pull in, is pinned at
    a version its specifier allows (run `make constraints` when this fails)."""
    from importlib.metadata import PackageNotFoundError, requires

    from packaging.requirements import Requirement
    from packaging.utils import canonicalize_name
    from packaging.version import Version

    pins = _pins()
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]
    assert "brayscope" not in pins
    for spec in project["dependencies"]:
        req = Requirement(spec)
        name = canonicalize_name(req.name)
        assert name in pins, f"{req.name} is not in deploy/constraints.txt: run make constraints"
        assert req.specifier.contains(Version(pins[name]), prereleases=True), (
            f"deploy/constraints.txt pins {name}=={pins[name]}, pyproject wants {req}"
        )
        for extra in req.extras:
            try:
                extra_reqs = [Requirement(r) for r in requires(req.name) or []]
            except PackageNotFoundError:
                pytest.fail(f"{req.name} is not installed: run make venv")
            pulled = [
                r
                for r in extra_reqs
                if r.marker is not None and r.marker.evaluate({"extra": extra})
            ]
            assert pulled, f"{req.name}[{extra}] pulls nothing?"
            for r in pulled:
                assert canonicalize_name(r.name) in pins, f"{r.name} ({req}) not pinned"
