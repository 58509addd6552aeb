"""Tests of models.properties.mixtures against outside references.

Oracles: Cantera 3 (``nasa_gas.yaml`` = McBride et al. 1993 NASA TM-4513, the data we ship;
``gri30.yaml`` GRI-Mech 3.0; ``airNASA9.yaml`` McBride et al. NASA/TP-2002-211556), CoolProp
(Lemmon et al. 2000 air, IAPWS-95 water, ASHRAE RP-1485 humid air, Lemmon & Span 2006 ideal-gas
parts), IAPWS R14-08(2011) check values, ISO 6976:2016 atomic weights, thermodynamic identities.
"""

from __future__ import annotations

import os

import cantera as ct
import CoolProp.CoolProp as CP
import numpy as np
import pytest

from models.properties import mixtures, thermo_data
from models.properties.humid_air import DRY_AIR, enhancement_factor, humid_air, saturation_pressure
from models.properties.mixtures import Mixture, residual
from models.properties.species import INDEX, SPECIES, WORKING_SPECIES
from models.status import ModelInputError, Reason

R_U = 8.314462618
NASA_NAME = {
    "n-C4H10": "C4H10,n-butane",
    "i-C4H10": "C4H10,isobutane",
    "n-C5H12": "C5H12,n-pentane",
    "i-C5H12": "C5H12,i-pentane",
}


def pure(name: str) -> Mixture:
    x = np.zeros(len(SPECIES))
    x[INDEX[name]] = 1.0
    return Mixture.from_mole_fractions(x)


def combustion_gas() -> np.ndarray:
    # lean natural-gas exhaust-like composition (invented mixture, realistic proportions)
    x = np.zeros(len(SPECIES))
    for k, v in {"N2": 0.745, "O2": 0.125, "Ar": 0.009, "CO2": 0.040, "H2O": 0.081}.items():
        x[INDEX[k]] = v
    return x / x.sum()


def cantera_x(x: np.ndarray, rename: dict[str, str]) -> dict[str, float]:
    return {rename.get(s, s): float(x[i]) for i, s in enumerate(SPECIES) if x[i] > 0}


# ------------------------------------------------------------------------------ data
def test_molar_masses_iso6976() -> None:
    # ISO 6976:2016 atomic weights: CH4 = 16.04246 g/mol (brief / ISO 6976:2016 Table A.2),
    # N2 = 2 x 14.0067, H2O = 2 x 1.00794 + 15.9994
    assert mixtures.MOLAR_MASS[INDEX["CH4"]] == pytest.approx(16.04246e-3, abs=1e-9)
    assert mixtures.MOLAR_MASS[INDEX["N2"]] == pytest.approx(28.0134e-3, abs=1e-9)
    assert mixtures.MOLAR_MASS[INDEX["H2O"]] == pytest.approx(18.01528e-3, abs=1e-9)


def test_common_break_and_ranges() -> None:
    assert np.all(thermo_data.T_MID == 1000.0)
    assert np.all(thermo_data.T_HIGH >= mixtures.T_MAX)
    # working species start at 200 K in the source, except SO2 (300 K, extrapolated; see below)
    low = {s for i, s in enumerate(WORKING_SPECIES) if thermo_data.T_LOW[i] > 200.0}
    assert low == {"SO2"}


@pytest.mark.parametrize("name", [s for s in SPECIES if s != "n-C6H14"])
def test_species_match_cantera_nasa_gas(name: str) -> None:
    # Oracle: Cantera reading nasa_gas.yaml (McBride et al. 1993) - the same published fits.
    sp = next(
        s for s in ct.Species.list_from_file("nasa_gas.yaml") if s.name == NASA_NAME.get(name, name)
    )
    th = sp.thermo
    m = pure(name)
    Ts = np.linspace(max(th.min_temp, 200.0), 3000.0, 57)
    cp = np.array([th.cp(T) for T in Ts]) / 1e3
    h = np.array([th.h(T) - th.h(298.15) for T in Ts]) / 1e3
    s = np.array([th.s(T) for T in Ts]) / 1e3
    np.testing.assert_allclose(m.cp(Ts) * m.M, cp, rtol=1e-9)
    # the high range is shifted to make h, s continuous at 1000 K: a few ppm of cp*T
    np.testing.assert_allclose(m.h(Ts) * m.M, h, atol=2e-4 * cp.max() * 1000.0)
    np.testing.assert_allclose(m.s0(Ts) * m.M, s, atol=2e-4 * R_U)


