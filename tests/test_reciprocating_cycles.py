"""Ideal Otto, Diesel and dual cycles (models.cycles.reciprocating) against Cantera.

Oracles:
* Cantera 3 with a one-species ideal gas of constant cp (Cantera's ``constant-cp`` species
  thermo) for the air-standard form: every corner from Cantera's own state setters (SV for
  the isentropes by volume, UV / HP for the heat additions), nothing from ``models``.
* Cantera 3 with dry air from the NASA TM-4513 polynomials of ``nasa_gas.yaml`` (the same
  published fits as ``models.properties.mixtures``, an independent implementation) for the
  temperature-dependent form.
* The first law by mechanics: the net work as the integral of p dv round the cycle (Cantera
  states along each isentrope, Simpson's rule), against our heat balance q_in - q_out.
* Identities between the forms (Otto = dual with rc = 1, Diesel = dual with alpha = 1).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from models.cycles import reciprocating as cyc
from models.cycles.reciprocating import (
    CORNERS,
    R_DRY_AIR,
    diesel_cycle,
    diesel_efficiency,
    dual_cycle,
    dual_efficiency,
    otto_cycle,
    otto_efficiency,
)
from models.properties import humid_air, mixtures
from models.status import ModelInputError, Reason

ct = pytest.importorskip("cantera")
simpson = pytest.importorskip("scipy.integrate").simpson

DRY = mixtures.Mixture.from_mole_fractions(humid_air.DRY_AIR)
_DRY_X = {
    "N2": 0.78084,
    "O2": 0.209476,
    "Ar": 0.00934,
    "CO2": 0.0004,
}  # as models.properties.humid_air.DRY_AIR


def _constant_cp_gas(gamma: float, R: float) -> object:
    """Cantera ideal gas of one pseudo-species with molar mass R_u/R and constant cp."""
    M = ct.gas_constant / R  # kg/kmol
    cp = gamma / (gamma - 1.0) * ct.gas_constant / 1000.0  # J/(mol K)
    yaml = f"""
elements:
- symbol: Ax
  atomic-weight: {M!r}
phases:
- name: cold-air
  thermo: ideal-gas
  elements: [Ax]
  species: [AIR]
  state: {{T: 300.0, P: 1 atm}}
species:
- name: AIR
  composition: {{Ax: 1}}
  thermo:
    model: constant-cp
    T0: 298.15 K
    h0: 0.0 J/mol
    s0: 200.0 J/mol/K
    cp0: {cp!r} J/mol/K
    T-min: 50.0
    T-max: 8000.0
"""
    return ct.Solution(yaml=yaml)


def _nasa_dry_air() -> object:
    species = {s.name: s for s in ct.Species.list_from_file("nasa_gas.yaml")}
    sol = ct.Solution(thermo="ideal-gas", species=[species[k] for k in ("N2", "O2", "Ar", "CO2")])
    sol.X = _DRY_X
    return sol


def _cantera_cycle(
    sol: object,
    T1: float,
    p1: float,
    r: float,
    *,
    q: float | None = None,
    p_peak: float | None = None,
    kind: str = "otto",
    alpha: float = 1.0,
    rc: float = 1.0,
) -> dict[str, np.ndarray | float]:
    """The cycle with Cantera's state setters only."""
    s = sol  # type: ignore[assignment]
    states = []
    s.TP = T1, p1
    u1, s1, v1 = s.int_energy_mass, s.entropy_mass, 1.0 / s.density
    states.append((s.T, s.P, v1))
    s.SV = s1, v1 / r
    T2, p2, v2, u2, h2 = s.T, s.P, v1 / r, s.int_energy_mass, s.enthalpy_mass
    states.append((T2, p2, v2))
    if q is None:
        s.TD = alpha * T2, 1.0 / v2
        states.append((s.T, s.P, v2))
        s.TP = rc * s.T, s.P
    elif kind == "otto":
        s.UV = u2 + q, v2
        states.append((s.T, s.P, v2))
    elif kind == "diesel":
        states.append((T2, p2, v2))
        s.HP = h2 + q, p2
    else:
        assert p_peak is not None
        s.TD = T2 * p_peak / p2, 1.0 / v2
        states.append((s.T, s.P, v2))
        s.HP = s.enthalpy_mass + q - (s.int_energy_mass - u2), s.P
    states.append((s.T, s.P, 1.0 / s.density))
    s3 = s.entropy_mass
    s.SV = s3, v1
    states.append((s.T, s.P, v1))
    u4 = s.int_energy_mass
    arr = np.array(states)
    # heat input from the states: (u3a - u2) + (h3b - h3a)
    s.TD = arr[2, 0], 1.0 / arr[2, 2]
    u3a, h3a = s.int_energy_mass, s.enthalpy_mass
    s.TP = arr[3, 0], arr[3, 1]
    h3b = s.enthalpy_mass
    q_in = (u3a - u2) + (h3b - h3a)
    w = q_in - (u4 - u1)
    return {"T": arr[:, 0], "p": arr[:, 1], "v": arr[:, 2], "q_in": q_in, "w": w, "eta": w / q_in}


