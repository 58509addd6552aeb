"""Sensor faults through the real path: plant file → decoder → assembly → compute.

Reliability checklist item 13: a stuck transmitter, an out-of-range value and one of two
redundant sensors disagreeing must give results flagged invalid with the reason, never numbers
computed silently from a bad value.

References for the check values:
- Isentropic compressor efficiency needs the discharge temperature, η_c = (h2s − h1)/(h2 − h1)
  (Saravanamuttoo et al., *Gas Turbine Theory*, ch. 2): without a usable T2 it cannot be
  computed; the heat rate (fuel flow × LHV / power) needs no T2 and stays computed.
- Agreeing redundant sensors are combined by their arithmetic mean, and a difference beyond
  the allowed spread makes the pair unusable (common practice for two-out-of-two
  measurements).  The combined result is compared with ``models.units.gas_turbine.schema.GAS_TURBINE``
  called directly on the mean (the daemon must add nothing on the way).
- A temperature difference in °C equals the same difference in K (NIST SP 811, 4.2.1.1), so a
  band or spread given in °C is used unscaled in K.
- Operating point: the invented KR-GT1 demo values of ``tests/live_support.py``.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from live_support import OPERATING_POINTS

from daemon.assembly import Assembler
from daemon.compute import bindings_from_plant, compute_batch
from daemon.config import load_plant
from daemon.feeds.decode import Decoder
from models.status import Reason
from models.units.gas_turbine.schema import GAS_TURBINE

EXAMPLE = Path(__file__).resolve().parent.parent / "daemon" / "examples" / "kestrel-ridge.toml"
T0 = 1_780_315_200.0  # 2026-06-01T12:00:00Z, a multiple of 10 s
CDT = "compressor_discharge_temperature"
CDT_TAG = f'  topic = "kestrel/gt1/TT-CDT"\n  measurement = "{CDT}"\n'
GT2_HEADER = "[units.KR-GT2]"
AUX = {"aux.bearing1_vibration": 4.2e-3, "aux.lube_oil_temperature": 328.0}


def _plant(tmp_path: Path, *edits: tuple[str, str]) -> Any:
    text = EXAMPLE.read_text(encoding="utf-8")
    for old, new in edits:
        assert old in text, old
        text = text.replace(old, new, 1)
    path = tmp_path / "plant.toml"
    path.write_text(text, encoding="utf-8")
    return load_plant(path)


class Line:
    """KR-GT1 on the wire: every tag published once per call, in the tag's own unit."""

    def __init__(self, plant: Any) -> None:
        self.plant = plant
        self.decoder = Decoder.from_plant(plant)
        self.assembler = Assembler.from_plant(plant)
        self.bindings = bindings_from_plant(plant)
        self.quarantined: list[Any] = []

    def publish(self, t: float, **si: float) -> None:
        point = dict(OPERATING_POINTS["KR-GT1"]) | AUX
        for tag in self.plant.units["KR-GT1"].tags:  # ambient pressure precedes the gauge tag
            v = si.get(tag.measurement.replace(":", "_"), point.get(tag.canonical))
            baro = point["ambient_pressure"] if tag.is_gauge and tag.baro_pa is None else None
            x = float(f"{tag.converter.inverse(v, baro):.6f}")
            res = self.decoder.decode(tag.topic, json.dumps({"value": x, "ts": t}).encode(), t)
            self.quarantined.extend(res.quarantined)
            self.assembler.ingest(res.readings, res.quarantined)

    def tick(self, t: float) -> tuple[Any, Any]:
        (snap,) = [s for s in self.assembler.tick(t) if s.unit == "KR-GT1"]
        (result,) = compute_batch([snap], self.bindings)
        return snap, result


def _direct(plant: Any, **override: float) -> dict[str, float]:
    u = plant.units["KR-GT1"]
    meas = {k: np.array([v]) for k, v in (OPERATING_POINTS["KR-GT1"] | override).items()}
    out = GAS_TURBINE.compute(meas, u.fuel_properties, u.effective_parameters())
    return {k: float(v[0]) for k, v in out.values.items()}


