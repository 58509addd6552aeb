"""Components on models.properties.mixtures mixtures: compressor, combustor, turbine, generator, ideal cycles.

Sources are named beside every check value.  "from memory" marks values quoted from a book
without the page at hand; their tolerances follow the book's table precision.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from models.components.combustor import combustor, exhaust_mixture, stoichiometric_fuel_air_ratio
from models.components.compressor import compressor, compressor_discharge_temperature
from models.components.generator import generator_power, shaft_power
from models.components.turbine import turbine, turbine_exit_temperature
from models.cycles.brayton import air_standard_brayton_efficiency, brayton_cycle, carnot_efficiency
from models.properties import humid_air, mixtures
from models.properties.fuel import gas_fuel
from models.status import Reason

DRY = mixtures.Mixture.from_mole_fractions(humid_air.DRY_AIR)
METHANE = gas_fuel({"CH4": 1.0})


# ------------------------------------------------------------------------------------------
# Published worked examples: ideal and actual air-standard Brayton cycle, variable properties
# ------------------------------------------------------------------------------------------
def test_cengel_example_9_5_ideal_brayton_variable_properties() -> None:
    # Source: Çengel & Boles, Thermodynamics: An Engineering Approach, Example 9-5 (from
    # memory): r = 8, T1 = 300 K, T3 = 1300 K, air tables (ideal gas, variable cp):
    # T2s ≈ 540 K, T4s ≈ 770 K, w_c = 244.16 kJ/kg, w_t = 606.60 kJ/kg, q_in = 851.62 kJ/kg,
    # back-work ratio 0.403, eta 0.426.  Tolerances: the book rounds temperatures to the
    # table step (a few K) and ratios to 3 digits; its table interpolation costs ~0.1 %.
    c = brayton_cycle(DRY, 300.0, 100.0e3, 8.0, 1300.0, real_gas=False)
    assert int(c.status) == 0
    assert float(c.T2s) == pytest.approx(540.0, abs=2.0)
    assert float(c.T4s) == pytest.approx(770.0, abs=3.0)
    assert float(c.compressor_work) == pytest.approx(244.16e3, rel=3e-3)
    assert float(c.turbine_work) == pytest.approx(606.60e3, rel=3e-3)
    assert float(c.heat_input) == pytest.approx(851.62e3, rel=3e-3)
    assert float(c.back_work_ratio) == pytest.approx(0.403, abs=0.0015)
    assert float(c.efficiency) == pytest.approx(0.426, abs=0.0015)


def test_cengel_example_9_6_actual_brayton() -> None:
    # Source: Çengel & Boles, Example 9-6 (from memory): Example 9-5 with eta_c = 0.80 and
    # eta_t = 0.85: back-work ratio 0.592, eta 0.266, T2a ≈ 598 K, T4a ≈ 853 K.
    c = brayton_cycle(
        DRY, 300.0, 100.0e3, 8.0, 1300.0,
        compressor_efficiency=0.80, turbine_efficiency=0.85, real_gas=False,
    )  # fmt: skip
    assert float(c.back_work_ratio) == pytest.approx(0.592, abs=0.0015)
    assert float(c.efficiency) == pytest.approx(0.266, abs=0.0015)
    assert float(c.T2) == pytest.approx(598.0, abs=2.0)
    assert float(c.T4) == pytest.approx(853.0, abs=3.0)


def test_air_standard_formula_values() -> None:
    # Source: 1 - r^(-(gamma-1)/gamma) with gamma = 1.4 (cold-air standard, any
    # thermodynamics text): 0.4480 at r = 8 and 0.5471 at r = 16 (4-digit values).
    eta, st = air_standard_brayton_efficiency(np.array([8.0, 16.0]))
    np.testing.assert_allclose(eta, [0.4480, 0.5471], atol=5e-5)
    assert not st.any()
    eta, st = air_standard_brayton_efficiency(np.array([1.0, np.nan]))
    assert np.isnan(eta).all()
    assert st[0] & Reason.PRESSURE_RATIO_INVALID and st[1] & Reason.INPUT_MISSING


def test_carnot() -> None:
    # Source: Carnot efficiency 1 - Tc/Th; 300 K / 1300 K -> 0.7692 (arithmetic, 4 digits).
    eta, _ = carnot_efficiency(300.0, 1300.0)
    assert float(eta) == pytest.approx(0.7692, abs=5e-5)
    eta, st = carnot_efficiency([300.0, 300.0], [250.0, np.nan])
    assert np.isnan(eta).all() and st[0] & Reason.INPUT_NONPHYSICAL


def test_ideal_cycle_with_fuel_below_air_standard_and_above_actual() -> None:
    # Fact of the trade (common practice): with variable properties and combustion products
    # the ideal-cycle efficiency is below the cold-air-standard figure at the same r and
    # above the actual cycle with component losses; all below Carnot.
    air_std, _ = air_standard_brayton_efficiency(16.0)
    ideal = brayton_cycle(DRY, 288.15, 101325.0, 16.0, 1500.0, fuel=METHANE)
    actual = brayton_cycle(
        DRY, 288.15, 101325.0, 16.0, 1500.0, fuel=METHANE,
        compressor_efficiency=0.87, turbine_efficiency=0.89,
    )  # fmt: skip
    carnot, _ = carnot_efficiency(288.15, 1500.0)
    assert float(actual.efficiency) < float(ideal.efficiency) < float(air_std) < float(carnot)
    # Fuel-air ratio of a heavy-duty machine at TIT 1500 K, methane: about 0.02-0.03
    # (common practice), far below stoichiometric 1/17.2 (physics notes: 17.19 kg/kg).
    assert 0.018 < float(ideal.fuel_air_ratio) < 0.03
    assert float(stoichiometric_fuel_air_ratio(DRY, METHANE)) == pytest.approx(1 / 17.19, rel=3e-3)


# ------------------------------------------------------------------------------------------
# Compressor
# ------------------------------------------------------------------------------------------
def _cantera_dry_air() -> object:
    ct = pytest.importorskip("cantera")
    species = {s.name: s for s in ct.Species.list_from_file("nasa_gas.yaml")}
    sol = ct.Solution(thermo="ideal-gas", species=[species[k] for k in ("N2", "O2", "Ar", "CO2")])
    sol.X = {"N2": 0.78084, "O2": 0.209476, "Ar": 0.00934, "CO2": 0.0004}
    return sol


def test_compressor_ideal_gas_against_cantera() -> None:
    # Source: Cantera 3 ideal-gas dry air with the NASA TM-4513 polynomials of nasa_gas.yaml
    # (an independent implementation of the same data): T1 288.15 K, r 16, T2 680 K.  The
    # physics notes quote T2s 627.6 K, eta_c 0.862, eta_p 0.903 from GRI-Mech data; Cantera
    # recomputes them here.
    sol = _cantera_dry_air()
    p1, T1, T2, r = 101325.0, 288.15, 680.0, 16.0
    sol.TP = T1, p1  # type: ignore[attr-defined]
    h1, s1 = sol.enthalpy_mass, sol.entropy_mass  # type: ignore[attr-defined]
    sol.SP = s1, r * p1  # type: ignore[attr-defined]
    T2s_ct, h2s = sol.T, sol.enthalpy_mass  # type: ignore[attr-defined]
    sol.TP = T2, r * p1  # type: ignore[attr-defined]
    h2 = sol.enthalpy_mass  # type: ignore[attr-defined]
    eta_ct = (h2s - h1) / (h2 - h1)
    c = compressor(DRY, T1, p1, T2, r * p1, real_gas=False)
    assert float(c.T2s) == pytest.approx(T2s_ct, abs=0.01)
    assert float(c.isentropic_efficiency) == pytest.approx(eta_ct, abs=1e-5)
    assert float(c.T2s) == pytest.approx(627.6, abs=0.3)  # physics notes (GRI-Mech 3.0)
    # 3-digit values computed with other data (GRI-Mech 3.0): rounding plus data, 1e-3
    assert float(c.isentropic_efficiency) == pytest.approx(0.862, abs=1e-3)
    assert float(c.polytropic_efficiency) == pytest.approx(0.903, abs=1e-3)
    # constant-cp shortcut with gamma = 1.4 overstates: 0.888 (physics notes)
    T2s_cold = T1 * r ** (0.4 / 1.4)
    assert (T2s_cold - T1) / (T2 - T1) == pytest.approx(0.888, abs=5e-4)


def test_compressor_real_gas_against_coolprop_lemmon_air() -> None:
    # Source: CoolProp's Lemmon et al. (2000) air equation of state as the oracle, dry air,
    # pressure ratio 15, 288.15 K -> 663 K.  The real-gas effect on eta_c is CoolProp at the
    # real pressures minus CoolProp at 1/1000 of them (its own ideal-gas limit, same ratio);
    # it must match ours (real minus ideal on the same NASA mixture) closely.  The absolute
    # values differ a little more: Lemmon's pseudo-pure air has no CO2 and its own
    # ideal-gas cp.  (The physics notes quote about 0.2 points against a GRI-Mech mixture,
    # i.e. with a different ideal-gas base.)
    CP = pytest.importorskip("CoolProp.CoolProp")
    T1, r, T2 = 288.15, 15.0, 663.0

    def eta_coolprop(p1: float) -> float:
        p2 = r * p1
        h1 = CP.PropsSI("Hmass", "T", T1, "P", p1, "Air")
        s1 = CP.PropsSI("Smass", "T", T1, "P", p1, "Air")
        h2s = CP.PropsSI("Hmass", "S", s1, "P", p2, "Air")
        h2 = CP.PropsSI("Hmass", "T", T2, "P", p2, "Air")
        return float((h2s - h1) / (h2 - h1))

    p1 = 101325.0
    real_cp, ideal_cp = eta_coolprop(p1), eta_coolprop(p1 / 1000.0)
    real = float(compressor(DRY, T1, p1, T2, r * p1).isentropic_efficiency)
    ideal = float(compressor(DRY, T1, p1, T2, r * p1, real_gas=False).isentropic_efficiency)
    assert real - ideal == pytest.approx(real_cp - ideal_cp, abs=5e-5)
    assert 0.0008 < real - ideal < 0.002
    assert real == pytest.approx(real_cp, abs=6e-4)


def test_compressor_forward_round_trip() -> None:
    # Identity: the forward discharge temperature for a given eta_c gives back eta_c.
    air_x, _ = humid_air.humid_air(np.array([263.15, 288.15, 313.15]), 101325.0, 0.6)
    air = mixtures.Mixture.from_mole_fractions(air_x)
    T1 = np.array([263.15, 288.15, 313.15])
    p2 = np.array([2.2e6, 1.6e6, 1.0e6])
    T2, st = compressor_discharge_temperature(air, T1, 100e3, p2, 0.87)
    assert not st.any()
    c = compressor(air, T1, 100e3, T2, p2)
    np.testing.assert_allclose(c.isentropic_efficiency, 0.87, atol=1e-9)


def test_compressor_bad_inputs_flag_only_their_element() -> None:
    T1 = np.array([288.15, np.nan, 288.15, 288.15, 288.15, -5.0])
    T2 = np.array([660.0, 660.0, 280.0, 660.0, 300.0, 660.0])
    p2 = np.array([1.5e6, 1.5e6, 1.5e6, 0.9e5, 1.5e6, 1.5e6])
    c = compressor(DRY, T1, 101325.0, T2, p2)
    st = c.status
    assert st[0] == 0 and np.isfinite(c.isentropic_efficiency[0])
    assert st[1] & Reason.INPUT_MISSING
    assert st[2] & Reason.DISCHARGE_NOT_HOTTER
    assert st[3] & Reason.PRESSURE_RATIO_INVALID
    # 288 K -> 300 K at r 15 would be an efficiency far above 1: physically impossible
    assert st[4] & Reason.EFFICIENCY_OUT_OF_RANGE
    assert st[5] & Reason.INPUT_NONPHYSICAL
    assert np.isnan(c.isentropic_efficiency[1:]).all()
    single = compressor(DRY, 288.15, 101325.0, 660.0, 1.5e6)
    assert c.isentropic_efficiency[0] == float(single.isentropic_efficiency)


def test_compressor_implausible_is_warning_with_value() -> None:
    # Common practice band 0.80-0.92: a value of ~0.70 is computed but flagged.
    c = compressor(DRY, 288.15, 101325.0, 760.0, 1.52e6)
    assert 0.6 < float(c.isentropic_efficiency) < 0.8
    assert int(c.status) == Reason.EFFICIENCY_IMPLAUSIBLE


# ------------------------------------------------------------------------------------------
# Combustor and turbine
# ------------------------------------------------------------------------------------------
def test_combustor_energy_balance_and_products() -> None:
    # Identity: (1 + f) h_g(T3, p3) = h_a(T2, p2) + f (eta_b - c) LHV, products conserve mass.
    f = np.array([0.015, 0.022, 0.03])
    cb = combustor(
        DRY, METHANE, 680.0, 1.6e6, f, combustion_efficiency=0.995,
        casing_heat_loss_fraction=0.004, combustor_pressure_loss=0.04,
    )  # fmt: skip
    assert not cb.status.any()
    lhs = (1 + f) * cb.exhaust.h_real(cb.T3, cb.p3)
    rhs = DRY.h_real(680.0, 1.6e6) + f * (0.995 - 0.004) * float(METHANE.lhv)
    np.testing.assert_allclose(lhs, rhs, rtol=1e-9)
    np.testing.assert_allclose(cb.p3, 1.6e6 * 0.96)
    np.testing.assert_allclose(cb.exhaust.y.sum(axis=-1), 1.0, atol=1e-12)
    assert np.all(np.diff(cb.T3) > 0)
    rich = combustor(DRY, METHANE, 680.0, 1.6e6, 0.08)  # above stoichiometric 0.058
    assert rich.status & Reason.ENERGY_BALANCE_INFEASIBLE and np.isnan(rich.T3)


def test_turbine_round_trip_and_bad_pressure() -> None:
    g = exhaust_mixture(DRY, METHANE, 0.022)
    T3 = np.array([1400.0, 1550.0])
    T4, st = turbine_exit_temperature(g, T3, 1.5e6, 1.04e5, 0.89)
    assert not st.any()
    t = turbine(g, T3, 1.5e6, T4, 1.04e5)
    np.testing.assert_allclose(t.isentropic_efficiency, 0.89, atol=1e-9)
    bad = turbine(g, 1400.0, 1.0e5, 800.0, 1.04e5)
    assert bad.status & Reason.PRESSURE_RATIO_INVALID and np.isnan(bad.isentropic_efficiency)


# ------------------------------------------------------------------------------------------
# Generator and mechanical losses
# ------------------------------------------------------------------------------------------
def test_shaft_and_generator_power_inverse() -> None:
    P, st = shaft_power(np.array([45.0e6, 12.0e6]), 0.985, 150.0e3)
    np.testing.assert_allclose(P, np.array([45.0e6, 12.0e6]) / 0.985 + 150.0e3)
    back, _ = generator_power(P, 0.985, 150.0e3)
    np.testing.assert_allclose(back, [45.0e6, 12.0e6], rtol=1e-14)
    P, st = shaft_power([45.0e6, 45.0e6, -1.0], [1.2, np.nan, 0.98])
    assert st[0] & Reason.EFFICIENCY_OUT_OF_RANGE and st[1] & Reason.INPUT_MISSING
    assert st[2] & Reason.INPUT_NONPHYSICAL and np.isnan(P).all()
    assert math.isfinite(float(shaft_power(1.0, 1.0)[0]))
