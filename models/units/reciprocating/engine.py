"""Whole reciprocating engine: forward model and reconstruction from one batch of measurements.

Length (about 670 lines, above the project's 600): the forward model and the
reconstruction share one energy balance and must stay exact inverses of each other, so they
are kept side by side.

The forward model (:func:`simulate_engine`, plant-like sensor
values from engine health, ambient and load) and the reconstruction
(:func:`reconstruct_engine`, every figure of :mod:`models.components.reciprocating`,
the ideal cycles of :mod:`models.cycles.reciprocating` and the ISO 3046-1 correction from one
batch of measurements).  Shared by the ``gas_engine`` (Otto) and ``diesel_engine`` (Diesel,
dual) unit types.

Control volume of the energy balance: engine, turbocharger and charge-air cooler, from the
air at ambient temperature to the exhaust after the turbocharger turbine (sensible enthalpies
from 298.15 K, the LHV reference; ideal gas at these near-ambient pressures)::

    m_a h_a(T0) + m_f (h_f + eta_comb LHV)
        = P_b + Q_jw + Q_lo + Q_cac + Q_rad + m_g h_g(T_exh)                    (1)
    m_g = m_a + m_f,  exhaust = air + burnt fuel (complete combustion)
    Q_cac = m_ch (h_ch(T_c,out) - h_ch(T_rec))                                   (2)

The forward model solves (1) for the exhaust temperature with the radiation and other
unmeasured losses Q_rad given as a fraction of the fuel heat; the reconstruction reports the
unaccounted part of (1) (``unaccounted_heat_fraction``), which then equals that fraction plus
the measurement errors.

Advisory monitoring only: not a protection or control system.  Follow the manufacturer's
limits, site procedures, local codes and licensed engineers.

References
----------
.. [1] J. B. Heywood, *Internal Combustion Engine Fundamentals*, 2nd ed., McGraw-Hill, 2018,
   ch. 2, 4, 5 and 6 (operating parameters, stoichiometry, ideal cycles, gas exchange).
.. [2] ISO 3046-1:2002 (power, fuel consumption, reference conditions).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.components import generator
from models.components import reciprocating as rc
from models.components.combustor import exhaust_mixture, stoichiometric_fuel_air_ratio
from models.components.compressor import compressor_discharge_temperature
from models.correction.iso3046 import (
    STANDARD_REFERENCE,
    Iso3046Exponents,
    iso3046_correction,
    spark_ignition_correction_factor,
)
from models.cycles import reciprocating as cyc
from models.properties import humid_air, mixtures
from models.properties.fuel import FuelProperties
from models.status import WARNING_REASONS, ModelInputError, Reason, flag

__all__ = [
    "MEASUREMENTS_OPTIONAL",
    "MEASUREMENTS_REQUIRED",
    "EngineResult",
    "reconstruct_engine",
    "simulate_engine",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]
CycleKind = Literal["otto", "diesel"]
Correction = Literal["iso3046", "spark_ignition", "none"]

#: Measurements :func:`reconstruct_engine` needs (glossary names, SI units).
MEASUREMENTS_REQUIRED: tuple[str, ...] = (
    "ambient_temperature",
    "ambient_pressure",
    "ambient_relative_humidity",
    "engine_speed",
    "generator_power",
    "fuel_mass_flow",
)
#: Measurements it uses when present (absent or all-NaN: the dependent results are NaN).
MEASUREMENTS_OPTIONAL: tuple[str, ...] = (
    "charge_air_pressure",
    "charge_air_temperature",
    "turbocharger_compressor_inlet_pressure",
    "turbocharger_compressor_outlet_pressure",
    "turbocharger_compressor_outlet_temperature",
    "exhaust_temperature",
    "exhaust_oxygen",
    "air_mass_flow",
    "peak_cylinder_pressure",
    "charge_air_coolant_temperature",
    "fuel_temperature",
    "jacket_water_heat",
    "lube_oil_heat",
    "charge_air_cooler_heat",
    "exhaust_heat_recovered",
)

_ERR = ~np.uint32(WARNING_REASONS)


def _arr(v: ArrayLike, shape: tuple[int, ...]) -> FloatArray:
    return np.array(np.broadcast_to(np.asarray(v, dtype=np.float64), shape), dtype=np.float64)


def _air(T0: FloatArray, p0: FloatArray, rh: FloatArray) -> tuple[mixtures.Mixture, StatusArray]:
    x, st = humid_air.humid_air(T0, p0, rh)
    return mixtures.Mixture.from_mole_fractions(x), st


def _charge(
    air: mixtures.Mixture, fuel: FuelProperties, m_a: FloatArray, m_f: FloatArray, premixed: bool
) -> mixtures.Mixture:
    """Charge inducted: air, or air and fuel gas mixed upstream of the compressor."""
    if not premixed:
        return air
    if fuel.composition is None:
        raise ModelInputError("premixed", True, "a gas fuel (composition) for a premixed charge")
    fuel_gas = mixtures.Mixture.from_mole_fractions(fuel.composition)
    with np.errstate(invalid="ignore"):
        wa = np.where(m_a > 0, m_a, np.nan)
        wf = np.where(m_f > 0, m_f, np.nan)
    return mixtures.Mixture.blend([(air, wa), (fuel_gas, wf)])


def _stoich_air(air: mixtures.Mixture, fuel: FuelProperties) -> FloatArray:
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.asarray(1.0 / stoichiometric_fuel_air_ratio(air, fuel), dtype=np.float64)


# --------------------------------------------------------------------------------------------
# Forward model
# --------------------------------------------------------------------------------------------
def simulate_engine(
    geometry: rc.EngineGeometry,
    fuel: FuelProperties,
    *,
    ambient_temperature: ArrayLike,
    ambient_pressure: ArrayLike,
    ambient_relative_humidity: ArrayLike,
    generator_power: ArrayLike,
    engine_speed: ArrayLike,
    brake_thermal_efficiency: ArrayLike,
    excess_air_ratio: ArrayLike,
    volumetric_efficiency: ArrayLike,
    charge_air_temperature: ArrayLike,
    turbocharger_compressor_isentropic_efficiency: ArrayLike,
    premixed: bool = False,
    generator_efficiency: ArrayLike = 0.975,
    mechanical_loss: ArrayLike = 0.0,
    combustion_efficiency: ArrayLike = 1.0,
    inlet_pressure_loss: ArrayLike = 0.005,
    intercooler_pressure_loss: ArrayLike = 0.02,
    jacket_water_heat_fraction: ArrayLike = 0.12,
    lube_oil_heat_fraction: ArrayLike = 0.05,
    radiation_heat_fraction: ArrayLike = 0.015,
    exhaust_stack_temperature: ArrayLike | None = None,
    fuel_temperature: ArrayLike = 298.15,
    charge_air_coolant_temperature: ArrayLike = 298.0,
) -> tuple[dict[str, FloatArray], StatusArray]:
    r"""Plant-like sensor values of a turbocharged engine-generator set.

    Parameters
    ----------
    geometry : EngineGeometry
    fuel : FuelProperties
    ambient_temperature, ambient_pressure, ambient_relative_humidity : array_like
        T0 [K], p0 [Pa], RH [-].
    generator_power : array_like
        The load, P_gen [W], > 0.
    engine_speed : array_like
        omega [rad/s], > 0 (synchronous speed for a genset).
    brake_thermal_efficiency : array_like
        Health: eta_b [-].
    excess_air_ratio : array_like
        lambda [-], >= 1 (about 1.7-2.2 for lean-burn gas engines, 1.8-2.5 for Diesels at
        full load, common practice).
    volumetric_efficiency : array_like
        eta_v against the receiver density [-].
    charge_air_temperature : array_like
        Receiver temperature after the intercooler [K] (a controlled value on most sets).
    turbocharger_compressor_isentropic_efficiency : array_like
        Isentropic efficiency of the turbocharger compressor [-].
    premixed : bool
        Gas mixed into the air before the compressor (lean-burn gas engines).
    generator_efficiency, mechanical_loss : array_like
        eta_gen [-], P_mech [W].
    combustion_efficiency : array_like
        Fraction of the fuel burnt [-].
    inlet_pressure_loss : array_like
        Filter and duct loss as a fraction of p0 [-].
    intercooler_pressure_loss : array_like
        Intercooler loss as a fraction of the compressor outlet pressure [-].
    jacket_water_heat_fraction, lube_oil_heat_fraction, radiation_heat_fraction : array_like
        Heat to each, as a fraction of the fuel heat m_f LHV [-].
    exhaust_stack_temperature : array_like, optional
        Gas temperature after an exhaust-gas boiler [K]; gives ``exhaust_heat_recovered``.
    fuel_temperature : array_like
        [K] (default 298.15 K, h_f = 0).
    charge_air_coolant_temperature : array_like
        Passed through as a sensor value [K].

    Returns
    -------
    sensors : dict of ndarray
        Keys of :data:`MEASUREMENTS_REQUIRED` and :data:`MEASUREMENTS_OPTIONAL` (with
        ``exhaust_oxygen`` on the dry basis; ``exhaust_oxygen_wet`` besides), plus
        ``air_mass_flow``.
    status : ndarray of uint32
        Reason bits; NaN sensors where an error bit is set.

    Notes
    -----
    .. math::

        m_f = \frac{P_b}{\eta_b LHV}, \quad m_a = \lambda A_{st} m_f, \quad
        m_a h_a(T_0) + m_f (h_f + \eta_{comb} LHV) = P_b + \sum Q + m_g h_g(T_{exh})

    m_f = P_b / (eta_b LHV), P_b = P_gen / eta_gen + P_mech; m_a = lambda A_st m_f (humid
    air); receiver density m_ch / (eta_v V_d n_cyc) and pressure p = rho Z R T; compressor
    outlet p_rec / (1 - dp_ic), outlet temperature from eta_c
    (:func:`models.components.compressor.compressor_discharge_temperature`); exhaust temperature
    from eq. (1) of the module; O2 from :func:`models.components.reciprocating.exhaust_oxygen`.

    References
    ----------
    .. [1] J. B. Heywood, *Internal Combustion Engine Fundamentals*, 2nd ed., McGraw-Hill,
       2018, ch. 2 and 4.
    .. [2] ISO 3046-1:2002 (power, fuel consumption, reference conditions).
    """
    T0, p0, rh, Pg, w, eta_b, lam, eta_v, Tr, eta_c = (
        np.asarray(v, dtype=np.float64)
        for v in (
            ambient_temperature,
            ambient_pressure,
            ambient_relative_humidity,
            generator_power,
            engine_speed,
            brake_thermal_efficiency,
            excess_air_ratio,
            volumetric_efficiency,
            charge_air_temperature,
            turbocharger_compressor_isentropic_efficiency,
        )
    )
    shape = np.broadcast_shapes(
        *(a.shape for a in (T0, p0, rh, Pg, w, eta_b, lam, eta_v, Tr, eta_c)), fuel.shape
    )
    T0, p0, rh, Pg, w, eta_b, lam, eta_v, Tr, eta_c = (
        _arr(a, shape) for a in (T0, p0, rh, Pg, w, eta_b, lam, eta_v, Tr, eta_c)
    )
    lhv = np.asarray(fuel.lhv, dtype=np.float64)
    air, status = _air(T0, p0, rh)
    status = np.array(np.broadcast_to(status, shape))
    Pb, st = generator.shaft_power(Pg, generator_efficiency, mechanical_loss)
    status |= st
    with np.errstate(invalid="ignore"):
        flag(status, ~((eta_b > 0) & (eta_b < 1)), Reason.EFFICIENCY_OUT_OF_RANGE)
        flag(status, ~((eta_c > 0) & (eta_c <= 1)), Reason.EFFICIENCY_OUT_OF_RANGE)
        flag(status, ~(lam >= 1) | ~(eta_v > 0) | ~(w > 0) | ~(Tr > 0), Reason.INPUT_NONPHYSICAL)
    m_f = Pb / (eta_b * lhv)
    eta_comb = np.asarray(combustion_efficiency, dtype=np.float64)
    m_a = lam * _stoich_air(air, fuel) * m_f
    m_ch = m_a + m_f if premixed else m_a
    charge = _charge(air, fuel, m_a, m_f, premixed)
    rho = m_ch / (eta_v * geometry.displacement * geometry.cycles_per_second(w))
    p_r = rho * charge.R * Tr
    for _ in range(6):  # p = rho Z(T, p) R T; Z - 1 ~ 1e-3 so each pass gains three digits
        p_r = rho * charge.R * Tr * mixtures.compressibility(Tr, p_r)
    p_in = p0 * (1.0 - np.asarray(inlet_pressure_loss))
    p_out = p_r / (1.0 - np.asarray(intercooler_pressure_loss))
    T_out, st = compressor_discharge_temperature(charge, T0, p_in, p_out, eta_c)
    status |= st
    q_fuel = m_f * lhv
    Q_cac = m_ch * (charge.h(T_out) - charge.h(Tr))
    Q_jw = np.asarray(jacket_water_heat_fraction) * q_fuel
    Q_lo = np.asarray(lube_oil_heat_fraction) * q_fuel
    Q_rad = np.asarray(radiation_heat_fraction) * q_fuel
    h_f = fuel.sensible_enthalpy(fuel_temperature)
    g = exhaust_mixture(air, fuel, m_f / m_a)
    m_g = m_a + m_f
    h_g = (m_a * air.h(T0) + m_f * (h_f + eta_comb * lhv) - Pb - Q_jw - Q_lo - Q_cac - Q_rad) / m_g
    T_exh, st = g.T_from_h(h_g, T_guess=np.full(shape, 700.0))
    status |= st
    flag(status, (status == 0) & ~(T_exh > T0), Reason.ENERGY_BALANCE_INFEASIBLE)
    x_dry, st = rc.exhaust_oxygen(lam, fuel, air, "dry")
    status |= st
    x_wet, st = rc.exhaust_oxygen(lam, fuel, air, "wet")
    status |= st
    out: dict[str, ArrayLike] = {
        "ambient_temperature": T0,
        "ambient_pressure": p0,
        "ambient_relative_humidity": rh,
        "engine_speed": w,
        "generator_power": Pg,
        "fuel_mass_flow": m_f,
        "air_mass_flow": m_a,
        "charge_air_pressure": p_r,
        "charge_air_temperature": Tr,
        "turbocharger_compressor_inlet_pressure": p_in,
        "turbocharger_compressor_outlet_pressure": p_out,
        "turbocharger_compressor_outlet_temperature": T_out,
        "exhaust_temperature": T_exh,
        "exhaust_oxygen": x_dry,
        "exhaust_oxygen_wet": x_wet,
        "charge_air_coolant_temperature": charge_air_coolant_temperature,
        "fuel_temperature": fuel_temperature,
        "jacket_water_heat": Q_jw,
        "lube_oil_heat": Q_lo,
        "charge_air_cooler_heat": Q_cac,
    }
    if exhaust_stack_temperature is not None:
        q_exh, st = rc.exhaust_heat(g, m_g, T_exh, exhaust_stack_temperature)
        status |= st
        out["exhaust_heat_recovered"] = q_exh
    bad = (status & _ERR) != 0
    return {k: np.where(bad, np.nan, _arr(v, shape)) for k, v in out.items()}, status


# --------------------------------------------------------------------------------------------
# Reconstruction
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class EngineResult:
    """What :func:`reconstruct_engine` returns for a batch of shape ``(N,)``.

    Attributes
    ----------
    values : mapping name -> ndarray
        Results by glossary name (``docs/glossary.md``), SI units, NaN where not computable.
    status : ndarray of uint32
        Reason bits of everything computed (warnings included).
    label_arrays : mapping name -> ndarray of str
        ``air_mass_flow_source`` per element: ``"measured"``, ``"oxygen"`` or ``"none"``.
    """

    values: Mapping[str, FloatArray]
    status: StatusArray
    label_arrays: Mapping[str, NDArray[np.str_]]


def _opt(meas: Mapping[str, ArrayLike], key: str, shape: tuple[int, ...]) -> FloatArray | None:
    v = meas.get(key)
    if v is None:
        return None
    a = _arr(v, shape)
    return None if np.isnan(a).all() else a


def reconstruct_engine(
    measurements: Mapping[str, ArrayLike],
    geometry: rc.EngineGeometry,
    fuel: FuelProperties,
    *,
    cycle: CycleKind,
    premixed: bool = False,
    generator_efficiency: ArrayLike = 0.975,
    mechanical_loss: ArrayLike = 0.0,
    combustion_efficiency: ArrayLike = 1.0,
    oxygen_basis: rc.OxygenBasis = "dry",
    correction: Correction = "none",
    iso3046_exponents: Iso3046Exponents | None = None,
    mechanical_efficiency: ArrayLike = 0.85,
) -> EngineResult:
    r"""Every figure of a reciprocating engine set from one batch of measurements.

    Parameters
    ----------
    measurements : mapping name -> array_like
        :data:`MEASUREMENTS_REQUIRED` and any of :data:`MEASUREMENTS_OPTIONAL` (SI units,
        absolute pressures, engine speed in rad/s, O2 as a mole fraction on
        ``oxygen_basis``); arrays of one shape.
    geometry : EngineGeometry
    fuel : FuelProperties
    cycle : {"otto", "diesel"}
        The comparison cycle: Otto for spark-ignition gas engines, Diesel for compression
        ignition (the dual cycle where ``peak_cylinder_pressure`` is measured).
    premixed : bool
        Gas mixed into the charge upstream of the compressor (the charge is air and fuel).
    generator_efficiency, mechanical_loss : array_like
        eta_gen [-], P_mech [W].
    combustion_efficiency : array_like
        Fraction of the fuel burnt [-] (for the cycle heat input and the energy balance).
    oxygen_basis : {"dry", "wet"}
        Basis of ``exhaust_oxygen``.
    correction : {"iso3046", "spark_ignition", "none"}
        Correction to reference conditions: ISO 3046-1 with ``iso3046_exponents`` and
        ``mechanical_efficiency``, or the ISO 1585 spark-ignition factor.
    iso3046_exponents : Iso3046Exponents, optional
        Needed for ``correction="iso3046"``.
    mechanical_efficiency : array_like
        eta_m of ISO 3046-1 [-].

    Returns
    -------
    EngineResult
        ``values`` keys: brake_power, brake_torque, brake_thermal_efficiency,
        brake_heat_rate, brake_specific_fuel_consumption, brake_mean_effective_pressure,
        mean_piston_speed, thermal_efficiency, heat_input, excess_air_ratio,
        excess_air_ratio_from_oxygen, excess_air_ratio_from_air_flow, air_fuel_ratio,
        air_mass_flow, charge_density, volumetric_efficiency, turbocharger_pressure_ratio,
        turbocharger_compressor_isentropic_efficiency, cycle_heat_input, cutoff_ratio,
        peak_pressure_ratio, ideal_otto_efficiency / ideal_diesel_efficiency /
        ideal_dual_efficiency (by ``cycle``), ideal_cycle_efficiency,
        ideal_cycle_mean_effective_pressure, relative_efficiency,
        relative_efficiency_air_standard, heat_recovery_efficiency, chp_total_efficiency,
        unaccounted_heat_fraction, and with a correction corrected_brake_power,
        corrected_brake_specific_fuel_consumption, corrected_brake_heat_rate,
        indicated_power_ratio, power_adjustment_factor, fuel_consumption_adjustment_factor.

    Raises
    ------
    ModelInputError
        A required measurement missing; ``cycle`` or ``correction`` unknown; ISO 3046-1
        asked without exponents.

    Notes
    -----
    .. math::

        q_{in} = \frac{\eta_{comb}\, m_f\, LHV}{m_{ch}}, \qquad
        \eta_{rel} = \frac{\eta_b}{\eta_{ideal}}

    Air flow: measured, else lambda from the exhaust O2 times A_st m_f.  The ideal cycles
    start at the receiver state (charge-air temperature and pressure) with
    q_in = eta_comb m_f LHV / m_ch; air standard with gamma = 1.4 and R of dry air, the
    ``ideal_cycle_efficiency`` with the charge's temperature-dependent properties.  The
    relative efficiency is brake over ideal (no indicated power is measured).

    References
    ----------
    Heywood (2018) [1]_; ISO 3046-1:2002 [2]_; the method in docs/method-engines.md.

    Examples
    --------
    The invented Kestrel Ridge block KR-GE1 at rated load: the forward model makes the
    sensors, the reconstruction gives the health back (air flow from the exhaust O2):

    >>> import math
    >>> from models.components.reciprocating import EngineGeometry
    >>> from models.properties.fuel import gas_fuel
    >>> kr_ge1 = EngineGeometry(0.21, 0.24, 0.48, 20, 12.5)
    >>> ng = gas_fuel({"CH4": 0.93, "C2H6": 0.04, "C3H8": 0.01, "N2": 0.01, "CO2": 0.01})
    >>> s, _ = simulate_engine(
    ...     kr_ge1, ng, ambient_temperature=288.15, ambient_pressure=101.3e3,
    ...     ambient_relative_humidity=0.6, generator_power=4.4e6,
    ...     engine_speed=1500 * 2 * math.pi / 60, brake_thermal_efficiency=0.445,
    ...     excess_air_ratio=1.9, volumetric_efficiency=0.93, charge_air_temperature=318.0,
    ...     turbocharger_compressor_isentropic_efficiency=0.78, premixed=True)
    >>> round(float(s["exhaust_oxygen"]), 4), round(float(s["charge_air_pressure"]) / 1e5, 2)
    (0.1048, 3.33)
    >>> del s["air_mass_flow"]
    >>> r = reconstruct_engine(s, kr_ge1, ng, cycle="otto", premixed=True)
    >>> [round(float(r.values[k]), 4) for k in ("brake_thermal_efficiency", "excess_air_ratio",
    ...  "volumetric_efficiency", "ideal_cycle_efficiency", "relative_efficiency")]
    [0.445, 1.9, 0.93, 0.5427, 0.82]
    """
    missing = [k for k in MEASUREMENTS_REQUIRED if k not in measurements]
    if missing:
        raise ModelInputError("measurements", missing, "all of " + ", ".join(MEASUREMENTS_REQUIRED))
    if cycle not in ("otto", "diesel"):
        raise ModelInputError("cycle", cycle, "'otto' or 'diesel'")
    if correction not in ("iso3046", "spark_ignition", "none"):
        raise ModelInputError("correction", correction, "'iso3046', 'spark_ignition', 'none'")
    if correction == "iso3046" and iso3046_exponents is None:
        raise ModelInputError("iso3046_exponents", None, "Iso3046Exponents for ISO 3046-1")
    shape = np.broadcast_shapes(
        *(np.shape(measurements[k]) for k in MEASUREMENTS_REQUIRED), fuel.shape
    )
    T0, p0, rh, w, Pg, m_f = (_arr(measurements[k], shape) for k in MEASUREMENTS_REQUIRED)
    opt = {k: _opt(measurements, k, shape) for k in MEASUREMENTS_OPTIONAL}
    lhv = np.asarray(fuel.lhv, dtype=np.float64)
    status = np.zeros(shape, dtype=np.uint32)
    v: dict[str, FloatArray] = {}

    def keep(name: str, value: ArrayLike, st: StatusArray) -> None:
        nonlocal status
        status = np.asarray(status | st, dtype=np.uint32)
        v[name] = _arr(value, shape)

    air, st_air = _air(T0, p0, rh)
    status |= st_air
    # -- brake figures ------------------------------------------------------------------
    b = rc.brake_performance(
        geometry,
        Pg,
        m_f,
        w,
        lhv,
        generator_efficiency=generator_efficiency,
        mechanical_loss=mechanical_loss,
    )
    for name in (
        "brake_power",
        "brake_torque",
        "brake_thermal_efficiency",
        "brake_heat_rate",
        "brake_specific_fuel_consumption",
        "brake_mean_effective_pressure",
        "mean_piston_speed",
    ):
        keep(name, getattr(b, name), b.status)
    el = rc.chp_efficiency(Pg, m_f, lhv)
    keep("thermal_efficiency", el.thermal_efficiency, el.status)
    keep("heat_input", np.where(np.isnan(el.thermal_efficiency), np.nan, m_f * lhv), el.status)
    chp = rc.chp_efficiency(
        Pg,
        m_f,
        lhv,
        jacket_water_heat=opt["jacket_water_heat"],
        lube_oil_heat=opt["lube_oil_heat"],
        charge_air_cooler_heat=opt["charge_air_cooler_heat"],
        exhaust_heat_recovered=opt["exhaust_heat_recovered"],
    )
    any_heat = any(
        opt[k] is not None
        for k in (
            "jacket_water_heat",
            "lube_oil_heat",
            "charge_air_cooler_heat",
            "exhaust_heat_recovered",
        )
    )
    nan = np.full(shape, np.nan)
    keep("heat_recovery_efficiency", chp.heat_recovery_efficiency if any_heat else nan, chp.status)
    keep("chp_total_efficiency", chp.chp_total_efficiency if any_heat else nan, chp.status)
    # -- air: lambda, air flow -----------------------------------------------------------
    a_st = _stoich_air(air, fuel)
    lam_o2 = lam_af = nan
    if opt["exhaust_oxygen"] is not None:
        lam_o2, st = rc.excess_air_ratio_from_oxygen(opt["exhaust_oxygen"], fuel, air, oxygen_basis)
        status |= st
    if opt["air_mass_flow"] is not None:
        lam_af, st = rc.excess_air_ratio_from_air_flow(opt["air_mass_flow"], m_f, fuel, air)
        status |= st
    measured = opt["air_mass_flow"]
    m_a = measured if measured is not None else lam_o2 * a_st * m_f
    source = np.where(
        ~np.isnan(measured if measured is not None else nan),
        "measured",
        np.where(~np.isnan(m_a), "oxygen", "none"),
    )
    with np.errstate(invalid="ignore"):
        m_a = np.where(m_a > 0, m_a, np.nan)
    lam = np.where(np.isnan(lam_o2), lam_af, lam_o2)
    v.update(
        excess_air_ratio=_arr(lam, shape),
        excess_air_ratio_from_oxygen=_arr(lam_o2, shape),
        excess_air_ratio_from_air_flow=_arr(lam_af, shape),
        air_mass_flow=_arr(m_a, shape),
        air_fuel_ratio=_arr(m_a / m_f, shape),
    )
    m_ch = m_a + m_f if premixed else m_a
    charge = _charge(air, fuel, m_a, m_f, premixed)
    # -- receiver and turbocharger ---------------------------------------------------------
    Tr, pr = opt["charge_air_temperature"], opt["charge_air_pressure"]
    if Tr is not None and pr is not None:
        rho, st = rc.charge_density(Tr, pr, charge)
        keep("charge_density", rho, st)
        eta_v, st = rc.volumetric_efficiency(geometry, m_ch, w, Tr, pr, fluid=charge)
        v["volumetric_efficiency"] = eta_v
        status |= st & ~np.uint32(Reason.INPUT_MISSING)  # a missing air flow is not an error
    T_out, p_out = (
        opt["turbocharger_compressor_outlet_temperature"],
        opt["turbocharger_compressor_outlet_pressure"],
    )
    p_in = opt["turbocharger_compressor_inlet_pressure"]
    p_in = p0 if p_in is None else p_in
    if p_out is not None:
        v["turbocharger_pressure_ratio"] = _arr(p_out / p_in, shape)
    if T_out is not None and p_out is not None:
        tc = rc.turbocharger_compressor(charge, T0, p_in, T_out, p_out)
        keep("turbocharger_compressor_isentropic_efficiency", tc.isentropic_efficiency, tc.status)
    # -- ideal cycles ----------------------------------------------------------------------
    r = geometry.compression_ratio
    if cycle == "otto":
        eta_as, st = cyc.otto_efficiency(np.full(shape, r))
        keep("ideal_otto_efficiency", eta_as, st)
    if Tr is not None and pr is not None:
        ppk = opt["peak_cylinder_pressure"] if cycle == "diesel" else None
        kind: Literal["otto", "diesel", "dual"] = cycle if ppk is None else "dual"
        std, var = (
            rc.cycle_from_fuel(
                kind,
                r,
                Tr,
                pr,
                fuel_mass_flow=m_f,
                charge_mass_flow=m_ch,
                lower_heating_value=lhv,
                peak_cylinder_pressure=ppk,
                fluid=fluid,
                combustion_efficiency=combustion_efficiency,
            )
            for fluid in (None, charge)
        )
        err = (std.status | var.status) & ~np.uint32(Reason.INPUT_MISSING)
        status |= err
        v["cycle_heat_input"] = var.cycle_heat_input
        if cycle == "diesel":
            v["cutoff_ratio"] = std.cutoff_ratio
            v["ideal_diesel_efficiency"] = std.efficiency if ppk is None else nan
            if ppk is not None:
                v["ideal_dual_efficiency"] = std.efficiency
                v["peak_pressure_ratio"] = std.peak_pressure_ratio
            eta_as = std.efficiency
        v["ideal_cycle_efficiency"] = var.efficiency
        v["ideal_cycle_mean_effective_pressure"] = var.mean_effective_pressure
        for name, ideal in (
            ("relative_efficiency", var.efficiency),
            ("relative_efficiency_air_standard", eta_as),
        ):
            rel, st = rc.relative_efficiency(v["brake_thermal_efficiency"], ideal)
            v[name] = rel
            status |= st & ~np.uint32(Reason.INPUT_MISSING)
    # -- energy balance ----------------------------------------------------------------------
    T_exh = opt["exhaust_temperature"]
    if (
        T_exh is not None
        and opt["jacket_water_heat"] is not None
        and opt["lube_oil_heat"] is not None
    ):
        q_cac = opt["charge_air_cooler_heat"]
        if q_cac is None and Tr is not None and T_out is not None:
            q_cac = m_ch * (charge.h(T_out) - charge.h(Tr))
        if q_cac is not None:
            g = exhaust_mixture(air, fuel, m_f / m_a)
            Tf = opt["fuel_temperature"]
            h_f = fuel.sensible_enthalpy(298.15 if Tf is None else Tf)
            eta_comb = np.asarray(combustion_efficiency, dtype=np.float64)
            rest = (
                m_a * air.h(T0)
                + m_f * (h_f + eta_comb * lhv)
                - v["brake_power"]
                - opt["jacket_water_heat"]
                - opt["lube_oil_heat"]
                - q_cac
                - (m_a + m_f) * g.h(T_exh)
            )
            v["unaccounted_heat_fraction"] = _arr(rest / (m_f * lhv), shape)
    # -- correction to reference conditions -------------------------------------------------
    if correction == "iso3046":
        assert iso3046_exponents is not None
        tcx = opt["charge_air_coolant_temperature"]
        c = iso3046_correction(
            v["brake_power"],
            v["brake_specific_fuel_consumption"],
            p0,
            T0,
            rh,
            charge_air_coolant_temperature=(
                STANDARD_REFERENCE.charge_air_coolant_temperature if tcx is None else tcx
            ),
            exponents=iso3046_exponents,
            mechanical_efficiency=mechanical_efficiency,
            brake_heat_rate=v["brake_heat_rate"],
        )
        for name in (
            "indicated_power_ratio",
            "power_adjustment_factor",
            "fuel_consumption_adjustment_factor",
            "corrected_brake_specific_fuel_consumption",
            "corrected_brake_heat_rate",
        ):
            keep(name, getattr(c, name), c.status & ~np.uint32(Reason.INPUT_MISSING))
        keep(
            "corrected_brake_power", c.corrected_power, c.status & ~np.uint32(Reason.INPUT_MISSING)
        )
    elif correction == "spark_ignition":
        a_si, st = spark_ignition_correction_factor(p0, T0, rh)
        keep("corrected_brake_power", a_si * v["brake_power"], st)
    values = {k: _arr(x, shape) for k, x in v.items()}
    labels = {"air_mass_flow_source": np.asarray(source, dtype=np.str_)}
    return EngineResult(values=values, status=status, label_arrays=labels)
