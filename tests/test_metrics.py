"""Metrics of the live daemon: naming, bounded labels, values, isolation.

Sources of the check values:
- Prometheus documentation, "Metric and label naming" (prometheus.io/docs/practices/naming):
  base units in the name, ``_total`` suffix on counters, one ``brayscope_`` prefix.
- Prometheus text exposition format, as parsed by ``prometheus_client.parser`` (the reference
  client library from the package registry).
- 1 kWh = 3600 kJ (SI Brochure, 9th ed., Table 8: the hour is 3600 s), so a heat rate in
  kJ/kWh divided by 3600 is the same heat rate in J/J.
"""

from __future__ import annotations

import math
import random

import pytest
from prometheus_client import REGISTRY, CollectorRegistry
from prometheus_client.parser import text_string_to_metric_families

from daemon.metrics import KPI_GAUGES, Metrics
from daemon.types import QUARANTINE_REASONS

UNITS = ["KR-GT1", "KR-GT2", "KR-GT3"]


class Clock:
    def __init__(self, t: float) -> None:
        self.t = t

    def __call__(self) -> float:
        return self.t


def families(m: Metrics) -> dict[str, object]:
    return {f.name: f for f in text_string_to_metric_families(m.render().decode())}


def test_names_units_and_labels_follow_prometheus_conventions() -> None:
    m = Metrics(CollectorRegistry(), UNITS, site="Kestrel Ridge Energy Park", version="0")
    fams = list(text_string_to_metric_families(m.render().decode()))
    assert len(fams) > 20
    for f in fams:
        assert f.name.startswith("brayscope_"), f.name
        for s in f.samples:
            if f.type == "counter":
                # Prometheus naming: counters are exposed with the _total suffix
                assert s.name.endswith(("_total", "_created")), s.name
            labels = set(s.labels) - {"le"}
            if f.name in ("brayscope_build", "brayscope_build_info"):
                assert labels == {"version", "site"}
            else:
                assert labels <= {"unit", "reason"}, (s.name, labels)
            if "unit" in s.labels:
                assert s.labels["unit"] in UNITS
            if "reason" in s.labels:
                assert s.labels["reason"] in QUARANTINE_REASONS
    names = {f.name for f in fams}
    for needed in (
        "brayscope_readings_received",
        "brayscope_readings_rejected",
        "brayscope_snapshots_computed",
        "brayscope_queue_depth_messages",
        "brayscope_sequence_gaps",
        "brayscope_compute_duration_seconds",
        "brayscope_commit_duration_seconds",
        "brayscope_last_tick_timestamp_seconds",
        "brayscope_result_age_seconds",
        "brayscope_steady_state",
        "brayscope_result_status_code",
        "brayscope_compressor_isentropic_efficiency_ratio",
        "brayscope_turbine_isentropic_efficiency_ratio",
        "brayscope_turbine_inlet_temperature_kelvin",
        "brayscope_corrected_power_watts",
        "brayscope_heat_rate_lhv_kj_per_kwh",
        "brayscope_corrected_heat_rate_lhv_kj_per_kwh",
        "brayscope_air_mass_flow_grams_per_second",
    ):
        assert needed in names, needed
    # removed in this release: a heat rate in J/J nobody reads, mass in a non-base unit
    for gone in (
        "brayscope_heat_rate_joules_per_joule",
        "brayscope_corrected_heat_rate_joules_per_joule",
        "brayscope_air_mass_flow_kilograms_per_second",
    ):
        assert gone not in names, gone


def test_every_reason_code_is_precreated_and_counted() -> None:
    m = Metrics(CollectorRegistry(), UNITS)
    m.readings_rejected("out_of_range", 3)
    m.readings_rejected("malformed_json", 1)
    fam = families(m)["brayscope_readings_rejected"]
    by_reason = {s.labels["reason"]: s.value for s in fam.samples if s.name.endswith("_total")}
    assert set(by_reason) == set(QUARANTINE_REASONS)
    assert by_reason["out_of_range"] == 3
    assert by_reason["malformed_json"] == 1
    assert sum(by_reason.values()) == 4


def test_unknown_units_and_reasons_never_create_series() -> None:
    m = Metrics(CollectorRegistry(), UNITS)
    before = m.series_count()
    rng = random.Random(7)
    for i in range(2000):
        junk = f"unit-{rng.getrandbits(40):x}"
        m.readings_accepted(junk, 1)
        m.sequence_gap(junk, 3)
        m.sequence_gap(None, 1)
        m.readings_rejected(f"reason_{i}", 1)
        m.observe_result(junk, 1.0, {"thermal_efficiency": 0.3}, 0, valid=True, steady_state=True)
    assert m.series_count() == before
    refused = families(m)["brayscope_metric_label_refused"]
    total = next(s.value for s in refused.samples if s.name.endswith("_total"))
    assert total == 2000 * 5