def _work_by_integration(sol: object, T: np.ndarray, v: np.ndarray) -> float:
    """Net work of the cycle as the integral of p dv (isentropes sampled with Cantera)."""
    s = sol  # type: ignore[assignment]

    def isentrope(T0: float, v0: float, v_end: float) -> float:
        s.TD = T0, 1.0 / v0
        s0 = s.entropy_mass
        vv = np.linspace(v0, v_end, 2001)
        pp = np.empty_like(vv)
        for i, vi in enumerate(vv):
            s.SV = s0, vi
            pp[i] = s.P
        return float(simpson(pp, x=vv))

    w_comp = isentrope(T[0], v[0], v[1])  # negative: work done on the gas
    s.TD = T[3], 1.0 / v[3]
    w_cp = s.P * (v[3] - v[2])
    w_exp = isentrope(T[3], v[3], v[4])
    return w_comp + w_cp + w_exp


# ------------------------------------------------------------------------------------------
# Closed forms
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("gamma", [1.4, 1.3])
def test_closed_form_efficiencies_against_cantera_constant_cp(gamma: float) -> None:
    # Oracle: Cantera constant-cp ideal gas, ratio form of each cycle (state setters only,
    # which converge to about 1e-9).
    sol = _constant_cp_gas(gamma, R_DRY_AIR)
    for r, alpha, rc in [(8.0, 2.5, 1.0), (12.0, 2.0, 1.0), (18.0, 1.0, 2.2), (16.0, 1.5, 1.6)]:
        ref = _cantera_cycle(sol, 320.0, 2.0e5, r, alpha=alpha, rc=rc)
        if rc == 1.0 and alpha > 1.0:
            assert float(otto_efficiency(r, gamma)[0]) == pytest.approx(ref["eta"], rel=1e-8)
        if alpha == 1.0:
            assert float(diesel_efficiency(r, rc, gamma)[0]) == pytest.approx(ref["eta"], rel=1e-8)
        if alpha > 1.0 or rc > 1.0:
            eta = float(dual_efficiency(r, alpha, rc, gamma)[0])
            assert eta == pytest.approx(ref["eta"], rel=1e-8)


def test_closed_forms_reduce_to_each_other() -> None:
    # Identities: dual(alpha=1) = Diesel; dual(rc=1) = Diesel(rc=1) = Otto.
    r = np.array([6.0, 10.0, 14.0, 22.0])
    rc = np.array([1.0, 1.5, 2.0, 3.0])
    np.testing.assert_allclose(
        dual_efficiency(r, 1.0, rc)[0], diesel_efficiency(r, rc)[0], rtol=1e-14
    )
    np.testing.assert_allclose(dual_efficiency(r, 1.7, 1.0)[0], otto_efficiency(r)[0], rtol=1e-14)
    np.testing.assert_allclose(diesel_efficiency(r, 1.0)[0], otto_efficiency(r)[0], rtol=1e-14)
    # for equal r the Diesel cycle is the less efficient one (Heywood 2018, section 5.3)
    assert np.all(diesel_efficiency(r, 2.0)[0] < otto_efficiency(r)[0])


