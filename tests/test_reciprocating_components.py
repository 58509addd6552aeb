"""Reciprocating-engine components (models.components.reciprocating).

Oracles: Cantera 3 chemical equilibrium of lean fuel-air mixtures at 500 K (complete
combustion found by Gibbs minimisation, not by our element balance) for the exhaust O2 and
the exhaust enthalpy; CoolProp's air (Lemmon et al. 2000) for the receiver density and the
turbocharger compressor; crank geometry solved numerically; facts of the trade (marked common
practice) for stoichiometry and plausible ranges.  Engine data are the invented Kestrel Ridge
units KR-GE1 (4.4 MW gas-engine CHP block) and KR-DG1 (2 MW black-start Diesel).
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest

from models.components import reciprocating as rc
from models.components.combustor import exhaust_mixture
from models.components.reciprocating import (
    BSFC_G_PER_KWH,
    HEAT_RATE_KJ_PER_KWH,
    EngineGeometry,
    brake_performance,
    charge_density,
    chp_efficiency,
    estimate_cutoff_ratio,
    excess_air_ratio_from_air_flow,
    excess_air_ratio_from_oxygen,
    exhaust_heat,
    exhaust_oxygen,
    heat_input_per_charge,
    relative_efficiency,
    turbocharger_compressor,
    volumetric_efficiency,
)
from models.properties import humid_air, mixtures
from models.properties.fuel import gas_fuel, liquid_fuel
from models.properties.species import INDEX
from models.status import ModelInputError, Reason

ct = pytest.importorskip("cantera")
CP = pytest.importorskip("CoolProp.CoolProp")
brentq = pytest.importorskip("scipy.optimize").brentq

RPM = 2 * math.pi / 60
KR_GE1 = EngineGeometry(0.21, 0.24, 0.48, 20, 12.5)  # invented
KR_DG1 = EngineGeometry(0.17, 0.19, 0.38, 16, 15.5)  # invented
NG = {"CH4": 0.93, "C2H6": 0.04, "C3H8": 0.01, "N2": 0.01, "CO2": 0.01}
DRY_X = {
    "N2": 0.78084,
    "O2": 0.209476,
    "Ar": 0.00934,
    "CO2": 0.0004,
}  # models.properties.humid_air.DRY_AIR


# ------------------------------------------------------------------------------------------
# Geometry
# ------------------------------------------------------------------------------------------
def test_geometry_volumes_and_speeds() -> None:
    g = KR_GE1
    assert g.swept_volume == pytest.approx(math.pi * 0.21**2 / 4 * 0.24, rel=1e-15)
    assert g.displacement == pytest.approx(20 * g.swept_volume, rel=1e-15)
    # r = (V_s + V_c) / V_c, the definition
    assert (g.swept_volume + g.clearance_volume) / g.clearance_volume == pytest.approx(12.5)
    back = EngineGeometry.from_clearance_volume(
        0.21, 0.24, 0.48, 20, clearance_volume=g.clearance_volume
    )
    assert back.compression_ratio == pytest.approx(12.5, rel=1e-14)
    assert float(g.mean_piston_speed(1500 * RPM)) == pytest.approx(2 * 0.24 * 25.0)
    # four-stroke: one cycle per two revolutions; two-stroke: one per revolution
    assert float(g.cycles_per_second(1500 * RPM)) == pytest.approx(12.5)
    two = EngineGeometry(0.5, 2.0, 2.5, 6, 18.0, strokes_per_cycle=2)
    assert float(two.cycles_per_second(90 * RPM)) == pytest.approx(1.5)


def test_piston_position_against_a_numerical_crank_solution() -> None:
    # Independent: place the crank pin at (a sin t, a cos t) and find the piston-pin height
    # y on the cylinder axis with |pin - (0, y)| = l by root finding.
    g = KR_DG1
    a, lr = g.stroke / 2, g.connecting_rod_length
    theta = np.linspace(0.0, 2 * math.pi, 37)
    ours = g.piston_position(theta)
    for t, s in zip(theta, ours, strict=True):
        px, py = a * math.sin(t), a * math.cos(t)
        y = brentq(lambda y, px=px, py=py: math.hypot(px, y - py) - lr, py, py + lr + a)
        assert s == pytest.approx(a + lr - y, abs=1e-12)
    assert ours[0] == pytest.approx(0.0, abs=1e-15)  # TDC
    assert ours[18] == pytest.approx(g.stroke, abs=1e-15)  # BDC at 180 degrees
    v = g.cylinder_volume(np.array([0.0, math.pi]))
    assert v[1] / v[0] == pytest.approx(g.compression_ratio, rel=1e-14)


@pytest.mark.parametrize(
    "kwargs",
    [
        {"bore": 0.0},
        {"stroke": -1.0},
        {"connecting_rod_length": 0.05},
        {"cylinders": 0},
        {"cylinders": 2.5},
        {"compression_ratio": 1.0},
        {"strokes_per_cycle": 3},
    ],
)
def test_geometry_misuse_raises(kwargs: dict[str, float]) -> None:
    base = {
        "bore": 0.17,
        "stroke": 0.19,
        "connecting_rod_length": 0.38,
        "cylinders": 16,
        "compression_ratio": 15.5,
    }
    with pytest.raises(ModelInputError):
        EngineGeometry(**{**base, **kwargs})  # type: ignore[arg-type]


# ------------------------------------------------------------------------------------------
# Brake figures
# ------------------------------------------------------------------------------------------
def test_brake_figures_identities_and_trade_ranges() -> None:
    fuel = gas_fuel(NG)
    P = np.array([4.4e6, 3.3e6, 2.2e6])
    mf = np.array([0.197, 0.152, 0.107])
    b = brake_performance(KR_GE1, P, mf, 1500 * RPM, fuel.lhv, generator_efficiency=0.975)
    assert (b.status == 0).all()
    Pb = P / 0.975
    np.testing.assert_allclose(b.brake_power, Pb, rtol=1e-14)
    # identities: HR = 1/eta; bsfc LHV = HR; torque by P = omega T
    np.testing.assert_allclose(b.brake_heat_rate * b.brake_thermal_efficiency, 1.0, rtol=1e-14)
    np.testing.assert_allclose(b.brake_specific_fuel_consumption * fuel.lhv, b.brake_heat_rate)
    np.testing.assert_allclose(b.brake_torque * 1500 * RPM, Pb, rtol=1e-14)
    # Heywood (2018), section 2.7: bmep = 2 pi n_R T / V_d (n_R = 2 for four-stroke)
    np.testing.assert_allclose(
        b.brake_mean_effective_pressure,
        4 * math.pi * b.brake_torque / KR_GE1.displacement,
        rtol=1e-13,
    )
    # display units: g/kWh and kJ/kWh
    assert b.brake_heat_rate[0] * HEAT_RATE_KJ_PER_KWH == pytest.approx(
        3600 * 0.197 * float(fuel.lhv) / Pb[0]
    )
    assert b.brake_specific_fuel_consumption[0] * BSFC_G_PER_KWH == pytest.approx(
        0.197e3 / (Pb[0] / 3.6e6)
    )
    # common practice: large gas engines at full load 40-49 % brake efficiency, BMEP 15-25 bar
    assert 0.40 <= b.brake_thermal_efficiency[0] <= 0.49
    assert 15e5 <= b.brake_mean_effective_pressure[0] <= 25e5


def test_brake_figures_bad_elements() -> None:
    b = brake_performance(
        KR_DG1,
        [2.0e6, np.nan, 2.0e6, 2.0e6],
        [0.11, 0.11, -0.1, 0.02],
        1500 * RPM,
        42.7e6,
        generator_efficiency=0.96,
    )
    assert b.status[0] == 0
    assert b.status[1] & Reason.INPUT_MISSING and np.isnan(b.brake_power[1])
    assert b.status[2] & Reason.INPUT_NONPHYSICAL and np.isnan(b.brake_thermal_efficiency[2])
    # 0.02 kg/s for 2 MW would be 244 % efficient
    assert b.status[3] & Reason.EFFICIENCY_OUT_OF_RANGE and np.isnan(b.brake_heat_rate[3])
    b = brake_performance(KR_DG1, 0.5e6, 0.11, 1500 * RPM, 42.7e6)
    assert b.status == Reason.EFFICIENCY_IMPLAUSIBLE and not np.isnan(b.brake_power)


def test_relative_efficiency() -> None:
    r, st = relative_efficiency([0.44, 0.70, np.nan], 0.63)
    assert r[0] == pytest.approx(0.44 / 0.63) and st[0] == 0
    assert st[1] & Reason.EFFICIENCY_OUT_OF_RANGE and np.isnan(r[1])
    assert st[2] & Reason.INPUT_MISSING


# ------------------------------------------------------------------------------------------
# Stoichiometry
# ------------------------------------------------------------------------------------------
@functools.cache
def _nasa_species() -> dict[str, object]:
    return {s.name: s for s in ct.Species.list_from_file("nasa_gas.yaml")}


def _cantera_exhaust(
    fuel_moles: dict[str, float], lam: float, air_x: dict[str, float], o2_demand: float
) -> object:
    """Equilibrium products at 500 K of fuel with lam times the stoichiometric air."""
    names = ["N2", "O2", "Ar", "CO2", "H2O", "CH4", "C2H6", "C3H8", "CO", "H2", "OH"]
    species = _nasa_species()
    sol = ct.Solution(thermo="ideal-gas", species=[species[n] for n in names])
    n_air = lam * o2_demand / air_x["O2"]
    mix = dict(fuel_moles)
    for k, x in air_x.items():
        mix[k] = mix.get(k, 0.0) + n_air * x
    sol.TPX = 500.0, 1.0e5, mix
    sol.equilibrate("TP")
    return sol


def _x_o2(sol: object, basis: str) -> float:
    s = sol  # type: ignore[assignment]
    x = dict(zip(s.species_names, s.X, strict=True))
    if basis == "dry":
        return x["O2"] / (1.0 - x["H2O"])
    return x["O2"]


@pytest.mark.parametrize("basis", ["dry", "wet"])
@pytest.mark.parametrize("lam", [1.0, 1.3, 1.8, 2.4, 3.5])
def test_exhaust_oxygen_against_cantera_equilibrium_natural_gas(lam: float, basis: str) -> None:
    # Oracle: Cantera equilibrium (NASA data) of natural gas in dry air at 500 K: complete
    # combustion by Gibbs minimisation.  O2 demand of the mixture: sum x_i (c + h/4).
    o2_demand = 0.93 * 2 + 0.04 * 3.5 + 0.01 * 5
    sol = _cantera_exhaust(NG, lam, DRY_X, o2_demand)
    x, st = exhaust_oxygen(lam, gas_fuel(NG), basis=basis)  # type: ignore[arg-type]
    assert st == 0
    assert float(x) == pytest.approx(_x_o2(sol, basis), abs=2e-7)
    back, st = excess_air_ratio_from_oxygen(_x_o2(sol, basis), gas_fuel(NG), basis=basis)  # type: ignore[arg-type]
    assert st == 0 and float(back) == pytest.approx(lam, rel=1e-5)


@pytest.mark.parametrize("basis", ["dry", "wet"])
def test_excess_air_from_oxygen_liquid_fuel_in_humid_air(basis: str) -> None:
    # Oracle: Cantera equilibrium of propane, whose C/H mass fractions (0.8171 / 0.1829 by
    # element balance) describe the liquid fuel: the exhaust depends on the elements only.
    # Humid air at 30 degC, 70 % RH from models.properties.humid_air.humid_air feeds both sides.
    xh, _ = humid_air.humid_air(303.15, 1.0e5, 0.7)
    air = mixtures.Mixture.from_mole_fractions(xh)
    air_x = {k: float(xh[INDEX[k]]) for k in ("N2", "O2", "Ar", "CO2", "H2O")}
    mC, mH = 3 * 12.0106, 8 * 1.00794
    fuel = liquid_fuel(46.35e6, mC / (mC + mH), mH / (mC + mH))
    for lam in (1.6, 2.0, 2.8):
        sol = _cantera_exhaust({"C3H8": 1.0}, lam, air_x, 5.0)
        x_ct = _x_o2(sol, basis)
        got, st = excess_air_ratio_from_oxygen(x_ct, fuel, air, basis)  # type: ignore[arg-type]
        assert st == 0 and float(got) == pytest.approx(lam, rel=2e-5)


def test_stoichiometric_air_of_methane_common_practice() -> None:
    # Common practice: methane needs 17.19 kg air / kg (23.2 % O2 by mass in air) and
    # 9.52 mol air / mol (21 % O2).  Our air (CIPM-2007 / ISO 2533, 23.14 % O2 by mass,
    # 20.95 % by volume) gives 0.3 % more; the tolerance says so.
    ch4 = gas_fuel({"CH4": 1.0})
    demand = -float(ch4.product_delta[INDEX["O2"]])  # kg O2 per kg CH4: CH4 + 2 O2
    assert demand == pytest.approx(2 * 31.9988 / 16.0425, rel=1e-4)
    assert demand / 0.232 == pytest.approx(17.19, abs=0.01)  # on the 23.2 % O2 basis
    lam, _ = excess_air_ratio_from_air_flow(17.19, 1.0, ch4)
    assert float(lam) == pytest.approx(1.0, rel=5e-3)
    # molar: 2 mol O2 per mol CH4 over the O2 mole fraction of air
    assert 2.0 / DRY_X["O2"] == pytest.approx(9.52, rel=5e-3)
    # the exhaust at lambda 1 holds no O2
    x, _ = exhaust_oxygen(1.0, ch4)
    assert float(x) == pytest.approx(0.0, abs=1e-15)


def test_oxygen_rule_of_thumb_overestimates_lambda() -> None:
    # The quick 20.9 / (20.9 - O2 %) (common practice) ignores the contraction of the products;
    # for natural gas at 8-15 % dry O2 it reads 4-8 % high (the docstring's claim).
    x = np.array([0.08, 0.10, 0.12, 0.15])
    lam, _ = excess_air_ratio_from_oxygen(x, gas_fuel(NG))
    rule = 0.209476 / (0.209476 - x)
    assert np.all((rule / lam > 1.035) & (rule / lam < 1.085))
    assert np.all(np.diff(rule / lam) > 0)


def test_excess_air_bad_readings() -> None:
    lam, st = excess_air_ratio_from_oxygen([-0.01, 0.21, np.nan, 0.0], gas_fuel(NG))
    assert st[0] & Reason.INPUT_NONPHYSICAL and st[1] & Reason.INPUT_NONPHYSICAL
    assert st[2] & Reason.INPUT_MISSING
    assert np.isnan(lam[:3]).all() and lam[3] == pytest.approx(1.0)
    x, st = exhaust_oxygen(0.9, gas_fuel(NG))
    assert st & Reason.INPUT_NONPHYSICAL and np.isnan(x)
    with pytest.raises(ModelInputError):
        exhaust_oxygen(2.0, gas_fuel(NG), basis="moist")  # type: ignore[arg-type]


def test_excess_air_vectorised_over_humid_air_batch() -> None:
    xh, _ = humid_air.humid_air(np.array([280.0, 300.0, np.nan]), 1.0e5, 0.5)
    air = mixtures.Mixture.from_mole_fractions(xh)
    x, st = exhaust_oxygen(2.0, gas_fuel(NG), air, "wet")
    assert st[0] == 0 and st[1] == 0 and np.isnan(x[2])
    assert x[1] < x[0]  # more water vapour dilutes the O2 on the wet basis


# ------------------------------------------------------------------------------------------
# Charge air, turbocharger, heat
# ------------------------------------------------------------------------------------------
def test_charge_density_against_coolprop_air() -> None:
    # Oracle: CoolProp "Air" (Lemmon et al. 2000 pseudo-pure fluid) at receiver conditions;
    # our dry air (with Ar and CO2 as species) and the virial fit agree within 0.01 %.
    for T, p in [(313.15, 2.5e5), (323.15, 4.0e5), (333.15, 5.5e5)]:
        rho, st = charge_density(T, p, rc.dry_air())
        assert st == 0
        assert float(rho) == pytest.approx(CP.PropsSI("D", "T", T, "P", p, "Air"), rel=1e-4)
    rho_ig, _ = charge_density(323.15, 4.0e5, real_gas=False)
    assert float(rho_ig) == pytest.approx(4.0e5 / (287.05 * 323.15), rel=2e-4)


def test_volumetric_efficiency_definition() -> None:
    # eta_v = m / (rho V_d N/n_R): the air that exactly fills the displacement gives 1.
    rho, _ = charge_density(318.0, 3.2e5)
    m_full = float(rho) * KR_GE1.displacement * 12.5
    eta, st = volumetric_efficiency(KR_GE1, [m_full, 0.9 * m_full], 1500 * RPM, 318.0, 3.2e5)
    assert (st == 0).all()
    np.testing.assert_allclose(eta, [1.0, 0.9], rtol=1e-12)
    eta, st = volumetric_efficiency(KR_GE1, m_full, 1500 * RPM, 318.0, np.nan)
    assert st & Reason.INPUT_MISSING and np.isnan(eta)


def test_turbocharger_compressor_against_coolprop() -> None:
    # Oracle: CoolProp air (Lemmon), eta = (h2s - h1) / (h2 - h1) with s(T2s, p2) = s1; our
    # NASA dry air + virial departure agrees within 0.1 point (measured difference 0.06).
    T1, p1 = 300.0, 1.0e5
    for p2, T2 in [(2.0e5, 385.0), (3.2e5, 450.0), (4.5e5, 500.0)]:
        h1 = CP.PropsSI("H", "T", T1, "P", p1, "Air")
        s1 = CP.PropsSI("S", "T", T1, "P", p1, "Air")
        h2s = CP.PropsSI("H", "S", s1, "P", p2, "Air")
        h2 = CP.PropsSI("H", "T", T2, "P", p2, "Air")
        tc = turbocharger_compressor(rc.dry_air(), T1, p1, T2, p2)
        assert float(tc.isentropic_efficiency) == pytest.approx((h2s - h1) / (h2 - h1), abs=1e-3)
        assert float(tc.pressure_ratio) == pytest.approx(p2 / p1)
    # a radial compressor at 0.55 is outside the turbocharger band: a warning, value kept
    tc = turbocharger_compressor(rc.dry_air(), T1, p1, 520.0, 3.2e5)
    assert tc.status == Reason.EFFICIENCY_IMPLAUSIBLE and tc.isentropic_efficiency < 0.6
    # 0.80 is inside the turbocharger band though below the gas-turbine compressor's 0.80-0.92
    ok = turbocharger_compressor(rc.dry_air(), T1, p1, 437.0, 3.2e5)
    assert ok.status == 0


def test_exhaust_heat_against_cantera() -> None:
    # Oracle: Cantera enthalpy of the equilibrium exhaust of natural gas at lambda 1.8.
    lam, T_in, T_out, m_g = 1.8, 700.0, 393.15, 6.7
    o2_demand = 0.93 * 2 + 0.04 * 3.5 + 0.01 * 5
    sol = _cantera_exhaust(NG, lam, DRY_X, o2_demand)
    X = sol.X  # type: ignore[attr-defined]
    sol.TPX = T_in, 1e5, X  # type: ignore[attr-defined]
    h_in = sol.enthalpy_mass  # type: ignore[attr-defined]
    sol.TPX = T_out, 1e5, X  # type: ignore[attr-defined]
    h_out = sol.enthalpy_mass  # type: ignore[attr-defined]
    fuel = gas_fuel(NG)
    air = rc.dry_air()
    a_st = -float(fuel.product_delta[INDEX["O2"]]) / float(air.y[INDEX["O2"]])
    f = 1.0 / (lam * a_st)
    q, st = exhaust_heat(exhaust_mixture(air, fuel, f), m_g, T_in, T_out)
    assert st == 0
    assert float(q) == pytest.approx(m_g * (h_in - h_out), rel=2e-4)
    q, st = exhaust_heat(exhaust_mixture(air, fuel, f), m_g, 400.0, 450.0)
    assert st & Reason.INPUT_NONPHYSICAL and np.isnan(q)


def test_chp_efficiency_arithmetic_and_trade_range() -> None:
    fuel_heat = 0.197 * 50.0e6
    c = chp_efficiency(
        4.4e6,
        0.197,
        50.0e6,
        jacket_water_heat=[1.3e6, np.nan],
        lube_oil_heat=0.45e6,
        exhaust_heat_recovered=2.2e6,
    )
    assert c.thermal_efficiency[0] == pytest.approx(4.4e6 / fuel_heat)
    assert c.chp_total_efficiency[0] == pytest.approx((4.4e6 + 1.3e6 + 0.45e6 + 2.2e6) / fuel_heat)
    # common practice: gas-engine CHP reaches 80-90 % total efficiency (LHV)
    assert 0.80 <= c.chp_total_efficiency[0] <= 0.90
    assert c.status[1] & Reason.INPUT_MISSING and np.isnan(c.chp_total_efficiency[1])
    over = chp_efficiency(4.4e6, 0.197, 50.0e6, exhaust_heat_recovered=6.0e6)
    assert over.status & Reason.EFFICIENCY_OUT_OF_RANGE and np.isnan(over.chp_total_efficiency)
    plain = chp_efficiency(4.4e6, 0.197, 50.0e6)
    assert float(plain.heat_recovery_efficiency) == 0.0


# ------------------------------------------------------------------------------------------
# Cut-off ratio
# ------------------------------------------------------------------------------------------
def test_cutoff_ratio_estimate() -> None:
    # Constant specific heats: rc = 1 + q / (cp T2), T2 = T1 r^(gamma - 1), q = m_f LHV / m_ch.
    mf, ma, lhv, T1, r = 0.1, 3.2, 42.7e6, 330.0, 16.0
    rc_, st = estimate_cutoff_ratio(
        r, T1, 3.0e5, fuel_mass_flow=mf, charge_mass_flow=ma, lower_heating_value=lhv
    )
    cp = 3.5 * rc.R_DRY_AIR
    assert st == 0
    assert float(rc_) == pytest.approx(1 + mf * lhv / ma / (cp * T1 * r**0.4), rel=1e-12)
    q, _ = heat_input_per_charge(mf, ma, lhv, 0.99)
    assert float(q) == pytest.approx(0.99 * mf * lhv / ma)
    # Variable properties against Cantera (NASA dry air): constant-pressure heating from the
    # isentropic compression end state, rc = T3 / T2.
    species = _nasa_species()
    sol = ct.Solution(thermo="ideal-gas", species=[species[k] for k in ("N2", "O2", "Ar", "CO2")])
    sol.TPX = T1, 3.0e5, DRY_X
    s1, v1 = sol.entropy_mass, 1 / sol.density
    sol.SV = s1, v1 / r
    T2, h2, p2 = sol.T, sol.enthalpy_mass, sol.P
    sol.HP = h2 + mf * lhv / ma, p2
    rc_var, st = estimate_cutoff_ratio(
        r,
        T1,
        3.0e5,
        fuel_mass_flow=mf,
        charge_mass_flow=ma,
        lower_heating_value=lhv,
        fluid=rc.dry_air(),
    )
    assert st == 0 and float(rc_var) == pytest.approx(sol.T / T2, rel=3e-5)
    # with a measured peak pressure part of the heat goes in at constant volume: smaller rc
    rc_dual, st = estimate_cutoff_ratio(
        r,
        T1,
        3.0e5,
        fuel_mass_flow=mf,
        charge_mass_flow=ma,
        lower_heating_value=lhv,
        peak_cylinder_pressure=1.3 * p2,
        fluid=rc.dry_air(),
    )
    assert st == 0 and 1.0 < float(rc_dual) < float(rc_var)
    with pytest.raises(ModelInputError):
        rc.cycle_from_fuel(
            "dual", r, T1, 3e5, fuel_mass_flow=mf, charge_mass_flow=ma, lower_heating_value=lhv
        )
    with pytest.raises(ModelInputError):
        rc.cycle_from_fuel(
            "stirling",
            r,
            T1,
            3e5,
            fuel_mass_flow=mf,  # type: ignore[arg-type]
            charge_mass_flow=ma,
            lower_heating_value=lhv,
        )
