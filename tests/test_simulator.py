"""The Kestrel Ridge simulator: its scenario shapes and the payloads it sends.

The simulator's plant is invented demo data; what is checked here against outside sources is
that its messages are what the plant file promises (every tag decodes back to the forward
model's value through the daemon's own decoder, within the rounding and noise), and that the
scenario has the shapes the demo advertises (fouling lowers efficiency and flow capacity and
approaches an asymptote; a wash recovers most of the loss; the day is warmest in the
afternoon).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from daemon.config import load_plant
from daemon.demo_cmd import write_demo_plant
from daemon.feeds.decode import Decoder
from daemon.simulator import (
    PlantSimulator,
    ambient_conditions,
    fouling_state,
    kestrel_ridge_scenario,
)

T0 = 1_780_000_000.0  # a wall time for payload timestamps


@pytest.fixture(scope="module")
def plant(tmp_path_factory: pytest.TempPathFactory):
    d: Path = tmp_path_factory.mktemp("simplant")
    path = write_demo_plant(
        d, mqtt_port=1883, http_port=9478, database_url=f"sqlite:///{d / 'x.sqlite'}"
    )
    return load_plant(path)


def test_fouling_lowers_efficiency_and_flow_towards_an_asymptote() -> None:
    sc = kestrel_ridge_scenario()
    gt1 = sc.units[0]
    h = np.linspace(0.0, 200.0, 401)
    st = fouling_state(gt1, h, sc.fouling_speedup)
    eta = st["compressor_efficiency"]
    # recoverable fouling: monotone decline, ever slower (common practice: fouling levels off)
    assert np.all(np.diff(eta) < 0)
    assert np.all(np.diff(eta, 2) > -1e-12)
    assert np.all(np.diff(st["flow_capacity"]) < 0)
    # the asymptote is the configured loss below clean
    far = fouling_state(gt1, 1e6, sc.fouling_speedup)
    assert float(far["compressor_efficiency"]) == pytest.approx(
        gt1.compressor_efficiency - gt1.fouling_eta_loss, abs=1e-9
    )


def test_offline_wash_recovers_most_of_the_loss() -> None:
    sc = kestrel_ridge_scenario()
    gt2 = next(u for u in sc.units if math.isfinite(u.wash_start_h))
    ws, we = gt2.wash_start_h, gt2.wash_start_h + gt2.wash_hours
    before = fouling_state(gt2, ws - 1e-6, sc.fouling_speedup)
    during = fouling_state(gt2, 0.5 * (ws + we), sc.fouling_speedup)
    after = fouling_state(gt2, we, sc.fouling_speedup)
    clean = gt2.compressor_efficiency - gt2.nonrecoverable_eta_loss
    loss_before = clean - float(before["compressor_efficiency"])
    loss_after = clean - float(after["compressor_efficiency"])
    assert float(during["online"]) == 0.0
    assert float(before["online"]) == float(after["online"]) == 1.0
    assert loss_after == pytest.approx(loss_before * (1 - gt2.wash_recovery), rel=1e-6)
    # fouling resumes after the wash
    later = fouling_state(gt2, we + 5.0, sc.fouling_speedup)
    assert float(later["compressor_efficiency"]) < float(after["compressor_efficiency"])


def test_daily_cycle_warmest_in_the_afternoon_and_humidity_opposite() -> None:
    sc = kestrel_ridge_scenario()
    h = np.arange(0.0, 24.0, 0.25)
    amb = ambient_conditions(sc, h)
    hod = (sc.start_h + h) % 24
    warmest = hod[np.argmax(amb["ambient_temperature"])]
    assert 14.0 <= warmest <= 16.0
    assert np.corrcoef(amb["ambient_temperature"], amb["ambient_relative_humidity"])[0, 1] < -0.9
    assert np.all((amb["ambient_relative_humidity"] > 0) & (amb["ambient_relative_humidity"] < 1))


def test_every_tag_decodes_back_to_the_forward_model_value(plant) -> None:
    sim = PlantSimulator(plant, kestrel_ridge_scenario(), noise=False, faults=False)
    msgs = sim.step(T0)
    dec = Decoder.from_plant(plant)
    got: dict[tuple[str, str], float] = {}
    for topic, payload in msgs:
        res = dec.decode(topic, payload, T0 + 0.1)
        assert not res.quarantined, [q.detail for q in res.quarantined]
        for r in res.readings:
            got[(r.unit, r.measurement)] = r.value
    n_tags = sum(len(u.tags) for u in plant.units.values())
    assert len(got) == n_tags
    for (unit, m), v in got.items():
        truth = sim.truth[unit].values[m]
        # 6 significant digits in the tag's unit; gauge tags with a fixed barometric value
        # carry that value's offset (a few hundred Pa) like on a plant
        tol = 400.0 if m == "compressor_discharge_pressure" else abs(truth) * 2e-5 + 0.02
        assert v == pytest.approx(truth, abs=tol), (unit, m)


def test_payload_forms_follow_the_tag_map(plant) -> None:
    sim = PlantSimulator(plant, kestrel_ridge_scenario(), noise=False, faults=False)
    msgs = dict(sim.step(T0))
    gt1 = json.loads(msgs["kestrel/gt1/TT-AMB"])
    assert set(gt1) == {"value", "ts", "seq"} and gt1["ts"] == pytest.approx(T0)
    assert isinstance(json.loads(msgs["kestrel/gt2/TT-AMB"]), float)  # bare number
    gt3 = json.loads(msgs["kestrel/gt3/data"])
    assert gt3["ts"].endswith("Z") and {"ambient_temp", "discharge_press", "power_kw"} <= set(gt3)


def test_scripted_faults_are_quarantined_with_their_reason(plant) -> None:
    sim = PlantSimulator(plant, kestrel_ridge_scenario(), noise=True, faults=True)
    dec = Decoder.from_plant(plant)
    reasons: dict[str, int] = {}
    stuck: list[object] = []
    for k in range(40):
        now = T0 + k
        for topic, payload in sim.step(now):
            res = dec.decode(topic, payload, now + 0.05)
            for q in res.quarantined:
                reasons[q.reason] = reasons.get(q.reason, 0) + 1
            if topic == "kestrel/gt2/RH-AMB":
                stuck.append(json.loads(payload))
    # "NaN" text -> wrong_type, 999 degC -> out_of_range, bare NaN token -> non_finite
    # (Python's json accepts NaN unless told not to: reliability guide, common practice)
    assert reasons.get("wrong_type", 0) >= 1
    assert reasons.get("out_of_range", 0) >= 1
    assert reasons.get("non_finite", 0) >= 1
    # the stuck humidity sensor (scenario hours 4..16 = wall seconds 4..16 at 1 h/s) repeats
    assert len(set(map(str, stuck[5:15]))) == 1
    assert len(set(map(str, stuck[20:30]))) > 1


def test_time_lapse_clock_holds_blocks_in_real_time_and_fast_forwards_between() -> None:
    sc = kestrel_ridge_scenario()
    assert sc.hold_s > 0 and sc.hold_speed == 1.0
    t_open = sc.opening_s
    h = sc.scenario_hours(np.array([0.0, t_open, t_open + sc.hold_s]))
    # the opening runs at `speed`, a held block at real time (an hour per 3600 wall seconds)
    assert h[1] == pytest.approx(t_open * sc.speed / 3600.0)
    assert h[2] - h[1] == pytest.approx(sc.hold_s / 3600.0)
    period = sc.hold_s + sc.move_s
    h2 = sc.scenario_hours(np.array([t_open + period, t_open + 2 * period]))
    assert h2[1] - h2[0] == pytest.approx((sc.hold_s + sc.move_s * sc.speed) / 3600.0)
    # monotone, no jumps
    e = np.linspace(0.0, 300.0, 3001)
    assert np.all(np.diff(sc.scenario_hours(e)) > 0)


def test_dispatch_levels_are_flat_in_blocks_and_ramp_between() -> None:
    from daemon.simulator import dispatch_level

    sc = kestrel_ridge_scenario()
    gt3 = next(u for u in sc.units if u.name == "KR-GT3")
    period = sc.hold_s + sc.move_s
    for k in range(1, 4):
        start = sc.opening_s + k * period
        e = np.linspace(start + 0.01, start + sc.hold_s - 0.01, 50)
        lv = dispatch_level(gt3, sc, sc.scenario_hours(e))
        assert np.ptp(lv) == pytest.approx(0.0, abs=1e-12)
        assert lv[0] == pytest.approx(gt3.dispatch[(k - 1) % len(gt3.dispatch)])
    # between block 1 and block 2 the level moves monotonically from one to the other
    e = np.linspace(sc.opening_s + 2 * period - sc.move_s, sc.opening_s + 2 * period, 60)
    lv = dispatch_level(gt3, sc, sc.scenario_hours(e))
    assert lv[0] == pytest.approx(gt3.dispatch[0], abs=1e-6)
    assert lv[-1] == pytest.approx(gt3.dispatch[1], abs=1e-6)
    assert np.all(np.sign(np.diff(lv)) * np.sign(gt3.dispatch[1] - gt3.dispatch[0]) >= 0)


def test_r_statistic_finds_the_held_blocks_steady_and_the_moves_transient(plant) -> None:
    # Cao & Rhinehart (1995) R-statistic with its default filter factors: R near 1 when the
    # signal only carries noise, R >> 1 while it drifts; the simulated generator power must
    # show both, at the demo's 0.25 s scan
    from models.steady import r_statistic, steady_flags

    sc = kestrel_ridge_scenario()
    sim = PlantSimulator(plant, sc, noise=True, faults=False)
    dt = 0.25
    t = np.arange(0.0, sc.opening_s + 2 * (sc.hold_s + sc.move_s), dt)
    power = []
    for e in t:
        sim.step(T0 + e)
        power.append(sim._noisy("generator_power", sim.truth["KR-GT1"].values["generator_power"]))
    flags = steady_flags(r_statistic(np.array(power)))
    period = sc.hold_s + sc.move_s
    for k in (1, 2):
        hold_end = sc.opening_s + k * period - sc.move_s
        late = (t > hold_end - 10.0) & (t < hold_end)
        assert flags[late].mean() > 0.9, k  # steady by the end of each held block
    opening = (t > 8.0) & (t < sc.opening_s)
    assert flags[opening].mean() < 0.05  # the fast-forward is a transient