def test_hexane_refit_against_original() -> None:
    # Original: Zhang et al. 2015 (NUIG) n-hexane polynomials shipped with Cantera (break 1394 K)
    path = os.path.join(
        os.path.dirname(ct.__file__), "data", "example_data", "n-hexane-NUIG-2015.yaml"
    )
    th = next(s for s in ct.Species.list_from_file(path) if s.name == "NC6H14").thermo
    m = pure("n-C6H14")
    lowT = np.linspace(300.0, 999.0, 30)  # low range copied exactly
    np.testing.assert_allclose(m.cp(lowT) * m.M, [th.cp(T) / 1e3 for T in lowT], rtol=1e-9)
    Ts = np.linspace(1000.0, 3000.0, 81)  # refit: the original has a kink at 1394 K
    cp = np.array([th.cp(T) for T in Ts]) / 1e3
    np.testing.assert_allclose(m.cp(Ts) * m.M, cp, rtol=6e-3)
    h = np.array([th.h(T) - th.h(298.15) for T in Ts]) / 1e3
    np.testing.assert_allclose(m.h(Ts) * m.M, h, rtol=2.5e-3)  # measured 0.19 %


@pytest.mark.parametrize(
    ("name", "fluid", "T", "tol"),
    [
        # extrapolation of the low-range fit below its source limit, checked against the
        # ideal-gas parts of CoolProp's reference equations of state (measured errors:
        # SO2 -1.3 % at 200 K, H2S -0.6 % at 200 K, n-pentane -2.1 % at 250 K)
        ("SO2", "SulfurDioxide", 200.0, 0.015),
        ("SO2", "SulfurDioxide", 250.0, 0.006),
        ("H2S", "HydrogenSulfide", 200.0, 0.008),
        ("n-C5H12", "n-Pentane", 273.15, 0.012),
        ("i-C5H12", "Isopentane", 273.15, 0.004),
    ],
)
def test_extrapolated_species_vs_coolprop_ideal_gas(
    name: str, fluid: str, T: float, tol: float
) -> None:
    m = pure(name)
    cp0 = CP.PropsSI("CP0MOLAR", "T", T, "Dmolar", 1e-3, fluid)
    assert m.cp(T) * m.M == pytest.approx(cp0, rel=tol)


# -------------------------------------------------------------------- independent data
def test_n2_o2_vs_nasa9() -> None:
    # airNASA9.yaml: NASA/TP-2002-211556 9-coefficient data, 200-2200 K; reference pressure 1 atm
    sol = ct.Solution("airNASA9.yaml")
    Ts = np.linspace(200.0, 2200.0, 81)
    for sp in ("N2", "O2"):
        m = pure(sp)
        cp, h, s = [], [], []
        for T in Ts:
            sol.TPX = T, ct.one_atm, {sp: 1.0}
            cp.append(sol.cp_mole / 1e3)
            h.append(sol.enthalpy_mole / 1e3)
            s.append(sol.entropy_mole / 1e3)
        sol.TPX = 298.15, ct.one_atm, {sp: 1.0}
        h = np.array(h) - sol.enthalpy_mole / 1e3
        # TM-4513 7-coefficient fits vs the 2002 9-coefficient data: measured up to 0.35 % in cp
        np.testing.assert_allclose(m.cp(Ts) * m.M, cp, rtol=4e-3)
        np.testing.assert_allclose(m.h(Ts) * m.M, h, atol=2e-3 * np.abs(h).max())
        np.testing.assert_allclose(m.s(Ts, ct.one_atm) * m.M, s, atol=0.2)  # J/(mol K)