# ----------------------------------------------------------------------------------------------
# Stuck transmitter
# ----------------------------------------------------------------------------------------------


def test_stuck_sensor_flags_results_after_the_window_and_recovers_when_it_moves(
    tmp_path: Path,
) -> None:
    plant = _plant(tmp_path, (CDT_TAG, CDT_TAG + "  stuck_after_s = 60.0\n"))
    line = Line(plant)
    t2 = 672.0
    for k in range(7):  # 0..60 s: the same value for 60 s is not yet "longer than 60 s"
        line.publish(T0 + 10 * k, **{CDT: t2})
    snap, res = line.tick(T0 + 60)
    assert snap.quality[CDT] == 0 and res.valid
    assert math.isfinite(res.values["compressor_isentropic_efficiency"])
    line.publish(T0 + 70, **{CDT: t2})  # 70 s without a change
    snap, res = line.tick(T0 + 70)
    assert snap.quality[CDT] & Reason.INPUT_STUCK and math.isnan(snap.values[CDT])
    assert math.isnan(res.inputs[CDT])
    assert math.isnan(res.values["compressor_isentropic_efficiency"])
    assert res.status & Reason.INPUT_STUCK and "input_stuck" in res.reasons and not res.valid
    assert not res.status & Reason.INPUT_BAD_QUALITY  # the fault is named, not generic
    assert math.isfinite(res.values["heat_rate_lhv_kj_per_kwh"])  # needs no T2
    assert line.assembler.counters.stuck_flagged == 1
    # the transmitter moves by 0.5 K: usable again at once
    line.publish(T0 + 80, **{CDT: t2 + 0.5})
    snap, res = line.tick(T0 + 80)
    assert snap.quality[CDT] == 0 and snap.values[CDT] == pytest.approx(t2 + 0.5, abs=1e-6)
    ref = _direct(plant, **{CDT: snap.values[CDT]})
    got = res.values["compressor_isentropic_efficiency"]
    assert got == pytest.approx(ref["compressor_isentropic_efficiency"], rel=1e-9)
    assert res.valid


@pytest.mark.parametrize(
    ("band", "steps", "stuck"),
    [
        (0.0, [0.0, 0.02, 0.0, 0.02] * 3, False),  # bit-identical only: any change moves
        (0.1, [0.0, 0.02, 0.0, 0.02] * 3, True),  # quantisation jitter inside the band
        (0.1, [0.03 * i for i in range(12)], False),  # slow creep leaves the band: moving
    ],
)
def test_stuck_band_is_measured_from_the_start_of_the_run(
    tmp_path: Path, band: float, steps: list[float], stuck: bool
) -> None:
    plant = _plant(
        tmp_path, (CDT_TAG, CDT_TAG + f"  stuck_after_s = 60.0\n  stuck_band = {band}\n")
    )
    line = Line(plant)
    for k, d in enumerate(steps):
        line.publish(T0 + 10 * k, **{CDT: 672.0 + d})
    snap, _ = line.tick(T0 + 10 * (len(steps) - 1))
    assert bool(snap.quality[CDT] & Reason.INPUT_STUCK) is stuck


def test_out_of_range_value_makes_results_invalid(tmp_path: Path) -> None:
    line = Line(load_plant(EXAMPLE))
    line.publish(T0)
    line.publish(T0 + 5, **{CDT: 273.15 + 600.0})  # tag range 0..520 degC
    assert [q.reason for q in line.quarantined] == ["out_of_range"]
    snap, res = line.tick(T0 + 10)
    assert snap.quality[CDT] == Reason.INPUT_BAD_QUALITY
    assert math.isnan(res.values["compressor_isentropic_efficiency"]) and not res.valid


# ----------------------------------------------------------------------------------------------
# Redundant sensors
# ----------------------------------------------------------------------------------------------

