"""Forward model of the single-shaft gas turbine: component health -> sensor values.

:func:`simulate` is the exact inverse of the reconstruction
(:func:`models.units.gas_turbine.reconstruct.reconstruct`: same property kernel and balances): the
demo plant and the round-trip tests drive it with known efficiencies and recover them.
:func:`forward_cycle` is the unchecked core, also used by the model-based correction to reference
ambient.

Advisory monitoring only: not a protection or control system.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.properties import humid_air, mixtures
from models.properties.fuel import FuelProperties
from models.properties.kernel import DEPARTURE_H, Fluid, Groups, departure
from models.status import Reason, flag
from models.units.gas_turbine.checks import (
    DEFAULT_FUEL_TEMPERATURE,
    DEFAULT_PARAMETERS,
    check,
    fuel_enthalpy,
)
from models.units.gas_turbine.fluids import DRY_AIR_O2_MASS_FRACTION, FuelData, fuel_data

__all__ = ["forward_cycle", "simulate"]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]
Num = float | FloatArray


def forward_cycle(
    *,
    air: Fluid,
    y_w: Num,
    T1: FloatArray,
    p1: FloatArray,
    p2: FloatArray,
    p4: FloatArray,
    eta_c: Num,
    T3: Num,
    eta_t: Num,
    ma: Num,
    hf: Num,
    lhv: Num,
    fd: FuelData,
    eta_b: Num,
    closs: Num,
    dp: Num,
    eta_gen: Num,
    pmech: Num,
    temperatures: bool,
    status: StatusArray,
    guesses: tuple[FloatArray, FloatArray] | None = None,
    groups: Groups = None,
) -> dict[str, FloatArray]:
    r"""Forward cycle: component health and operating point -> sensor values (unchecked).

    Parameters
    ----------
    air : Fluid
        Humid air per kg of humid air (:func:`models.properties.humid_air.humid_air_fluid`).
    y_w : float or ndarray
        Its water mass fraction [-].
    T1, p1 : ndarray
        Compressor inlet temperature [K] and pressure [Pa].
    p2, p4 : ndarray
        Compressor discharge and exhaust pressure [Pa].
    eta_c, eta_t : float or ndarray
        Compressor and turbine isentropic efficiency [-].
    T3 : float or ndarray
        Turbine inlet temperature (heat-balance, mixed mean) [K].
    ma : float or ndarray
        Air mass flow [kg/s].
    hf : float or ndarray
        Fuel sensible enthalpy [J/kg].
    lhv : float or ndarray
        Lower heating value [J/kg].
    fd : FuelData
        The fuel (:func:`models.units.gas_turbine.fluids.fuel_data`).
    eta_b, closs, dp, eta_gen : float or ndarray
        Combustion efficiency, casing heat loss fraction, combustor pressure loss, generator
        efficiency [-].
    pmech : float or ndarray
        Mechanical loss [W].
    temperatures : bool
        Also solve the discharge and exhaust temperatures (the sensor values).
    status : ndarray of uint32
        ORed in place: ENERGY_BALANCE_INFEASIBLE, NOT_CONVERGED.
    guesses : (ndarray, ndarray), optional
        First guesses of T2s and T4s [K].
    groups : ndarray, optional
        Convergence groups (:func:`models.properties.kernel.newton`).

    Returns
    -------
    dict of str to ndarray
        ``fuel_mass_flow`` [kg/s], ``generator_power`` [W], ``fuel_air_ratio`` [-],
        ``compressor_discharge_pressure``, ``turbine_inlet_pressure`` [Pa]; with
        ``temperatures`` also ``compressor_discharge_temperature``,
        ``exhaust_temperature`` [K].

    Notes
    -----
    .. math::

        h_2 &= h_1 + (h_{2s} - h_1) / \eta_c

        f &= \frac{h_a(T_3, p_3) - h_2}{h_f + (\eta_b - c_{loss}) LHV - h_{pd}(T_3, p_3)}

        H_4 &= H_3 - \eta_t (H_3 - H_{4s}), \qquad
        P_{gen} = \eta_{gen} (m_a (H_3 - H_4 - (h_2 - h_1)) - P_{mech})

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo et al., *Gas Turbine Theory*, 7th ed., 2017, ch. 2.
    """
    g2, g4 = (None, None) if guesses is None else guesses
    T3a = np.broadcast_to(np.asarray(T3, dtype=np.float64), np.broadcast(T1, p2, T3).shape)
    T2s, c1 = air.isentropic_T(T1, p1, p2, guess=g2, groups=groups)
    h1 = air.h(T1, p1)
    h2 = h1 + (air.h(T2s, p2) - h1) / eta_c
    p3 = p2 * (1.0 - dp)
    q_net = hf + (eta_b - closs) * lhv
    hr3 = departure(DEPARTURE_H, T3a, p3)
    pd = Fluid([(fd.tab, 1.0)], fd.R)
    ha3 = air.h(T3a) + air.R * T3a * hr3
    hpd3 = pd.h(T3a) + fd.R * T3a * hr3
    f = (ha3 - h2) / (q_net - hpd3)
    f_st = (1.0 - y_w) * DRY_AIR_O2_MASS_FRACTION / fd.o2
    bad_f = ~((f > 0) & (f < f_st))
    f = np.where(bad_f, 0.02, f)
    gasf = air.with_part(fd.tab, f, fd.R)
    H3 = ha3 + f * hpd3
    T4s, c2 = gasf.isentropic_T(T3a, p3, p4, guess=g4, groups=groups)
    H4 = H3 - eta_t * (H3 - gasf.h(T4s, p4))
    P_shaft = np.asarray(ma) * (H3 - H4 - (h2 - h1))
    P_gen = np.asarray(eta_gen * (P_shaft - pmech))
    out = {
        "fuel_mass_flow": np.asarray(f * ma),
        "generator_power": P_gen,
        "fuel_air_ratio": f,
        "compressor_discharge_pressure": p2,
        "turbine_inlet_pressure": p3,
    }
    flag(status, bad_f | ~(P_gen > 0), Reason.ENERGY_BALANCE_INFEASIBLE)
    bad = ~c1 | ~c2
    if temperatures:
        guess = T1 + (T2s - T1) / np.asarray(eta_c)
        T2, c3 = air.T_from_h(h2, p2, guess)
        T4, c4 = gasf.T_from_h(H4, p4, T4s + 20.0)
        out["compressor_discharge_temperature"] = T2
        out["exhaust_temperature"] = T4
        bad |= ~c3 | ~c4
    flag(status, bad, Reason.NOT_CONVERGED)
    return out


def simulate(
    *,
    ambient_temperature: ArrayLike,
    ambient_pressure: ArrayLike,
    ambient_relative_humidity: ArrayLike,
    pressure_ratio: ArrayLike,
    compressor_isentropic_efficiency: ArrayLike,
    turbine_inlet_temperature: ArrayLike,
    turbine_isentropic_efficiency: ArrayLike,
    air_mass_flow: ArrayLike,
    fuel: FuelProperties,
    inlet_pressure_loss: ArrayLike = 0.0,
    exhaust_pressure_loss: ArrayLike = 0.0,
    fuel_temperature: ArrayLike = DEFAULT_FUEL_TEMPERATURE,
    generator_efficiency: ArrayLike = DEFAULT_PARAMETERS["generator_efficiency"],
    combustor_pressure_loss: ArrayLike = DEFAULT_PARAMETERS["combustor_pressure_loss"],
    combustion_efficiency: ArrayLike = DEFAULT_PARAMETERS["combustion_efficiency"],
    casing_heat_loss_fraction: ArrayLike = DEFAULT_PARAMETERS["casing_heat_loss_fraction"],
    mechanical_loss: ArrayLike = DEFAULT_PARAMETERS["mechanical_loss"],
) -> tuple[dict[str, FloatArray], StatusArray]:
    r"""Forward model: component health and operating point -> the measurements of the contract.

    Parameters
    ----------
    ambient_temperature, ambient_pressure, ambient_relative_humidity : array_like
        T0 [K], p0 [Pa], RH [-].  The compressor inlet temperature is T0.
    pressure_ratio : array_like
        Compressor pressure ratio p2/p1 [-].
    compressor_isentropic_efficiency, turbine_isentropic_efficiency : array_like
        eta_c, eta_t [-].
    turbine_inlet_temperature : array_like
        T3 [K] (heat-balance value).
    air_mass_flow : array_like
        m_a [kg/s].
    fuel : FuelProperties
    inlet_pressure_loss : array_like, optional
        (p0 - p1)/p0 [-] (default 0).
    exhaust_pressure_loss : array_like, optional
        (p4 - p0)/p0 [-] (default 0).
    fuel_temperature : array_like, optional
        T_f [K] (default 298.15 K).
    generator_efficiency, combustor_pressure_loss, combustion_efficiency,
    casing_heat_loss_fraction, mechanical_loss : array_like, optional
        Unit parameters as for the reconstruction: [-], [-] (of p2), [-], [-] (of m_f LHV),
        [W].

    Returns
    -------
    measurements : dict of ndarray
        The measurement names of the contract (plus ``air_mass_flow``, ``fuel_temperature``),
        NaN where the status has an error bit.
    status : ndarray of uint32

    Notes
    -----
    .. math::

        h_2 = h_1 + \frac{h_{2s} - h_1}{\eta_c}, \qquad
        f = \frac{h_a(T_3, p_3) - h_2}{h_f + (\eta_b - c_{loss}) LHV - h_{pd}(T_3, p_3)}

        h_4 = h_3 - \eta_t (h_3 - h_{4s}), \qquad
        P_{gen} = \eta_{gen} \left(m_a (h_3 - h_4 - (h_2 - h_1)) - P_{mech}\right)

    The exact inverse of :func:`reconstruct` (same property kernel and balances): T2 from
    ``h2 = h1 + (h2s - h1)/eta_c``; fuel-air ratio in closed form from the combustor balance
    at the given T3; ``h4 = h3 - eta_t (h3 - h4s)``; ``P_gen = eta_gen (W_t - W_c - P_mech)``.

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
       *Gas Turbine Theory*, 7th ed., Pearson, 2017, ch. 2.
    .. [2] ASME PTC 22-2014, Performance Test Code on Gas Turbines, section 5 (heat balance
       determination of exhaust flow).
    """
    T0 = np.atleast_1d(np.asarray(ambient_temperature, dtype=np.float64))
    shape = np.broadcast_shapes(
        T0.shape,
        *(np.shape(v) for v in (ambient_pressure, ambient_relative_humidity, pressure_ratio,
                                 compressor_isentropic_efficiency, turbine_inlet_temperature,
                                 turbine_isentropic_efficiency, air_mass_flow, fuel.lhv)),
    )  # fmt: skip
    n = int(np.prod(shape))

    def a(v: ArrayLike) -> FloatArray:
        return np.ascontiguousarray(np.broadcast_to(np.asarray(v, dtype=np.float64), shape))

    T0 = a(T0)
    p0, RH = a(ambient_pressure), a(ambient_relative_humidity)
    status = np.zeros(shape, dtype=np.uint32)
    check(T0, status, rng=(mixtures.T_MIN, mixtures.T_MAX))
    check(p0, status)
    check(RH, status, lo=-1e-300, hi=1.0 + humid_air.RH_TOLERANCE)
    PR, ma = a(pressure_ratio), a(air_mass_flow)
    check(ma, status)
    flag(status, ~(PR > 1.0), Reason.PRESSURE_RATIO_INVALID)
    eta_c, eta_t = a(compressor_isentropic_efficiency), a(turbine_isentropic_efficiency)
    flag(status, ~((eta_c > 0) & (eta_c <= 1) & (eta_t > 0) & (eta_t <= 1)),
          Reason.EFFICIENCY_OUT_OF_RANGE)  # fmt: skip
    T3 = a(turbine_inlet_temperature)
    check(T3, status, rng=(mixtures.T_MIN, mixtures.T_MAX))
    Tf = a(fuel_temperature)
    fd = fuel_data(fuel, n)
    p1 = p0 * (1.0 - a(inlet_pressure_loss))
    p4 = p0 * (1.0 + a(exhaust_pressure_loss))
    with np.errstate(all="ignore"):
        y_w = humid_air.water_mass_fraction(T0, p0, RH, status)
        res = forward_cycle(
            air=humid_air.humid_air_fluid(y_w), y_w=y_w, T1=T0, p1=p1, p2=PR * p1, p4=p4,
            eta_c=eta_c, T3=T3, eta_t=eta_t, ma=ma, hf=fuel_enthalpy(fuel, Tf), lhv=fd.lhv, fd=fd,
            eta_b=a(combustion_efficiency), closs=a(casing_heat_loss_fraction),
            dp=a(combustor_pressure_loss), eta_gen=a(generator_efficiency),
            pmech=a(mechanical_loss), temperatures=True, status=status,
        )  # fmt: skip
    meas = {
        "ambient_temperature": T0,
        "ambient_pressure": p0,
        "ambient_relative_humidity": RH,
        "compressor_inlet_temperature": T0.copy(),
        "compressor_inlet_pressure": p1,
        "compressor_discharge_temperature": res["compressor_discharge_temperature"],
        "compressor_discharge_pressure": res["compressor_discharge_pressure"],
        "exhaust_temperature": res["exhaust_temperature"],
        "exhaust_pressure": p4,
        "fuel_mass_flow": res["fuel_mass_flow"],
        "generator_power": res["generator_power"],
        "air_mass_flow": ma,
        "fuel_temperature": Tf,
    }
    err = (status & ~np.uint32(Reason.HUMIDITY_SATURATED)) != 0
    return {k: np.where(err, np.nan, v) for k, v in meas.items()}, status