@pytest.mark.parametrize("case", ["dry air", "humid air", "combustion gas"])
def test_mixtures_vs_grimech(case: str) -> None:
    # GRI-Mech 3.0 (gri30.yaml), 300-2200 K (its species start at 300 K), at 20 bar
    if case == "dry air":
        x = DRY_AIR
    elif case == "humid air":
        x, st = humid_air(303.15, 101325.0, 0.8)
        assert st == 0
    else:
        x = combustion_gas()
    m = Mixture.from_mole_fractions(x)
    g = ct.Solution("gri30.yaml")
    X = cantera_x(x, {"Ar": "AR"})
    Ts = np.linspace(300.0, 2200.0, 39)
    g.TPX = 298.15, 2e6, X
    h0 = g.enthalpy_mole / 1e3
    cp, h, s = [], [], []
    for T in Ts:
        g.TPX = T, 2e6, X
        cp.append(g.cp_mole / 1e3)
        h.append(g.enthalpy_mole / 1e3 - h0)
        s.append(g.entropy_mole / 1e3)
    # GRI-Mech's N2/O2 fits differ from TM-4513 by up to ~0.2 % in cp (the same size as between
    # GRI-Mech and the 2002 NASA data, see test_gri_vs_nasa9_spread)
    np.testing.assert_allclose(m.cp(Ts) * m.M, cp, rtol=2.5e-3)
    dh = np.diff(h)
    np.testing.assert_allclose(np.diff(m.h(Ts)) * m.M, dh, rtol=2.5e-3)
    np.testing.assert_allclose(m.h(Ts)[1:] * m.M, np.array(h)[1:], rtol=1.5e-3, atol=1.0)
    np.testing.assert_allclose(m.s(Ts, 2e6) * m.M, s, atol=0.15)


def test_gri_vs_nasa9_spread() -> None:
    # documents the tolerance above: GRI-Mech N2 vs NASA/TP-2002-211556 N2 already differ ~0.2 %
    g, n9 = ct.Solution("gri30.yaml"), ct.Solution("airNASA9.yaml")
    d = []
    for T in np.linspace(300.0, 2200.0, 20):
        g.TPX = T, 1e5, "N2:1"
        n9.TPX = T, 1e5, "N2:1"
        d.append(g.cp_mole / n9.cp_mole - 1)
    assert 1e-3 < np.abs(d).max() < 3e-3


def test_humid_air_700K_vs_grimech() -> None:
    # humid air at a compressor discharge of 700 K (beyond HAPropsSI's 350 degC limit)
    x, _ = humid_air(308.15, 101325.0, 0.9)
    m = Mixture.from_mole_fractions(x)
    g = ct.Solution("gri30.yaml")
    g.TPX = 700.0, 1.5e6, cantera_x(x, {"Ar": "AR"})
    assert m.cp(700.0) * m.M == pytest.approx(g.cp_mole / 1e3, rel=1.5e-3)
    assert m.s(700.0, 1.5e6) * m.M == pytest.approx(g.entropy_mole / 1e3, abs=0.15)


def test_guide_compressor_check_value() -> None:
    # physics guide check value: dry air ideal gas, T1 288.15 K, PR 16, T2 680 K ->
    # T2s ~ 627.6 K, eta_c ~ 0.862, eta_p ~ 0.903 (said to be GRI-Mech data); recomputed here
    # with Cantera gri30 and our NASA TM-4513 mixture.
    g = ct.Solution("gri30.yaml")
    X = cantera_x(DRY_AIR, {"Ar": "AR"})
    g.TPX = 288.15, 1e5, X
    h1, s1 = g.enthalpy_mass, g.entropy_mass
    g.SPX = s1, 16e5, X
    T2s_c, h2s_c = g.T, g.enthalpy_mass
    g.TPX = 680.0, 16e5, X
    eta_c = (h2s_c - h1) / (g.enthalpy_mass - h1)
    air = Mixture.from_mole_fractions(DRY_AIR)
    T2s, st = air.isentropic_T(288.15, 1e5, 16e5)
    assert st == 0
    ours = (air.h(T2s) - air.h(288.15)) / (air.h(680.0) - air.h(288.15))
    eta_p = air.R * np.log(16.0) / (air.s0(680.0) - air.s0(288.15))
    assert T2s_c == pytest.approx(627.6, abs=0.3)  # guide value vs Cantera GRI-Mech
    assert eta_c == pytest.approx(0.862, abs=0.001)
    assert float(T2s) == pytest.approx(T2s_c, abs=0.4)  # data difference GRI vs TM-4513
    assert float(ours) == pytest.approx(eta_c, abs=0.001)
    assert float(eta_p) == pytest.approx(0.903, abs=0.001)


# ------------------------------------------------------------------------ CoolProp air
def _lemmon_departure(T: float, p: float) -> tuple[float, float]:
    st = CP.AbstractState("HEOS", "Air")
    st.update(CP.PT_INPUTS, p, T)
    R = st.gas_constant()
    Z = p / (st.rhomolar() * R * T)
    tat = st.tau() * st.dalphar_dTau()
    hr = R * T * (tat + st.delta() * st.dalphar_dDelta())
    sr = R * (tat - st.alphar() + np.log(Z))
    return hr, sr  # J/mol, J/(mol K) at the same T, p


