"""Whole engine (models.units.reciprocating.engine): forward model -> reconstruction round trips,
the forward energy balance against Cantera, element-wise bad data, trade ranges.

Engines and operating points are invented (Kestrel Ridge Energy Park): KR-GE1, a 4.4 MW
lean-burn gas-engine CHP block (20 cylinders, premixed natural gas), and KR-DG1, a 2 MW
black-start Diesel set (16 cylinders).  They carry no check values of their own: checks come
from identities (the round trip, the first law), from Cantera, and from facts of the trade
marked common practice.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest

from models.components.reciprocating import (
    BSFC_G_PER_KWH,
    EngineGeometry,
    estimate_cutoff_ratio,
)
from models.correction.iso3046 import ISO3046_EXPONENTS
from models.cycles.reciprocating import diesel_efficiency, otto_efficiency
from models.properties import humid_air
from models.properties.fuel import gas_fuel, liquid_fuel
from models.properties.species import INDEX, SPECIES
from models.status import WARNING_REASONS, ModelInputError, Reason
from models.units.reciprocating.engine import (
    MEASUREMENTS_OPTIONAL,
    MEASUREMENTS_REQUIRED,
    reconstruct_engine,
    simulate_engine,
)

RPM = 2 * math.pi / 60
KR_GE1 = EngineGeometry(0.21, 0.24, 0.48, 20, 12.5)
KR_DG1 = EngineGeometry(0.17, 0.19, 0.38, 16, 15.5)
NG = gas_fuel({"CH4": 0.93, "C2H6": 0.04, "C3H8": 0.01, "N2": 0.01, "CO2": 0.01})
GAS_OIL = liquid_fuel(42.7e6, 0.866, 0.134 - 1.0e-5, 1.0e-5)  # 10 mg/kg sulfur
LOSSES = {
    "jacket_water_heat_fraction": 0.12,
    "lube_oil_heat_fraction": 0.05,
    "radiation_heat_fraction": 0.015,
}


def _errors(status: np.ndarray) -> np.ndarray:
    return status & ~np.uint32(WARNING_REASONS)


# per engine: health ranges (eta_b, lambda, eta_v, eta_c), power range, other inputs
_ENGINES: dict[str, dict[str, Any]] = {
    "KR-GE1": {"health": ((0.40, 0.46), (1.7, 2.1), (0.88, 0.98), (0.74, 0.82)),
               "power": (2.5e6, 4.4e6), "T0": (263.0, 313.0),
               "fixed": {"premixed": True, "exhaust_stack_temperature": 393.15}},
    "KR-DG1": {"health": ((0.38, 0.43), (1.8, 2.4), (0.90, 1.0), (0.72, 0.80)),
               "power": (1.0e6, 2.0e6), "T0": (263.0, 318.0),
               "fixed": {"generator_efficiency": 0.96}},
}  # fmt: skip
_HEALTH = ("brake_thermal_efficiency", "excess_air_ratio", "volumetric_efficiency",
           "turbocharger_compressor_isentropic_efficiency")  # fmt: skip


def _simulate(unit: str, n: int, seed: int) -> tuple[dict[str, np.ndarray], dict]:
    spec = _ENGINES[unit]
    rng = np.random.default_rng(seed)
    truth = {k: rng.uniform(lo, hi, n) for k, (lo, hi) in zip(_HEALTH, spec["health"], strict=True)}
    sensors, st = simulate_engine(
        KR_GE1 if unit == "KR-GE1" else KR_DG1,
        NG if unit == "KR-GE1" else GAS_OIL,
        ambient_temperature=rng.uniform(*spec["T0"], n),
        ambient_pressure=rng.uniform(94.0e3, 102.0e3, n),
        ambient_relative_humidity=rng.uniform(0.1, 0.9, n),
        generator_power=rng.uniform(*spec["power"], n),
        engine_speed=np.full(n, 1500 * RPM),
        charge_air_temperature=rng.uniform(313.0, 323.0, n),
        charge_air_coolant_temperature=rng.uniform(290.0, 310.0, n),
        **LOSSES, **truth, **spec["fixed"],
    )  # fmt: skip
    assert not _errors(st).any()
    return sensors, truth


def _gas_engine(n: int = 16, seed: int = 7) -> tuple[dict[str, np.ndarray], dict]:
    return _simulate("KR-GE1", n, seed)


def _diesel(n: int = 12, seed: int = 3) -> tuple[dict[str, np.ndarray], dict]:
    return _simulate("KR-DG1", n, seed)


def _diesel_iso3046(meas: dict, **kw: Any) -> Any:
    return reconstruct_engine(meas, KR_DG1, GAS_OIL, cycle="diesel", generator_efficiency=0.96,
                              correction="iso3046", iso3046_exponents=ISO3046_EXPONENTS[
                                  "ci_turbocharged_charge_air_cooled"], **kw)  # fmt: skip


def _measured(sensors: dict[str, np.ndarray], drop: tuple[str, ...] = ()) -> dict:
    keys = set(MEASUREMENTS_REQUIRED) | set(MEASUREMENTS_OPTIONAL)
    return {k: v for k, v in sensors.items() if k in keys and k not in drop}


# ------------------------------------------------------------------------------------------
# Round trips
# ------------------------------------------------------------------------------------------
def test_gas_engine_round_trip_recovers_health() -> None:
    # Identity: reconstruct_engine inverts simulate_engine; the health that went in comes out.
    sensors, truth = _gas_engine()
    out = reconstruct_engine(
        _measured(sensors, drop=("air_mass_flow",)), KR_GE1, NG, cycle="otto", premixed=True
    )
    assert not _errors(out.status).any()
    v = out.values
    np.testing.assert_allclose(
        v["brake_thermal_efficiency"], truth["brake_thermal_efficiency"], rtol=1e-12
    )
    np.testing.assert_allclose(v["excess_air_ratio"], truth["excess_air_ratio"], rtol=1e-10)
    np.testing.assert_allclose(v["air_mass_flow"], sensors["air_mass_flow"], rtol=1e-10)
    np.testing.assert_allclose(
        v["volumetric_efficiency"], truth["volumetric_efficiency"], rtol=1e-9
    )
    np.testing.assert_allclose(
        v["turbocharger_compressor_isentropic_efficiency"],
        truth["turbocharger_compressor_isentropic_efficiency"],
        atol=1e-7,
    )
    # first law: the unaccounted heat is the radiation loss the forward model put in
    np.testing.assert_allclose(v["unaccounted_heat_fraction"], 0.015, atol=1e-9)
    fuel_heat = sensors["fuel_mass_flow"] * NG.lhv
    total = (
        sensors["generator_power"]
        + sensors["jacket_water_heat"]
        + sensors["lube_oil_heat"]
        + sensors["charge_air_cooler_heat"]
        + sensors["exhaust_heat_recovered"]
    ) / fuel_heat
    np.testing.assert_allclose(v["chp_total_efficiency"], total, rtol=1e-12)
    assert (out.label_arrays["air_mass_flow_source"] == "oxygen").all()
    # ideal cycles beside the actual one
    np.testing.assert_allclose(v["ideal_otto_efficiency"], otto_efficiency(12.5)[0])
    assert np.all(v["ideal_cycle_efficiency"] < v["ideal_otto_efficiency"])
    np.testing.assert_allclose(
        v["relative_efficiency"], v["brake_thermal_efficiency"] / v["ideal_cycle_efficiency"]
    )
    assert np.all((v["relative_efficiency"] > 0.6) & (v["relative_efficiency"] < 1.0))


def test_measured_air_flow_agrees_with_oxygen() -> None:
    sensors, truth = _gas_engine(seed=11)
    out = reconstruct_engine(_measured(sensors), KR_GE1, NG, cycle="otto", premixed=True)
    v = out.values
    assert (out.label_arrays["air_mass_flow_source"] == "measured").all()
    np.testing.assert_allclose(
        v["excess_air_ratio_from_air_flow"], truth["excess_air_ratio"], rtol=1e-10
    )
    np.testing.assert_allclose(
        v["excess_air_ratio_from_oxygen"], truth["excess_air_ratio"], rtol=1e-10
    )
    np.testing.assert_allclose(
        v["air_fuel_ratio"], sensors["air_mass_flow"] / sensors["fuel_mass_flow"]
    )


def test_diesel_round_trip_with_peak_pressure_and_iso3046() -> None:
    sensors, truth = _diesel()
    meas = _measured(sensors, drop=("air_mass_flow",))
    out = _diesel_iso3046(meas, mechanical_efficiency=0.88)
    assert not _errors(out.status).any()
    v = out.values
    np.testing.assert_allclose(
        v["brake_thermal_efficiency"], truth["brake_thermal_efficiency"], rtol=1e-12
    )
    np.testing.assert_allclose(v["excess_air_ratio"], truth["excess_air_ratio"], rtol=1e-10)
    np.testing.assert_allclose(
        v["volumetric_efficiency"], truth["volumetric_efficiency"], rtol=1e-9
    )
    # the air-standard Diesel efficiency at the estimated cut-off
    rc_, _ = estimate_cutoff_ratio(
        15.5,
        meas["charge_air_temperature"],
        meas["charge_air_pressure"],
        fuel_mass_flow=meas["fuel_mass_flow"],
        charge_mass_flow=v["air_mass_flow"],
        lower_heating_value=GAS_OIL.lhv,
    )
    np.testing.assert_allclose(v["cutoff_ratio"], rc_, rtol=1e-12)
    np.testing.assert_allclose(
        v["ideal_diesel_efficiency"], diesel_efficiency(15.5, rc_)[0], rtol=1e-10
    )
    assert np.isfinite(v["corrected_brake_power"]).all()
    # with a peak-pressure reading: the dual cycle
    meas["peak_cylinder_pressure"] = np.full(len(rc_), 170.0e5)
    dual = reconstruct_engine(meas, KR_DG1, GAS_OIL, cycle="diesel", generator_efficiency=0.96)
    dv = dual.values
    finite = np.isfinite(dv["ideal_dual_efficiency"])
    assert finite.all()
    assert np.all(dv["peak_pressure_ratio"] >= 1.0)
    assert np.all(dv["cutoff_ratio"] <= v["cutoff_ratio"] + 1e-12)
    # for the same heat, constant-volume heat addition first is the more efficient (Heywood
    # 2018, section 5.3)
    assert np.all(dv["ideal_dual_efficiency"] >= v["ideal_diesel_efficiency"] - 1e-12)


def test_iso3046_correction_is_identity_at_reference_conditions() -> None:
    sensors, _ = _diesel(n=4, seed=5)
    meas = _measured(sensors)
    meas.update(
        ambient_pressure=np.full(4, 100.0e3),
        ambient_temperature=np.full(4, 298.0),
        ambient_relative_humidity=np.full(4, 0.30),
        charge_air_coolant_temperature=np.full(4, 298.0),
    )
    out = _diesel_iso3046(meas)
    v = out.values
    np.testing.assert_allclose(v["corrected_brake_power"], v["brake_power"], rtol=1e-12)
    np.testing.assert_allclose(
        v["corrected_brake_specific_fuel_consumption"],
        v["brake_specific_fuel_consumption"],
        rtol=1e-12,
    )
    # a hot site: the corrected (reference) power is above the measured one
    meas["ambient_temperature"] = np.full(4, 313.0)
    hot = _diesel_iso3046(meas)
    assert np.all(hot.values["corrected_brake_power"] > hot.values["brake_power"])


# ------------------------------------------------------------------------------------------
# The forward energy balance against Cantera
# ------------------------------------------------------------------------------------------
def test_forward_exhaust_temperature_against_cantera_energy_balance() -> None:
    # Oracle: Cantera absolute enthalpies (formation included, NASA data of nasa_gas.yaml):
    # m_a h_a(T0) + m_f h_f(298.15 K) = P_b + Q_jw + Q_lo + Q_cac + Q_rad + m_g h_g(T_exh),
    # products of complete combustion by element balance of the fuel.  Our side uses
    # sensible enthalpies and the ISO 6976 LHV, which differs from Cantera's heat of
    # combustion by about 0.02 %; measured agreement 0.03 K, tolerance 0.2 K.
    ct = pytest.importorskip("cantera")
    sensors, _ = _gas_engine(n=3, seed=2)
    names = ["N2", "O2", "Ar", "CO2", "H2O", "CH4", "C2H6", "C3H8"]
    species = {s.name: s for s in ct.Species.list_from_file("nasa_gas.yaml")}
    sol = ct.Solution(thermo="ideal-gas", species=[species[n] for n in names])
    for i in range(3):
        T0, p0, rh = (
            sensors[k][i]
            for k in ("ambient_temperature", "ambient_pressure", "ambient_relative_humidity")
        )
        xa, _ = humid_air.humid_air(T0, p0, rh)
        air = {n: float(xa[INDEX[n]]) for n in names[:5]}
        m_f, m_a = sensors["fuel_mass_flow"][i], sensors["air_mass_flow"][i]
        sol.TPX = T0, p0, air
        H_in = m_a * sol.enthalpy_mass
        fuel_x = {n: float(NG.composition[INDEX[n]]) for n in SPECIES if NG.composition[INDEX[n]]}
        sol.TPX = 298.15, 101325.0, {k: v for k, v in fuel_x.items() if k in names}
        H_in += m_f * sol.enthalpy_mass
        # exhaust mass fractions: air + burnt fuel (element balance, complete combustion)
        sol.TPX = T0, p0, air
        ya = dict(zip(sol.species_names, sol.Y, strict=True))
        y = {n: m_a * ya[n] + m_f * float(NG.product_delta[INDEX[n]]) for n in names[:5]}
        P_b = sensors["generator_power"][i] / 0.975
        out = (
            P_b
            + sensors["jacket_water_heat"][i]
            + sensors["lube_oil_heat"][i]
            + sensors["charge_air_cooler_heat"][i]
            + 0.015 * m_f * float(NG.lhv)
        )
        h_target = (H_in - out) / (m_a + m_f)
        sol.TPY = 700.0, p0, y
        sol.HP = h_target, p0
        assert sensors["exhaust_temperature"][i] == pytest.approx(sol.T, abs=0.2)


# ------------------------------------------------------------------------------------------
# Trade ranges, bad data, misuse
# ------------------------------------------------------------------------------------------
def test_trade_ranges_at_rated_load() -> None:
    # Common practice: large lean-burn gas engines 40-49 % brake efficiency, BMEP 15-25 bar,
    # 9-12 % dry O2 (lambda 1.8-2.1), 380-480 degC after the turbocharger, CHP 80-92 % (LHV);
    # large high-speed Diesel gensets 195-225 g/kWh at rated load.
    rated = {"ambient_temperature": 298.0, "ambient_pressure": 100.0e3,
             "ambient_relative_humidity": 0.3, "engine_speed": 1500 * RPM,
             "charge_air_temperature": 318.0, **LOSSES}  # fmt: skip
    s, _ = simulate_engine(
        KR_GE1, NG, generator_power=4.4e6, brake_thermal_efficiency=0.445, excess_air_ratio=1.9,
        volumetric_efficiency=0.93, turbocharger_compressor_isentropic_efficiency=0.78,
        premixed=True, exhaust_stack_temperature=393.15, **rated,
    )  # fmt: skip
    v = reconstruct_engine(_measured(s), KR_GE1, NG, cycle="otto", premixed=True).values
    assert 0.40 <= v["brake_thermal_efficiency"] <= 0.49
    assert 15e5 <= v["brake_mean_effective_pressure"] <= 25e5
    assert 0.09 <= s["exhaust_oxygen"] <= 0.12
    assert 653.15 <= s["exhaust_temperature"] <= 753.15
    assert 0.80 <= v["chp_total_efficiency"] <= 0.92
    assert 2.5e5 <= s["charge_air_pressure"] <= 4.5e5  # boost of lean-burn engines at 20 bar
    d, _ = simulate_engine(
        KR_DG1, GAS_OIL, generator_power=2.0e6, brake_thermal_efficiency=0.41,
        excess_air_ratio=2.1, volumetric_efficiency=0.95,
        turbocharger_compressor_isentropic_efficiency=0.76, generator_efficiency=0.96, **rated,
    )  # fmt: skip
    dv = reconstruct_engine(
        _measured(d), KR_DG1, GAS_OIL, cycle="diesel", generator_efficiency=0.96
    ).values
    assert 195.0 <= dv["brake_specific_fuel_consumption"] * BSFC_G_PER_KWH <= 225.0
    assert 1.2 <= dv["cutoff_ratio"] <= 3.0


def test_bad_sensor_removes_only_its_own_results() -> None:
    sensors, _ = _gas_engine(n=4, seed=9)
    meas = _measured(sensors, drop=("air_mass_flow",))
    meas["charge_air_pressure"] = meas["charge_air_pressure"].copy()
    meas["charge_air_pressure"][1] = np.nan
    meas["exhaust_oxygen"] = meas["exhaust_oxygen"].copy()
    meas["exhaust_oxygen"][2] = 0.25  # above air: a leak into the sample line
    out = reconstruct_engine(meas, KR_GE1, NG, cycle="otto", premixed=True)
    v, st = out.values, out.status
    assert _errors(st)[0] == 0 and _errors(st)[3] == 0
    assert st[1] & Reason.INPUT_MISSING and st[2] & Reason.INPUT_NONPHYSICAL
    for name in (
        "brake_thermal_efficiency",
        "brake_mean_effective_pressure",
        "thermal_efficiency",
        "ideal_otto_efficiency",
        "chp_total_efficiency",
    ):
        assert np.isfinite(v[name]).all(), name
    assert np.isnan(v["volumetric_efficiency"][[1, 2]]).all()
    assert np.isnan(v["ideal_cycle_efficiency"][[1, 2]]).all()
    assert np.isnan(v["excess_air_ratio"][2]) and np.isfinite(v["excess_air_ratio"][1])
    assert out.label_arrays["air_mass_flow_source"][2] == "none"
    assert np.isfinite(v["turbocharger_compressor_isentropic_efficiency"][1])


def test_optional_measurements_absent() -> None:
    sensors, _ = _gas_engine(n=3)
    meas = {k: sensors[k] for k in MEASUREMENTS_REQUIRED}
    out = reconstruct_engine(meas, KR_GE1, NG, cycle="otto", premixed=True)
    assert not _errors(out.status).any()
    v = out.values
    assert np.isfinite(v["brake_thermal_efficiency"]).all()
    assert "volumetric_efficiency" not in v and np.isnan(v["chp_total_efficiency"]).all()
    assert (out.label_arrays["air_mass_flow_source"] == "none").all()


def test_misuse_raises() -> None:
    sensors, _ = _gas_engine(n=2)
    meas = _measured(sensors)
    with pytest.raises(ModelInputError):
        reconstruct_engine(
            {k: v for k, v in meas.items() if k != "fuel_mass_flow"}, KR_GE1, NG, cycle="otto"
        )
    with pytest.raises(ModelInputError):
        reconstruct_engine(meas, KR_GE1, NG, cycle="brayton")  # type: ignore[arg-type]
    with pytest.raises(ModelInputError):
        reconstruct_engine(meas, KR_GE1, NG, cycle="otto", correction="iso3046")
    with pytest.raises(ModelInputError):
        reconstruct_engine(meas, KR_DG1, GAS_OIL, cycle="diesel", premixed=True)
