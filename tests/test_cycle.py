"""Whole-cycle reconstruction (models.units.gas_turbine.reconstruct): identities, independent re-computations
on models.properties.mixtures mixtures, element-wise bad-data handling, the unit-type interface.

Operating points are invented (Kestrel Ridge Energy Park, KR-GT1-like ~45 MW and KR-GT3-like
~12 MW machines); they carry no check values of their own.  Check values come from identities
(energy conservation), from independent re-implementations (component functions and a naive
fixed-point iteration on mixtures.Mixture objects), and from facts of the trade where named.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from models.components.combustor import combustor, exhaust_mixture
from models.components.compressor import compressor
from models.components.turbine import turbine
from models.cycles.brayton import brayton_cycle
from models.properties import humid_air, mixtures
from models.properties.fuel import gas_fuel, liquid_fuel
from models.status import WARNING_REASONS, Reason
from models.units.base import UnitType
from models.units.gas_turbine.reconstruct import reconstruct
from models.units.gas_turbine.schema import GAS_TURBINE
from models.units.gas_turbine.simulate import simulate
from models.units.registry import builtin_unit_types

FUEL = gas_fuel(
    {"CH4": 0.93, "C2H6": 0.035, "C3H8": 0.008, "n-C4H10": 0.002, "N2": 0.015, "CO2": 0.01}
)
PARAMS = {
    "generator_efficiency": 0.985,
    "combustor_pressure_loss": 0.04,
    "combustion_efficiency": 0.995,
    "casing_heat_loss_fraction": 0.004,
    "mechanical_loss": 150.0e3,
}


def _sim(n: int = 24, seed: int = 3, fuel: Any = FUEL) -> tuple[dict[str, np.ndarray], dict]:
    rng = np.random.default_rng(seed)
    truth = {
        "ambient_temperature": rng.uniform(258.0, 318.0, n),
        "ambient_pressure": rng.uniform(95.0e3, 103.0e3, n),
        "ambient_relative_humidity": rng.uniform(0.05, 1.0, n),
        "pressure_ratio": rng.uniform(8.0, 24.0, n),
        "compressor_isentropic_efficiency": rng.uniform(0.82, 0.90, n),
        "turbine_inlet_temperature": rng.uniform(1250.0, 1700.0, n),
        "turbine_isentropic_efficiency": rng.uniform(0.84, 0.93, n),
        "air_mass_flow": rng.uniform(35.0, 140.0, n),
    }
    meas, st = simulate(
        **truth, fuel=fuel, inlet_pressure_loss=0.01, exhaust_pressure_loss=0.035,
        fuel_temperature=rng.uniform(288.0, 450.0, n), **PARAMS,
    )  # fmt: skip
    assert not (st & ~np.uint32(WARNING_REASONS)).any()
    return meas, truth


def _recon(meas: dict[str, np.ndarray], measured_air: bool = False, **kw: Any) -> Any:
    m = dict(meas)
    ma = m.pop("air_mass_flow")
    return reconstruct(**m, fuel=kw.pop("fuel", FUEL), air_mass_flow=ma if measured_air else None,
                       **{**PARAMS, **kw})  # fmt: skip


def _errors(status: np.ndarray) -> np.ndarray:
    return status & ~np.uint32(WARNING_REASONS)


# ------------------------------------------------------------------------------------------
def test_round_trip_recovers_component_health() -> None:
    # Identity: simulate() is the exact forward model of reconstruct(); the health that
    # went in must come out (Newton tolerance: < 1e-5 K on every solved temperature).
    meas, truth = _sim()
    out = _recon(meas)
    assert not _errors(out.status).any()
    v = out.values
    np.testing.assert_allclose(
        v["compressor_isentropic_efficiency"], truth["compressor_isentropic_efficiency"], atol=1e-7
    )
    np.testing.assert_allclose(
        v["turbine_isentropic_efficiency"], truth["turbine_isentropic_efficiency"], atol=1e-7
    )
    np.testing.assert_allclose(
        v["turbine_inlet_temperature"], truth["turbine_inlet_temperature"], atol=1e-4
    )
    np.testing.assert_allclose(v["air_mass_flow"], truth["air_mass_flow"], rtol=1e-8)
    np.testing.assert_allclose(v["compressor_pressure_ratio"], truth["pressure_ratio"], rtol=1e-12)
    assert (out.label_arrays["air_mass_flow_source"] == "heat_balance").all()


def test_energy_balance_closes() -> None:
    # Identity (first law on the whole machine): with the heat-balance air flow,
    # turbine power - compressor power = shaft power, to 1e-9 relative.
    meas, _ = _sim(n=64, seed=11)
    v = _recon(meas).values
    net = v["turbine_power"] - v["compressor_power"]
    np.testing.assert_allclose(net, v["shaft_power"], rtol=1e-9)
    np.testing.assert_allclose(
        v["back_work_ratio"], v["compressor_power"] / v["turbine_power"], rtol=1e-12
    )
    np.testing.assert_allclose(v["exhaust_mass_flow"], v["air_mass_flow"] + meas["fuel_mass_flow"])
    # heat rate arithmetic: 3600 kJ/kWh per unit of (heat input / power)
    hr = 3600.0 * meas["fuel_mass_flow"] * float(FUEL.lhv) / meas["generator_power"]
    np.testing.assert_allclose(v["heat_rate_lhv_kj_per_kwh"], hr, rtol=1e-12)
    np.testing.assert_allclose(v["thermal_efficiency"] * v["heat_rate_lhv_kj_per_kwh"], 3600.0)
    np.testing.assert_allclose(
        v["heat_rate_hhv_kj_per_kwh"] / v["heat_rate_lhv_kj_per_kwh"], float(FUEL.hhv / FUEL.lhv)
    )


def test_measured_air_flow_consistent_with_heat_balance() -> None:
    # Identity: with consistent data the measured air flow equals the heat-balance air flow
    # and the reported closure is zero; all results equal the heat-balance run's.
    meas, _ = _sim(seed=5)
    hb = _recon(meas)
    ms = _recon(meas, measured_air=True)
    assert (ms.label_arrays["air_mass_flow_source"] == "measured").all()
    np.testing.assert_allclose(ms.values["heat_balance_air_mass_flow"], meas["air_mass_flow"],
                               rtol=1e-8)  # fmt: skip
    np.testing.assert_allclose(ms.values["heat_balance_closure"], 0.0, atol=1e-9)
    assert np.isnan(hb.values["heat_balance_closure"]).all()
    for k in ("turbine_inlet_temperature", "turbine_isentropic_efficiency", "turbine_power"):
        np.testing.assert_allclose(ms.values[k], hb.values[k], rtol=1e-7)
    # a 2 % high air-flow reading shows as a non-zero closure, with the measured value used
    m2 = dict(meas)
    m2["air_mass_flow"] = meas["air_mass_flow"] * 1.02
    off = _recon(m2, measured_air=True)
    np.testing.assert_allclose(off.values["air_mass_flow"], m2["air_mass_flow"])
    assert (np.abs(off.values["heat_balance_closure"]) > 1e-3).all()


def test_heat_balance_closed_form_equals_fixed_point_iteration() -> None:
    # Independent re-computation: the usual fixed-point iteration on exhaust composition,
    # written naively with mixtures.Mixture objects (combustor.exhaust_mixture, h_real), must
    # converge to the closed form of reconstruct().
    meas, _ = _sim(n=12, seed=8)
    out = _recon(meas)
    x, _ = humid_air.humid_air(meas["ambient_temperature"], meas["ambient_pressure"],
                         meas["ambient_relative_humidity"])  # fmt: skip
    air = mixtures.Mixture.from_mole_fractions(x)
    T1, p1 = meas["compressor_inlet_temperature"], meas["compressor_inlet_pressure"]
    T4, p4 = meas["exhaust_temperature"], meas["exhaust_pressure"]
    mf, P = meas["fuel_mass_flow"], meas["generator_power"]
    hf = FUEL.sensible_enthalpy(meas["fuel_temperature"])
    lhv = float(FUEL.lhv)
    P_shaft = P / PARAMS["generator_efficiency"] + PARAMS["mechanical_loss"]
    q_in = mf * (hf + PARAMS["combustion_efficiency"] * lhv)
    q_loss = PARAMS["casing_heat_loss_fraction"] * mf * lhv
    h1 = air.h_real(T1, p1)
    ma = np.full(T1.shape, 100.0)
    for _ in range(30):
        g = exhaust_mixture(air, FUEL, mf / ma)
        h4 = g.h_real(T4, p4)
        ma_new = (q_in - P_shaft - q_loss - mf * h4) / (h4 - h1)
        done = np.max(np.abs(ma_new / ma - 1)) < 1e-13
        ma = ma_new
        if done:
            break
    np.testing.assert_allclose(out.values["heat_balance_air_mass_flow"], ma, rtol=1e-10)


def test_fused_kernel_matches_component_functions() -> None:
    # Independent re-computation: compressor(), combustor(), turbine() and brayton_cycle()
    # on mixtures.Mixture objects against the fused kernel of reconstruct().
    meas, _ = _sim(n=10, seed=21)
    v = _recon(meas).values
    x, _ = humid_air.humid_air(meas["ambient_temperature"], meas["ambient_pressure"],
                         meas["ambient_relative_humidity"])  # fmt: skip
    air = mixtures.Mixture.from_mole_fractions(x)
    T1, p1 = meas["compressor_inlet_temperature"], meas["compressor_inlet_pressure"]
    T2, p2 = meas["compressor_discharge_temperature"], meas["compressor_discharge_pressure"]
    c = compressor(air, T1, p1, T2, p2)
    np.testing.assert_allclose(v["compressor_isentropic_efficiency"], c.isentropic_efficiency,
                               atol=1e-9)  # fmt: skip
    np.testing.assert_allclose(v["compressor_polytropic_efficiency"], c.polytropic_efficiency,
                               atol=1e-9)  # fmt: skip
    np.testing.assert_allclose(v["compressor_specific_work"], c.specific_work, rtol=1e-9)
    f = v["fuel_air_ratio"]
    cb = combustor(
        air, FUEL, T2, p2, f, fuel_enthalpy=FUEL.sensible_enthalpy(meas["fuel_temperature"]),
        combustion_efficiency=PARAMS["combustion_efficiency"],
        casing_heat_loss_fraction=PARAMS["casing_heat_loss_fraction"],
        combustor_pressure_loss=PARAMS["combustor_pressure_loss"],
    )  # fmt: skip
    np.testing.assert_allclose(v["turbine_inlet_temperature"], cb.T3, atol=1e-4)
    t = turbine(cb.exhaust, cb.T3, cb.p3, meas["exhaust_temperature"], meas["exhaust_pressure"],
                h3=cb.h3)  # fmt: skip
    np.testing.assert_allclose(v["turbine_isentropic_efficiency"], t.isentropic_efficiency,
                               atol=1e-7)  # fmt: skip
    ideal = brayton_cycle(air, T1, p1, p2 / p1, v["turbine_inlet_temperature"], fuel=FUEL,
                          fuel_enthalpy=FUEL.sensible_enthalpy(meas["fuel_temperature"]))  # fmt: skip
    np.testing.assert_allclose(v["ideal_cycle_efficiency"], ideal.efficiency, atol=1e-7)


def test_comparison_cycles_order() -> None:
    # Fact of thermodynamics (common practice): actual < ideal cycle on the real fluid
    # < Carnot between the same temperatures; the cold-air-standard figure lies above
    # the real-fluid ideal cycle at the same pressure ratio.
    meas, _ = _sim(n=30, seed=2)
    v = _recon(meas).values
    assert np.all(v["thermal_efficiency"] < v["ideal_cycle_efficiency"])
    assert np.all(v["ideal_cycle_efficiency"] < v["ideal_brayton_efficiency"])
    assert np.all(v["ideal_brayton_efficiency"] < v["carnot_efficiency"])


def test_liquid_fuel_and_fuel_batch() -> None:
    # A batch of fuels (one per snapshot) gives the same answer as one call per fuel.
    diesel = liquid_fuel(42.8e6, 0.866, 0.13, 0.004)
    meas, truth = _sim(n=6, seed=4, fuel=diesel)
    out = _recon(meas, fuel=diesel)
    np.testing.assert_allclose(out.values["turbine_isentropic_efficiency"],
                               truth["turbine_isentropic_efficiency"], atol=1e-7)  # fmt: skip
    comp = {"CH4": np.array([0.93, 0.80]), "H2": np.array([0.0, 0.15]),
            "C2H6": np.array([0.05, 0.03]), "N2": np.array([0.02, 0.02])}  # fmt: skip
    batch = gas_fuel(comp)
    meas, _ = _sim(n=2, seed=6)
    both = _recon(meas, fuel=batch).values["heat_balance_air_mass_flow"]
    for i in range(2):
        one = gas_fuel({k: float(v[i]) for k, v in comp.items()})
        mi = {k: v[i : i + 1] for k, v in meas.items()}
        assert _recon(mi, fuel=one).values["heat_balance_air_mass_flow"][0] == pytest.approx(
            both[i], rel=1e-12
        )


def test_chunking_changes_results_only_within_solver_tolerance() -> None:
    # Newton stops when the whole chunk has converged, so the last digits depend on the
    # chunk's neighbours: within 1e-8 relative, far below any physical meaning.
    meas, _ = _sim(n=37, seed=9)
    a = _recon(meas, chunk_size=5).values
    b = _recon(meas).values
    for k in a:
        np.testing.assert_allclose(a[k], b[k], rtol=1e-8, err_msg=k)


# ------------------------------------------------------------------------------------------
# Bad data: NaN + reason bits per element, the other elements unaffected
# ------------------------------------------------------------------------------------------
def test_bad_inputs_flag_their_element_only() -> None:
    meas, _ = _sim(n=10, seed=13)
    clean = _recon(meas).values
    bad = {k: v.copy() for k, v in meas.items()}
    bad["compressor_discharge_temperature"][1] = np.nan
    bad["compressor_discharge_pressure"][2] = bad["compressor_inlet_pressure"][2] * 0.9
    bad["fuel_mass_flow"][3] = -1.0
    bad["compressor_discharge_temperature"][4] = bad["compressor_inlet_temperature"][4] - 1.0
    bad["exhaust_temperature"][5] = bad["compressor_inlet_temperature"][5] - 5.0  # m_a < 0
    bad["generator_power"][6] = np.nan
    bad["ambient_relative_humidity"][7] = 1.5
    bad["ambient_temperature"][8] = -3.0
    out = _recon(bad)
    st, v = out.status, out.values
    assert st[1] & Reason.INPUT_MISSING
    assert st[2] & Reason.PRESSURE_RATIO_INVALID
    assert st[3] & Reason.INPUT_NONPHYSICAL
    assert st[4] & Reason.DISCHARGE_NOT_HOTTER
    assert st[5] & Reason.ENERGY_BALANCE_INFEASIBLE
    assert st[6] & Reason.INPUT_MISSING
    assert st[7] & Reason.INPUT_NONPHYSICAL
    assert st[8] & Reason.INPUT_NONPHYSICAL
    for i in (0, 9):
        assert _errors(st[i : i + 1]).item() == 0
        for k in clean:
            np.testing.assert_allclose(v[k][i], clean[k][i], rtol=1e-8, err_msg=k)
    for i in range(1, 9):
        assert np.isnan(v["turbine_isentropic_efficiency"][i]), i
    # results that do not depend on the failed input survive
    assert np.isfinite(v["heat_rate_lhv_kj_per_kwh"][1]) and np.isfinite(v["air_mass_flow"][1])
    assert np.isnan(v["compressor_isentropic_efficiency"][1])
    assert np.isfinite(v["compressor_isentropic_efficiency"][6])
    assert np.isnan(v["heat_rate_lhv_kj_per_kwh"][6])
    assert np.isnan(v["heat_rate_lhv_kj_per_kwh"][3])


def test_implausible_heat_rate_is_a_warning() -> None:
    # Common practice band 8 000-14 000 kJ/kWh (LHV): a power reading at half its value
    # doubles the heat rate; the number is still reported, with the warning bit.
    meas, _ = _sim(n=4, seed=1)
    m = {k: v.copy() for k, v in meas.items()}
    m["generator_power"] = m["generator_power"] * 0.5
    out = _recon(m)
    assert np.all(out.status & Reason.HEAT_RATE_IMPLAUSIBLE)
    assert np.all(np.isfinite(out.values["heat_rate_lhv_kj_per_kwh"]))


# ------------------------------------------------------------------------------------------
# Unit-type interface
# ------------------------------------------------------------------------------------------
REQUIRED_RESULTS = [
    "compressor_pressure_ratio",
    "compressor_isentropic_efficiency",
    "compressor_polytropic_efficiency",
    "compressor_specific_work",
    "compressor_power",
    "air_mass_flow",
    "fuel_air_ratio",
    "exhaust_mass_flow",
    "turbine_inlet_temperature",
    "turbine_inlet_pressure",
    "turbine_isentropic_efficiency",
    "turbine_power",
    "shaft_power",
    "heat_input",
    "heat_rate_lhv_kj_per_kwh",
    "heat_rate_hhv_kj_per_kwh",
    "thermal_efficiency",
    "back_work_ratio",
    "ideal_brayton_efficiency",
    "ideal_cycle_efficiency",
    "carnot_efficiency",
    "corrected_power",
    "corrected_heat_rate_lhv_kj_per_kwh",
    "corrected_power_model",
    "corrected_heat_rate_lhv_model_kj_per_kwh",
    "corrected_power_curve",
    "corrected_heat_rate_lhv_curve_kj_per_kwh",
    "heat_balance_closure",
]


def test_unit_type_interface() -> None:
    assert isinstance(GAS_TURBINE, UnitType)
    assert builtin_unit_types()["gas_turbine"] is GAS_TURBINE
    names = [f.name for f in GAS_TURBINE.results]
    assert set(REQUIRED_RESULTS) <= set(names)
    meas, _ = _sim(n=3, seed=17)
    m = dict(meas)
    m.pop("air_mass_flow")
    out = GAS_TURBINE.compute(m, FUEL, PARAMS)
    assert set(out.values) == set(names)
    assert out.labels["correction_method"] == "model"
    direct = _recon(meas).values
    for k in names:
        np.testing.assert_array_equal(out.values[k], direct[k])
    # defaults are documented and used when a parameter is absent
    defaults = {f.name: f.default for f in GAS_TURBINE.parameters}
    assert defaults["generator_efficiency"] == 0.985
    GAS_TURBINE.compute(m, FUEL, {})
    with pytest.raises(ValueError, match="parameters"):
        GAS_TURBINE.compute(m, FUEL, {"generator_eff": 0.98})