def test_departure_vs_lemmon_air() -> None:
    # Lemmon et al. (2000) air via CoolProp, T 250-900 K, p 1-40 bar
    air = Mixture.from_mole_fractions(DRY_AIR)
    for T in np.linspace(250.0, 900.0, 14):
        for p in np.linspace(1e5, 40e5, 9):
            hr, sr = _lemmon_departure(T, p)
            dh, ds = residual(T, p, air)
            assert dh * air.M == pytest.approx(hr, abs=1.5e-3 * R_U * T + 0.02 * abs(hr))
            assert ds * air.M == pytest.approx(sr, abs=1.5e-3 * R_U + 0.02 * abs(sr))


@pytest.mark.parametrize(
    ("T1", "pr", "T2"), [(288.15, 16.0, 680.0), (258.15, 20.0, 680.0), (318.15, 12.0, 660.0)]
)
def test_isentropic_efficiency_vs_coolprop(T1: float, pr: float, T2: float) -> None:
    # CoolProp-only computation (Lemmon 2000 air) of eta_c; ours: NASA ideal gas + departure
    p1 = 101325.0
    p2 = pr * p1
    h1 = CP.PropsSI("H", "T", T1, "P", p1, "Air")
    s1 = CP.PropsSI("S", "T", T1, "P", p1, "Air")
    h2 = CP.PropsSI("H", "T", T2, "P", p2, "Air")
    h2s = CP.PropsSI("H", "S", s1, "P", p2, "Air")
    eta_cp = (h2s - h1) / (h2 - h1)
    # the same machine on Lemmon air at 1e-4 of the pressures: the ideal-gas limit of that EOS
    f = 1e-4
    h1i = CP.PropsSI("H", "T", T1, "P", p1 * f, "Air")
    s1i = CP.PropsSI("S", "T", T1, "P", p1 * f, "Air")
    h2i = CP.PropsSI("H", "T", T2, "P", p2 * f, "Air")
    h2si = CP.PropsSI("H", "S", s1i, "P", p2 * f, "Air")
    eta_cp_ideal = (h2si - h1i) / (h2i - h1i)
    air = Mixture.from_mole_fractions(DRY_AIR)
    T2s, st = air.isentropic_T(T1, p1, p2, real_gas=True)
    assert st == 0
    eta = float(
        (air.h_real(T2s, p2) - air.h_real(T1, p1)) / (air.h_real(T2, p2) - air.h_real(T1, p1))
    )
    T2i, _ = air.isentropic_T(T1, p1, p2)
    eta_i = float((air.h(T2i) - air.h(T1)) / (air.h(T2) - air.h(T1)))
    # the real-gas correction itself agrees to within 0.003 points (measured 0.0007)
    assert eta - eta_i == pytest.approx(eta_cp - eta_cp_ideal, abs=3e-5)
    # and it is not negligible (guide: ~0.2 points at PR 15; Lemmon air gives 0.11-0.14 here)
    assert eta_cp - eta_cp_ideal > 1e-3
    # total: the NASA TM-4513 ideal-gas data and Lemmon's ideal-gas part differ by 0.03-0.05
    # points of eta_c here (measured), so the total agrees to 0.06 points
    assert eta == pytest.approx(eta_cp, abs=6e-4)
    T2s_cp = CP.PropsSI("T", "S", s1, "P", p2, "Air")
    assert float(T2s) == pytest.approx(T2s_cp, abs=0.3)


def test_enthalpy_differences_vs_lemmon() -> None:
    air = Mixture.from_mole_fractions(DRY_AIR)
    for T, p in [(600.0, 15e5), (750.0, 30e5), (400.0, 5e5)]:
        d = CP.PropsSI("H", "T", T, "P", p, "Air") - CP.PropsSI("H", "T", 288.15, "P", 1e5, "Air")
        ours = air.h_real(T, p) - air.h_real(288.15, 1e5)
        assert float(ours) == pytest.approx(d, rel=1.5e-3)
        ds = CP.PropsSI("S", "T", T, "P", p, "Air") - CP.PropsSI("S", "T", 288.15, "P", 1e5, "Air")
        assert float(air.s_real(T, p) - air.s_real(288.15, 1e5)) == pytest.approx(ds, abs=0.5)