def test_kpi_values_in_their_units_and_result_age() -> None:
    clock = Clock(1_800_000_000.0)
    m = Metrics(CollectorRegistry(), UNITS, clock=clock)
    values = {
        "compressor_isentropic_efficiency": 0.871,
        "turbine_inlet_temperature": 1400.0,
        "heat_rate_lhv_kj_per_kwh": 10_440.0,
        "corrected_heat_rate_lhv_kj_per_kwh": 10_300.0,
        "corrected_power": 44.1e6,
        "air_mass_flow": 140.0,
    }
    m.observe_result("KR-GT1", clock.t - 10.0, values, 0, valid=True, steady_state=True)
    clock.t += 5.0
    fams = families(m)

    def val(name: str, unit: str = "KR-GT1") -> float:
        f = fams[name]
        return next(s.value for s in f.samples if s.labels.get("unit") == unit)

    assert val("brayscope_heat_rate_lhv_kj_per_kwh") == pytest.approx(10_440.0)
    assert val("brayscope_corrected_heat_rate_lhv_kj_per_kwh") == pytest.approx(10_300.0)
    # Prometheus base unit of mass is the gram (prometheus.io, "Metric and label naming"):
    # 140 kg/s is exported as 140 000 g/s
    assert val("brayscope_air_mass_flow_grams_per_second") == pytest.approx(140_000.0)
    assert val("brayscope_compressor_isentropic_efficiency_ratio") == pytest.approx(0.871)
    assert val("brayscope_turbine_inlet_temperature_kelvin") == pytest.approx(1400.0)
    assert val("brayscope_corrected_power_watts") == pytest.approx(44.1e6)
    assert val("brayscope_steady_state") == 1.0
    assert val("brayscope_result_valid") == 1.0
    assert val("brayscope_result_age_seconds") == pytest.approx(15.0)
    # results not computed stay NaN, other units have no result yet
    assert math.isnan(val("brayscope_turbine_isentropic_efficiency_ratio"))
    assert math.isnan(val("brayscope_result_age_seconds", "KR-GT2"))
    assert math.isnan(val("brayscope_steady_state", "KR-GT2"))
    computed = fams["brayscope_snapshots_computed"]
    assert {s.labels["unit"]: s.value for s in computed.samples if s.name.endswith("_total")} == {
        "KR-GT1": 1.0,
        "KR-GT2": 0.0,
        "KR-GT3": 0.0,
    }


def test_invalid_result_and_undecided_steady_state() -> None:
    m = Metrics(CollectorRegistry(), UNITS)
    m.observe_result("KR-GT3", 5.0, {}, (1 << 14), valid=False, steady_state=None)
    fams = families(m)
    status = next(
        s.value
        for s in fams["brayscope_result_status_code"].samples
        if s.labels["unit"] == "KR-GT3"
    )
    assert status == float(1 << 14)
    invalid = fams["brayscope_results_invalid"]
    assert (
        next(
            s.value for s in invalid.samples if s.labels["unit"] == "KR-GT3" and "_total" in s.name
        )
        == 1.0
    )
    steady = next(
        s.value for s in fams["brayscope_steady_state"].samples if s.labels["unit"] == "KR-GT3"
    )
    assert math.isnan(steady)


def test_histograms_and_feed_stats_protocol() -> None:
    m = Metrics(CollectorRegistry(), UNITS)
    for dt in (0.002, 0.02, 0.2):
        m.committed(10, dt)
    m.compute_duration.observe(0.03)
    m.queue_depth(17)
    m.queue_overflow(2)
    m.connection_state(True)
    m.reconnect()
    m.commit_failed()
    m.readings_received(12)
    m.readings_accepted("KR-GT2", 11)
    m.sequence_gap("KR-GT2", 4)
    fams = families(m)
    commit = fams["brayscope_commit_duration_seconds"]
    count = next(s.value for s in commit.samples if s.name.endswith("_count"))
    total = next(s.value for s in commit.samples if s.name.endswith("_sum"))
    assert count == 3
    assert total == pytest.approx(0.222)
    assert next(iter(fams["brayscope_queue_depth_messages"].samples)).value == 17
    assert next(iter(fams["brayscope_broker_connected"].samples)).value == 1
    missing = fams["brayscope_sequence_missing_messages"]
    assert (
        next(
            s.value for s in missing.samples if s.labels["unit"] == "KR-GT2" and "_total" in s.name
        )
        == 4
    )


def test_registries_are_isolated_and_default_registry_untouched() -> None:
    before = {m.name for m in REGISTRY.collect()}
    a = Metrics(CollectorRegistry(), UNITS)
    b = Metrics(CollectorRegistry(), UNITS)  # same names: would raise on a shared registry
    a.readings_received(5)
    assert (
        next(
            s.value
            for s in families(b)["brayscope_readings_received"].samples
            if "_total" in s.name
        )
        == 0
    )
    assert {m.name for m in REGISTRY.collect()} == before
    assert all(not n.startswith("brayscope_") for n in before)


def test_kpi_table_names_are_unique_and_have_base_unit_suffixes() -> None:
    names = [k.metric for k in KPI_GAUGES]
    assert len(names) == len(set(names))
    suffixes = ("_ratio", "_kelvin", "_watts", "_grams_per_second", "_kj_per_kwh")
    for n in names:
        assert n.endswith(suffixes), n