def test_closed_forms_flag_bad_elements() -> None:
    eta, st = diesel_efficiency([np.nan, 0.9, 16.0, 16.0], [2.0, 2.0, 0.8, 2.0])
    assert np.isnan(eta[:3]).all() and not np.isnan(eta[3])
    assert st[0] == Reason.INPUT_MISSING
    assert st[1] == Reason.INPUT_NONPHYSICAL and st[2] == Reason.INPUT_NONPHYSICAL
    eta, st = otto_efficiency(10.0, [1.4, 1.0])
    assert st[1] == Reason.INPUT_NONPHYSICAL and np.isnan(eta[1])


# ------------------------------------------------------------------------------------------
# Cycle states, constant specific heats
# ------------------------------------------------------------------------------------------
CASES_HEAT = [
    ("otto", {"q": 1.4e6}),
    ("diesel", {"q": 1.4e6}),
    ("dual", {"q": 1.4e6, "p_peak": 150.0e5}),
]


def _ours(
    kind: str, T1: float, p1: float, r: float, fluid: mixtures.Mixture | None, **kw: float
) -> cyc.ReciprocatingCycle:
    if kind == "otto":
        return otto_cycle(T1, p1, r, cycle_heat_input=kw["q"], fluid=fluid)
    if kind == "diesel":
        return diesel_cycle(T1, p1, r, cycle_heat_input=kw["q"], fluid=fluid)
    return dual_cycle(
        T1, p1, r, cycle_heat_input=kw["q"], peak_cylinder_pressure=kw["p_peak"], fluid=fluid
    )


@pytest.mark.parametrize("fluid", [None, DRY], ids=["air-standard", "variable"])
@pytest.mark.parametrize(("kind", "kw"), CASES_HEAT)
def test_states_against_cantera(
    kind: str, kw: dict[str, float], fluid: mixtures.Mixture | None
) -> None:
    # Oracles: the Cantera constant-cp gas (gamma 1.4, R of dry air), corners to 1e-8 (the
    # tolerance of Cantera's own state-setter iterations); Cantera dry air from nasa_gas.yaml
    # (McBride et al. 1993), to 2e-5 on T (models.properties.mixtures shifts the high-range constants by a
    # few ppm for exact continuity at 1000 K).
    sol = _constant_cp_gas(1.4, R_DRY_AIR) if fluid is None else _nasa_dry_air()
    tol = 1e-8 if fluid is None else 2e-5
    T1, p1, r = 330.0, 3.0e5, 15.0
    ref = _cantera_cycle(sol, T1, p1, r, kind=kind, **kw)
    c = _ours(kind, T1, p1, r, fluid, **kw)
    assert c.status == 0
    np.testing.assert_allclose(c.T, ref["T"], rtol=tol)
    np.testing.assert_allclose(c.p, ref["p"], rtol=2.5 * tol)
    np.testing.assert_allclose(c.v, ref["v"], rtol=tol)
    assert float(c.cycle_heat_input) == pytest.approx(kw["q"], rel=1e-12)
    assert float(c.efficiency) == pytest.approx(ref["eta"], abs=2.5 * tol)
    if fluid is None:  # the ratio estimates agree with the closed forms
        eta_cf, _ = dual_efficiency(r, c.peak_pressure_ratio, c.cutoff_ratio)
        assert float(c.efficiency) == pytest.approx(float(eta_cf), rel=1e-10)
    else:  # cp rises with temperature: less efficient than the air standard
        assert float(c.efficiency) < float(_ours(kind, T1, p1, r, None, **kw).efficiency) - 0.03


