"""Comparison cycles: air-standard Brayton, Brayton on the real working fluid, Carnot bound.

Reported beside the reconstructed thermal efficiency, the three tell where the gap to the
ideal is: the air-standard figure is the cold-air limit at the measured pressure ratio, the
real-fluid ideal cycle removes the constant-property and no-fuel assumptions (same pressure
ratio, same turbine inlet temperature, isentropic machines, variable properties, the same fuel
chemistry), and Carnot is the bound between the same two temperature extremes.

Illustration (the invented Kestrel Ridge Energy Park, its KR-GT1 snapshot of
``daemon/examples/kr-gt1-snapshot.json``): pressure ratio 15.0, compressor inlet 291.05 K,
heat-balance turbine inlet 1393 K.  The air-standard cycle gives 0.5387, the ideal cycle on
the real humid air and pipeline gas 0.507, Carnot 0.791, against a measured thermal efficiency
of 0.344: variable properties and the fuel take 3 points, the real compressor and turbine
(0.870 and 0.880 isentropic) another 14, and pressure losses, generator and casing losses the
last 2.6.  Textbook worked examples are check values in ``tests/test_components.py``.

References
----------
.. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen et al., *Gas Turbine Theory*,
   7th ed., Pearson, 2017, ch. 2.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.components.combustor import exhaust_mixture
from models.properties import mixtures
from models.properties.fuel import FuelProperties
from models.status import Reason, flag

__all__ = [
    "BraytonCycle",
    "air_standard_brayton_efficiency",
    "brayton_cycle",
    "carnot_efficiency",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]


def air_standard_brayton_efficiency(
    pressure_ratio: ArrayLike, gamma: ArrayLike = 1.4
) -> tuple[FloatArray, StatusArray]:
    r"""Thermal efficiency of the ideal air-standard Brayton cycle (cold-air standard).

    Parameters
    ----------
    pressure_ratio : array_like
        Compressor pressure ratio r = p2/p1 [-], > 1.
    gamma : array_like, optional
        Ratio of specific heats [-], > 1 (default 1.4, cold air).

    Returns
    -------
    eta : ndarray
        ``1 - r**(-(gamma - 1)/gamma)`` [-]; NaN where r <= 1 or gamma <= 1.
    status : ndarray of uint32

    Notes
    -----
    .. math::

        \eta = 1 - r^{-(\gamma - 1)/\gamma}

    References
    ----------
    .. [1] Y. A. Çengel, M. A. Boles, *Thermodynamics: An Engineering Approach*, 8th ed.,
       McGraw-Hill, 2015, section 9-8 (ideal Brayton cycle, cold-air-standard).

    Examples
    --------
    KR-GT1 (pressure ratio 15) and the smaller KR-GT3 (20) of the invented Kestrel Ridge site:

    >>> eta, _ = air_standard_brayton_efficiency([15.0, 20.0])
    >>> [round(float(e), 4) for e in eta]
    [0.5387, 0.5751]
    """
    r = np.asarray(pressure_ratio, dtype=np.float64)
    g = np.asarray(gamma, dtype=np.float64)
    status = np.zeros(np.broadcast(r, g).shape, dtype=np.uint32)
    flag(status, np.isnan(r) | np.isnan(g), Reason.INPUT_MISSING)
    flag(status, ~np.isnan(r) & ~(r > 1.0), Reason.PRESSURE_RATIO_INVALID)
    flag(status, ~np.isnan(g) & ~(g > 1.0), Reason.INPUT_NONPHYSICAL)
    with np.errstate(invalid="ignore", divide="ignore"):
        eta = 1.0 - r ** (-(g - 1.0) / g)
    return np.where(status != 0, np.nan, eta), status


def carnot_efficiency(T_cold: ArrayLike, T_hot: ArrayLike) -> tuple[FloatArray, StatusArray]:
    r"""Carnot efficiency between two temperatures.

    Parameters
    ----------
    T_cold : array_like
        Lower temperature [K] (compressor inlet), > 0.
    T_hot : array_like
        Upper temperature [K] (turbine inlet), > T_cold.

    Returns
    -------
    eta : ndarray
        ``1 - T_cold / T_hot`` [-].
    status : ndarray of uint32

    Notes
    -----
    .. math::

        \eta_{Carnot} = 1 - \frac{T_{cold}}{T_{hot}}

    References
    ----------
    .. [1] Y. A. Çengel, M. A. Boles, *Thermodynamics: An Engineering Approach*, 8th ed.,
       McGraw-Hill, 2015, section 6-10.

    Examples
    --------
    KR-GT1's compressor inlet and heat-balance turbine inlet temperatures (invented site):

    >>> round(float(carnot_efficiency(291.05, 1393.1)[0]), 4)
    0.7911
    """
    Tc = np.asarray(T_cold, dtype=np.float64)
    Th = np.asarray(T_hot, dtype=np.float64)
    status = np.zeros(np.broadcast(Tc, Th).shape, dtype=np.uint32)
    flag(status, np.isnan(Tc) | np.isnan(Th), Reason.INPUT_MISSING)
    flag(status, ~(Tc > 0.0) & ~np.isnan(Tc), Reason.INPUT_NONPHYSICAL)
    flag(status, ~(Th > Tc) & ~np.isnan(Tc) & ~np.isnan(Th), Reason.INPUT_NONPHYSICAL)
    with np.errstate(invalid="ignore", divide="ignore"):
        eta = 1.0 - Tc / Th
    return np.where(status != 0, np.nan, eta), status


@dataclass(frozen=True)
class BraytonCycle:
    """Result of :func:`brayton_cycle`; specific quantities per kg of air.

    Attributes
    ----------
    T2s, T2 : compressor isentropic and actual discharge temperature [K]
    T4s, T4 : turbine isentropic and actual exhaust temperature [K]
    compressor_work, turbine_work, net_work : [J/kg air]
    heat_input : [J/kg air] (h3 - h2 for air standard, f LHV with fuel)
    back_work_ratio : compressor_work / turbine_work [-]
    efficiency : net_work / heat_input [-]
    fuel_air_ratio : [-] (0 for air standard)
    status : Reason bits
    """

    T2s: FloatArray
    T2: FloatArray
    T4s: FloatArray
    T4: FloatArray
    compressor_work: FloatArray
    turbine_work: FloatArray
    net_work: FloatArray
    heat_input: FloatArray
    back_work_ratio: FloatArray
    efficiency: FloatArray
    fuel_air_ratio: FloatArray
    status: StatusArray


def brayton_cycle(
    air: mixtures.Mixture,
    T1: ArrayLike,
    p1: ArrayLike,
    pressure_ratio: ArrayLike,
    T3: ArrayLike,
    *,
    compressor_efficiency: ArrayLike = 1.0,
    turbine_efficiency: ArrayLike = 1.0,
    fuel: FuelProperties | None = None,
    fuel_enthalpy: ArrayLike = 0.0,
    real_gas: bool = True,
) -> BraytonCycle:
    r"""Compute a simple Brayton cycle with variable properties (ideal when both efficiencies 1).

    Parameters
    ----------
    air : models.properties.mixtures.Mixture
        Working fluid at the compressor.
    T1, p1 : array_like
        Compressor inlet temperature [K] and pressure [Pa].
    pressure_ratio : array_like
        r = p2/p1 [-]; the turbine expands back to p1 (no pressure losses).
    T3 : array_like
        Turbine inlet temperature [K].
    compressor_efficiency, turbine_efficiency : array_like, optional
        Isentropic efficiencies [-] (default 1: the ideal cycle).
    fuel : FuelProperties, optional
        None: air-standard cycle, heat added to the air itself.  Given: internal combustion of
        this fuel (complete, eta_b = 1), the turbine expands the exhaust gas and the heat
        input is f LHV.
    fuel_enthalpy : array_like, optional
        Sensible enthalpy of the fuel h_f [J/kg] (default 0).
    real_gas : bool, optional
        Include the real-gas departure (default True); the textbook air-standard cycle is
        ``real_gas=False``.

    Returns
    -------
    BraytonCycle

    Notes
    -----
    .. math::

        h_2 = h_1 + \frac{h_{2s} - h_1}{\eta_c}, \quad h_4 = h_3 - \eta_t (h_3 - h_{4s}), \quad
        \eta = \frac{w_t - w_c}{q_{in}}

    ``T2s``: s(T2s, p2) = s(T1, p1); ``h2 = h1 + (h2s - h1)/eta_c``; with fuel
    ``h2 + f (h_f + LHV) = (1 + f) h_g(T3)`` solved for f in closed form (exhaust
    properties are linear in f per kg of air); ``T4s``: s(T4s, p1) = s(T3, p2);
    ``h4 = h3 - eta_t (h3 - h4s)``; ``eta = (w_t - w_c) / q_in``.

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
       *Gas Turbine Theory*, 7th ed., Pearson, 2017, ch. 2.
    .. [2] Y. A. Çengel, M. A. Boles, *Thermodynamics: An Engineering Approach*, 8th ed.,
       McGraw-Hill, 2015, section 9-8.

    Examples
    --------
    The KR-GT1 snapshot of the invented Kestrel Ridge site: humid air at 291.45 K, 100.85 kPa
    and 62 % RH, compressor inlet 291.05 K and 99.9 kPa, pressure ratio 15, turbine inlet
    1393.1 K, burning its pipeline gas; first ideal, then with the machine's reconstructed
    component efficiencies:

    >>> from models.properties.fuel import gas_fuel
    >>> from models.properties.humid_air import humid_air
    >>> x, _ = humid_air(291.45, 100850.0, 0.62)
    >>> air = mixtures.Mixture.from_mole_fractions(x)
    >>> fuel = gas_fuel({"CH4": 0.931, "C2H6": 0.038, "C3H8": 0.008, "n-C4H10": 0.0015,
    ...     "i-C4H10": 0.0012, "n-C5H12": 0.0003, "N2": 0.012, "CO2": 0.008})
    >>> ideal = brayton_cycle(air, 291.05, 99900.0, 15.0, 1393.1, fuel=fuel)
    >>> round(float(ideal.efficiency), 3), round(float(ideal.T2s), 1)
    (0.507, 622.4)
    >>> real = brayton_cycle(air, 291.05, 99900.0, 15.0, 1393.1, fuel=fuel,
    ...     compressor_efficiency=0.870, turbine_efficiency=0.880)
    >>> round(float(real.efficiency), 3), round(float(real.back_work_ratio), 3)
    (0.37, 0.539)
    """
    T1a = np.asarray(T1, dtype=np.float64)
    p1a = np.asarray(p1, dtype=np.float64)
    r = np.asarray(pressure_ratio, dtype=np.float64)
    T3a = np.asarray(T3, dtype=np.float64)
    eta_c = np.asarray(compressor_efficiency, dtype=np.float64)
    eta_t = np.asarray(turbine_efficiency, dtype=np.float64)
    shape = np.broadcast(T1a, p1a, r, T3a, eta_c, eta_t, air.M).shape
    status = np.zeros(shape, dtype=np.uint32)
    flag(status, np.broadcast_to(~(r > 1.0), shape), Reason.PRESSURE_RATIO_INVALID)
    flag(status, np.broadcast_to(~(T3a > T1a) | ~(T1a > 0), shape), Reason.INPUT_NONPHYSICAL)
    eff_ok = (eta_c > 0) & (eta_c <= 1) & (eta_t > 0) & (eta_t <= 1)
    flag(status, np.broadcast_to(~eff_ok, shape), Reason.EFFICIENCY_OUT_OF_RANGE)
    p2 = p1a * r

    def h(m: mixtures.Mixture, T: FloatArray, p: FloatArray) -> FloatArray:
        return m.h_real(T, p) if real_gas else m.h(T)

    T2s, st = air.isentropic_T(T1a, p1a, p2, real_gas=real_gas)
    status |= st
    h1 = h(air, T1a, p1a)
    h2 = h1 + (h(air, T2s, p2) - h1) / eta_c
    T2, st = air.T_from_h(h2, T_guess=T2s, p=p2 if real_gas else None)
    status |= st
    if fuel is None:
        g = air
        f = np.zeros(shape)
        h3 = h(air, T3a, p2)
        q_in = h3 - h2
        scale = np.ones(shape)
    else:
        f0 = 0.01
        g0 = exhaust_mixture(air, fuel, f0)
        ha3 = h(air, T3a, p2)
        hpd3 = ((1.0 + f0) * h(g0, T3a, p2) - ha3) / f0
        q = np.asarray(fuel_enthalpy) + fuel.lhv
        f = (ha3 - h2) / (q - hpd3)
        flag(status, np.broadcast_to(~(f > 0), shape), Reason.ENERGY_BALANCE_INFEASIBLE)
        g = exhaust_mixture(air, fuel, np.where(f > 0, f, 0.01))
        h3 = (ha3 + f * hpd3) / (1.0 + f)
        q_in = f * fuel.lhv
        scale = 1.0 + f
    T4s, st = g.isentropic_T(T3a, p2, p1a, real_gas=real_gas)
    status |= st
    h4 = h3 - eta_t * (h3 - h(g, T4s, p1a))
    T4, st = g.T_from_h(h4, T_guess=T4s, p=p1a if real_gas else None)
    status |= st
    w_c = h2 - h1
    w_t = scale * (h3 - h4)
    bad = status != 0

    def nan(a: FloatArray) -> FloatArray:
        return np.where(bad, np.nan, np.broadcast_to(a, shape))

    return BraytonCycle(
        T2s=nan(T2s),
        T2=nan(T2),
        T4s=nan(T4s),
        T4=nan(T4),
        compressor_work=nan(w_c),
        turbine_work=nan(w_t),
        net_work=nan(w_t - w_c),
        heat_input=nan(q_in),
        back_work_ratio=nan(w_c / w_t),
        efficiency=nan((w_t - w_c) / q_in),
        fuel_air_ratio=nan(f),
        status=status,
    )