# ----------------------------------------------------------------- water and humid air
def test_saturation_pressure_vs_iapws95() -> None:
    # CoolProp 'Water' (IAPWS-95) saturated liquid, 273.16-473 K, within 0.05 %
    Ts = np.linspace(273.16, 473.0, 41)
    ref = np.array([CP.PropsSI("P", "T", T, "Q", 0, "Water") for T in Ts])
    np.testing.assert_allclose(saturation_pressure(Ts), ref, rtol=5e-4)


def test_sublimation_pressure_iapws2011() -> None:
    # IAPWS R14-08(2011) check value (from memory): 230 K -> 8.947352740189 Pa;
    # 273.16 K -> 611.657 Pa (triple-point pressure, IAPWS)
    assert float(saturation_pressure(230.0)) == pytest.approx(8.947352740189, rel=1e-8)
    assert float(saturation_pressure(273.16)) == pytest.approx(611.657, rel=1e-6)
    # continuity ice/liquid at the triple point
    assert float(saturation_pressure(273.16 - 1e-9)) == pytest.approx(611.657, rel=1e-6)


@pytest.mark.parametrize("T", [263.15, 273.15, 288.15, 303.15, 318.15])
@pytest.mark.parametrize("RH", [0.2, 0.6, 1.0])
@pytest.mark.parametrize("p", [101325.0, 89875.0])
def test_humidity_ratio_vs_hapropssi(T: float, RH: float, p: float) -> None:
    # CoolProp HAPropsSI (ASHRAE RP-1485, Herrmann et al. 2009) humidity ratio
    W_ref = CP.HAPropsSI("W", "T", T, "P", p, "R", RH)
    x, st = humid_air(T, p, RH)
    xw = x[INDEX["H2O"]]
    W = xw * mixtures.MOLAR_MASS[INDEX["H2O"]] / ((1 - xw) * Mixture.from_mole_fractions(DRY_AIR).M)
    # different enhancement factors (CIPM-2007 vs virial-based) and ice/liquid below 0 degC:
    # HAPropsSI uses RH over ice below the triple point as we do
    assert float(W) == pytest.approx(W_ref, rel=4e-3)
    assert (st == 0) if RH < 1 else (st == Reason.HUMIDITY_SATURATED)


def test_enhancement_factor_cipm() -> None:
    # CIPM-2007 (Picard et al. 2008): f = 1.00062 + 3.14e-8 p + 5.6e-7 t^2; at 20 degC, 101325 Pa
    assert float(enhancement_factor(293.15, 101325.0)) == pytest.approx(
        1.00062 + 3.14e-8 * 101325.0 + 5.6e-7 * 400.0, rel=1e-12
    )
    # guide: "f ~ 1.004 near 1 atm" (from memory)
    assert float(enhancement_factor(288.15, 101325.0)) == pytest.approx(1.004, abs=5e-4)


def test_humid_air_status_bits() -> None:
    T = np.array([288.15, 288.15, 288.15, -1.0, 288.15, np.nan, 288.15])
    RH = np.array([0.5, 1.0005, 1.2, 0.5, -0.1, 0.5, 0.5])
    p = np.array([1e5, 1e5, 1e5, 1e5, 1e5, 1e5, 0.0])
    x, st = humid_air(T, p, RH)
    assert st[0] == 0 and np.isclose(x[0].sum(), 1.0)
    assert st[1] == Reason.HUMIDITY_SATURATED and np.all(np.isfinite(x[1]))
    assert x[1][INDEX["H2O"]] == pytest.approx(humid_air(288.15, 1e5, 1.0)[0][INDEX["H2O"]])
    for i in (2, 3, 4, 6):
        assert st[i] & Reason.INPUT_NONPHYSICAL and np.all(np.isnan(x[i]))
    assert st[5] & Reason.INPUT_MISSING


# ------------------------------------------------------------------ identities, solvers
MIXES = {
    "air": DRY_AIR,
    "humid": humid_air(303.15, 101325.0, 0.8)[0],
    "combustion": combustion_gas(),
}


