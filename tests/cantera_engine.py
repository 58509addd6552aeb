"""Independent Cantera model of a single-shaft gas turbine (test-only helper).

Two things live here, both built on Cantera's ideal-gas thermodynamics and nothing from
``models``:

* :func:`forward` - the *forward* problem.  From known component health (compressor pressure
  ratio and isentropic efficiency, turbine inlet temperature, turbine isentropic efficiency,
  air flow, combustion efficiency, pressure losses, generator efficiency, casing heat loss) it
  produces the sensor values a plant would report: T2, p2, T4, p4, fuel flow and generator
  power.  The fuel flow that reaches the requested turbine inlet temperature is found from
  Cantera's own energy balance in *absolute* (formation-inclusive) enthalpies, with the
  complete-combustion products built here from an element balance (no equilibrium).  This is
  the independent reference of the round-trip test: the inverse in ``models`` works with
  sensible enthalpies and an ISO 6976 heating value instead.
* :func:`reconstruct_one` - the *inverse* for one snapshot, the same equations as
  ``models.units.gas_turbine.reconstruct.reconstruct`` but with one Cantera property call after another.  It is
  the "per-snapshot loop" baseline of ``brayscope bench`` and an oracle for the vectorised code.

Thermodynamic data
------------------
``data="nasa"`` (default): species from Cantera's ``nasa_gas.yaml``, the NASA Lewis/Glenn
7-coefficient fits of McBride, Gordon & Reno (1993), valid 200-6000 K for N2, O2, Ar, CO2, H2O,
CH4...C4H10, H2, CO, He (SO2 and H2S from 300 K, the pentanes from 298.15 K).  The compressor
inlet in winter (263 K) is inside that range.  ``data="gri30"``: the same species taken from
GRI-Mech 3.0 (``gri30.yaml``); those fits start at 300 K for N2 and Ar and Cantera extrapolates
silently below that, so use it only for inlet temperatures >= 300 K (and it has no butanes,
pentanes, H2S or He).

Humid air
---------
The water mole fraction at the compressor inlet is fixed by the ambient state: CoolProp's
humid-air model (ASHRAE RP-1485, HAPropsSI output ``psi_w``), which includes the enhancement
factor and refers RH to ice below 0 degC (``saturation="ice"``, the default, the same
convention as ``models.properties.humid_air.humid_air``), or - for ``saturation="water"`` below 0 degC, the
meteorological convention of relative humidity over liquid water - ``RH * f * p_sat,w(T) / p``
with CoolProp's IAPWS-95 water.

Consistency with the inverse (documented differences)
-----------------------------------------------------
* Heating value: the inverse uses the ISO 6976:2016 net heating value at 25 degC; the forward
  model implicitly uses Cantera's (formation enthalpies of the NASA/GRI data).  For methane
  they differ by about 0.02 %, which moves the recovered TIT by well under 1 K and the air
  flow by under 0.1 %.  :func:`cantera_lhv` returns Cantera's value so tests can show it.
* Combustion efficiency: a fraction (1 - eta_b) of the fuel's heating value is not released
  (the products are still written as complete combustion), i.e.
  ``m_a h_a(T2) + m_f h_f(Tf) - (1 - eta_b) m_f LHV = m_g h_g(T3)`` in absolute enthalpies.
* Casing heat loss: ``Q_loss = casing_heat_loss_fraction * m_f * LHV`` leaves the hot section.
  Where it leaves (before the turbine-inlet station or after it) follows the convention of
  ``models.units.gas_turbine.reconstruct``; see :data:`CASING_LOSS_AT`.
* Cantera uses kmol; everything here is converted to SI per kg or per mol at the edges.

References
----------
.. [1] D. G. Goodwin, R. L. Speth, H. K. Moffat, B. W. Weber, "Cantera: An object-oriented
   software toolkit for chemical kinetics, thermodynamics, and transport processes",
   https://www.cantera.org, version 3.2.
.. [2] B. J. McBride, S. Gordon, M. A. Reno, "Coefficients for Calculating Thermodynamic and
   Transport Properties of Individual Species", NASA TM-4513, 1993.
.. [3] G. P. Smith et al., GRI-Mech 3.0, http://combustion.berkeley.edu/gri-mech/.
.. [4] I. H. Bell, J. Wronski, S. Quoilin, V. Lemort, "Pure and Pseudo-pure Fluid
   Thermophysical Property Evaluation and the Open-Source Thermophysical Property Library
   CoolProp", Ind. Eng. Chem. Res. 53 (2014) 2498-2508.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from functools import cache
from typing import Any, Literal

import cantera as ct
import CoolProp
import numpy as np
from CoolProp.CoolProp import PropsSI
from CoolProp.HumidAirProp import HAPropsSI
from scipy.optimize import brentq

__all__ = [
    "CASING_LOSS_AT",
    "DRY_AIR",
    "REAL_GAS_STATIONS",
    "T_REF",
    "OperatingPoint",
    "cantera_lhv",
    "forward",
    "humid_air_composition",
    "reconstruct_one",
]

#: Reference temperature of the heating value and of sensible enthalpies [K] (25 degC).
T_REF = 298.15
#: Standard atmosphere [Pa]; only used as the pressure of reference-state enthalpies (ideal gas:
#: enthalpy does not depend on it).
P_STD = 101325.0

#: Dry air mole fractions (N2, O2, Ar, CO2), common practice (about 400 ppm CO2); normalised.
_DRY = {"N2": 0.78084, "O2": 0.20948, "Ar": 0.00934, "CO2": 0.0004}
_DRY_SUM = sum(_DRY.values())
DRY_AIR: Mapping[str, float] = {k: v / _DRY_SUM for k, v in _DRY.items()}

#: Where the casing heat loss leaves the gas path: ``"combustor"`` (before station 3, so the
#: combustor balance carries it) or ``"turbine"`` (after station 3).  Kept equal to the
#: convention of ``models.units.gas_turbine.reconstruct`` (see that module's Notes).
CASING_LOSS_AT: Literal["combustor", "turbine"] = "combustor"

#: Stations whose states carry the real-gas departure of air when ``real_gas=True``: the
#: compressor (1, 2, 2s) and/or the turbine (3, 4, 4s).  ``models.units.gas_turbine.reconstruct`` applies the
#: molar departure of air to every station (combustion gas included), so both.
REAL_GAS_STATIONS: frozenset[str] = frozenset({"compressor", "turbine"})

# our species names (models.properties.species spelling) -> name in each Cantera data file
_NASA_NAMES = {
    "N2": "N2",
    "O2": "O2",
    "Ar": "Ar",
    "CO2": "CO2",
    "H2O": "H2O",
    "SO2": "SO2",
    "CH4": "CH4",
    "C2H6": "C2H6",
    "C3H8": "C3H8",
    "n-C4H10": "C4H10,n-butane",
    "i-C4H10": "C4H10,isobutane",
    "n-C5H12": "C5H12,n-pentane",
    "i-C5H12": "C5H12,i-pentane",
    "H2": "H2",
    "CO": "CO",
    "H2S": "H2S",
    "He": "He",
}
_GRI_NAMES = {
    "N2": "N2",
    "O2": "O2",
    "Ar": "AR",
    "CO2": "CO2",
    "H2O": "H2O",
    "CH4": "CH4",
    "C2H6": "C2H6",
    "C3H8": "C3H8",
    "H2": "H2",
    "CO": "CO",
}
_FILES = {"nasa": ("nasa_gas.yaml", _NASA_NAMES), "gri30": ("gri30.yaml", _GRI_NAMES)}

Data = Literal["nasa", "gri30"]


@cache
def _species(data: Data) -> tuple[tuple[str, ...], tuple[Any, ...]]:
    path, names = _FILES[data]
    by_name = {s.name: s for s in ct.Species.list_from_file(path)}
    ours = tuple(names)
    return ours, tuple(by_name[names[n]] for n in ours)


def _phase(data: Data) -> ct.Solution:
    """A fresh ideal-gas phase holding our species (Cantera names mapped to ours)."""
    _, species = _species(data)
    return ct.Solution(thermo="ideal-gas", species=list(species))


class _Gas:
    """A Cantera ideal-gas phase addressed with our species names and SI molar units."""

    def __init__(self, data: Data = "nasa") -> None:
        self.data = data
        self.ours, _ = _species(data)
        self.phase = _phase(data)
        self.index = {n: i for i, n in enumerate(self.ours)}
        self.elements = self.phase.element_names
        # atoms[i, e]: atoms of element e in species i
        self.atoms = np.array(
            [[self.phase.n_atoms(k, e) for e in self.elements] for k in range(len(self.ours))]
        )
        self.M = self.phase.molecular_weights / 1000.0  # kg/mol

    def vector(self, moles: Mapping[str, float]) -> np.ndarray:
        x = np.zeros(len(self.ours))
        for name, n in moles.items():
            if name not in self.index:
                msg = f"species {name!r} is not in the Cantera {self.data!r} data set"
                raise KeyError(msg)
            x[self.index[name]] += n
        return x

    def set_TP(self, T: float, p: float, n: np.ndarray) -> None:
        self.phase.TPX = T, p, n / n.sum()

    def mean_molar_mass(self, n: np.ndarray) -> float:
        """Mean molar mass [kg/mol] of the mole amounts ``n``."""
        return float(n @ self.M / n.sum())

    def h_mass(self, T: float, p: float, n: np.ndarray, real: bool = False) -> float:
        """Absolute specific enthalpy [J/kg] of the mixture with mole amounts ``n``.

        ``real=True`` adds the real-gas departure of air (Lemmon et al. 2000 via CoolProp) per
        mole of mixture.
        """
        self.set_TP(T, p, n)
        h = float(self.phase.enthalpy_mass)
        if real:
            h += air_departure(T, p)[0] / self.mean_molar_mass(n)
        return h

    def s_mass(self, T: float, p: float, n: np.ndarray, real: bool = False) -> float:
        """Specific entropy [J/(kg K)]; ``real`` as for :meth:`h_mass`."""
        self.set_TP(T, p, n)
        s = float(self.phase.entropy_mass)
        if real:
            s += air_departure(T, p)[1] / self.mean_molar_mass(n)
        return s

    def T_from_h(self, h: float, p: float, n: np.ndarray, real: bool = False) -> float:
        """Temperature [K] at absolute enthalpy ``h`` [J/kg] (Cantera's HP solver; with the
        real-gas departure a bracketing root solve around that first guess)."""
        self.phase.HPX = h, p, n / n.sum()
        T0 = float(self.phase.T)
        if not real:
            return T0
        return float(
            brentq(lambda T: self.h_mass(T, p, n, True) - h, T0 - 5.0, T0 + 5.0, xtol=1e-11)
        )

    def isentropic_h(
        self, T: float, p: float, p_end: float, n: np.ndarray, real: bool = False
    ) -> tuple[float, float]:
        """(T_end_s [K], h_end_s [J/kg]) at ``p_end`` with the entropy of (T, p)."""
        self.set_TP(T, p, n)
        self.phase.SP = self.phase.entropy_mass, p_end
        Ts = float(self.phase.T)
        if real:
            s = self.s_mass(T, p, n, True)
            Ts = float(
                brentq(lambda t: self.s_mass(t, p_end, n, True) - s, Ts - 5.0, Ts + 5.0, xtol=1e-11)
            )
        return Ts, self.h_mass(Ts, p_end, n, real)

    def molar_h(self, T: float) -> np.ndarray:
        """Species molar enthalpies [J/mol], absolute (formation-inclusive)."""
        self.phase.TP = T, P_STD
        return self.phase.standard_enthalpies_RT * ct.gas_constant * T / 1000.0

    def mass(self, n: np.ndarray) -> float:
        return float(n @ self.M)

    def products(self, *reactants: np.ndarray) -> np.ndarray:
        """Complete-combustion products of the summed reactant mole amounts (element balance).

        C -> CO2, H -> H2O, S -> SO2, N -> N2, Ar and He pass through, O2 is what is left.
        Raises ValueError when there is not enough oxygen (rich mixture).
        """
        n = np.sum(reactants, axis=0)
        el = dict(zip(self.elements, n @ self.atoms, strict=True))
        C, H, N = el.get("C", 0.0), el.get("H", 0.0), el.get("N", 0.0)
        ox = el.get("O", 0.0)
        S = el.get("S", 0.0)
        o2 = ox / 2.0 - C - H / 4.0 - S
        if o2 < 0.0:
            msg = "rich mixture: complete combustion needs more oxygen than the air supplies"
            raise ValueError(msg)
        prod = {"CO2": C, "H2O": H / 2.0, "N2": N / 2.0, "O2": o2}
        if S:
            prod["SO2"] = S
        for inert in ("Ar", "He"):
            if el.get(inert):
                prod[inert] = el[inert]
        return self.vector(prod)


_AIR_EOS: list[Any] = []


def air_departure(T: float, p: float) -> tuple[float, float]:
    """Real-gas departure of air at (T [K], p [Pa]): (h - h_ig(T) [J/mol],
    s - s_ig(T, p) [J/(mol K)]) from the Lemmon et al. (2000) equation of state in CoolProp.

    ``h_ig`` depends on T only, so the enthalpy departure is CoolProp's residual enthalpy;
    CoolProp's residual entropy is taken at equal density, so ``R ln Z`` converts it to
    equal pressure.
    """
    if not _AIR_EOS:
        _AIR_EOS.append(CoolProp.AbstractState("HEOS", "Air"))
    eos = _AIR_EOS[0]
    eos.update(CoolProp.PT_INPUTS, p, T)
    R = eos.gas_constant()
    return eos.hmolar_residual(), eos.smolar_residual() + R * math.log(eos.compressibility_factor())


@cache
def _gas(data: Data) -> _Gas:
    # one phase object per data set and process; Cantera phases are not thread-safe, and the
    # tests and the bench are single-threaded
    return _Gas(data)


def _p_sat_water(T: float) -> float:
    """Saturation pressure over liquid water [Pa], IAPWS-95 via CoolProp (supercooled below
    the triple point: CoolProp evaluates the ancillary there)."""
    return float(PropsSI("P", "T", T, "Q", 0, "Water"))


def humid_air_composition(
    T: float, p: float, RH: float, saturation: Literal["ice", "water"] = "ice"
) -> dict[str, float]:
    """Mole fractions of humid air at ambient (T [K], p [Pa], RH [1]).

    Above 0 degC CoolProp's HAPropsSI (ASHRAE RP-1485, enhancement factor included) gives the
    water mole fraction.  Below 0 degC HAPropsSI refers RH to ice; ``saturation="water"``
    (the meteorological convention, common practice) instead uses CoolProp's IAPWS-95
    saturation pressure over (supercooled) liquid water, with HAPropsSI's own enhancement
    factor at that state.
    """
    if saturation == "water" and T < 273.16:
        # enhancement factor of HAPropsSI at the triple point (it varies by < 0.1 % from there
        # to -10 degC); HAPropsSI does not report it directly
        T_tp = 273.16
        f = float(HAPropsSI("psi_w", "T", T_tp, "P", p, "R", 1.0)) * p / _p_sat_water(T_tp)
        x_w = RH * f * _p_sat_water(T) / p
    else:
        x_w = float(HAPropsSI("psi_w", "T", T, "P", p, "R", RH))
    out = {k: v * (1.0 - x_w) for k, v in DRY_AIR.items()}
    out["H2O"] = x_w
    return out


def _fuel_vector(gas: _Gas, fuel: Mapping[str, float]) -> np.ndarray:
    total = sum(fuel.values())
    return gas.vector({k: v / total for k, v in fuel.items()})


def _o2_demand(gas: _Gas, n: np.ndarray) -> float:
    """O2 [mol] needed to burn the mole amounts ``n`` completely, net of their own oxygen."""
    el = dict(zip(gas.elements, n @ gas.atoms, strict=True))
    return el.get("C", 0.0) + el.get("H", 0.0) / 4.0 + el.get("S", 0.0) - el.get("O", 0.0) / 2


def _stoichiometric_far(gas: _Gas, air_per_kg: np.ndarray, fuel_per_kg: np.ndarray) -> float:
    """Stoichiometric fuel-air mass ratio [1] (oxygen of air and fuel both counted)."""
    free_o2 = -_o2_demand(gas, air_per_kg)  # the air's O2 net of its own (zero) demand
    return free_o2 / _o2_demand(gas, fuel_per_kg)


def cantera_lhv(fuel: Mapping[str, float], data: Data = "nasa", T: float = T_REF) -> float:
    """Net (lower) heating value [J/kg] of a gas fuel from Cantera's formation enthalpies.

    ``LHV = [H_fuel(T) + H_O2,stoich(T) - H_products(T)] / m_fuel`` with water as vapour and
    complete combustion; inert fuel components (N2, CO2, Ar, He) cancel.
    """
    gas = _gas(data)
    nf = _fuel_vector(gas, fuel)
    ox = gas.vector({"O2": max(_o2_demand(gas, nf), 0.0) + 1.0})  # one mol spare O2 cancels
    prod = gas.products(nf, ox)
    hm = gas.molar_h(T)
    return float((nf @ hm + ox @ hm - prod @ hm) / gas.mass(nf))


@dataclass(frozen=True)
class OperatingPoint:
    """Known state of the machine for :func:`forward` (SI, absolute pressures).

    ``air_mass_flow`` is the humid air entering the compressor [kg/s].  ``inlet_pressure_loss``
    and ``exhaust_back_pressure`` are differences to ambient [Pa]; ``inlet_temperature_rise``
    is T1 - T0 [K] (0 for a plain filter house).  ``combustor_pressure_loss`` is a fraction
    of p2; ``casing_heat_loss_fraction`` a fraction of the fuel's heat input m_f * LHV.
    """

    ambient_temperature: float = 288.15
    ambient_pressure: float = 101325.0
    ambient_relative_humidity: float = 0.6
    pressure_ratio: float = 16.0
    compressor_efficiency: float = 0.87
    turbine_inlet_temperature: float = 1500.0
    turbine_efficiency: float = 0.89
    air_mass_flow: float = 130.0
    fuel: Mapping[str, float] = field(default_factory=lambda: {"CH4": 1.0})
    fuel_temperature: float = 298.15
    combustion_efficiency: float = 0.995
    combustor_pressure_loss: float = 0.04
    generator_efficiency: float = 0.985
    casing_heat_loss_fraction: float = 0.0
    inlet_pressure_loss: float = 1000.0
    exhaust_back_pressure: float = 3000.0
    inlet_temperature_rise: float = 0.0
    saturation: Literal["ice", "water"] = "ice"

    def with_(self, **changes: Any) -> OperatingPoint:
        return replace(self, **changes)


def forward(
    op: OperatingPoint, data: Data = "nasa", lhv: float | None = None, real_gas: bool = True
) -> dict[str, Any]:
    """Sensor values of a gas turbine at a known operating point (Cantera, ideal gas).

    Parameters
    ----------
    op : OperatingPoint
        The machine's known state.
    data : {"nasa", "gri30"}
        Thermodynamic data set (see the module docstring).
    lhv : float, optional
        Heating value [J/kg] used only to size the combustion-inefficiency and casing-loss
        terms; default Cantera's own (:func:`cantera_lhv`).  The main heat release always
        comes from Cantera's absolute enthalpies.
    real_gas : bool
        Add the real-gas departure of air (:func:`air_departure`) at the stations named in
        :data:`REAL_GAS_STATIONS` (default True); False is a pure ideal-gas mixture.

    Returns
    -------
    dict
        ``"measurements"``: the calc-contract measurement names -> float (SI);
        ``"parameters"``: the unit parameters the inverse needs;
        ``"truth"``: the known states and flows (T1...T4, p1...p4, air/fuel/gas flow,
        shaft power, LHV used, fuel-air ratio, isentropic end states).

    Notes
    -----
    Compressor: ``T2s`` from ``s(T2s, p2) = s(T1, p1)`` (Cantera SP solve),
    ``h2 = h1 + (h2s - h1) / eta_c``.  Combustor: the fuel-air ratio ``f`` solves
    ``h_a(T2) + f (h_f(Tf) - (1 - eta_b) LHV - c LHV_c) = (1 + f) h_g(TIT)`` in absolute
    enthalpies (``c`` the casing-loss fraction when the loss is taken in the combustor), with
    ``h_g`` the complete-combustion products of that ``f``.  Turbine: ``p3 = p2 (1 - dp)``,
    ``h4 = h3 - eta_t (h3 - h4s)``.  ``P_gen = eta_gen (m_g (h3 - h4) - m_a (h2 - h1) -
    Q_turbine_loss)``.
    """
    gas = _gas(data)
    rc = real_gas and "compressor" in REAL_GAS_STATIONS
    rt = real_gas and "turbine" in REAL_GAS_STATIONS
    T0, p0 = op.ambient_temperature, op.ambient_pressure
    T1 = T0 + op.inlet_temperature_rise
    p1 = p0 - op.inlet_pressure_loss
    air = gas.vector(
        humid_air_composition(T0, p0, op.ambient_relative_humidity, saturation=op.saturation)
    )
    air_per_kg = air / gas.mass(air)  # mol per kg humid air
    fuel_per_mol = _fuel_vector(gas, op.fuel)
    fuel_per_kg = fuel_per_mol / gas.mass(fuel_per_mol)
    LHV = cantera_lhv(op.fuel, data) if lhv is None else lhv

    # compressor
    h1 = gas.h_mass(T1, p1, air_per_kg, rc)
    p2 = op.pressure_ratio * p1
    T2s, h2s = gas.isentropic_h(T1, p1, p2, air_per_kg, rc)
    h2 = h1 + (h2s - h1) / op.compressor_efficiency
    T2 = gas.T_from_h(h2, p2, air_per_kg, rc)

    # combustor: fuel-air ratio to reach TIT (absolute enthalpies, complete combustion)
    p3 = p2 * (1.0 - op.combustor_pressure_loss)
    hf = gas.h_mass(op.fuel_temperature, p2, fuel_per_kg)
    c = op.casing_heat_loss_fraction
    c_comb = c if CASING_LOSS_AT == "combustor" else 0.0
    TIT = op.turbine_inlet_temperature

    def products(f: float) -> np.ndarray:
        return gas.products(air_per_kg, f * fuel_per_kg)  # mol per kg air

    def residual(f: float) -> float:
        n = products(f)
        h_in = h2 + f * (hf - (1.0 - op.combustion_efficiency) * LHV - c_comb * LHV)
        return gas.h_mass(TIT, p3, n, rt) * gas.mass(n) - h_in

    far_max = 0.98 * _stoichiometric_far(gas, air_per_kg, fuel_per_kg)
    far = brentq(residual, 1e-6, far_max, xtol=1e-15, rtol=1e-15, maxiter=200)
    prod = products(far)
    m_a = op.air_mass_flow
    m_f = far * m_a
    m_g = m_a + m_f
    assert math.isclose(gas.mass(prod), 1.0 + far, rel_tol=1e-12)  # mass is conserved

    # turbine
    p4 = p0 + op.exhaust_back_pressure
    h3 = gas.h_mass(TIT, p3, prod, rt)
    T4s, h4s = gas.isentropic_h(TIT, p3, p4, prod, rt)
    h4_expansion = h3 - op.turbine_efficiency * (h3 - h4s)
    Q_loss = c * m_f * LHV
    Q_turb = Q_loss if CASING_LOSS_AT == "turbine" else 0.0
    h4 = h4_expansion - Q_turb / m_g
    T4 = gas.T_from_h(h4, p4, prod, rt)

    P_turbine = m_g * (h3 - h4_expansion)
    P_compressor = m_a * (h2 - h1)
    P_shaft = P_turbine - P_compressor
    P_gen = op.generator_efficiency * P_shaft

    measurements = {
        "ambient_temperature": T0,
        "ambient_pressure": p0,
        "ambient_relative_humidity": op.ambient_relative_humidity,
        "compressor_inlet_temperature": T1,
        "compressor_inlet_pressure": p1,
        "compressor_discharge_temperature": T2,
        "compressor_discharge_pressure": p2,
        "exhaust_temperature": T4,
        "exhaust_pressure": p4,
        "fuel_mass_flow": m_f,
        "generator_power": P_gen,
        "fuel_temperature": op.fuel_temperature,
    }
    parameters = {
        "generator_efficiency": op.generator_efficiency,
        "combustor_pressure_loss": op.combustor_pressure_loss,
        "combustion_efficiency": op.combustion_efficiency,
        "casing_heat_loss_fraction": op.casing_heat_loss_fraction,
    }
    truth = {
        "T1": T1,
        "p1": p1,
        "T2": T2,
        "T2s": T2s,
        "p2": p2,
        "T3": TIT,
        "p3": p3,
        "T4": T4,
        "T4s": T4s,
        "p4": p4,
        "air_mass_flow": m_a,
        "fuel_mass_flow": m_f,
        "gas_mass_flow": m_g,
        "fuel_air_ratio": far,
        "shaft_power": P_shaft,
        "casing_heat_loss": Q_loss,
        "lhv": LHV,
        "compressor_isentropic_efficiency": op.compressor_efficiency,
        "turbine_isentropic_efficiency": op.turbine_efficiency,
        "turbine_inlet_temperature": TIT,
        "heat_rate_lhv_kj_per_kwh": 3600.0 * m_f * LHV / P_gen,
        "thermal_efficiency": P_gen / (m_f * LHV),
    }
    return {"measurements": measurements, "parameters": parameters, "truth": truth}


def reconstruct_one(
    measurements: Mapping[str, float],
    fuel: Mapping[str, float],
    lhv: float,
    parameters: Mapping[str, float],
    data: Data = "nasa",
    saturation: Literal["ice", "water"] = "ice",
    real_gas: bool = True,
    max_iter: int = 50,
    tol: float = 1e-10,
) -> dict[str, float]:
    """Reconstruct one snapshot with Cantera property calls (the per-snapshot baseline).

    Same method as the vectorised reconstruction in ``models.units.gas_turbine.reconstruct``: sensible
    enthalpies relative to 25 degC with the caller's heating value ``lhv`` [J/kg] (pass the
    ISO 6976 value of ``models.properties.fuel`` to compare like with like).

    Parameters
    ----------
    measurements : mapping
        Calc-contract measurement names -> value (SI, absolute pressures).
    fuel : mapping
        Fuel mole fractions by our species names.
    lhv : float
        Net heating value at 25 degC [J/kg].
    parameters : mapping
        ``generator_efficiency``, ``combustor_pressure_loss``, ``combustion_efficiency``,
        ``casing_heat_loss_fraction`` [1].
    real_gas : bool
        Real-gas departure of air at :data:`REAL_GAS_STATIONS` (as :func:`forward`).

    Returns
    -------
    dict
        ``compressor_isentropic_efficiency``, ``turbine_isentropic_efficiency``,
        ``turbine_inlet_temperature`` [K], ``air_mass_flow`` [kg/s], ``gas_mass_flow`` [kg/s],
        ``fuel_air_ratio`` [1], ``shaft_power`` [W], ``heat_rate_lhv_kj_per_kwh``,
        ``thermal_efficiency``, ``iterations``.

    Notes
    -----
    Air flow by the whole-machine heat balance (sensible enthalpies, 25 degC datum)::

        m_a h_a(T1) + m_f (h_f + eta_b LHV) = P_gen / eta_gen + Q_loss + (m_a + m_f) h_g(T4)

    with ``Q_loss = c m_f LHV``; the exhaust composition depends on ``f = m_f / m_a``, so the
    balance is iterated (fixed point on ``m_a``).  Turbine inlet temperature from the
    combustor balance ``m_a h_a(T2) + m_f (h_f + eta_b LHV) - Q_comb = m_g h_g(T3)``, turbine
    efficiency ``(h3 - h4) / (h3 - h4s)`` at ``p3 = p2 (1 - dp)``.
    """
    gas = _gas(data)
    rc = real_gas and "compressor" in REAL_GAS_STATIONS
    rt = real_gas and "turbine" in REAL_GAS_STATIONS
    m = measurements
    T0, p0, RH = m["ambient_temperature"], m["ambient_pressure"], m["ambient_relative_humidity"]
    T1, p1 = m["compressor_inlet_temperature"], m["compressor_inlet_pressure"]
    T2, p2 = m["compressor_discharge_temperature"], m["compressor_discharge_pressure"]
    T4, p4 = m["exhaust_temperature"], m["exhaust_pressure"]
    m_f, P_gen = m["fuel_mass_flow"], m["generator_power"]
    Tf = m.get("fuel_temperature", T_REF)
    if Tf is None or not math.isfinite(Tf):
        Tf = T_REF
    eta_gen = parameters["generator_efficiency"]
    dp = parameters["combustor_pressure_loss"]
    eta_b = parameters["combustion_efficiency"]
    c = parameters.get("casing_heat_loss_fraction", 0.0)

    air = gas.vector(humid_air_composition(T0, p0, RH, saturation=saturation))
    air = air / gas.mass(air)
    fuel_kg = _fuel_vector(gas, fuel)
    fuel_kg = fuel_kg / gas.mass(fuel_kg)

    def hs(T: float, p: float, n: np.ndarray, real: bool = False) -> float:
        """Sensible enthalpy [J/kg] relative to the ideal gas at T_REF (+ departure)."""
        return gas.h_mass(T, p, n, real) - gas.h_mass(T_REF, p, n)

    # compressor
    h1 = hs(T1, p1, air, rc)
    h2 = hs(T2, p2, air, rc)
    _, h2s_abs = gas.isentropic_h(T1, p1, p2, air, rc)
    h2s = h2s_abs - gas.h_mass(T_REF, p2, air)
    eta_c = (h2s - h1) / (h2 - h1)

    # whole-machine balance for the air flow (fixed point on the exhaust composition)
    hf = hs(Tf, p2, fuel_kg)
    P_shaft = P_gen / eta_gen
    Q_loss = c * m_f * lhv
    heat_in = m_f * (hf + eta_b * lhv)
    m_a = 0.0
    far = 0.02
    it = 0
    for it in range(1, max_iter + 1):  # noqa: B007
        prod = gas.products(air, far * fuel_kg) / (1.0 + far)  # mol per kg gas
        h4 = hs(T4, p4, prod, rt)
        m_a_new = (heat_in - P_shaft - Q_loss - m_f * h4) / (h4 - h1)
        far = m_f / m_a_new
        if abs(m_a_new - m_a) <= tol * abs(m_a_new):
            m_a = m_a_new
            break
        m_a = m_a_new
    m_g = m_a + m_f
    prod = gas.products(air, far * fuel_kg) / (1.0 + far)

    # combustor balance -> TIT
    p3 = p2 * (1.0 - dp)
    Q_comb = Q_loss if CASING_LOSS_AT == "combustor" else 0.0
    h3 = (m_a * h2 + heat_in - Q_comb) / m_g
    T3 = gas.T_from_h(h3 + gas.h_mass(T_REF, p3, prod), p3, prod, rt)

    # turbine
    h4 = hs(T4, p4, prod, rt)
    _, h4s_abs = gas.isentropic_h(T3, p3, p4, prod, rt)
    h4s = h4s_abs - gas.h_mass(T_REF, p4, prod)
    eta_t = (h3 - h4) / (h3 - h4s)

    return {
        "compressor_isentropic_efficiency": eta_c,
        "turbine_isentropic_efficiency": eta_t,
        "turbine_inlet_temperature": T3,
        "air_mass_flow": m_a,
        "gas_mass_flow": m_g,
        "fuel_air_ratio": far,
        "shaft_power": P_shaft,
        "heat_rate_lhv_kj_per_kwh": 3600.0 * m_f * lhv / P_gen,
        "thermal_efficiency": P_gen / (m_f * lhv),
        "iterations": float(it),
    }