def test_air_standard_otto_efficiency_independent_of_heat() -> None:
    # Identity of the constant-cp Otto cycle: eta = 1 - r^(1-gamma) whatever the heat added.
    q = np.array([2.0e5, 8.0e5, 1.6e6, 2.5e6])
    c = otto_cycle(300.0, 1.0e5, 11.0, cycle_heat_input=q)
    np.testing.assert_allclose(c.efficiency, otto_efficiency(11.0)[0], rtol=1e-12)
    # ratio and heat forms agree: the Diesel cycle with the cut-off the heat form estimated
    d = diesel_cycle(300.0, 1.0e5, 17.0, cycle_heat_input=q)
    d2 = diesel_cycle(300.0, 1.0e5, 17.0, cutoff_ratio=d.cutoff_ratio)
    np.testing.assert_allclose(d2.T, d.T, rtol=1e-12)
    cp = 1.4 / 0.4 * R_DRY_AIR
    np.testing.assert_allclose(d.cutoff_ratio, 1.0 + q / (cp * d.T[..., 1]), rtol=1e-12)


# ------------------------------------------------------------------------------------------
# Temperature-dependent properties
# ------------------------------------------------------------------------------------------
def test_variable_property_ratio_form_against_cantera() -> None:
    sol = _nasa_dry_air()
    ref = _cantera_cycle(sol, 320.0, 2.5e5, 16.0, alpha=1.4, rc=1.7)
    c = dual_cycle(320.0, 2.5e5, 16.0, peak_pressure_ratio=1.4, cutoff_ratio=1.7, fluid=DRY)
    np.testing.assert_allclose(c.T, ref["T"], rtol=2e-5)
    assert float(c.efficiency) == pytest.approx(ref["eta"], abs=5e-5)


@pytest.mark.parametrize("fluid", [None, DRY], ids=["air-standard", "variable"])
@pytest.mark.parametrize(("kind", "kw"), CASES_HEAT)
def test_first_law_net_work_equals_integral_of_p_dv(
    kind: str, kw: dict[str, float], fluid: mixtures.Mixture | None
) -> None:
    # First law of the closed cycle: q_in - q_out (our heat balance) = the integral of p dv
    # round the cycle (mechanics, Cantera states along the isentropes); mean effective
    # pressure by its definition w / (v1 - v2).
    sol = _constant_cp_gas(1.4, R_DRY_AIR) if fluid is None else _nasa_dry_air()
    c = _ours(kind, 330.0, 3.0e5, 15.0, fluid, **kw)
    w_mech = _work_by_integration(sol, c.T, c.v)
    assert float(c.net_work) == pytest.approx(w_mech, rel=2e-5)
    assert float(c.net_work) == pytest.approx(
        float(c.cycle_heat_input - c.cycle_heat_rejected), rel=1e-12
    )
    mep = float(c.net_work) / float(c.v[0] - c.v[1])
    assert float(c.mean_effective_pressure) == pytest.approx(mep, rel=1e-12)


def test_variable_property_efficiency_falls_with_heat_input() -> None:
    # Physics: with cv rising with temperature, the constant-volume cycle's efficiency falls as
    # more heat is added (Heywood 2018, section 5.5, fuel-air cycle results).
    q = np.linspace(3.0e5, 2.0e6, 8)
    c = otto_cycle(330.0, 3.0e5, 12.0, cycle_heat_input=q, fluid=DRY)
    assert (c.status == 0).all()
    assert np.all(np.diff(c.efficiency) < 0)
    assert np.all(c.efficiency < otto_efficiency(12.0)[0])


