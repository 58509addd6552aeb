"""Combustor: exhaust-gas composition, turbine inlet temperature by heat balance, pressure loss.

Per kg of air, with fuel-air ratio ``f = m_f / m_a`` and complete combustion::

    y_g   = (y_a + f * product_delta) / (1 + f)                                   (1)
    h_a(T2, p2) + f (h_f + (eta_b - c_loss) LHV) = (1 + f) h_g(T3, p3)            (2)
    p3    = p2 (1 - dp_comb)                                                      (3)

``product_delta`` is the fuel's species change per kg burnt
(:class:`models.properties.fuel.FuelProperties`), h are sensible enthalpies relative to 298.15 K
(the LHV reference), with the real-gas departure at p2 and p3.  ``c_loss`` is the casing heat loss
as a fraction of the heat input, lumped at the combustor.  T3 is the mixed-mean heat-balance
temperature: with cooling air mixed in upstream of the first rotor it is the ISO 2314-style
reference turbine inlet temperature, lower than the true firing temperature.

References
----------
.. [1] ISO 2314:2009, Gas turbines — Acceptance tests, Annex on the reference turbine inlet
   temperature by heat balance.
.. [2] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen et al., *Gas Turbine Theory*,
   7th ed., Pearson, 2017, section 2.3 (combustion temperature rise, fuel-air ratio).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.properties import mixtures
from models.properties.fuel import FuelProperties
from models.properties.species import INDEX
from models.status import Reason, flag

__all__ = [
    "CombustorState",
    "combustor",
    "exhaust_mixture",
    "stoichiometric_fuel_air_ratio",
    "turbine_inlet_pressure",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]


def stoichiometric_fuel_air_ratio(air: mixtures.Mixture, fuel: FuelProperties) -> FloatArray:
    r"""Stoichiometric fuel-air ratio [kg fuel / kg air] of ``fuel`` in the (humid) air ``air``.

    Notes
    -----
    .. math::

        f_{st} = \frac{y_{O_2,air}}{\nu_{O_2}}, \qquad
        \nu_{O_2} = \text{kg of } O_2 \text{ consumed per kg of fuel burnt}

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
       *Gas Turbine Theory*, 7th ed., Pearson, 2017, ch. 2 (combustion) and app. A.
    """
    y_o2 = air.y[..., INDEX["O2"]]
    return np.asarray(y_o2 / -fuel.product_delta[..., INDEX["O2"]], dtype=np.float64)


def exhaust_mixture(air: mixtures.Mixture, fuel: FuelProperties, f: ArrayLike) -> mixtures.Mixture:
    r"""Exhaust gas of complete combustion at fuel-air ratio f, eq. (1).

    Parameters
    ----------
    air : models.properties.mixtures.Mixture
        Combustion air.
    fuel : FuelProperties
    f : array_like
        Fuel-air ratio [-], 0 <= f < stoichiometric (lean).  Elements outside give NaN rows.

    Returns
    -------
    models.properties.mixtures.Mixture

    Notes
    -----
    .. math::

        y_g = \frac{y_a + f\, \Delta y_{fuel}}{1 + f}

    References
    ----------
    .. [1] ISO 6976:2016 (fuel composition); complete combustion C -> CO2, H -> H2O, S -> SO2
       (common practice).
    """
    fa = np.asarray(f, dtype=np.float64)
    f_st = stoichiometric_fuel_air_ratio(air, fuel)
    ok = (fa >= 0) & (fa < f_st)
    fs = np.where(ok, fa, np.nan)
    y = (air.y + fs[..., None] * fuel.product_delta) / (1.0 + fs[..., None])
    return mixtures.Mixture.from_mass_fractions(np.clip(y, 0.0, None))


def turbine_inlet_pressure(p2: ArrayLike, combustor_pressure_loss: ArrayLike) -> FloatArray:
    r"""p3 = p2 (1 - dp_comb) [Pa], eq. (3); ``combustor_pressure_loss`` is a fraction of p2.

    Notes
    -----
    .. math::

        p_3 = p_2 \, (1 - \Delta p_{comb} / p_2)

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
       *Gas Turbine Theory*, 7th ed., Pearson, 2017, ch. 2.
    """
    return np.asarray(
        np.asarray(p2, dtype=np.float64) * (1.0 - np.asarray(combustor_pressure_loss)),
        dtype=np.float64,
    )


@dataclass(frozen=True)
class CombustorState:
    """Result of :func:`combustor`.

    Attributes
    ----------
    fuel_air_ratio : f [-]
    exhaust : models.properties.mixtures.Mixture  exhaust-gas composition
    T3 : turbine inlet temperature [K]
    p3 : turbine inlet pressure [Pa]
    h3 : exhaust-gas enthalpy at station 3 [J/kg gas] (sensible, real gas)
    status : Reason bits
    """

    fuel_air_ratio: FloatArray
    exhaust: mixtures.Mixture
    T3: FloatArray
    p3: FloatArray
    h3: FloatArray
    status: StatusArray


def combustor(
    air: mixtures.Mixture,
    fuel: FuelProperties,
    T2: ArrayLike,
    p2: ArrayLike,
    fuel_air_ratio: ArrayLike,
    *,
    fuel_enthalpy: ArrayLike = 0.0,
    combustion_efficiency: ArrayLike = 0.995,
    casing_heat_loss_fraction: ArrayLike = 0.0,
    combustor_pressure_loss: ArrayLike = 0.04,
) -> CombustorState:
    r"""Turbine inlet state by the combustor heat balance, eq. (2).

    Parameters
    ----------
    air : models.properties.mixtures.Mixture
        Combustion air (humid air at the compressor discharge).
    fuel : FuelProperties
    T2, p2 : array_like
        Compressor discharge temperature [K] and pressure [Pa].
    fuel_air_ratio : array_like
        f = m_f / m_a [-].
    fuel_enthalpy : array_like, optional
        Sensible enthalpy of the fuel as supplied, h_f [J/kg] (default 0: fuel at 25 °C).
    combustion_efficiency : array_like, optional
        eta_b [-] (default 0.995).
    casing_heat_loss_fraction : array_like, optional
        c_loss [-] (of m_f LHV) (default 0).
    combustor_pressure_loss : array_like, optional
        dp_comb / p2 [-] (default 0.04).

    Returns
    -------
    CombustorState

    Notes
    -----
    .. math::

        m_a h_2 + m_f \left(h_f + (\eta_b - c_{loss}) LHV\right) = (m_a + m_f)\, h_g(T_3, p_3),
        \qquad p_3 = p_2 (1 - \Delta p_{comb})

    Solved for T3 by Newton (:meth:`models.properties.mixtures.Mixture.T_from_h` with the real-gas
    departure at p3).  NaN + ENERGY_BALANCE_INFEASIBLE where f is not lean-positive.

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
       *Gas Turbine Theory*, 7th ed., Pearson, 2017, ch. 2.
    .. [2] ASME PTC 22-2014, Performance Test Code on Gas Turbines (combustor heat balance).
    """
    T2a = np.asarray(T2, dtype=np.float64)
    p2a = np.asarray(p2, dtype=np.float64)
    f = np.asarray(fuel_air_ratio, dtype=np.float64)
    shape = np.broadcast(T2a, p2a, f, fuel.lhv, air.M).shape
    status = np.zeros(shape, dtype=np.uint32)
    f_st = stoichiometric_fuel_air_ratio(air, fuel)
    infeasible = ~((f > 0) & (f < f_st))
    flag(status, np.broadcast_to(infeasible, shape), Reason.ENERGY_BALANCE_INFEASIBLE)
    g = exhaust_mixture(air, fuel, f)
    p3 = turbine_inlet_pressure(p2a, combustor_pressure_loss)
    q = np.asarray(fuel_enthalpy) + (
        np.asarray(combustion_efficiency) - np.asarray(casing_heat_loss_fraction)
    ) * np.asarray(fuel.lhv)
    h3 = (air.h_real(T2a, p2a) + f * q) / (1.0 + f)
    T3, st = g.T_from_h(h3, T_guess=np.full(shape, 1400.0), p=p3)
    status |= st
    bad = status != 0
    return CombustorState(
        fuel_air_ratio=np.where(bad, np.nan, f),
        exhaust=g,
        T3=np.where(bad, np.nan, T3),
        p3=np.broadcast_to(p3, shape).copy(),
        h3=np.where(bad, np.nan, h3),
        status=status,
    )