@pytest.mark.parametrize("key", MIXES)
def test_identities(key: str) -> None:
    m = Mixture.from_mole_fractions(MIXES[key])
    T = np.linspace(210.0, 2900.0, 200)
    T = T[np.abs(T - 1000.0) > 1.0]
    d = 1e-3
    np.testing.assert_allclose((m.h(T + d) - m.h(T - d)) / (2 * d), m.cp(T), rtol=1e-7)
    np.testing.assert_allclose(
        (m.s(T + d, 3e5) - m.s(T - d, 3e5)) / (2 * d), m.cp(T) / T, rtol=1e-6
    )
    np.testing.assert_allclose(m.s(T, 2e6) - m.s(T, 1e5), -m.R * np.log(20.0), rtol=1e-12)
    # continuity at the 1000 K break (h, s exact; cp within the published fits' jump)
    e = 1e-9
    assert float(m.h(1000.0 - e)) == pytest.approx(float(m.h(1000.0)), abs=1e-3)
    assert float(m.s0(1000.0 - e)) == pytest.approx(float(m.s0(1000.0)), abs=1e-6)
    assert float(m.cp(1000.0 - e)) == pytest.approx(float(m.cp(1000.0)), rel=2e-3)


@pytest.mark.parametrize("key", MIXES)
def test_round_trips(key: str) -> None:
    m = Mixture.from_mole_fractions(MIXES[key])
    T = np.concatenate([np.linspace(200.0, 3000.0, 301), [999.9999, 1000.0, 1000.0001]])
    Th, st = m.T_from_h(m.h(T))
    assert np.all(st == 0)
    np.testing.assert_allclose(Th, T, atol=1e-6)
    Ts, st = m.T_from_s(m.s(T, 7e5), 7e5)
    assert np.all(st == 0)
    np.testing.assert_allclose(Ts, T, atol=1e-6)
    Tr = np.linspace(250.0, 2000.0, 50)
    Trs, st = m.T_from_s(m.s_real(Tr, 3e6), 3e6, real_gas=True)
    assert np.all(st == 0)
    np.testing.assert_allclose(Trs, Tr, atol=1e-6)
    Trh, st = m.T_from_h(m.h_real(Tr, 3e6), p=3e6)
    assert np.all(st == 0)
    np.testing.assert_allclose(Trh, Tr, atol=1e-6)


def test_isentropic_definition() -> None:
    m = Mixture.from_mole_fractions(MIXES["humid"])
    T1 = np.array([250.0, 288.15, 320.0, 1600.0])
    p1 = np.array([1e5, 1e5, 1e5, 18e5])
    p2 = np.array([16e5, 20e5, 30e5, 1.05e5])
    T2, st = m.isentropic_T(T1, p1, p2)
    assert np.all(st == 0)
    np.testing.assert_allclose(m.s(T2, p2), m.s(T1, p1), atol=1e-8)
    T2r, st = m.isentropic_T(T1, p1, p2, real_gas=True)
    assert np.all(st == 0)
    np.testing.assert_allclose(m.s_real(T2r, p2), m.s_real(T1, p1), atol=1e-8)


def test_vectorised_equals_scalar_and_broadcasting() -> None:
    rng = np.random.default_rng(1)
    T = rng.uniform(250.0, 320.0, 7)
    RH = rng.uniform(0.0, 1.0, 7)
    x, _ = humid_air(T, 101325.0, RH)
    batch = Mixture.from_mole_fractions(x)
    Tq = rng.uniform(300.0, 1800.0, 7)
    hv = batch.h(Tq)
    T2v, _ = batch.isentropic_T(T, 101325.0, 16 * 101325.0, real_gas=True)
    for i in range(7):
        single = Mixture.from_mole_fractions(x[i])
        assert float(single.h(Tq[i])) == pytest.approx(hv[i], rel=1e-13)
        t2, _ = single.isentropic_T(T[i], 101325.0, 16 * 101325.0, real_gas=True)
        assert float(t2) == pytest.approx(T2v[i], abs=1e-9)
    # one mixture, a 2-D grid of temperatures
    air = Mixture.from_mole_fractions(DRY_AIR)
    grid = np.linspace(300.0, 1500.0, 12).reshape(3, 4)
    assert air.cp(grid).shape == (3, 4)
    assert float(air.cp(grid)[2, 1]) == float(air.cp(grid[2, 1]))
    # a batch of mixtures against a (n_T, 1) column of temperatures -> (n_T, batch)
    col = np.array([[400.0], [1200.0]])
    assert batch.h(col).shape == (2, 7)
    assert batch.h(col)[1, 3] == pytest.approx(float(Mixture.from_mole_fractions(x[3]).h(1200.0)))


