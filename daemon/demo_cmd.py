"""``brayscope demo``: the whole live path on one machine, with nothing to install or set up.

It starts, in one process:

1. an embedded MQTT broker (amqtt; MQTT 3.1.1 only) listening on loopback only, anonymous
   clients allowed — nothing outside this machine can reach it;
2. a SQLite database in a temporary folder (or ``--data-dir``);
3. the brayscope daemon (:mod:`daemon.runtime`) on a plant file generated from the Kestrel Ridge
   example (``daemon/examples/kestrel-ridge.toml``) with a 1 s tick, pointed at the broker and
   the database above; its metrics, health and API on loopback;
4. the plant simulator (:mod:`daemon.simulator`) publishing the three invented units' sensor
   values, with load changes, a daily ambient swing and compressor fouling in accelerated
   time, one offline wash, noise and a few bad values;

and shows a live table of the latest result per unit (or one plain line per unit per tick when
stdout is not a terminal).  Ctrl-C stops everything cleanly; ``--duration S`` stops after S
seconds and exits 0.

Everything the demo shows is invented data of an invented site.  Advisory monitoring only.
"""

from __future__ import annotations

import argparse
import asyncio
import contextlib
import json
import logging
import math
import os
import signal
import socket
import sys
import tempfile
import time
from collections.abc import Mapping
from dataclasses import dataclass, replace
from importlib import resources
from pathlib import Path
from typing import Any

__all__ = [
    "DemoOptions",
    "EmbeddedBroker",
    "add_parser",
    "demo_plant_text",
    "free_port",
    "run",
    "run_demo",
    "write_demo_plant",
]

log = logging.getLogger("brayscope.demo")

CAUTION = (
    "Advisory monitoring only: brayscope is not a protection or control system. Follow the "
    "manufacturer's limits, site procedures, local codes and licensed engineers."
)

#: Default ports: MQTT on the usual 1883 unless taken, HTTP on brayscope's 9478 unless taken.
DEFAULT_MQTT_PORT = 1883
DEFAULT_HTTP_PORT = 9478


# --------------------------------------------------------------------------------------------
# The embedded broker
# --------------------------------------------------------------------------------------------


def _moved(asked: int, used: int, default: int) -> str:
    """A note for the banner when the default port was taken and another one is used."""
    if asked or used == default:
        return ""
    return f" — port {default} was taken, so the demo uses {used}"


def free_port(host: str = "127.0.0.1", preferred: int = 0) -> int:
    """``preferred`` if it can be bound on ``host``, else a free port chosen by the system."""
    if preferred:
        with socket.socket() as s:
            try:
                s.bind((host, preferred))
            except OSError:
                pass
            else:
                return preferred
    with socket.socket() as s:
        s.bind((host, 0))
        return int(s.getsockname()[1])


class EmbeddedBroker:
    """An amqtt broker in this process, on loopback, anonymous clients only (MQTT 3.1.1).

    Parameters
    ----------
    host : str
        Address to listen on; must be a loopback address (the broker has no authentication).
    port : int
        TCP port.
    max_connections : int
        Listener connection limit.

    Notes
    -----
    Only amqtt's anonymous-authentication plugin is loaded (no ``$SYS`` topics, no packet
    logging).  amqtt speaks MQTT 3.1.1 only; the demo plant file says so.
    """

    def __init__(self, host: str = "127.0.0.1", port: int = 1883, max_connections: int = 64):
        if host not in {"127.0.0.1", "::1", "localhost"}:
            raise ValueError(
                f"the embedded broker allows anonymous clients and listens on loopback only, "
                f"not {host!r}"
            )
        self.host = host
        self.port = port
        self.max_connections = max_connections
        self._broker: Any = None

    @property
    def url(self) -> str:
        """``mqtt://host:port``."""
        return f"mqtt://{self.host}:{self.port}"

    def config(self) -> dict[str, Any]:
        """The amqtt broker configuration used."""
        return {
            "listeners": {
                "default": {
                    "type": "tcp",
                    "bind": f"{self.host}:{self.port}",
                    "max_connections": self.max_connections,
                }
            },
            "plugins": {
                "amqtt.plugins.authentication.AnonymousAuthPlugin": {"allow_anonymous": True}
            },
        }

    async def start(self) -> None:
        """Start listening (raises ``amqtt.errors.BrokerError`` if the port is taken)."""
        from amqtt.broker import Broker

        for name in ("amqtt", "transitions"):
            logging.getLogger(name).setLevel(logging.WARNING)
        self._broker = Broker(self.config())
        await self._broker.start()

    async def stop(self) -> None:
        """Disconnect every client and stop listening."""
        if self._broker is not None:
            broker, self._broker = self._broker, None
            with contextlib.suppress(Exception):
                await broker.shutdown()

    async def __aenter__(self) -> EmbeddedBroker:
        await self.start()
        return self

    async def __aexit__(self, *exc: object) -> None:
        await self.stop()


