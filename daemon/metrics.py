"""Prometheus metrics of the live daemon.

Everything lives in one :class:`Metrics` object built on an injected
:class:`prometheus_client.CollectorRegistry`; there is no module-level state and the process
default registry is never touched, so two runtimes (or two tests) never share counters.

Naming: prefix ``brayscope_``, Prometheus base units in the suffix (``_seconds``, ``_kelvin``,
``_watts``, ``_grams_per_second``, ``_ratio`` for dimensionless fractions), ``_total`` for
counters; ``promtool check metrics`` passes on a scrape (tested).
The only labels are ``unit`` (a unit name from the plant file) and, on the rejected-readings
counter, ``reason`` (one of :data:`daemon.types.QUARANTINE_REASONS`).  Label children are
created once, at construction, for every configured unit and every reason; a call naming any
other unit or reason changes no labelled series (it is counted in
``brayscope_metric_label_refused_total`` instead), so whatever arrives on the wire cannot grow
the number of series.

:class:`Metrics` implements the feed's ``FeedStats`` protocol
(:class:`daemon.feeds.mqtt.FeedStats`), so it can be handed to the MQTT feed directly.

Heat rate is exported once, in the trade's kJ/kWh at LHV (``brayscope_heat_rate_lhv_kj_per_kwh``,
the result's own name): a base-unit J/J twin was read by nobody.  The list of every metric with
its meaning is in ``docs/operations.md``.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass

from prometheus_client import (
    CollectorRegistry,
    Counter,
    Gauge,
    Histogram,
    Info,
    generate_latest,
)
from prometheus_client.exposition import CONTENT_TYPE_LATEST

from daemon.types import QUARANTINE_REASONS

__all__ = [
    "CONTENT_TYPE_LATEST",
    "KPI_GAUGES",
    "KpiGauge",
    "Metrics",
]


@dataclass(frozen=True, slots=True)
class KpiGauge:
    """One per-unit KPI gauge: metric name, the result it shows and a scale factor.

    The metric name is ``brayscope_`` + the result name + the Prometheus base-unit suffix of
    its unit (``_ratio`` for fractions, ``_kelvin``, ``_watts``, ``_grams_per_second``; none
    when the result name carries its unit, as ``heat_rate_lhv_kj_per_kwh`` does, or is itself
    a ratio); ``tests/test_names.py`` checks the rule against the glossary.
    """

    metric: str
    result: str
    help: str
    scale: float = 1.0


#: Per-unit KPI gauges (result names from the unit type's results, see docs/glossary.md).
#: Station numbers in the help texts are brayscope's (docs/glossary.md maps them to SAE
#: AS755: our 1, 2, 3, 4 are its 2, 3, 4, 5).
KPI_GAUGES: tuple[KpiGauge, ...] = (
    KpiGauge(
        "brayscope_compressor_isentropic_efficiency_ratio",
        "compressor_isentropic_efficiency",
        "Compressor isentropic efficiency (h2s - h1)/(h2 - h1), fraction "
        "(brayscope stations: 1 compressor inlet, 2 discharge)",
    ),
    KpiGauge(
        "brayscope_compressor_pressure_ratio",
        "compressor_pressure_ratio",
        "Compressor pressure ratio p2/p1 (brayscope stations: 1 compressor inlet, 2 discharge)",
    ),
    KpiGauge(
        "brayscope_turbine_isentropic_efficiency_ratio",
        "turbine_isentropic_efficiency",
        "Turbine isentropic efficiency (h3 - h4)/(h3 - h4s), fraction "
        "(brayscope stations: 3 turbine inlet, 4 exhaust)",
    ),
    KpiGauge(
        "brayscope_turbine_inlet_temperature_kelvin",
        "turbine_inlet_temperature",
        "Turbine inlet temperature T3 from the combustor heat balance (mixed mean, below the "
        "firing temperature; brayscope station 3)",
    ),
    KpiGauge(
        "brayscope_thermal_efficiency_ratio",
        "thermal_efficiency",
        "Thermal efficiency P_gen/(m_f LHV), fraction",
    ),
    KpiGauge(
        "brayscope_heat_rate_lhv_kj_per_kwh",
        "heat_rate_lhv_kj_per_kwh",
        "Heat rate at LHV in kJ/kWh (the trade's unit)",
    ),
    KpiGauge(
        "brayscope_corrected_power_watts",
        "corrected_power",
        "Generator power corrected to reference conditions",
    ),
    KpiGauge(
        "brayscope_corrected_heat_rate_lhv_kj_per_kwh",
        "corrected_heat_rate_lhv_kj_per_kwh",
        "Heat rate at LHV corrected to reference conditions, kJ/kWh",
    ),
    KpiGauge(
        "brayscope_air_mass_flow_grams_per_second",
        "air_mass_flow",
        "Compressor air mass flow, measured or from the heat balance (brayscope station 1), "
        "in the Prometheus base unit g/s (1000 g/s = 1 kg/s)",
        1000.0,
    ),
    KpiGauge(
        "brayscope_shaft_power_watts",
        "shaft_power",
        "Shaft power (turbine power minus compressor power)",
    ),
)

#: Buckets of the compute and commit latency histograms [s].
LATENCY_BUCKETS: tuple[float, ...] = (
    0.001,
    0.0025,
    0.005,
    0.01,
    0.025,
    0.05,
    0.1,
    0.25,
    0.5,
    1.0,
    2.5,
    5.0,
    10.0,
)


class Metrics:
    """All metrics of one daemon, registered on ``registry``.

    Parameters
    ----------
    registry : CollectorRegistry
        Where the metrics are registered (never the process default registry).
    units : sequence of str
        Unit names of the plant file: the only values the ``unit`` label ever takes.
    site : str
        Site name, exported in ``brayscope_build_info``.
    version : str
        brayscope version, exported in ``brayscope_build_info``.
    clock : callable
        Wall clock [s since the epoch], used for result ages (injected for tests).
    """

    def __init__(
        self,
        registry: CollectorRegistry,
        units: Sequence[str],
        *,
        site: str = "",
        version: str = "",
        clock: Callable[[], float] = time.time,
    ) -> None:
        self.registry = registry
        self.units: tuple[str, ...] = tuple(units)
        self._known = frozenset(self.units)
        self._clock = clock
        self._last_result_ts: dict[str, float] = {}
        r = registry

        info = Info("brayscope_build", "brayscope version and site", registry=r)
        info.info({"version": version, "site": site})

        # -- feed -------------------------------------------------------------------------
        self.readings_received_total = Counter(
            "brayscope_readings_received",
            "Values received from the feeds (accepted + rejected)",
            registry=r,
        )
        self.readings_accepted_total = Counter(
            "brayscope_readings_accepted",
            "Values accepted and stored, per unit",
            ["unit"],
            registry=r,
        )
        self.readings_rejected_total = Counter(
            "brayscope_readings_rejected",
            "Values rejected and quarantined, per reason code",
            ["reason"],
            registry=r,
        )
        self.sequence_gaps_total = Counter(
            "brayscope_sequence_gaps",
            "Gaps detected in source sequence numbers, per unit",
            ["unit"],
            registry=r,
        )
        self.sequence_missing_total = Counter(
            "brayscope_sequence_missing_messages",
            "Messages missing according to source sequence numbers, per unit",
            ["unit"],
            registry=r,
        )
        self.queue_depth_gauge = Gauge(
            "brayscope_queue_depth_messages",
            "Messages waiting in the bounded inbound queue",
            registry=r,
        )
        self.queue_overflow_total = Counter(
            "brayscope_queue_overflow_messages",
            "Messages refused because the inbound queue was full (left unacknowledged)",
            registry=r,
        )
        self.broker_connected = Gauge(
            "brayscope_broker_connected",
            "1 while the feed is connected and subscribed to the broker",
            registry=r,
        )
        self.broker_reconnects_total = Counter(
            "brayscope_broker_reconnects",
            "Broker reconnection attempts",
            registry=r,
        )
        self.commits_total = Counter(
            "brayscope_commits",
            "Batches of readings committed to the database before acknowledgement",
            registry=r,
        )
        self.commit_failures_total = Counter(
            "brayscope_commit_failures",
            "Failed commits of readings (messages stay unacknowledged at the broker)",
            registry=r,
        )
        self.commit_duration = Histogram(
            "brayscope_commit_duration_seconds",
            "Time to make one batch of readings durable",
            buckets=LATENCY_BUCKETS,
            registry=r,
        )

        # -- compute and results ----------------------------------------------------------
        self.snapshots_computed_total = Counter(
            "brayscope_snapshots_computed",
            "Snapshots passed through the unit type's compute, per unit",
            ["unit"],
            registry=r,
        )
        self.results_invalid_total = Counter(
            "brayscope_results_invalid",
            "Computed snapshots whose status has a non-warning reason bit, per unit",
            ["unit"],
            registry=r,
        )
        self.results_written_total = Counter(
            "brayscope_results_written",
            "Result rows newly written to the database (duplicates excluded)",
            registry=r,
        )
        self.results_pending = Gauge(
            "brayscope_results_pending_rows",
            "Result rows kept in memory until the database accepts them (bounded)",
            registry=r,
        )
        self.results_dropped_total = Counter(
            "brayscope_results_dropped",
            "Result rows dropped because the bounded pending buffer was full",
            registry=r,
        )
        self.result_write_failures_total = Counter(
            "brayscope_result_write_failures",
            "Failed writes of a tick's results",
            registry=r,
        )
        self.compute_duration = Histogram(
            "brayscope_compute_duration_seconds",
            "Time of one tick's batched compute (all due snapshots in one call per group)",
            buckets=LATENCY_BUCKETS,
            registry=r,
        )
        self.last_tick_timestamp = Gauge(
            "brayscope_last_tick_timestamp_seconds",
            "Time of the last completed tick, seconds since the Unix epoch",
            registry=r,
        )
        self.database_up = Gauge(
            "brayscope_database_up",
            "1 while the database answers",
            registry=r,
        )
        self.publish_total = Counter(
            "brayscope_published_messages",
            "Result messages published to the broker",
            registry=r,
        )
        self.publish_dropped_total = Counter(
            "brayscope_publish_superseded_messages",
            "Result messages replaced by a newer one of the same unit before they were sent",
            registry=r,
        )
        self.label_refused_total = Counter(
            "brayscope_metric_label_refused",
            "Metric updates ignored because they named a unit or reason outside the plant "
            "file / the fixed reason set",
            registry=r,
        )

        self.kpis: list[tuple[KpiGauge, Gauge]] = [
            (k, Gauge(k.metric, k.help, ["unit"], registry=r)) for k in KPI_GAUGES
        ]
        self.steady_state = Gauge(
            "brayscope_steady_state",
            "Steady-state test of the last result: 1 steady, 0 transient, NaN undecided",
            ["unit"],
            registry=r,
        )
        self.result_status = Gauge(
            "brayscope_result_status_code",
            "Reason bits (models.status.Reason) of the last result; 0 = clean",
            ["unit"],
            registry=r,
        )
        self.result_valid = Gauge(
            "brayscope_result_valid",
            "1 when the last result has no non-warning reason bit",
            ["unit"],
            registry=r,
        )
        self.result_timestamp = Gauge(
            "brayscope_result_timestamp_seconds",
            "Snapshot time of the last result, seconds since the Unix epoch",
            ["unit"],
            registry=r,
        )
        self.result_age = Gauge(
            "brayscope_result_age_seconds",
            "Age of the last result at scrape time (NaN before the first result)",
            ["unit"],
            registry=r,
        )

        # pre-create every labelled child: the label sets are fixed from here on
        for reason in sorted(QUARANTINE_REASONS):
            self.readings_rejected_total.labels(reason=reason)
        for unit in self.units:
            for c in (
                self.readings_accepted_total,
                self.sequence_gaps_total,
                self.sequence_missing_total,
                self.snapshots_computed_total,
                self.results_invalid_total,
            ):
                c.labels(unit=unit)
            for _, g in self.kpis:
                g.labels(unit=unit).set(math.nan)
            self.steady_state.labels(unit=unit).set(math.nan)
            self.result_status.labels(unit=unit).set(math.nan)
            self.result_valid.labels(unit=unit).set(math.nan)
            self.result_timestamp.labels(unit=unit).set(math.nan)
            self.result_age.labels(unit=unit).set_function(self._age_fn(unit))
        self.database_up.set(0)
        self.broker_connected.set(0)

    def _age_fn(self, unit: str) -> Callable[[], float]:
        def age() -> float:
            ts = self._last_result_ts.get(unit)
            return math.nan if ts is None else max(0.0, self._clock() - ts)

        return age

    def _unit_ok(self, unit: str | None) -> bool:
        if unit is not None and unit in self._known:
            return True
        self.label_refused_total.inc()
        return False

    # -- FeedStats protocol (daemon.feeds.mqtt) ---------------------------------------------

    def readings_received(self, n: int) -> None:
        """Count ``n`` values received (accepted or rejected)."""
        self.readings_received_total.inc(n)

    def readings_accepted(self, unit: str, n: int) -> None:
        """Count ``n`` values of ``unit`` accepted."""
        if self._unit_ok(unit):
            self.readings_accepted_total.labels(unit=unit).inc(n)

    def readings_rejected(self, reason: str, n: int) -> None:
        """Count ``n`` values rejected for ``reason`` (a quarantine reason code)."""
        if reason in QUARANTINE_REASONS:
            self.readings_rejected_total.labels(reason=reason).inc(n)
        else:
            self.label_refused_total.inc()

    def sequence_gap(self, unit: str | None, missing: int) -> None:
        """Count one sequence gap of ``missing`` messages."""
        if self._unit_ok(unit):
            self.sequence_gaps_total.labels(unit=unit).inc()
            self.sequence_missing_total.labels(unit=unit).inc(max(0, missing))

    def queue_overflow(self, n: int) -> None:
        """Count ``n`` messages refused by a full inbound queue."""
        self.queue_overflow_total.inc(n)

    def queue_depth(self, depth: int) -> None:
        """Set the inbound queue depth [messages]."""
        self.queue_depth_gauge.set(depth)

    def commit_failed(self) -> None:
        """Count one failed commit."""
        self.commit_failures_total.inc()

    def committed(self, messages: int, seconds: float) -> None:
        """Count one commit of ``messages`` messages that took ``seconds``."""
        self.commits_total.inc()
        self.commit_duration.observe(seconds)

    def connection_state(self, connected: bool) -> None:
        """Set the broker connection state."""
        self.broker_connected.set(1 if connected else 0)

    def reconnect(self) -> None:
        """Count one reconnection attempt."""
        self.broker_reconnects_total.inc()

    # -- results ----------------------------------------------------------------------------

    def observe_result(
        self,
        unit: str,
        ts: float,
        values: Mapping[str, float],
        status: int,
        *,
        valid: bool,
        steady_state: bool | None,
    ) -> None:
        """Show one result of ``unit`` in the per-unit gauges.

        Parameters
        ----------
        unit : str
            Unit name (ignored unless configured).
        ts : float
            Snapshot time [s since the epoch].
        values : mapping of str to float
            Result values by glossary name [SI; heat rates in kJ/kWh]; NaN where not computed.
        status : int
            Reason bits of the result.
        valid : bool
            True when no non-warning reason bit is set.
        steady_state : bool or None
            Steady-state verdict (True steady, False transient, None undecided).
        """
        if not self._unit_ok(unit):
            return
        self.snapshots_computed_total.labels(unit=unit).inc()
        if not valid:
            self.results_invalid_total.labels(unit=unit).inc()
        for k, g in self.kpis:
            v = values.get(k.result, math.nan)
            g.labels(unit=unit).set(float(v) * k.scale if v is not None else math.nan)
        self.steady_state.labels(unit=unit).set(
            math.nan if steady_state is None else float(steady_state)
        )
        self.result_status.labels(unit=unit).set(int(status))
        self.result_valid.labels(unit=unit).set(1.0 if valid else 0.0)
        self.result_timestamp.labels(unit=unit).set(ts)
        prev = self._last_result_ts.get(unit)
        self._last_result_ts[unit] = ts if prev is None else max(prev, ts)

    def results_written(self, n: int) -> None:
        """Count ``n`` result rows newly written."""
        self.results_written_total.inc(n)

    def tick_done(self, ts: float) -> None:
        """Record the completion time of a tick [s since the epoch]."""
        self.last_tick_timestamp.set(ts)

    def render(self) -> bytes:
        """The registry in the Prometheus text exposition format."""
        return generate_latest(self.registry)

    def series_count(self) -> int:
        """Number of samples currently exported (for cardinality checks)."""
        return sum(len(m.samples) for m in self.registry.collect())

    @staticmethod
    def known_reasons() -> Iterable[str]:
        """The fixed reason-label values."""
        return sorted(QUARANTINE_REASONS)
