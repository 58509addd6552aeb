"""The optimised gas-turbine kernel gives the same results as the code it replaced.

Oracle: ``tests/_reference_reconstruct.py``, a frozen, unedited copy of
``models/gas_turbine.py`` as it stood before the speed work.  That earlier code is what the
other tests check against outside sources (Cantera and CoolProp in ``test_roundtrip.py``,
published worked examples and identities in ``test_cycle.py`` / ``test_components.py``,
``test_correction.py``); this file only checks that the speed work changed no result beyond
the agreed tolerance: every value within 1e-7 relative, every temperature within 1e-4 K, the
same NaNs, the same status bits, the same labels.  (The Newton solves converge to about
1e-6 K; better first guesses change the converged temperatures by about that much.)

The operating points are invented (Kestrel Ridge Energy Park, KR-GT1/GT3-like machines) and
carry no check values of their own; faults are injected element by element so that every
NaN / status path of the kernel is exercised, and small chunk sizes put chunk boundaries
through the batch.
"""

from __future__ import annotations

from typing import Any

import _reference_reconstruct as ref
import numpy as np
import pytest

from models import gas_turbine as fast
from models.correction import CorrectionCurve, CorrectionTables
from models.fuel import gas_fuel

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
    """Invented operating points through the frozen forward model, then sensor faults."""
    rng = np.random.default_rng(seed)
    T0 = rng.uniform(243.15, 318.15, n)
    meas, _ = ref.simulate(
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


@pytest.mark.parametrize("faults", [False, True])
@pytest.mark.parametrize("chunk_size", [4096, 333])
def test_same_results_as_frozen_kernel(faults: bool, chunk_size: int) -> None:
    m = _measurements(6000, seed=11 if faults else 7, faults=faults)
    kw: dict[str, Any] = dict(m, fuel=FUEL, chunk_size=chunk_size, mechanical_loss=120.0e3)
    _assert_same(fast.reconstruct(**kw), ref.reconstruct(**kw))


@pytest.mark.parametrize(
    ("tables", "method"),
    [(None, "auto"), (None, "curve"), (TABLES, "auto"), (TABLES, "model"), (None, "model")],
)
def test_same_results_with_corrections(tables: Any, method: str) -> None:
    m = _measurements(2500, seed=5, faults=True)
    kw: dict[str, Any] = dict(m, fuel=FUEL, corrections=tables, correction_method=method)
    _assert_same(fast.reconstruct(**kw), ref.reconstruct(**kw))


def test_same_results_for_array_parameters_fuel_batch_and_scalars() -> None:
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
    kw: dict[str, Any] = dict(m, **par, fuel=batch, chunk_size=700)
    _assert_same(fast.reconstruct(**kw), ref.reconstruct(**kw))
    # one snapshot given as scalars
    one = {k: float(v[0]) for k, v in _measurements(1, seed=29, faults=False).items()}
    _assert_same(fast.reconstruct(**one, fuel=FUEL), ref.reconstruct(**one, fuel=FUEL))


def test_same_results_through_the_unit_type() -> None:
    m = _measurements(3000, seed=31, faults=False)
    m["air_mass_flow"][:] = np.nan
    params = {"generator_efficiency": 0.985, "combustor_pressure_loss": 0.04}
    new = fast.GAS_TURBINE.compute(m, FUEL, params)
    old = ref.GAS_TURBINE.compute(m, FUEL, params)
    _assert_same(new, old)