# --------------------------------------------------------------------------------------------
# The demo plant file
# --------------------------------------------------------------------------------------------


def _toml_key(k: str) -> str:
    bare = k and all(c.isalnum() or c in "-_" for c in k) and k.isascii()
    return k if bare else json.dumps(k)


def _toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int | float):
        if isinstance(v, float) and not math.isfinite(v):
            raise ValueError(f"cannot write {v!r} to TOML")
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, list) and not any(isinstance(x, dict) for x in v):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    raise TypeError(f"cannot write {type(v).__name__} as a TOML value")


def _toml_table(path: list[str], table: Mapping[str, Any], out: list[str]) -> None:
    scalars = [
        (k, v)
        for k, v in table.items()
        if not isinstance(v, dict | list)
        or (isinstance(v, list) and not any(isinstance(x, dict) for x in v))
    ]
    subs = [(k, v) for k, v in table.items() if isinstance(v, dict)]
    arrays = [(k, v) for k, v in table.items()
              if isinstance(v, list) and any(isinstance(x, dict) for x in v)]  # fmt: skip
    if path and (scalars or not (subs or arrays)):
        out.append("")
        out.append("[" + ".".join(_toml_key(p) for p in path) + "]")
    out.extend(f"{_toml_key(k)} = {_toml_value(v)}" for k, v in scalars)
    for k, v in subs:
        _toml_table([*path, k], v, out)
    for k, items in arrays:
        for item in items:
            out.append("")
            out.append("[[" + ".".join(_toml_key(p) for p in [*path, k]) + "]]")
            inner: list[str] = []
            _toml_table([], {kk: vv for kk, vv in item.items() if not isinstance(vv, dict)}, inner)
            out.extend(inner)


def _fit_ranges(raw: dict[str, Any]) -> list[str]:
    """Narrow tag ranges that reach past the unit type's physical limits (in place).

    The demo must start even if the example's plausible ranges and the unit type's physical
    limits drift apart; each change is returned as text (and printed by the demo).
    """
    from daemon.config import STANDARD_ATMOSPHERE_PA, available_unit_types
    from daemon.uom import compile_converter, parse_uom

    types = available_unit_types()
    changed: list[str] = []
    for uname, unit in raw.get("units", {}).items():
        ut = types.get(unit.get("unit_type", ""))
        if ut is None:
            continue
        limits = {f.name: f for f in ut.measurements}
        for tag in unit.get("tags", []):
            spec = limits.get(tag.get("measurement", ""))
            if spec is None:
                continue
            try:
                conv = compile_converter(tag["uom"], spec.unit)
                gauge = parse_uom(tag["uom"]).gauge
            except Exception:  # noqa: S112 - load_plant reports it properly
                continue
            baro = float(tag.get("baro_pa", STANDARD_ATMOSPHERE_PA)) if gauge else None
            lo, hi = float(tag["low"]), float(tag["high"])
            if math.isfinite(spec.low) and conv(lo, baro) < spec.low:
                tag["low"] = float(f"{conv.inverse(spec.low, baro):.6g}")
                if conv(tag["low"], baro) < spec.low:
                    tag["low"] = float(f"{conv.inverse(spec.low * 1.0001 + 1e-9, baro):.6g}")
            if math.isfinite(spec.high) and conv(hi, baro) > spec.high:
                tag["high"] = float(f"{conv.inverse(spec.high * 0.9999, baro):.6g}")
            if (tag["low"], tag["high"]) != (lo, hi):
                changed.append(
                    f"{uname} {tag.get('topic')}{'#' + tag['key'] if tag.get('key') else ''}: "
                    f"range {lo:g}..{hi:g} -> {tag['low']:g}..{tag['high']:g} {tag['uom']} "
                    f"(physical limits of {spec.name})"
                )
    return changed


