"""The property kernel (models.properties.kernel): rows, mixing, Newton solves, departures.

Oracles: Cantera 3 reading ``nasa_gas.yaml`` (McBride et al. 1993 NASA TM-4513, the data we
ship), CoolProp's Lemmon et al. (2000) air, thermodynamic identities, and the mixture front
(:class:`models.properties.mixtures.Mixture`, a separate solver with a tight 1e-6 K criterion)
as a tight re-solve.
"""

from __future__ import annotations

import cantera as ct
import CoolProp.CoolProp as CP
import numpy as np
import pytest

from models.properties import kernel
from models.properties.humid_air import DRY_AIR, humid_air, humid_air_fluid, water_mass_fraction
from models.properties.mixtures import MOLAR_MASS, Mixture
from models.properties.species import INDEX, N_SPECIES, SPECIES, WORKING_SPECIES

NASA = {
    "n-C4H10": "C4H10,n-butane",
    "i-C4H10": "C4H10,isobutane",
    "n-C5H12": "C5H12,n-pentane",
    "i-C5H12": "C5H12,i-pentane",
}


def test_rows_are_continuous_at_the_break() -> None:
    # h and phi of the two ranges meet at 1000 K (the kernel shifts the published high-range
    # constants by a few ppm so a Newton solve always has a root)
    T = np.array([kernel.T_MID])
    for i in range(N_SPECIES):
        lo, hi = kernel.SPECIES_ROWS[0, i], kernel.SPECIES_ROWS[1, i]
        h_lo, h_hi = kernel.poly(lo[kernel.H], T), kernel.poly(hi[kernel.H], T)
        assert h_hi == pytest.approx(h_lo, rel=1e-12, abs=1e-6), SPECIES[i]
        one = kernel.Fluid([(kernel.SPECIES_ROWS[:, i, :], 1.0)], 1.0)
        eps = np.array([kernel.T_MID * (1 - 1e-12), kernel.T_MID * (1 + 1e-12)])
        phi = one.evaluate(kernel.PHI, eps)
        assert phi[1] == pytest.approx(phi[0], rel=1e-9, abs=1e-9), SPECIES[i]


def test_humid_air_fluid_matches_cantera() -> None:
    # Oracle: Cantera ideal gas of the same composition from nasa_gas.yaml (the same fits):
    # cp to 1e-9, sensible h within the few ppm of cp*T of the continuity shift
    y_w = float(water_mass_fraction(np.array(303.15), np.array(101325.0), np.array(0.7)))
    air = humid_air_fluid(y_w)
    x, _ = humid_air(303.15, 101325.0, 0.7)
    species = list(ct.Species.list_from_file("nasa_gas.yaml"))
    names = [NASA.get(s, s) for s in WORKING_SPECIES if x[INDEX[s]] > 0]
    gas = ct.Solution(thermo="ideal-gas", species=[s for s in species if s.name in names])
    comp = {NASA.get(s, s): float(x[INDEX[s]]) for s in WORKING_SPECIES if x[INDEX[s]] > 0}
    Ts = np.linspace(220.0, 2500.0, 40)
    gas.TPX = 298.15, ct.one_atm, comp
    h0 = gas.enthalpy_mass
    cp, h = [], []
    for T in Ts:
        gas.TPX = T, ct.one_atm, comp
        cp.append(gas.cp_mass)
        h.append(gas.enthalpy_mass - h0)
    # per mole (our molar masses use ISO 6976 atomic weights, Cantera's its own: 1e-5 apart)
    M_ours = float(np.sum(x * MOLAR_MASS))
    M_ct = gas.mean_molecular_weight / 1e3
    assert pytest.approx(8.314462618 / M_ours, rel=1e-12) == air.R
    np.testing.assert_allclose(air.cp(Ts) * M_ours, np.array(cp) * M_ct, rtol=1e-9)
    np.testing.assert_allclose(
        air.h(Ts) * M_ours, np.array(h) * M_ct, atol=2e-4 * 1300.0 * 1000.0 * M_ours
    )


def test_basis_parts_mix_exactly() -> None:
    # Identity: the coefficient rows are linear in the mass fractions, so air + f x (burnt
    # fuel change) per kg of air equals the mixture of the blended composition, times (1 + f)
    y_air = DRY_AIR * MOLAR_MASS / np.sum(DRY_AIR * MOLAR_MASS)
    delta = np.zeros(N_SPECIES)  # 1 kg of methane burnt: +2.744 CO2, +2.246 H2O, -3.990 O2
    delta[INDEX["CO2"]], delta[INDEX["H2O"]], delta[INDEX["O2"]] = 2.7435, 2.2461, -3.9896
    f = np.array([0.0, 0.01, 0.02, 0.03])
    base = kernel.Fluid([(kernel.mixture_rows(y_air), 1.0)], 287.0)
    gas = base.with_part(kernel.mixture_rows(delta), f, 0.0)
    blend = Mixture.from_mass_fractions((y_air + f[:, None] * delta) / (1.0 + f[:, None]))
    T = np.full(4, 1400.0)
    np.testing.assert_allclose(gas.h(T), (1.0 + f) * blend.h(T), rtol=1e-12)
    np.testing.assert_allclose(gas.cp(T), (1.0 + f) * blend.cp(T), rtol=1e-12)