def test_blend_is_exact() -> None:
    a = Mixture.from_mole_fractions(DRY_AIR)
    c = Mixture.from_mole_fractions(combustion_gas())
    b = Mixture.blend([(a, 3.0), (c, 1.0)])
    y = (3.0 * a.y + c.y) / 4.0
    ref = Mixture.from_mass_fractions(y)
    for T in (250.0, 800.0, 1700.0):
        assert float(b.h(T)) == pytest.approx(
            0.75 * float(a.h(T)) + 0.25 * float(c.h(T)), rel=1e-12
        )
        assert float(b.s(T, 1e6)) == pytest.approx(float(ref.s(T, 1e6)), rel=1e-12)
    np.testing.assert_allclose(b.x.sum(), 1.0)


def test_out_of_range_gives_nan_and_reason() -> None:
    air = Mixture.from_mole_fractions(DRY_AIR)
    h = air.h(np.array([150.0, 300.0, 3500.0, np.nan]))
    assert np.isnan(h[0]) and np.isfinite(h[1]) and np.isnan(h[2]) and np.isnan(h[3])
    T, st = air.T_from_h(np.array([air.h(300.0), 1e9, -5e5, np.nan]))
    assert st[0] == 0 and T[0] == pytest.approx(300.0)
    assert st[1] & Reason.TEMPERATURE_OUT_OF_RANGE and np.isnan(T[1])
    assert st[2] & Reason.TEMPERATURE_OUT_OF_RANGE and np.isnan(T[2])
    assert st[3] & Reason.INPUT_MISSING and np.isnan(T[3])
    T2, st = air.isentropic_T(
        np.array([288.0, 150.0, 288.0, 288.0]), np.array([1e5, 1e5, -1.0, 1e5]), 16e5
    )
    assert st[0] == 0
    assert st[1] & Reason.TEMPERATURE_OUT_OF_RANGE
    assert st[2] & Reason.INPUT_NONPHYSICAL
    assert np.all(np.isnan(T2[1:3]))
    _, st = air.isentropic_T(288.0, 1e5, 9e6, real_gas=True)
    assert st & Reason.PRESSURE_OUT_OF_RANGE


def test_not_converged_flag(monkeypatch: pytest.MonkeyPatch) -> None:
    air = Mixture.from_mole_fractions(DRY_AIR)
    h = air.h(np.array([250.0, 900.0]))
    monkeypatch.setattr(
        mixtures, "MAX_ITER", 1
    )  # one Newton step from 1500 K away cannot reach 1e-6 K
    T, st = air.T_from_h(h, T_guess=np.array([1750.0, 2400.0]))
    assert np.all(st == Reason.NOT_CONVERGED) and np.all(np.isnan(T))
    monkeypatch.setattr(mixtures, "MAX_ITER", 8)
    T, st = air.T_from_h(h, T_guess=np.array([1750.0, 2400.0]))
    assert np.all(st == 0)
    np.testing.assert_allclose(T, [250.0, 900.0], atol=1e-6)


def test_misuse_raises() -> None:
    with pytest.raises(ModelInputError, match="last axis"):
        Mixture.from_mole_fractions(np.ones(5) / 5)
    bad = DRY_AIR.copy()
    bad[0] += 0.01
    with pytest.raises(ModelInputError, match="sum"):
        Mixture.from_mole_fractions(bad)
    neg = DRY_AIR.copy()
    neg[INDEX["CO2"]] = -0.01
    neg[INDEX["N2"]] += 0.01
    with pytest.raises(ModelInputError, match=">= 0"):
        Mixture.from_mass_fractions(neg)
    with pytest.raises(ModelInputError):
        Mixture.blend([])
    # NaN rows are data, not misuse: they propagate
    rows = np.stack([DRY_AIR, np.full(len(SPECIES), np.nan)])
    m = Mixture.from_mole_fractions(rows)
    h = m.h(500.0)
    assert np.isfinite(h[0]) and np.isnan(h[1])


def test_dry_air_composition() -> None:
    # ISO 2533:1975 Table 1 N2 78.084 %, O2 20.9476 %, Ar 0.934 %; CO2 400 ppm (common practice)
    assert DRY_AIR.sum() == pytest.approx(1.0, abs=1e-15)
    assert DRY_AIR[INDEX["N2"]] == pytest.approx(0.78084, rel=1e-4)
    # molar mass of dry air 28.9647 g/mol (ISO 2533 with 314 ppm CO2, from memory) -> 28.966
    assert pytest.approx(28.966e-3, abs=2e-6) == Mixture.from_mole_fractions(DRY_AIR).M