def demo_plant_text(
    *,
    mqtt_port: int,
    http_port: int,
    database_url: str,
    source: str | Path | None = None,
    tick_s: float = 1.0,
    speed: float = 3600.0,
) -> str:
    """The demo's plant file: the Kestrel Ridge example, re-pointed at the demo's services.

    Parameters
    ----------
    mqtt_port : int
        Port of the embedded broker on 127.0.0.1.
    http_port : int
        Port of the daemon's metrics/API on 127.0.0.1.
    database_url : str
        SQLAlchemy URL of the demo database.
    source : path, optional
        Plant file to start from (default: the shipped Kestrel Ridge example).
    tick_s : float
        Daemon tick [s] (1 s so that the table moves).
    speed : float
        Scenario seconds per wall second of the fast-forward: a tag's ``stuck_after_s`` (real
        plant time) is divided by it, at least 4 ticks, so the demo's compressed time shows
        the stuck-sensor test.

    Returns
    -------
    str
        TOML text.  The units, their fuels, parameters, baselines and tag maps are the
        example's, except ``stuck_after_s`` scaled to the demo's clock; broker, database,
        HTTP and tick are the demo's.
    """
    import tomllib

    if source is None:
        text = resources.files("daemon").joinpath("examples/kestrel-ridge.toml").read_text("utf-8")
    else:
        text = Path(source).read_text("utf-8")
    raw = tomllib.loads(text)
    for line in _fit_ranges(raw):
        log.info("demo plant file: %s", line)
    raw["broker"] = {
        **raw.get("broker", {}),
        "host": "127.0.0.1",
        "port": mqtt_port,
        "protocol": "3.1.1",
        "tls": False,
        "username": "",
        "password_file": "",
        "client_id": "brayscope-demo",
        "qos": 1,
    }
    for k in ("ca_file", "cert_file", "key_file"):
        raw["broker"].pop(k, None)
    raw["database"] = {**raw.get("database", {}), "url": database_url}
    raw["http"] = {"bind": f"127.0.0.1:{http_port}"}
    raw["daemon"] = {**raw.get("daemon", {}), "tick_s": tick_s}
    for unit in raw.get("units", {}).values():
        for tag in unit.get("tags", []):
            if "stuck_after_s" in tag:
                tag["stuck_after_s"] = max(4.0 * tick_s, float(tag["stuck_after_s"]) / speed)
    header = [
        "# brayscope demo plant file, generated by `brayscope demo` from the Kestrel Ridge",
        "# example (an invented site).  Broker, database, HTTP and tick point at the demo's",
        "# own loopback services; the units and tag maps are the example's (stuck_after_s",
        "# divided by the demo's speed, because the demo compresses time).",
        "# Advisory monitoring only: brayscope is not a protection or control system.",
        "# Follow the manufacturer's limits, site procedures, local codes and licensed engineers.",
    ]
    body: list[str] = []
    _toml_table([], raw, body)
    return "\n".join(header + body).strip() + "\n"


def write_demo_plant(data_dir: Path, **kwargs: Any) -> Path:
    """Write :func:`demo_plant_text` to ``data_dir/demo-plant.toml`` and return its path."""
    path = data_dir / "demo-plant.toml"
    path.write_text(demo_plant_text(**kwargs), encoding="utf-8")
    return path