def test_vectorised_over_a_batch_of_mixtures() -> None:
    # One humid-air composition per element: the batch equals the element-by-element result.
    x, _ = humid_air.humid_air(np.array([280.0, 300.0, 310.0]), 1.0e5, np.array([0.2, 0.6, 0.9]))
    mix = mixtures.Mixture.from_mole_fractions(x)
    q = np.array([1.2e6, 1.4e6, 1.6e6])
    batch = diesel_cycle(330.0, 3.0e5, 16.0, cycle_heat_input=q, fluid=mix)
    for i in range(3):
        one = diesel_cycle(
            330.0,
            3.0e5,
            16.0,
            cycle_heat_input=q[i],
            fluid=mixtures.Mixture.from_mole_fractions(x[i]),
        )
        np.testing.assert_allclose(batch.T[i], one.T, rtol=1e-10)


# ------------------------------------------------------------------------------------------
# Bad data and misuse
# ------------------------------------------------------------------------------------------
def test_dual_cycle_clips_an_unusable_peak_pressure() -> None:
    # Below p2: the Diesel cycle; beyond what the heat reaches at constant volume: the Otto
    # cycle.  Both flagged PEAK_PRESSURE_CLIPPED (a warning: values kept).
    q = 1.2e6
    base = {"cycle_heat_input": q}
    d = dual_cycle(330.0, 3.0e5, 15.0, peak_cylinder_pressure=[1.0e6, 5.0e8], **base)
    assert (d.status == Reason.PEAK_PRESSURE_CLIPPED).all()
    np.testing.assert_allclose(d.efficiency[0], diesel_cycle(330.0, 3.0e5, 15.0, **base).efficiency)
    np.testing.assert_allclose(d.efficiency[1], otto_cycle(330.0, 3.0e5, 15.0, **base).efficiency)


def test_bad_elements_are_nan_with_their_reason() -> None:
    c = otto_cycle(
        [330.0, np.nan, -1.0, 330.0, 330.0],
        3.0e5,
        [12.0, 12.0, 12.0, 0.5, 12.0],
        cycle_heat_input=[1.0e6, 1.0e6, 1.0e6, 1.0e6, 9.0e6],
        fluid=DRY,
    )
    st = c.status
    assert st[0] == 0 and not np.isnan(c.T[0]).any()
    assert st[1] & Reason.INPUT_MISSING and np.isnan(c.T[1]).all()
    assert st[2] & Reason.INPUT_NONPHYSICAL and st[3] & Reason.INPUT_NONPHYSICAL
    # 9 MJ/kg at constant volume would pass 3000 K, the end of the property data
    assert st[4] & Reason.TEMPERATURE_OUT_OF_RANGE and np.isnan(c.efficiency[4])


def test_misuse_raises() -> None:
    with pytest.raises(ModelInputError):
        otto_cycle(300.0, 1e5, 10.0)  # neither form
    with pytest.raises(ModelInputError):
        diesel_cycle(300.0, 1e5, 10.0, cycle_heat_input=1e6, cutoff_ratio=2.0)  # both forms
    with pytest.raises(ModelInputError):
        dual_cycle(300.0, 1e5, 10.0, cycle_heat_input=1e6)  # heat form without the peak pressure
    with pytest.raises(ModelInputError):
        otto_cycle(300.0, 1e5, 10.0, cycle_heat_input=1e6, fluid="air")  # type: ignore[arg-type]
    c = otto_cycle(300.0, 1e5, 10.0, cycle_heat_input=1e6)
    with pytest.raises(ModelInputError):
        c.corner("5")
    T, p, v = (np.array([c.corner(n)[i] for n in CORNERS]) for i in range(3))
    np.testing.assert_array_equal(T, c.T)
    np.testing.assert_array_equal(p * v, c.p * c.v)


def test_dry_air_gas_constant() -> None:
    # ISO 2533:1975, Table 1: molar mass of dry air 28.964 42 kg/kmol (0.0314 % CO2; ours has
    # 400 ppm: +0.005 %); R = R_u / M = 287.05 J/(kg K) (ours 287.04).
    assert math.isclose(R_DRY_AIR, 8.314462618 / 0.02896442, rel_tol=1e-4)
