"""``brayscope trend``: a known degradation goes through the whole path and comes back.

The record is made by the forward cycle model (:func:`models.units.gas_turbine.simulate.simulate`) from a
compressor whose isentropic efficiency falls at a known rate between washes and whose
post-wash level falls at a known slower rate (the usual picture of recoverable fouling plus
non-recoverable wear: common practice).  Its sensor values, with noise, are reconstructed by
the daemon's own compute path, stored in SQLite through :class:`daemon.storage.Store`, and read
back by the trend command.  Checked:

- the rate between washes and the rate of the post-wash levels come back within tolerance
  (ordinary least squares recovers the slope of a straight line: Draper & Smith, Applied
  Regression Analysis, 3rd ed., 1998, ch. 1);
- both washes are found where they were made;
- the forecast crossing of a threshold agrees with the straight line's t* = t0 + (y* - L)/r
  (the point estimate of Fieller 1954);
- fired hours count only time while firing and no gaps longer than max_gap_s (fired
  hours are counted while the unit burns fuel: common practice);
- efficiency thresholds are taken as 0.86 or 86 %, and a bare 86 is refused.

The numbers of the machine are invented demo data; the truths compared against are the ones
put into the forward model.
"""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from daemon.cli import main as cli_main
from daemon.compute import bindings_from_plant, compute_batch
from daemon.config import load_plant
from daemon.demo_cmd import write_demo_plant
from daemon.runtime import result_row
from daemon.simulator import (
    NOISE,
    ambient_conditions,
    kestrel_ridge_scenario,
    operating_point,
    shutdown_values,
)
from daemon.storage import Store
from daemon.storage import schema as db_schema
from daemon.trend_cmd import (
    KPIS,
    TrendRecord,
    collect,
    fired_hours,
    parse_threshold,
    trend_report,
)
from daemon.types import Snapshot

UNIT = "KR-GT1"
T_START = 1_780_000_000.0  # epoch s of the first result
STEP_S = 600.0  # one result every 10 min
ETA_CLEAN = 0.872
RATE_BETWEEN = -0.012  # per 1000 fired hours between washes (fouling + wear)
RATE_WEAR = -0.002  # per 1000 fired hours of the post-wash level (wear only)
WASHES_H = (500.0, 1000.0)  # fired hours of the two offline washes
TOTAL_H = 1500.0
WASH_OFFLINE_H = 6.0


def eta_truth(t_op: np.ndarray) -> np.ndarray:
    """Compressor efficiency put into the forward model at operating hours ``t_op``."""
    starts = np.array([0.0, *WASHES_H])
    tau = starts[np.searchsorted(starts, t_op, side="right") - 1]
    level = ETA_CLEAN + RATE_WEAR / 1000.0 * tau
    return np.asarray(level + RATE_BETWEEN / 1000.0 * (t_op - tau))


@pytest.fixture(scope="module")
def filled(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path, dict[str, float]]:
    """A SQLite store with the known record; returns (plant file, db, facts)."""
    from models.units.gas_turbine.simulate import simulate

    d = tmp_path_factory.mktemp("trend")
    db = d / "trend.sqlite"
    plant_path = write_demo_plant(d, mqtt_port=1883, http_port=9478, database_url=f"sqlite:///{db}")
    plant = load_plant(plant_path)
    sc = kestrel_ridge_scenario()
    gt1 = next(u for u in sc.units if u.name == UNIT)
    # operating schedule: firing, except an offline wash of WASH_OFFLINE_H calendar hours at
    # each wash (operating hours stand still), and one daemon outage of 2 days (no results)
    n_op = int(TOTAL_H * 3600 / STEP_S)
    t_op = np.arange(n_op) * STEP_S / 3600.0
    ts = T_START + t_op * 3600.0
    for w in WASHES_H:
        ts = np.where(t_op >= w, ts + WASH_OFFLINE_H * 3600.0, ts)
    outage_at = 1200.0
    ts = np.where(t_op >= outage_at, ts + 2 * 86400.0, ts)
    hours_of_day = (ts - T_START) / 3600.0
    amb = ambient_conditions(sc, hours_of_day)
    eta = eta_truth(t_op)
    health = {"compressor_efficiency": eta, "flow_capacity": 1.0 - 0.5 * (ETA_CLEAN - eta)}
    op = operating_point(gt1, amb, health, np.ones(n_op))
    cfg = plant.units[UNIT]
    par = cfg.effective_parameters()
    meas, status = simulate(
        **amb,
        **op,
        fuel=cfg.fuel_properties,
        fuel_temperature=gt1.fuel_temperature,
        **{
            k: v for k, v in par.items() if k in {"generator_efficiency", "combustor_pressure_loss"}
        },
    )
    assert not np.any(status), "forward model refused the invented operating points"
    rng = np.random.default_rng(7)
    noisy = {}
    for m, v in meas.items():
        sd, rel = NOISE.get(m, (0.0, False))
        noisy[m] = v + rng.normal(0.0, 1.0, v.shape) * (np.abs(v) * sd if rel else sd)
    steady = rng.random(n_op) > 0.2  # a fifth of the results are transients
    snaps = [
        Snapshot(
            unit=UNIT,
            unit_type=cfg.unit_type,
            ts=float(ts[i]),
            values={m: float(noisy[m][i]) for m in noisy},
            quality={},
            age_s={},
            steady=bool(steady[i]),
            r_statistic=None,
        )
        for i in range(n_op)
    ]
    # standing machine during the washes: results with zero fuel (not firing)
    for w in WASHES_H:
        t_wash0 = T_START + (w + sum(WASH_OFFLINE_H for x in WASHES_H if x < w)) * 3600.0
        for j in range(int(WASH_OFFLINE_H * 3600 / STEP_S) - 1):
            tj = t_wash0 + (j + 0.5) * STEP_S
            a = {k: float(v) for k, v in ambient_conditions(sc, (tj - T_START) / 3600).items()}
            snaps.append(
                Snapshot(UNIT, cfg.unit_type, tj, shutdown_values(a, gt1.fuel_temperature), {}, {},
                         None, None)
            )  # fmt: skip
    snaps.sort(key=lambda s: s.ts)
    results = compute_batch(snaps, bindings_from_plant(plant))
    store = Store(f"sqlite:///{db}")
    store.upgrade()
    store.upsert_units(plant.units)
    vc, ic = frozenset(db_schema.RESULT_VALUE_COLUMNS), frozenset(db_schema.RESULT_INPUT_COLUMNS)
    rows = [result_row(r, vc, ic) for r in results]
    for k in range(0, len(rows), 2000):
        store.write_results(rows[k : k + 2000])
    store.close()
    facts = {"n_op": n_op, "n_steady": int(steady.sum()), "last_ts": float(ts[-1])}
    return plant_path, db, facts