# --------------------------------------------------------------------------------------------
# The live summary
# --------------------------------------------------------------------------------------------

#: Columns of the live summary: (header, result column, formatter).
_MW = 1e-6


def _num(v: Any, fmt: str, scale: float = 1.0, offset: float = 0.0) -> str:
    if v is None:
        return "—"
    try:
        x = float(v)
    except (TypeError, ValueError):
        return "—"
    if not math.isfinite(x):
        return "—"
    return format(x * scale + offset, fmt)


@dataclass(frozen=True)
class SummaryRow:
    """The latest result of one unit, formatted for people (efficiencies in per cent)."""

    unit: str
    ts: str
    load_mw: str
    eta_c: str
    eta_t: str
    tit_c: str
    heat_rate: str
    corrected_mw: str
    steady_state: str
    status: str

    #: Column headers of the live table (several lines each, so the table fits 80 columns).
    HEADERS = (
        "unit",
        "UTC",
        "load\nMW",
        "η_c\n%",
        "η_t\n%",
        "TIT °C\n(heat\nbalance)",
        "heat\nrate\nkJ/kWh",
        "corrected\npower\nMW",
        "steady\nstate",
        "status",
    )

    def cells(self) -> tuple[str, ...]:
        return (
            self.unit,
            self.ts,
            self.load_mw,
            self.eta_c,
            self.eta_t,
            self.tit_c,
            self.heat_rate,
            self.corrected_mw,
            self.steady_state,
            self.status,
        )

    def line(self) -> str:
        """One plain line (for logs and pipes), every quantity spelled out."""
        return (
            f"{self.ts} {self.unit}: load {self.load_mw} MW, compressor efficiency "
            f"{self.eta_c} %, turbine efficiency {self.eta_t} %, TIT (heat balance) "
            f"{self.tit_c} degC, heat rate (LHV) {self.heat_rate} kJ/kWh, corrected power "
            f"{self.corrected_mw} MW, steady state {self.steady_state}, status {self.status}"
        )


#: Legend under the live table: every abbreviation of the headers.
LEGEND = (
    "load: generator power · η_c, η_t: compressor and turbine isentropic efficiency · "
    "TIT: turbine inlet temperature from the combustor heat balance (below the firing "
    "temperature) · heat rate at LHV · corrected power at 15 °C, 101.325 kPa, 60 % RH · "
    "steady state: steady, transient, or undecided (the test is warming up) · "
    "status: valid, or the reasons a result is invalid"
)


def summary_row(unit: str, row: Mapping[str, Any] | None) -> SummaryRow:
    """Format a stored result row (``Store.latest_results``) for the live summary.

    ``steady_state`` is ``undecided`` until the steady-state test has enough samples, then
    ``steady`` or ``transient``; ``status`` is ``valid`` or the names of the reason bits
    other than ``not_steady`` (which the steady-state column shows).
    """
    from daemon.compute import steady_state_word
    from models.status import Reason

    if row is None:
        return SummaryRow(unit, "—", "—", "—", "—", "—", "—", "—", "—", "waiting for data")
    ts: Any = row.get("ts")
    ts_text = ts.strftime("%H:%M:%S") if hasattr(ts, "strftime") else str(ts)
    # the steady-state column already says "transient": not_steady is not repeated as status
    reasons = [r for r in str(row.get("reasons") or "").split(",") if r and r != "not_steady"]
    status = int(row.get("status") or 0) & ~int(Reason.NOT_STEADY)
    status_text = "valid" if status == 0 else (", ".join(reasons) or f"bits {status:#x}")
    return SummaryRow(
        unit=unit,
        ts=ts_text,
        load_mw=_num(row.get("in_generator_power"), ".2f", _MW),
        eta_c=_num(row.get("compressor_isentropic_efficiency"), ".2f", 100.0),
        eta_t=_num(row.get("turbine_isentropic_efficiency"), ".2f", 100.0),
        tit_c=_num(row.get("turbine_inlet_temperature"), ".0f", 1.0, -273.15),
        heat_rate=_num(row.get("heat_rate_lhv_kj_per_kwh"), ".0f"),
        corrected_mw=_num(row.get("corrected_power"), ".2f", _MW),
        steady_state=steady_state_word(row.get("steady_state")),
        status=status_text,
    )