def test_departure_of_air_against_coolprop() -> None:
    # Oracle: CoolProp, Lemmon et al. (2000) air: h(T, p) - h(T, 1 kPa) at compressor and
    # turbine conditions; the fit is good to about 1 % of the departure (tools/gen_thermo_data)
    R = 8.314462618 / 0.0289647  # CoolProp's air molar mass
    for T, p in ((300.0, 1.0e6), (680.0, 1.6e6), (1400.0, 1.5e6)):
        ref = CP.PropsSI("Hmass", "T", T, "P", p, "Air") - CP.PropsSI(
            "Hmass", "T", T, "P", 1e3, "Air"
        )
        ours = R * T * float(kernel.departure(kernel.DEPARTURE_H, np.array(T), p))
        assert ours == pytest.approx(ref, rel=0.02, abs=20.0), (T, p)


def test_newton_groups_give_the_numbers_of_one_solve_per_group() -> None:
    # a block of groups stops each group on its own: element for element the numbers of
    # solving each group alone (exact equality, not a tolerance)
    rng = np.random.default_rng(7)
    y_w = rng.uniform(0.0, 0.03, 600)
    air = humid_air_fluid(y_w)
    T_true = rng.uniform(250.0, 1900.0, 600)
    T_true[:200] = rng.uniform(290.0, 300.0, 200)  # a group that converges early
    H = air.h(T_true, 1.5e6)
    guess = T_true + rng.uniform(-80.0, 80.0, 600)
    starts = np.array([0, 200, 400])
    T_block, ok_block = air.T_from_h(H, 1.5e6, guess, starts)
    for a, b in ((0, 200), (200, 400), (400, 600)):
        part = humid_air_fluid(y_w[a:b])
        T_one, ok_one = part.T_from_h(H[a:b], 1.5e6, guess[a:b])
        np.testing.assert_array_equal(T_block[a:b], T_one)
        np.testing.assert_array_equal(ok_block[a:b], ok_one)
    assert ok_block.all()


def test_step_criterion_gives_a_temperature_within_1e5_kelvin() -> None:
    # NEWTON_TOL = 0.03 K on the step gives an answer within 1e-5 K of the root (quadratic
    # convergence), checked against the tight (1e-6 K) solve of the mixture front, where the
    # kernel solves for temperature (combustor outlet, compressor and turbine exit: 400 K up)
    rng = np.random.default_rng(1)
    T = rng.uniform(400.0, 2400.0, 500)
    y = humid_air(293.15, 101325.0, 0.55)[0]
    mix = Mixture.from_mole_fractions(y)
    air = humid_air_fluid(float(mix.y[INDEX["H2O"]]))
    H = air.h(T, 2.0e6)
    T_fast, ok = air.T_from_h(H, 2.0e6, T + 60.0)
    T_tight, st = mix.T_from_h(mix.h_real(T, 2.0e6), T_guess=T + 60.0, p=2.0e6)
    assert ok.all() and (st == 0).all()
    np.testing.assert_allclose(T_fast, T_tight, atol=1e-5)
    np.testing.assert_allclose(T_fast, T, atol=1e-5)


def test_isentropic_end_state_keeps_the_entropy() -> None:
    # Identity: phi(T2s) + R d_s(T2s, p2) = phi(T1) + R d_s(T1, p1) + R ln(p2/p1), to the
    # step criterion times cp/T
    air = humid_air_fluid(0.008)
    T1 = np.linspace(250.0, 320.0, 8)
    T2s, ok = air.isentropic_T(T1, 1.0e5, 1.8e6)
    lhs = air.phi(T2s, 1.8e6)
    rhs = air.phi(T1, 1.0e5) + air.R * np.log(18.0)
    assert ok.all()
    np.testing.assert_allclose(lhs, rhs, atol=1e-5 * 1100.0 / 600.0)
    assert (T2s > 560.0).all() and (T2s < 800.0).all()  # about 620-700 K at r = 18


def test_newton_reports_what_does_not_converge() -> None:
    # a step that never shrinks: no silent answer, the flag says so
    T, ok = kernel.newton(lambda T: np.full(T.shape, 1.0), np.array([500.0, 600.0]))
    assert not ok.any()
    T, ok = kernel.newton(lambda T: np.zeros(T.shape), np.zeros(0))
    assert T.shape == (0,) and ok.shape == (0,)