def _report(db: Path, **kw: object) -> dict[str, object]:
    from daemon.runtime import row_to_api

    store = Store(f"sqlite:///{db}")
    rec = TrendRecord(KPIS[str(kw.pop("kpi", "compressor_isentropic_efficiency"))])
    collect(
        lambda u, a, b: [row_to_api(r) for r in store.results_between(u, a, b)],
        UNIT,
        T_START - 86400.0,
        T_START + 120 * 86400.0,
        rec,
    )
    store.close()
    return trend_report(rec, **kw)  # type: ignore[arg-type]


def test_rates_come_back_from_the_stored_results(filled) -> None:
    _, db, facts = filled
    rep = _report(db, threshold=0.860)
    fit = rep["fit"]
    assert isinstance(fit, dict)
    # steady, valid, firing results only; 2 days outage and washes not counted as hours
    assert rep["n_steady"] == pytest.approx(facts["n_steady"], abs=5)
    assert rep["fired_hours"] == pytest.approx(TOTAL_H - STEP_S / 3600, abs=0.5)
    assert fit["reason"] == "ok"
    # between washes: -0.012 per 1000 h put in (OLS slope, Draper & Smith 1998)
    assert fit["between_wash_rate_per_1000h"] == pytest.approx(RATE_BETWEEN, abs=0.0006)
    # post-wash levels: -0.002 per 1000 h put in (three levels)
    assert fit["post_wash_rate_per_1000h"] == pytest.approx(RATE_WEAR, abs=0.0006)
    washes = rep["washes"]
    assert isinstance(washes, list) and len(washes) == 2
    for w, truth in zip(washes, WASHES_H, strict=True):
        assert w["fired_hours"] == pytest.approx(truth, abs=2.0)
        # the wash restores the fouling part: (0.012 - 0.002) per 1000 h times 500 h
        assert w["size"] == pytest.approx(-(RATE_BETWEEN - RATE_WEAR) * 0.5, abs=0.0008)


def test_forecast_matches_the_straight_line_crossing(filled) -> None:
    _, db, _ = filled
    rep = _report(db, threshold=0.860)
    fc = rep["forecast"]
    assert isinstance(fc, dict) and fc["status"] == "ahead"
    # truth: post-wash level at 1000 h is 0.872 - 0.002 = 0.870, falling 0.012 per 1000 h:
    # 0.860 is reached 0.010 / 0.012 * 1000 h = 833 h later (t* = t0 + (y* - L) / r)
    expected = 1000.0 + (0.860 - 0.870) / (RATE_BETWEEN / 1000.0)
    assert fc["fired_hours"] == pytest.approx(expected, abs=60.0)
    assert fc["band_closed"] and fc["fired_hours_low"] < fc["fired_hours"] < fc["fired_hours_high"]
    # an efficiency already above the threshold and a flat heat-rate limit far away
    never = _report(db, threshold=0.95)["forecast"]
    assert isinstance(never, dict) and never["status"] == "already_beyond"


def test_heat_rate_trend_rises_and_washes_step_down(filled) -> None:
    _, db, _ = filled
    rep = _report(db, kpi="corrected_heat_rate_lhv_kj_per_kwh")
    fit = rep["fit"]
    assert isinstance(fit, dict)
    # fouling raises the corrected heat rate between washes (common practice)
    assert fit["between_wash_rate_per_1000h"] > 0
    washes = rep["washes"]
    assert isinstance(washes, list) and len(washes) == 2
    assert all(w["size"] < 0 for w in washes)