def render_table(rows: list[SummaryRow], title: str, footer: str) -> Any:
    """A rich renderable of the summary rows with the caution line under it."""
    from rich import box
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text

    table = Table(
        title=title,
        title_justify="left",
        expand=False,
        box=box.SIMPLE_HEAD,
        padding=(0, 0),
        collapse_padding=True,
        pad_edge=False,
        show_edge=False,
    )
    cells = [r.cells() for r in rows]
    for i, h in enumerate(SummaryRow.HEADERS):
        if h == "status":
            table.add_column(h, justify="left", overflow="fold")
            continue
        width = max([*(len(x) for x in h.split("\n")), *(len(c[i]) for c in cells)])
        if h == "unit":
            table.add_column(h, justify="left", no_wrap=True, min_width=width)
        else:
            table.add_column(h, justify="right", no_wrap=True, min_width=width)
    for r in rows:
        table.add_row(*r.cells())
    return Group(table, Text(footer, style="dim"), Text(CAUTION, style="bold"))


def row_from_result(result: Any) -> dict[str, Any]:
    """A :class:`daemon.compute.Result` as a mapping shaped like a stored result row."""
    from datetime import UTC, datetime

    row: dict[str, Any] = dict(result.values)
    row["ts"] = datetime.fromtimestamp(result.ts, UTC)
    row["in_generator_power"] = result.inputs.get("generator_power")
    row["steady_state"] = result.steady_state
    row["status"] = result.status
    row["reasons"] = ",".join([*result.reasons, *result.warnings])
    return row


# --------------------------------------------------------------------------------------------
# Running the demo
# --------------------------------------------------------------------------------------------


@dataclass
class DemoOptions:
    """Options of :func:`run_demo` (the command-line options of ``brayscope demo``).

    Attributes
    ----------
    duration : float or None
        Stop after this many seconds and exit 0; None runs until Ctrl-C.
    data_dir : Path or None
        Folder for the database and the generated plant file; a new temporary folder if None
        (kept after the run, its path is printed).
    speed : float
        Scenario seconds per wall second (see :mod:`daemon.simulator`).
    port : int
        MQTT port of the embedded broker on 127.0.0.1; 0 picks 1883 if free, else any.
    http_port : int
        Port of the daemon's metrics/API on 127.0.0.1; 0 picks 9478 if free, else any.
    interval_s : float
        Seconds between simulator scans and between daemon ticks (0.25 s: the steady-state
        test gets enough samples to judge a held dispatch block within seconds).
    hold_s : float
        Wall seconds each dispatch block is held (0: no blocks, the clock always runs at
        ``speed``).
    plain : bool or None
        Plain lines instead of the live table; None decides by whether stdout is a terminal.
    """

    duration: float | None = None
    data_dir: Path | None = None
    speed: float = 3600.0
    port: int = 0
    http_port: int = 0
    interval_s: float = 0.25
    hold_s: float = 40.0
    plain: bool | None = None


def _isolated_env(database_url: str, mqtt_port: int, http_port: int) -> Any:
    """Environment overrides that point at the demo's services only.

    Built without reading ``os.environ``: a ``BRAYSCOPE_DATABASE_URL`` or
    ``BRAYSCOPE_BROKER_HOST`` of a real installation must never leak into the demo.
    """
    from daemon.config import EnvOverrides

    return EnvOverrides.model_construct(
        database_url=database_url,
        broker_host="127.0.0.1",
        broker_port=mqtt_port,
        http_bind=f"127.0.0.1:{http_port}",
    )


