"""Snapshot assembly: sample-and-hold, staleness, ordering, bad marks, tick alignment, steady flag.

Sources: the hold/stale/order rules are our own contract (docs/feeds.md), checked here against
hand-worked timelines.  The steady-state checks rest on the behaviour of the Cao & Rhinehart
(1995) R-statistic: for independent noise around a constant mean R ≈ 1, for a ramp R ≫ 1
(S. Cao and R. R. Rhinehart, "An efficient method for on-line identification of steady state",
J. Process Control 5(6):363-374, 1995).
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest

from daemon.assembly import Assembler, UnitSpec
from daemon.types import Quarantined, Reading
from models.status import Reason

T0 = 1_234_567_890.0  # 2009-02-13T23:31:30Z, a multiple of 10 s


def spec(**ages: float) -> UnitSpec:
    return UnitSpec(
        "KR-GT1",
        "gas_turbine",
        ages or {"ambient_temperature": 30.0, "generator_power": 20.0},
        extra_measurements=("fuel_mass_flow",),
    )


def rd(measurement: str, value: float, ts: float, quality: str = "good") -> Reading:
    return Reading(
        "KR-GT1", measurement, value, ts, ts, quality, f"kestrel/gt1/{measurement}", value, "SI"
    )


def qd(measurement: str, reason: str, ts: float) -> Quarantined:
    return Quarantined(
        ts, f"kestrel/gt1/{measurement}", b"x", reason, "", "KR-GT1", measurement, ts
    )


def test_no_readings_no_snapshot() -> None:
    a = Assembler([spec()], 10.0, clock=lambda: T0)
    assert a.tick() == []
    assert a.snapshot("KR-GT1", T0) is None


def test_tick_boundaries_are_aligned_to_utc_multiples() -> None:
    a = Assembler([spec()], 10.0)
    assert a.tick_at(T0 + 7.9) == T0
    assert a.next_tick_at(T0 + 7.9) == T0 + 10.0
    assert a.tick_at(T0) == T0
    assert Assembler([spec()], 60.0).tick_at(T0) == T0 - 30.0  # 23:31:00Z


def test_hold_then_stale_then_missing_bits() -> None:
    a = Assembler([spec()], 10.0)
    a.ingest([rd("ambient_temperature", 288.15, T0 - 5.0)])
    (s,) = a.tick(T0 + 1.0)
    assert s.ts == T0
    assert s.values["ambient_temperature"] == 288.15 and s.quality["ambient_temperature"] == 0
    assert s.age_s["ambient_temperature"] == pytest.approx(5.0)
    assert math.isnan(s.values["generator_power"])
    assert s.quality["generator_power"] == Reason.INPUT_MISSING
    assert math.isnan(s.age_s["generator_power"])
    assert s.quality["fuel_mass_flow"] == Reason.INPUT_MISSING  # needed by the type, no tag
    # held through the next tick (age 15 s ≤ 30 s) ...
    (s,) = a.tick(T0 + 10.0)
    assert s.values["ambient_temperature"] == 288.15
    # ... and stale once older than max_age_s (age 35 s > 30 s)
    (s,) = a.tick(T0 + 30.0)
    assert math.isnan(s.values["ambient_temperature"])
    assert s.quality["ambient_temperature"] == Reason.INPUT_STALE
    assert s.age_s["ambient_temperature"] == pytest.approx(35.0)


def test_each_tick_emitted_once_and_missed_ticks_skipped() -> None:
    a = Assembler([spec()], 10.0)
    a.ingest([rd("ambient_temperature", 288.15, T0)])
    assert len(a.tick(T0)) == 1
    assert a.tick(T0 + 9.99) == []
    (s,) = a.tick(T0 + 45.0)  # 10, 20, 30 missed: only 40 is emitted
    assert s.ts == T0 + 40.0


def test_older_readings_never_overwrite_newer() -> None:
    a = Assembler([spec()], 10.0)
    a.ingest([rd("generator_power", 44.0e6, T0 - 1.0)])
    a.ingest([rd("generator_power", 40.0e6, T0 - 3.0), rd("generator_power", 41.0e6, T0 - 1.0)])
    (s,) = a.tick(T0)
    assert s.values["generator_power"] == 44.0e6
    assert a.counters.older_ignored == 2
    # shuffled delivery ends in the same state as ordered delivery
    readings = [rd("generator_power", 40e6 + i, T0 - 10 + i) for i in range(10)]
    b1, b2 = Assembler([spec()], 10.0), Assembler([spec()], 10.0)
    b1.ingest(readings)
    b2.ingest(list(reversed(readings)))
    assert b1.tick(T0)[0].values == b2.tick(T0)[0].values


def test_bad_mark_newer_than_held_value_wins_until_a_newer_good_value() -> None:
    a = Assembler([spec()], 10.0)
    a.ingest([rd("ambient_temperature", 288.15, T0 - 8.0)])
    a.ingest([], [qd("ambient_temperature", "bad_quality", T0 - 4.0)])
    (s,) = a.tick(T0)
    assert math.isnan(s.values["ambient_temperature"])
    assert s.quality["ambient_temperature"] == Reason.INPUT_BAD_QUALITY
    a.ingest([rd("ambient_temperature", 289.0, T0 + 2.0)])
    (s,) = a.tick(T0 + 10.0)
    assert s.values["ambient_temperature"] == 289.0 and s.quality["ambient_temperature"] == 0


@pytest.mark.parametrize(
    ("reason", "bit"),
    [
        ("nonphysical", Reason.INPUT_NONPHYSICAL),
        ("out_of_range", Reason.INPUT_BAD_QUALITY),
        ("non_finite", Reason.INPUT_BAD_QUALITY),
        ("future_timestamp", None),  # a clock problem marks nothing
        ("unknown_key", None),
    ],
)
def test_quarantine_reasons_that_mark_a_measurement(reason: str, bit: Reason | None) -> None:
    a = Assembler([spec()], 10.0)
    a.ingest([rd("generator_power", 44e6, T0 - 9.0)], [qd("generator_power", reason, T0 - 2.0)])
    (s,) = a.tick(T0)
    if bit is None:
        assert s.values["generator_power"] == 44e6
    else:
        assert math.isnan(s.values["generator_power"]) and s.quality["generator_power"] == bit


def test_old_bad_mark_does_not_hide_a_newer_value_and_ages_out() -> None:
    a = Assembler([spec()], 10.0)
    a.ingest([], [qd("generator_power", "bad_quality", T0 - 50.0)])
    (s,) = a.tick(T0)  # only bad news, older than max_age 20 s
    assert s.quality["generator_power"] == Reason.INPUT_BAD_QUALITY | Reason.INPUT_STALE
    a.ingest([rd("generator_power", 44e6, T0 + 1.0)])
    (s,) = a.tick(T0 + 10.0)
    assert s.values["generator_power"] == 44e6


def test_bad_and_uncertain_quality_readings() -> None:
    a = Assembler([spec()], 10.0)
    a.ingest([rd("generator_power", 44e6, T0 - 3), rd("generator_power", 0.0, T0 - 1, "bad")])
    assert a.tick(T0)[0].quality["generator_power"] == Reason.INPUT_BAD_QUALITY
    a.ingest([rd("generator_power", 43e6, T0 + 1, "uncertain")])
    assert a.tick(T0 + 10)[0].values["generator_power"] == 43e6
    strict = Assembler([spec()], 10.0, uncertain_as_bad=True)
    strict.ingest([rd("generator_power", 43e6, T0 + 1, "uncertain")])
    assert strict.tick(T0 + 10)[0].quality["generator_power"] == Reason.INPUT_BAD_QUALITY


def test_unknown_units_and_measurements_are_ignored_and_counted() -> None:
    a = Assembler([spec()], 10.0)
    a.ingest(
        [
            Reading("KR-GT9", "generator_power", 1.0, T0, T0, "good", "t", 1.0, "W"),
            rd("exhaust_temperature", 800.0, T0),
        ]
    )
    assert a.counters.unknown_ignored == 2
    assert a.tick(T0) == []


def test_steady_flag_none_during_warmup_true_for_noise_false_for_ramp() -> None:
    rng = np.random.default_rng(20260512)
    steady_unit = Assembler([spec()], 10.0)
    ramp_unit = Assembler([spec()], 10.0)
    flags_noise, flags_ramp = [], []
    for i in range(80):
        t = T0 + 10.0 * i
        noise = float(rng.normal(0.0, 0.05e6))
        steady_unit.ingest([rd("generator_power", 44.0e6 + noise, t)])
        ramp_unit.ingest([rd("generator_power", 30.0e6 + 0.2e6 * i + noise, t)])
        (s1,) = steady_unit.tick(t)
        (s2,) = ramp_unit.tick(t)
        flags_noise.append(s1.steady)
        flags_ramp.append(s2.steady)
        if i < 20:  # warm-up of the default filters (models.steady: 20 samples)
            assert s1.steady is None and s1.r_statistic is None
    # R of noise around a constant stays near 1 (Cao & Rhinehart 1995): mostly steady
    assert sum(f is True for f in flags_noise[40:]) >= 30
    # a ramp of 4 standard deviations per sample drives R far above 2: never steady
    assert all(f is False for f in flags_ramp[25:])
    assert s2.r_statistic is not None and s2.r_statistic > 2.0


def test_steady_signal_missing_gives_not_steady() -> None:
    a = Assembler([spec()], 10.0)
    for i in range(30):
        a.ingest(
            [rd("generator_power", 44e6, T0 + 10 * i)]
            if i < 25
            else [rd("ambient_temperature", 288.0, T0 + 10 * i)]
        )
        (s,) = a.tick(T0 + 10 * i)
    # power stale since tick 25 + 2: NaN sample → R NaN → not steady
    assert s.quality["generator_power"] == Reason.INPUT_STALE
    assert s.steady is False and s.r_statistic is None


def test_from_plant_shape() -> None:
    def tag(m: str, age: float) -> SimpleNamespace:
        return SimpleNamespace(measurement=m, max_age_s=age)

    unit = SimpleNamespace(
        unit_type="gas_turbine",
        tags=[tag("generator_power", 20.0), tag("generator_power", 45.0), tag("x", 5.0)],
    )
    plant = SimpleNamespace(units={"KR-GT2": unit}, daemon=SimpleNamespace(tick_s=5.0))
    a = Assembler.from_plant(plant)
    assert a.tick_s == 5.0
    st = UnitSpec.from_config("KR-GT2", unit)
    assert st.max_age_s == {"generator_power": 45.0, "x": 5.0}  # largest age of redundant tags


# ----------------------------------------------------------------------------------------------
# Auxiliary values (aux.<name>): held, aged, marked bad, never in the snapshot
# ----------------------------------------------------------------------------------------------


def aux_spec() -> UnitSpec:
    return UnitSpec(
        "KR-GT1",
        "gas_turbine",
        {"generator_power": 20.0, "aux.bearing1_vibration": 30.0},
    )


def test_aux_values_are_held_but_never_enter_the_snapshot() -> None:
    a = Assembler([aux_spec()], 10.0)
    ((value, bits, age),) = a.aux("KR-GT1", T0).values()
    assert math.isnan(value) and bits == Reason.INPUT_MISSING and math.isnan(age)
    a.ingest([rd("aux.bearing1_vibration", 4.5e-3, T0 - 2.0), rd("generator_power", 4e7, T0)])
    (s,) = a.tick(T0)
    assert "aux.bearing1_vibration" not in s.values and "aux.bearing1_vibration" not in s.quality
    assert set(s.values) == {"generator_power"}
    value, bits, age = a.aux("KR-GT1", T0)["aux.bearing1_vibration"]
    assert (value, bits, age) == (4.5e-3, 0, pytest.approx(2.0))
    # same stale rule as any measurement: age 32 s > 30 s
    value, bits, _ = a.aux("KR-GT1", T0 + 30.0)["aux.bearing1_vibration"]
    assert math.isnan(value) and bits == Reason.INPUT_STALE
    # an out-of-range aux value marks the aux channel bad, not the snapshot
    a.ingest([], [qd("aux.bearing1_vibration", "out_of_range", T0 + 31.0)])
    value, bits, _ = a.aux("KR-GT1", T0 + 32.0)["aux.bearing1_vibration"]
    assert math.isnan(value) and bits == Reason.INPUT_BAD_QUALITY
    assert a.aux("KR-GT9", T0) == {}


def test_aux_spec_from_plant_file() -> None:
    from pathlib import Path

    from daemon.config import load_plant

    example = Path(__file__).resolve().parent.parent / "daemon" / "examples" / "kestrel-ridge.toml"
    plant = load_plant(example)
    st = UnitSpec.from_config("KR-GT1", plant.units["KR-GT1"])
    assert st.aux_names == ("aux.bearing1_vibration", "aux.lube_oil_temperature")
    assert not any(m.startswith("aux.") for m in st.measurements)
    assert "compressor_discharge_temperature" in st.measurements
