"""The chunked, vectorised gas-turbine kernel does not depend on how a batch is cut.

The fast path works in cache-sized chunks, with masked writes and Newton solves that stop per
chunk.  Bugs of that kind of code (a mask applied to the wrong chunk, a status bit lost at a
boundary, a NaN leaking into a neighbour) show up as a dependence of the results on the chunk
size or on the company a snapshot keeps in its batch.  These tests compute the same snapshots
cut in different ways and require every value within 1e-7 relative, every temperature within
1e-4 K (the Newton solves stop per chunk at about 1e-6 K), the same NaNs, the same status bits
and the same labels.  The physics itself is checked against outside sources elsewhere
(Cantera and CoolProp in ``test_roundtrip.py``, published worked examples and identities in
``test_cycle.py`` / ``test_components.py``, ``test_correction.py``).

The operating points are invented (Kestrel Ridge Energy Park, KR-GT1/GT3-like machines) and
carry no check values of their own; faults are injected element by element so that every
NaN / status path of the kernel is exercised.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from models.correction.gas_turbine import CorrectionCurve, CorrectionTables
from models.properties.fuel import gas_fuel
from models.units.gas_turbine import reconstruct as fast
from models.units.gas_turbine.schema import GAS_TURBINE
from models.units.gas_turbine.simulate import simulate

RTOL = 1e-7  # relative, every result
TEMPERATURE_ATOL = 1e-4  # K, results in kelvin
FUEL = gas_fuel(
    {"CH4": 0.93, "C2H6": 0.035, "C3H8": 0.008, "n-C4H10": 0.002, "N2": 0.015, "CO2": 0.01}
)
TABLES = CorrectionTables(
    power_vs_inlet_temperature=CorrectionCurve.from_points(
        [253.15, 288.15, 318.15], [1.15, 1.0, 0.85]
    ),
    heat_rate_vs_inlet_temperature=CorrectionCurve.from_points(
        [253.15, 288.15, 318.15], [0.98, 1.0, 1.03]
    ),
    power_vs_ambient_pressure=CorrectionCurve.from_points(
        [90.0e3, 101.325e3, 105.0e3], [0.89, 1.0, 1.04]
    ),
)


def _measurements(n: int, seed: int, faults: bool) -> dict[str, np.ndarray]:
    """Invented operating points through the forward model, then sensor faults."""
    rng = np.random.default_rng(seed)
    T0 = rng.uniform(243.15, 318.15, n)
    meas, _ = simulate(
        ambient_temperature=T0,
        ambient_pressure=rng.uniform(92.0e3, 104.0e3, n),
        ambient_relative_humidity=rng.uniform(0.0, 1.0, n),
        pressure_ratio=rng.uniform(8.0, 30.0, n),
        compressor_isentropic_efficiency=rng.uniform(0.80, 0.92, n),
        turbine_inlet_temperature=rng.uniform(1100.0, 1800.0, n),
        turbine_isentropic_efficiency=rng.uniform(0.84, 0.93, n),
        air_mass_flow=rng.uniform(30.0, 160.0, n),
        fuel=FUEL,
        inlet_pressure_loss=rng.uniform(0.0, 0.02, n),
        exhaust_pressure_loss=rng.uniform(0.0, 0.05, n),
        fuel_temperature=rng.uniform(280.0, 460.0, n),
    )
    m = {k: np.array(v) for k, v in meas.items()}
    # a measured air flow on about half the snapshots
    m["air_mass_flow"][rng.random(n) < 0.5] = np.nan
    if not faults:
        return m
    keys = sorted(m)
    for _ in range(n // 8):  # one fault in about every eighth snapshot
        i = int(rng.integers(n))
        k = keys[int(rng.integers(len(keys)))]
        kind = int(rng.integers(6))
        if kind == 0:
            m[k][i] = np.nan
        elif kind == 1:
            m[k][i] = -abs(m[k][i])
        elif kind == 2:
            m[k][i] = 0.0
        elif kind == 3:
            m[k][i] *= 40.0
        elif kind == 4:
            m[k][i] *= 0.7
        else:
            m[k][i] = np.inf
    # physically contradictory combinations
    m["compressor_discharge_temperature"][3] = m["compressor_inlet_temperature"][3] - 1.0
    m["compressor_discharge_pressure"][5] = m["compressor_inlet_pressure"][5] * 0.9
    m["exhaust_pressure"][7] = m["compressor_discharge_pressure"][7] * 1.5
    m["generator_power"][9] *= 3.0
    m["fuel_mass_flow"][11] *= 6.0
    m["ambient_relative_humidity"][13] = 1.0005
    m["ambient_relative_humidity"][15] = 1.2
    m["exhaust_temperature"][17] = m["compressor_discharge_temperature"][17] - 5.0
    return m


def _assert_same(new: Any, old: Any) -> None:
    assert set(new.values) == set(old.values)
    np.testing.assert_array_equal(new.status, old.status)
    assert new.labels == old.labels
    assert set(new.label_arrays) == set(old.label_arrays)
    for k, v in old.label_arrays.items():
        np.testing.assert_array_equal(new.label_arrays[k], v)
    for k, v in old.values.items():
        a = new.values[k]
        assert a.shape == v.shape and a.dtype == v.dtype, k
        np.testing.assert_array_equal(np.isnan(a), np.isnan(v), err_msg=k)
        np.testing.assert_allclose(a, v, rtol=RTOL, atol=0.0, equal_nan=True, err_msg=k)
        if k.endswith("temperature"):
            np.testing.assert_allclose(
                a, v, rtol=0.0, atol=TEMPERATURE_ATOL, equal_nan=True, err_msg=k
            )


def _one_by_one(m: dict[str, np.ndarray], **kw: Any) -> Any:
    """Each snapshot computed alone (a batch of one), stacked back into one output."""
    n = len(next(iter(m.values())))
    outs = [fast.reconstruct(**{k: v[i : i + 1] for k, v in m.items()}, **kw) for i in range(n)]
    first = outs[0]
    return type(first)(
        values={k: np.concatenate([o.values[k] for o in outs]) for k in first.values},
        status=np.concatenate([o.status for o in outs]),
        labels=first.labels,
        label_arrays={
            k: np.concatenate([o.label_arrays[k] for o in outs]) for k in first.label_arrays
        },
    )


@pytest.mark.parametrize("faults", [False, True])
@pytest.mark.parametrize("chunk_size", [333, 1000])
def test_chunk_size_changes_nothing(faults: bool, chunk_size: int) -> None:
    m = _measurements(6000, seed=11 if faults else 7, faults=faults)
    kw: dict[str, Any] = dict(m, fuel=FUEL, mechanical_loss=120.0e3)
    _assert_same(fast.reconstruct(**kw, chunk_size=chunk_size), fast.reconstruct(**kw))


@pytest.mark.parametrize("faults", [False, True])
def test_batch_equals_one_snapshot_at_a_time(faults: bool) -> None:
    m = _measurements(240, seed=13 if faults else 17, faults=faults)
    kw: dict[str, Any] = {"fuel": FUEL, "mechanical_loss": 120.0e3}
    _assert_same(fast.reconstruct(**m, **kw), _one_by_one(m, **kw))


@pytest.mark.parametrize(
    ("tables", "method"),
    [(None, "auto"), (None, "curve"), (TABLES, "auto"), (TABLES, "model"), (None, "model")],
)
def test_corrections_batch_equals_one_snapshot_at_a_time(tables: Any, method: str) -> None:
    m = _measurements(120, seed=5, faults=True)
    kw: dict[str, Any] = {"fuel": FUEL, "corrections": tables, "correction_method": method}
    _assert_same(fast.reconstruct(**m, **kw), _one_by_one(m, **kw))


def test_array_parameters_and_fuel_batch_do_not_depend_on_chunking() -> None:
    n = 1500
    rng = np.random.default_rng(19)
    m = _measurements(n, seed=23, faults=True)
    m.pop("fuel_temperature")
    ch4 = rng.uniform(0.80, 0.99, n)
    ch4[4] = np.nan  # one bad analyser reading
    batch = gas_fuel({"CH4": ch4, "C2H6": 0.9 - ch4 + 0.05, "H2": 0.05, "N2": 0.05},
                     on_invalid="nan")  # fmt: skip
    par = {
        "generator_efficiency": rng.uniform(0.96, 0.99, n),
        "combustor_pressure_loss": rng.uniform(0.02, 0.06, n),
        "combustion_efficiency": np.where(rng.random(n) < 0.01, 1.2, 0.997),
        "casing_heat_loss_fraction": 0.004,
        "mechanical_loss": np.where(rng.random(n) < 0.01, -1.0, 2.0e5),
    }
    kw: dict[str, Any] = dict(m, **par, fuel=batch)
    _assert_same(fast.reconstruct(**kw, chunk_size=700), fast.reconstruct(**kw))
    # the bad analyser reading spoils its own snapshot only
    out = fast.reconstruct(**kw)
    assert np.isnan(out.values["heat_rate_lhv_kj_per_kwh"][4])
    assert np.isfinite(out.values["compressor_isentropic_efficiency"][4])


def test_scalars_equal_a_batch_of_one() -> None:
    one = {k: float(v[0]) for k, v in _measurements(1, seed=29, faults=False).items()}
    batch = {k: np.array([v]) for k, v in one.items()}
    _assert_same(fast.reconstruct(**one, fuel=FUEL), fast.reconstruct(**batch, fuel=FUEL))


def test_unit_type_equals_reconstruct() -> None:
    m = _measurements(3000, seed=31, faults=False)
    m["air_mass_flow"][:] = np.nan
    params = {"generator_efficiency": 0.985, "combustor_pressure_loss": 0.04}
    new = GAS_TURBINE.compute(m, FUEL, params)
    old = fast.reconstruct(**m, fuel=FUEL, **params)
    _assert_same(new, old)