async def _simulate(
    simulator: Any, host: str, port: int, interval_s: float, stop: asyncio.Event
) -> None:
    """Connect to the broker (retrying) and publish the simulator's scans until ``stop``."""
    import aiomqtt

    from daemon.simulator import publish_loop

    while not stop.is_set():
        try:
            async with aiomqtt.Client(
                host,
                port,
                identifier="kestrel-ridge-simulator",
                protocol=aiomqtt.ProtocolVersion.V311,
                keepalive=30,
            ) as client:
                await publish_loop(client, simulator, interval_s, stop=stop)
        except aiomqtt.MqttError as exc:
            log.warning("simulator: broker connection lost (%s); retrying", exc)
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(stop.wait(), timeout=1.0)


async def _show(  # noqa: PLR0917
    runtime: Any,
    units: list[str],
    stop: asyncio.Event,
    plain: bool,
    title: str,
    footer: str,
    out: Any,
) -> None:
    """Show the latest result per unit until ``stop``: a live table, or plain lines."""
    shown: dict[str, float] = {}

    def rows() -> list[SummaryRow]:
        last = runtime.last_results
        return [summary_row(u, row_from_result(last[u]) if u in last else None) for u in units]

    if plain:
        # at most one line per unit per second, whatever the tick
        while not stop.is_set():
            for u in units:
                r = runtime.last_results.get(u)
                if r is not None and r.ts >= shown.get(u, -math.inf) + 1.0:
                    shown[u] = r.ts
                    print(summary_row(u, row_from_result(r)).line(), file=out, flush=True)
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(stop.wait(), timeout=0.2)
        return
    from rich.console import Console
    from rich.live import Live

    console = Console(file=out)
    with Live(render_table(rows(), title, footer), console=console, refresh_per_second=4) as live:
        while not stop.is_set():
            live.update(render_table(rows(), title, footer))
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(stop.wait(), timeout=0.5)
        live.update(render_table(rows(), title, footer))