SECOND = f"""
  [[units.KR-GT1.tags]]
  topic = "kestrel/gt1/TT-CDT-B"
  measurement = "{CDT}:B"
  uom = "degC"
  low = 0.0
  high = 520.0
  max_age_s = 30.0
  max_spread = 8.0
"""


def _pair(tmp_path: Path) -> Any:
    return _plant(
        tmp_path,
        (
            CDT_TAG,
            f'  topic = "kestrel/gt1/TT-CDT"\n  measurement = "{CDT}:A"\n  max_spread = 8.0\n',
        ),
        (GT2_HEADER, SECOND + "\n" + GT2_HEADER),
    )


def test_agreeing_sensors_give_their_mean(tmp_path: Path) -> None:
    plant = _pair(tmp_path)
    line = Line(plant)
    line.publish(T0, **{f"{CDT}_A": 670.0, f"{CDT}_B": 676.0})  # 6 K apart, 8 K allowed
    snap, res = line.tick(T0)
    assert snap.quality[CDT] == 0
    assert snap.values[CDT] == pytest.approx(673.0, abs=1e-6)
    assert f"{CDT}:A" not in snap.values  # the snapshot carries the measurement only
    chans = line.assembler.channels("KR-GT1", T0)
    assert chans[f"{CDT}:A"][0] == pytest.approx(670.0, abs=1e-6)
    assert chans[f"{CDT}:B"][0] == pytest.approx(676.0, abs=1e-6)
    ref = _direct(plant, **{CDT: snap.values[CDT]})
    for name in ("compressor_isentropic_efficiency", "turbine_isentropic_efficiency"):
        assert res.values[name] == pytest.approx(ref[name], rel=1e-12), name
    assert res.valid and res.inputs[CDT] == snap.values[CDT]


def test_disagreeing_sensors_give_nan_and_the_reason(tmp_path: Path) -> None:
    line = Line(_pair(tmp_path))
    line.publish(T0, **{f"{CDT}_A": 670.0, f"{CDT}_B": 680.0})  # 10 K apart > 8 K
    snap, res = line.tick(T0)
    assert math.isnan(snap.values[CDT]) and snap.quality[CDT] & Reason.INPUT_DISAGREE
    assert math.isnan(res.inputs[CDT])
    assert math.isnan(res.values["compressor_isentropic_efficiency"])
    assert res.status & Reason.INPUT_DISAGREE and "input_disagree" in res.reasons
    assert not res.valid
    assert math.isfinite(res.values["heat_rate_lhv_kj_per_kwh"])
    # the pair agrees again: the flag goes
    line.publish(T0 + 10, **{f"{CDT}_A": 671.0, f"{CDT}_B": 672.0})
    snap, res = line.tick(T0 + 10)
    assert snap.quality[CDT] == 0 and snap.values[CDT] == pytest.approx(671.5, abs=1e-6)
    assert res.valid


def test_a_failed_sensor_leaves_the_other_one(tmp_path: Path) -> None:
    line = Line(_pair(tmp_path))
    line.publish(T0, **{f"{CDT}_A": 670.0, f"{CDT}_B": 671.0})
    # B fails out of range (600 degC > 520): A alone carries the measurement
    line.publish(T0 + 5, **{f"{CDT}_A": 670.5, f"{CDT}_B": 873.15})
    snap, res = line.tick(T0 + 10)
    assert snap.quality[CDT] == 0 and snap.values[CDT] == pytest.approx(670.5, abs=1e-6)
    assert line.assembler.channels("KR-GT1", T0 + 10)[f"{CDT}:B"][1] == Reason.INPUT_BAD_QUALITY
    assert res.valid
    # both go stale (max_age_s 30 s): NaN, stale (and B still marked bad)
    snap, res = line.tick(T0 + 50)
    assert math.isnan(snap.values[CDT]) and snap.quality[CDT] & Reason.INPUT_STALE
    assert not res.valid and math.isnan(res.values["compressor_isentropic_efficiency"])