def test_fired_hours_count_firing_time_only() -> None:
    t = np.array([0.0, 600, 1200, 1800, 2400, 9000, 9600])
    firing = np.array([True, True, False, True, True, True, True])
    h = fired_hours(t, firing, max_gap_s=600.0)
    # 0-600 firing; 600-1200 stops; 1200-1800 starts (not firing at 1200); 1800-2400 firing;
    # 2400-9000 gap > max_gap; 9000-9600 firing -> 3 x 600 s
    assert h[-1] == pytest.approx(1800.0 / 3600.0)
    rec = TrendRecord(KPIS["compressor_isentropic_efficiency"], max_gap_s=600.0)
    rec.add(
        {"ts_epoch_s": float(a), "inputs": {"fuel_mass_flow": 2.0 if f else 0.0}, "results": {}}
        for a, f in zip(t, firing, strict=True)
    )
    assert rec.total_hours == pytest.approx(h[-1])


def test_cli_prints_rate_washes_forecast_and_writes_an_svg(filled, tmp_path: Path, capsys) -> None:
    plant_path, _, _ = filled
    svg = tmp_path / "gt1.svg"
    code = cli_main(
        [
            "trend", "-c", str(plant_path), "--unit", UNIT, "--since", str(T_START - 3600),
            "--until", str(T_START + 100 * 86400), "--threshold", "86%", "--plot", str(svg),
        ]
    )  # fmt: skip
    out = capsys.readouterr().out
    assert code == 0, out
    # efficiencies in per cent with two decimals, their rates in percentage points
    assert "percentage points per 1000 fired hours" in out and out.count("wash step") == 2
    assert "reaches 86.00 %" in out and "baseline     87.20 %" in out
    assert "not a maintenance instruction" in out
    assert "fired hours counted from result timestamps" in out
    root = ET.fromstring(svg.read_text())
    assert (
        root.tag.endswith("svg")
        and len(root.findall(".//{http://www.w3.org/2000/svg}circle")) > 100
    )
    code = cli_main(["trend", "-c", str(plant_path), "--unit", UNIT, "--since", "0", "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0 and doc["unit"] == UNIT and doc["baseline"] == pytest.approx(0.872)


def test_cli_help_explains_the_time_basis_and_refuses_unknown_units(filled, capsys) -> None:
    plant_path, _, _ = filled
    with pytest.raises(SystemExit):
        cli_main(["trend", "--help"])
    text = capsys.readouterr().out
    assert "fired hours" in text.lower() and "--fired-hours-at-start" in text
    assert "not a maintenance instruction" in text
    assert cli_main(["trend", "-c", str(plant_path), "--unit", "KR-GT9"]) == 2


def test_threshold_takes_a_fraction_or_a_percentage_and_refuses_a_bare_percent(
    filled, capsys
) -> None:
    eff = KPIS["compressor_isentropic_efficiency"]
    assert parse_threshold("0.85", eff) == parse_threshold("85%", eff) == pytest.approx(0.85)
    assert parse_threshold(" 85.5 % ", eff) == pytest.approx(0.855)
    with pytest.raises(ValueError, match=r"write 0\.85 or 85%"):
        parse_threshold("85", eff)
    hr = KPIS["corrected_heat_rate_lhv_kj_per_kwh"]
    assert parse_threshold("10900", hr) == 10900.0
    with pytest.raises(ValueError, match="efficiencies only"):
        parse_threshold("5%", hr)
    plant_path, _, _ = filled
    code = cli_main(["trend", "-c", str(plant_path), "--unit", UNIT, "--threshold", "85"])
    err = capsys.readouterr().err
    assert code == 2 and "--threshold" in err and "write 0.85 or 85%" in err


def test_old_option_and_kpi_names_still_work_with_a_warning(filled, capsys) -> None:
    # renamed in this release (CHANGELOG): accepted for one release, with a message
    plant_path, _, _ = filled
    code = cli_main(
        [
            "trend", "-c", str(plant_path), "--unit", UNIT, "--since", "0", "--json",
            "--kpi", "corrected_heat_rate_kJ_per_kWh", "--bin", "2", "--max-gap", "900",
            "--threshold", "10900", "--line", "nonrecoverable",
        ]
    )  # fmt: skip
    captured = capsys.readouterr()
    doc = json.loads(captured.out)
    assert code == 0
    assert doc["kpi"] == "corrected_heat_rate_lhv_kj_per_kwh" and doc["bin_h"] == 2.0
    assert doc["max_gap_s"] == 900.0 and doc["forecast"]["line"] == "post_wash"
    for old, new in (
        ("corrected_heat_rate_kJ_per_kWh", "corrected_heat_rate_lhv_kj_per_kwh"),
        ("--bin", "--bin-h"),
        ("--max-gap", "--max-gap-s"),
        ("nonrecoverable", "post_wash"),
    ):
        assert f"'{old}' is a deprecated name: use '{new}'" in captured.err