async def run_demo(opts: DemoOptions, out: Any = None) -> int:
    """Run the demo (see the module docstring); returns the exit code.

    Parameters
    ----------
    opts : DemoOptions
    out : file, optional
        Where the summary goes (stdout by default).
    """
    from daemon.config import PlantConfigError, load_plant
    from daemon.runtime import Runtime
    from daemon.simulator import PlantSimulator, kestrel_ridge_scenario

    out = out if out is not None else sys.stdout
    data_dir = opts.data_dir or Path(tempfile.mkdtemp(prefix="brayscope-demo-"))
    data_dir.mkdir(parents=True, exist_ok=True)
    mqtt_port = opts.port or free_port(preferred=DEFAULT_MQTT_PORT)
    http_port = opts.http_port or free_port(preferred=DEFAULT_HTTP_PORT)
    db_path = (data_dir / "brayscope.sqlite").resolve()
    db_url = f"sqlite:///{db_path}"
    plant_path = write_demo_plant(
        data_dir,
        mqtt_port=mqtt_port,
        http_port=http_port,
        database_url=db_url,
        tick_s=opts.interval_s,
        speed=opts.speed,
    )
    try:
        plant = load_plant(plant_path, env=_isolated_env(db_url, mqtt_port, http_port))
    except PlantConfigError as exc:
        print(f"brayscope demo: the generated plant file is not usable:\n{exc}", file=sys.stderr)
        return 1

    broker = EmbeddedBroker("127.0.0.1", mqtt_port)
    try:
        await broker.start()
    except Exception as exc:
        print(
            f"brayscope demo: cannot start the embedded MQTT broker on 127.0.0.1:{mqtt_port}: "
            f"{exc} — choose another port with --port",
            file=sys.stderr,
        )
        return 1

    runtime = Runtime(plant)
    scenario = replace(kestrel_ridge_scenario(speed=opts.speed), hold_s=opts.hold_s)
    simulator = PlantSimulator(plant, scenario)
    prefix = plant.daemon.results_topic_prefix
    sim_topics = simulator.topics
    info = [
        f"brayscope demo — {plant.site.name} (invented site, simulated data)",
        f"  MQTT broker   mqtt://127.0.0.1:{mqtt_port} (embedded, MQTT 3.1.1, loopback only)"
        + _moved(opts.port, mqtt_port, DEFAULT_MQTT_PORT),
        f"  sensor topics {', '.join(sorted({t.rsplit('/', 1)[0] + '/#' for t in sim_topics}))}",
        f"  results       {prefix}/<unit>/results (retained), status {prefix}/status",
        f"  subscribe     mosquitto_sub -h 127.0.0.1 -p {mqtt_port} -t '{prefix}/#' -v",
        f"  metrics, API  http://127.0.0.1:{http_port}/metrics  /api/units  live page "
        f"http://127.0.0.1:{http_port}/" + _moved(opts.http_port, http_port, DEFAULT_HTTP_PORT),
        f"  database      {db_path}",
        f"  plant file    {plant_path.resolve()}",
        f"  scenario      {opts.speed / 3600.0:g} h per second for {scenario.opening_s:g} s, then "
        + (
            f"dispatch blocks held {scenario.hold_s:g} s in real time with "
            f"{scenario.move_s:g} s fast-forward between them"
            if scenario.hold_s > 0
            else "the same speed throughout"
        )
        + f"; compressors foul {scenario.fouling_speedup:g}x faster than the scenario clock",
        f"  tick          {plant.daemon.tick_s:g} s (steady test warms up over 20 ticks)",
        "  " + CAUTION,
    ]
    print("\n".join(info), file=out, flush=True)

    stop = asyncio.Event()
    loop = asyncio.get_running_loop()
    installed: list[signal.Signals] = []
    for sig in (signal.SIGINT, signal.SIGTERM):
        with contextlib.suppress(NotImplementedError, RuntimeError, ValueError):
            loop.add_signal_handler(sig, stop.set)
            installed.append(sig)

    plain = opts.plain if opts.plain is not None else not out.isatty()
    title = f"{plant.site.name} — latest result per unit"
    footer = f"tick {plant.daemon.tick_s:g} s · {LEGEND} · Ctrl-C to stop"
    started = time.monotonic()
    code = 0
    try:
        run_task = asyncio.create_task(runtime.run(), name="daemon")
        sim_task = asyncio.create_task(
            _simulate(simulator, "127.0.0.1", mqtt_port, opts.interval_s, stop), name="simulator"
        )
        show_task = asyncio.create_task(
            _show(runtime, list(plant.units), stop, plain, title, footer, out), name="show"
        )
        waiters: set[asyncio.Future[Any]] = {run_task, asyncio.ensure_future(stop.wait())}
        timeout = opts.duration if opts.duration is not None else None
        done, _ = await asyncio.wait(waiters, timeout=timeout, return_when="FIRST_COMPLETED")
        if run_task in done and run_task.exception() is not None:
            log.error("the daemon stopped: %s", run_task.exception())
            code = 1
        stop.set()
        await asyncio.gather(sim_task, show_task, return_exceptions=True)
        runtime.request_stop()
        with contextlib.suppress(Exception):
            await asyncio.wait_for(run_task, timeout=25.0)
    finally:
        for sig in installed:
            loop.remove_signal_handler(sig)
        await broker.stop()
    elapsed = time.monotonic() - started
    _final_report(runtime, list(plant.units), elapsed, simulator, out)
    return code


def _final_report(runtime: Any, units: list[str], elapsed: float, sim: Any, out: Any) -> None:
    try:
        counts = {u: len(runtime.store.results_between(u, 0.0, time.time() + 3600)) for u in units}
        n_quar = runtime.store.count("quarantine")
        n_read = runtime.store.count("readings")
    except Exception as exc:
        print(f"brayscope demo: could not read the database back: {exc}", file=out)
        return
    stored = ", ".join(f"{u} {n}" for u, n in counts.items())
    print(
        f"demo stopped after {elapsed:.0f} s: {sim.messages_sent} messages published, "
        f"{n_read} readings and {sum(counts.values())} results stored ({stored}), "
        f"{n_quar} inputs quarantined",
        file=out,
        flush=True,
    )
    runtime.store.close()


# --------------------------------------------------------------------------------------------
# Command line
# --------------------------------------------------------------------------------------------


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``brayscope demo``."""
    p: argparse.ArgumentParser = subparsers.add_parser(
        "demo",
        help="run broker, daemon and a simulated plant on this machine, showing live results",
        description=(
            "Start an embedded MQTT broker on loopback, a SQLite database, the brayscope daemon "
            "and a simulator of the invented Kestrel Ridge Energy Park (three gas turbines with "
            "load changes, ambient swings, compressor fouling and an offline wash in "
            "accelerated time), and show the latest result per unit. " + CAUTION
        ),
        epilog=(
            "The start banner prints the broker's and the API's actual ports (another port\n"
            "is chosen when 1883 or 9478 is taken) and the mosquitto_sub command to watch the\n"
            "published results.  Everything shown is invented data (docs/demo.md).\n\n"
            "examples:\n"
            "  brayscope demo                          run until Ctrl-C (make demo does this)\n"
            "  brayscope demo --duration 60 --plain    one minute, plain lines, no table\n"
            "  brayscope demo --data-dir /tmp/kr --hold 0   keep the database; no held blocks\n"
            "  brayscope trend -c /tmp/kr/demo-plant.toml --unit KR-GT1 --since 0\n"
            "                                          afterwards: the trend report of the run"
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument(
        "--duration", type=float, default=None, metavar="S",
        help="stop after S seconds and exit 0 (default: run until Ctrl-C)",
    )  # fmt: skip
    p.add_argument(
        "--data-dir", type=Path, default=None, metavar="DIR",
        help="folder for the database and plant file (default: a new temporary folder)",
    )  # fmt: skip
    p.add_argument(
        "--speed", type=float, default=3600.0, metavar="X",
        help="scenario seconds per wall second (default 3600: an hour per second)",
    )  # fmt: skip
    p.add_argument(
        "--port", type=int, default=0, metavar="P",
        help="MQTT port of the embedded broker on 127.0.0.1 (default 1883 if free, else any)",
    )  # fmt: skip
    p.add_argument(
        "--http-port", type=int, default=0, metavar="P",
        help="port of metrics/API on 127.0.0.1 (default 9478 if free, else any)",
    )  # fmt: skip
    p.add_argument(
        "--tick", type=float, default=0.25, metavar="S",
        help="seconds between simulator scans and daemon ticks (default 0.25)",
    )  # fmt: skip
    p.add_argument(
        "--hold", type=float, default=40.0, metavar="S",
        help=(
            "wall seconds each dispatch block is held in real time after the opening "
            "fast-forward (default 40; 0 keeps the fast clock throughout)"
        ),
    )  # fmt: skip
    p.add_argument(
        "--plain", action="store_true", default=None,
        help="print one plain line per unit per tick instead of the live table",
    )  # fmt: skip
    return p


def run(args: argparse.Namespace) -> int:
    """Entry point of ``brayscope demo``."""
    if args.duration is not None and not args.duration > 0:
        print("brayscope demo: --duration must be > 0 seconds", file=sys.stderr)
        return 2
    if not args.speed > 0:
        print("brayscope demo: --speed must be > 0", file=sys.stderr)
        return 2
    if not 0.05 <= args.tick <= 60:
        print("brayscope demo: --tick must be between 0.05 and 60 seconds", file=sys.stderr)
        return 2
    if not args.hold >= 0:
        print("brayscope demo: --hold must be >= 0 seconds", file=sys.stderr)
        return 2
    logging.basicConfig(
        level=os.environ.get("BRAYSCOPE_DEMO_LOG", "WARNING").upper(),
        format="%(asctime)s %(levelname)s %(name)s: %(message)s",
        stream=sys.stderr,
    )
    opts = DemoOptions(
        duration=args.duration,
        data_dir=args.data_dir,
        speed=args.speed,
        port=args.port,
        http_port=args.http_port,
        interval_s=args.tick,
        hold_s=args.hold,
        plain=args.plain,
    )
    try:
        return asyncio.run(run_demo(opts))
    except KeyboardInterrupt:
        return 0
