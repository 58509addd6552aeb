"""Correction of engine power and fuel consumption to reference conditions after ISO 3046-1.

Standard reference conditions (ISO 3046-1:2002, clause 5; from memory of the clause number,
the values are the ones every engine data sheet quotes)::

    total barometric pressure   p_r  = 100 kPa
    air temperature             T_r  = 298 K (25 °C)
    relative humidity           phi_r = 30 %
    charge-air coolant temp.    T_cr = 298 K (25 °C)

Method (ISO 3046-1 power adjustment, the "general method" also used by ISO 15550)::

    k     = ((p_x - a phi_x p_sx) / (p_r - a phi_r p_sr))^m (T_r/T_x)^n (T_cr/T_cx)^s    (1)
    alpha = k - 0.7 (1 - k) (1/eta_m - 1)                                               (2)
    beta  = k / alpha                                                                   (3)
    P_x = alpha P_r,   b_x = beta b_r                                                   (4)

k is the ratio of indicated power (site x over reference r), alpha the power adjustment
factor, beta the fuel consumption adjustment factor, eta_m the mechanical efficiency at the
declared power, p_s the saturation pressure of water at the air temperature (IAPWS, via
:func:`models.properties.humid_air.saturation_pressure`), and (a, m, n, s) the humidity factor and
exponents of the engine type (:data:`ISO3046_EXPONENTS`).  The 0.7 is the standard's share of the
friction losses that stays constant.  Measured site values are corrected to reference by
inverting (4): ``P_r = P_x / alpha``, ``b_r = b_x / beta`` (and the fuel flow at that power
``B_r = B_x / k``: the indicated efficiency is held).

Spark-ignition (gas) engines: their makers publish derating tables of their own (knock and
methane number limit them); :func:`spark_ignition_correction_factor` gives the published
ISO 1585 / ISO 15550 test-bed factor for spark-ignition engines as a documented alternative.

Validity (flagged, result NaN with ``CORRECTION_UNAVAILABLE``)
--------------------------------------------------------------
The standard states no numerical limits that we could confirm.  brayscope applies the method
within a band of its own choice, wide enough for its worked example at 4000 m:
ambient pressure 60-110 kPa, air temperature 243-333 K, charge-air coolant temperature
273-333 K, and it needs k > 0 and alpha > 0.  Outside, the engine's turbocharger, knock or
thermal limits govern and the maker's derating applies.  For a turbocharged engine above the
altitude where the turbocharger runs out of speed margin, ISO 3046-1 uses substitute
reference conditions (pass them as ``reference``).

Advisory monitoring only: not a protection or control system.

References
----------
.. [1] ISO 3046-1:2002, Reciprocating internal combustion engines — Performance — Part 1:
   Declarations of power, fuel and lubricating oil consumptions, and test methods —
   Additional requirements for engines for general use (standard reference conditions;
   power and fuel consumption adjustment, its table of exponents and worked examples).
.. [2] ISO 15550:2016, Internal combustion engines — Determination and method for the
   measurement of engine power — General requirements.
.. [3] ISO 1585:1992, Road vehicles — Engine test code — Net power (correction factor of
   spark-ignition engines).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.properties import humid_air
from models.status import Reason, flag

__all__ = [
    "FRICTION_SHARE",
    "ISO3046_EXPONENTS",
    "STANDARD_REFERENCE",
    "Iso3046Correction",
    "Iso3046Exponents",
    "Iso3046Reference",
    "fuel_consumption_adjustment_factor",
    "indicated_power_ratio",
    "iso3046_correction",
    "power_adjustment_factor",
    "spark_ignition_correction_factor",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]

#: The constant 0.7 of eq. (2): the part of the friction power taken as unchanged [-].
FRICTION_SHARE: float = 0.7

#: brayscope's validity band of the method (not from the standard): (low, high).
_P_RANGE = (60.0e3, 110.0e3)  # Pa
_T_RANGE = (243.0, 333.0)  # K
_TC_RANGE = (273.0, 333.0)  # K


@dataclass(frozen=True)
class Iso3046Reference:
    """Reference conditions of eq. (1).

    Attributes
    ----------
    pressure : total barometric pressure p_r [Pa]
    temperature : air temperature T_r [K]
    relative_humidity : phi_r [-] (fraction, not percent)
    charge_air_coolant_temperature : T_cr [K]
    """

    pressure: float = 100.0e3
    temperature: float = 298.0
    relative_humidity: float = 0.30
    charge_air_coolant_temperature: float = 298.0


#: ISO 3046-1 standard reference conditions: 100 kPa, 298 K, 30 % RH, coolant 298 K.
STANDARD_REFERENCE = Iso3046Reference()


@dataclass(frozen=True)
class Iso3046Exponents:
    """Humidity factor and exponents of eq. (1) for one engine type.

    Attributes
    ----------
    a : humidity factor [-] (1: the water vapour displaces air; 0: ignored)
    m : pressure exponent [-]
    n : air temperature exponent [-]
    s : charge-air coolant temperature exponent [-]
    description : the engine type, as the standard's table names it
    """

    a: float
    m: float
    n: float
    s: float
    description: str = ""


#: Rows of the ISO 3046-1 table of exponents for compression-ignition engines (as applied in
#: the standard's worked examples; the row values were read from a reproduction of those
#: examples, not from our own copy of the standard).  For other engine types pass an
#: :class:`Iso3046Exponents` from the engine maker.
ISO3046_EXPONENTS: Mapping[str, Iso3046Exponents] = MappingProxyType(
    {
        "ci_naturally_aspirated": Iso3046Exponents(
            1.0,
            1.0,
            0.75,
            0.0,
            "compression ignition, naturally aspirated or mechanically pressure-charged, "
            "power limited by excess air",
        ),
        "ci_turbocharged": Iso3046Exponents(
            0.0, 0.7, 2.0, 0.0, "compression ignition, turbocharged, no charge-air cooling"
        ),
        "ci_turbocharged_charge_air_cooled": Iso3046Exponents(
            0.0, 0.7, 1.2, 1.0, "compression ignition, turbocharged with charge-air cooling"
        ),
    }
)


def indicated_power_ratio(
    ambient_pressure: ArrayLike,
    ambient_temperature: ArrayLike,
    ambient_relative_humidity: ArrayLike,
    charge_air_coolant_temperature: ArrayLike,
    exponents: Iso3046Exponents,
    *,
    reference: Iso3046Reference = STANDARD_REFERENCE,
) -> tuple[FloatArray, StatusArray]:
    r"""Ratio of indicated power k of ISO 3046-1, eq. (1) of the module.

    Parameters
    ----------
    ambient_pressure : array_like
        Site total barometric pressure p_x [Pa].
    ambient_temperature : array_like
        Site air temperature T_x [K] (at the engine's air inlet).
    ambient_relative_humidity : array_like
        Site relative humidity phi_x [-], 0..1.
    charge_air_coolant_temperature : array_like
        Site charge-air coolant temperature T_cx [K] (water at the intercooler inlet); any
        value when ``exponents.s`` is 0.
    exponents : Iso3046Exponents
        Engine type (:data:`ISO3046_EXPONENTS`).
    reference : Iso3046Reference, optional
        Reference conditions (default :data:`STANDARD_REFERENCE`).

    Returns
    -------
    k : ndarray [-]
        NaN where status has an error bit.
    status : ndarray of uint32
        ``INPUT_MISSING``, ``INPUT_NONPHYSICAL`` (p, T <= 0, RH outside 0..1),
        ``CORRECTION_UNAVAILABLE`` (outside brayscope's validity band, see the module).

    Notes
    -----
    .. math::
        k = \left(\frac{p_x - a \varphi_x p_{sx}}{p_r - a \varphi_r p_{sr}}\right)^m
        \left(\frac{T_r}{T_x}\right)^n \left(\frac{T_{cr}}{T_{cx}}\right)^s

    References
    ----------
    ISO 3046-1:2002, power adjustment [1]_.

    Examples
    --------
    The standard's worked example of a naturally aspirated Diesel engine at a hot, humid
    site (87 kPa, 45 °C, 80 % RH); with IAPWS saturation pressures (9.59 and 3.17 kPa, where
    the example rounds to 9.6 and 3.2) k comes out 0.7633 instead of 0.7628:

    >>> k, _ = indicated_power_ratio(87.0e3, 318.0, 0.8, 298.0,
    ...                              ISO3046_EXPONENTS["ci_naturally_aspirated"])
    >>> round(float(k), 4)
    0.7633
    """
    p = np.asarray(ambient_pressure, dtype=np.float64)
    T = np.asarray(ambient_temperature, dtype=np.float64)
    rh = np.asarray(ambient_relative_humidity, dtype=np.float64)
    tc = np.asarray(charge_air_coolant_temperature, dtype=np.float64)
    uses_tc = exponents.s != 0.0
    shape = np.broadcast_shapes(p.shape, T.shape, rh.shape, tc.shape)
    status = np.zeros(shape, dtype=np.uint32)
    pb, Tb, rb, tb = (np.broadcast_to(v, shape) for v in (p, T, rh, tc))
    miss = np.isnan(pb) | np.isnan(Tb) | np.isnan(rb) | (np.isnan(tb) & uses_tc)
    with np.errstate(invalid="ignore"):
        nonphys = ~miss & ((pb <= 0) | (Tb <= 0) | (rb < 0) | (rb > 1) | ((tb <= 0) & uses_tc))
        outside = (
            ~miss
            & ~nonphys
            & (
                (pb < _P_RANGE[0])
                | (pb > _P_RANGE[1])
                | (Tb < _T_RANGE[0])
                | (Tb > _T_RANGE[1])
                | (uses_tc & ((tb < _TC_RANGE[0]) | (tb > _TC_RANGE[1])))
            )
        )
    flag(status, miss, Reason.INPUT_MISSING)
    flag(status, nonphys, Reason.INPUT_NONPHYSICAL)
    flag(status, outside, Reason.CORRECTION_UNAVAILABLE)
    ok = status == 0
    ps = humid_air.saturation_pressure(np.where(ok, Tb, 298.0))
    ps_r = float(humid_air.saturation_pressure(reference.temperature))
    a, m, n, s = exponents.a, exponents.m, exponents.n, exponents.s
    dry_x = np.where(ok, pb, 1.0e5) - a * np.where(ok, rb, 0.0) * ps
    dry_r = reference.pressure - a * reference.relative_humidity * ps_r
    with np.errstate(invalid="ignore", divide="ignore"):
        k = (dry_x / dry_r) ** m * (reference.temperature / np.where(ok, Tb, 298.0)) ** n
        if uses_tc:
            k = k * (reference.charge_air_coolant_temperature / np.where(ok, tb, 298.0)) ** s
    flag(status, ok & ~(k > 0), Reason.CORRECTION_UNAVAILABLE)
    return np.where(status != 0, np.nan, k), status


def power_adjustment_factor(
    indicated_power_ratio: ArrayLike, mechanical_efficiency: ArrayLike
) -> tuple[FloatArray, StatusArray]:
    r"""Power adjustment factor alpha = k - 0.7 (1 - k)(1/eta_m - 1), eq. (2).

    Parameters
    ----------
    indicated_power_ratio : array_like
        k [-], > 0.
    mechanical_efficiency : array_like
        eta_m [-] at the declared power, 0 < eta_m <= 1 (the maker's figure; 0.8-0.9 for
        large engines, common practice).

    Returns
    -------
    alpha : ndarray [-]
    status : ndarray of uint32
        ``CORRECTION_UNAVAILABLE`` where alpha <= 0; ``EFFICIENCY_OUT_OF_RANGE`` for eta_m.

    Notes
    -----
    .. math::

        \alpha = k - 0.7\,(1 - k) \left(\frac{1}{\eta_m} - 1\right)

    Friction power held at FRICTION_SHARE of its reference value, indicated efficiency held.

    References
    ----------
    ISO 3046-1:2002, power adjustment [1]_.

    Examples
    --------
    >>> a, _ = power_adjustment_factor(0.7628, 0.85)
    >>> round(float(a), 4)
    0.7335
    """
    k = np.asarray(indicated_power_ratio, dtype=np.float64)
    eta = np.asarray(mechanical_efficiency, dtype=np.float64)
    shape = np.broadcast_shapes(k.shape, eta.shape)
    status = np.zeros(shape, dtype=np.uint32)
    kb, eb = np.broadcast_to(k, shape), np.broadcast_to(eta, shape)
    flag(status, np.isnan(kb) | np.isnan(eb), Reason.INPUT_MISSING)
    with np.errstate(invalid="ignore", divide="ignore"):
        flag(status, ~np.isnan(eb) & ~((eb > 0) & (eb <= 1)), Reason.EFFICIENCY_OUT_OF_RANGE)
        flag(status, ~np.isnan(kb) & ~(kb > 0), Reason.CORRECTION_UNAVAILABLE)
        alpha = kb - FRICTION_SHARE * (1.0 - kb) * (1.0 / eb - 1.0)
        flag(status, (status == 0) & ~(alpha > 0), Reason.CORRECTION_UNAVAILABLE)
    return np.where(status != 0, np.nan, alpha), status


def fuel_consumption_adjustment_factor(
    indicated_power_ratio: ArrayLike, power_adjustment_factor: ArrayLike
) -> FloatArray:
    r"""Fuel consumption adjustment factor beta = k / alpha [-], eq. (3) (NaN propagates).

    Notes
    -----
    .. math::

        \beta = \frac{k}{\alpha}

    References
    ----------
    ISO 3046-1:2002, fuel consumption adjustment [1]_.

    Examples
    --------
    >>> round(float(fuel_consumption_adjustment_factor(0.7628, 0.7335)), 4)
    1.0399
    """
    k = np.asarray(indicated_power_ratio, dtype=np.float64)
    a = np.asarray(power_adjustment_factor, dtype=np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.asarray(np.where(a > 0, k / np.where(a > 0, a, 1.0), np.nan), dtype=np.float64)


@dataclass(frozen=True)
class Iso3046Correction:
    """Result of :func:`iso3046_correction` (arrays of one shape, NaN where flagged).

    Attributes
    ----------
    indicated_power_ratio : k [-]
    power_adjustment_factor : alpha [-]
    fuel_consumption_adjustment_factor : beta [-]
    corrected_power : P_x / alpha [W], the power at the reference conditions
    corrected_brake_specific_fuel_consumption : b_x / beta [kg/J]
    corrected_brake_heat_rate : HR_x / beta [J/J] (same fuel: heat rate scales as bsfc)
    status : Reason bits
    """

    indicated_power_ratio: FloatArray
    power_adjustment_factor: FloatArray
    fuel_consumption_adjustment_factor: FloatArray
    corrected_power: FloatArray
    corrected_brake_specific_fuel_consumption: FloatArray
    corrected_brake_heat_rate: FloatArray
    status: StatusArray


def iso3046_correction(
    brake_power: ArrayLike,
    brake_specific_fuel_consumption: ArrayLike,
    ambient_pressure: ArrayLike,
    ambient_temperature: ArrayLike,
    ambient_relative_humidity: ArrayLike,
    *,
    charge_air_coolant_temperature: ArrayLike = np.nan,
    exponents: Iso3046Exponents,
    mechanical_efficiency: ArrayLike,
    brake_heat_rate: ArrayLike = np.nan,
    reference: Iso3046Reference = STANDARD_REFERENCE,
) -> Iso3046Correction:
    r"""Brake power and specific fuel consumption at site, corrected to reference conditions.

    Parameters
    ----------
    brake_power : array_like
        Measured brake power P_x [W], > 0.
    brake_specific_fuel_consumption : array_like
        Measured b_x [kg/J], > 0.
    ambient_pressure, ambient_temperature, ambient_relative_humidity : array_like
        Site conditions p_x [Pa], T_x [K], phi_x [-].
    charge_air_coolant_temperature : array_like, optional
        T_cx [K]; needed when ``exponents.s`` is not 0.
    exponents : Iso3046Exponents
        Engine type.
    mechanical_efficiency : array_like
        eta_m [-] at the declared power.
    brake_heat_rate : array_like, optional
        Measured brake heat rate [J/J], corrected like bsfc.
    reference : Iso3046Reference, optional
        Default :data:`STANDARD_REFERENCE`.

    Returns
    -------
    Iso3046Correction

    Notes
    -----
    .. math::

        P_r = \frac{P_x}{\alpha}, \qquad b_r = \frac{b_x}{\beta}, \qquad B_r = \frac{B_x}{k}

    P_r = P_x / alpha, b_r = b_x / beta, eqs. (1)-(4) of the module.  The method adjusts the
    power an engine can *deliver*: it is meaningful at full (declared) load.  At part load the
    corrected power answers "what would this fuel rack give at reference conditions" only in
    the sense of the method; bsfc and heat rate corrections remain usable.

    References
    ----------
    ISO 3046-1:2002 [1]_.

    Examples
    --------
    >>> c = iso3046_correction(366.8e3, 228.8 / 3.6e9, 87.0e3, 318.0, 0.8,
    ...                        exponents=ISO3046_EXPONENTS["ci_naturally_aspirated"],
    ...                        mechanical_efficiency=0.85)
    >>> round(float(c.corrected_power) / 1e3, 1), round(float(
    ...     c.corrected_brake_specific_fuel_consumption) * 3.6e9, 1)
    (499.7, 220.0)
    """
    k, status = indicated_power_ratio(
        ambient_pressure,
        ambient_temperature,
        ambient_relative_humidity,
        charge_air_coolant_temperature,
        exponents,
        reference=reference,
    )
    alpha, st = power_adjustment_factor(np.where(np.isnan(k), 1.0, k), mechanical_efficiency)
    status = np.asarray(status | st, dtype=np.uint32)
    beta = fuel_consumption_adjustment_factor(k, alpha)
    P = np.asarray(brake_power, dtype=np.float64)
    b = np.asarray(brake_specific_fuel_consumption, dtype=np.float64)
    hr = np.asarray(brake_heat_rate, dtype=np.float64)
    shape = np.broadcast_shapes(status.shape, P.shape, b.shape, hr.shape)
    status = np.array(np.broadcast_to(status, shape))
    Pb, bb = np.broadcast_to(P, shape), np.broadcast_to(b, shape)
    flag(status, np.isnan(Pb) | np.isnan(bb), Reason.INPUT_MISSING)
    with np.errstate(invalid="ignore"):
        flag(status, ~np.isnan(Pb) & ~(Pb > 0), Reason.INPUT_NONPHYSICAL)
        flag(status, ~np.isnan(bb) & ~(bb > 0), Reason.INPUT_NONPHYSICAL)
    bad = status != 0

    def out(a: ArrayLike) -> FloatArray:
        return np.where(bad, np.nan, np.broadcast_to(np.asarray(a, dtype=np.float64), shape))

    with np.errstate(invalid="ignore", divide="ignore"):
        return Iso3046Correction(
            indicated_power_ratio=out(k),
            power_adjustment_factor=out(alpha),
            fuel_consumption_adjustment_factor=out(beta),
            corrected_power=out(Pb / alpha),
            corrected_brake_specific_fuel_consumption=out(bb / beta),
            corrected_brake_heat_rate=out(hr / beta),
            status=status,
        )


#: ISO 1585 validity of the spark-ignition factor (from memory): (low, high).
_SI_ALPHA_RANGE = (0.93, 1.07)
_SI_T_RANGE = (288.0, 308.0)  # K
_SI_PD_RANGE = (80.0e3, 110.0e3)  # Pa, dry air pressure


def spark_ignition_correction_factor(
    ambient_pressure: ArrayLike,
    ambient_temperature: ArrayLike,
    ambient_relative_humidity: ArrayLike,
) -> tuple[FloatArray, StatusArray]:
    r"""Correction factor of spark-ignition engines to 99 kPa dry air and 298 K (ISO 1585).

    Parameters
    ----------
    ambient_pressure : array_like
        Total barometric pressure at the air inlet [Pa].
    ambient_temperature : array_like
        Air inlet temperature [K].
    ambient_relative_humidity : array_like
        [-], 0..1.

    Returns
    -------
    alpha_a : ndarray [-]
        P_reference = alpha_a P_measured; NaN with ``CORRECTION_UNAVAILABLE`` outside the
        validity of the formula.
    status : ndarray of uint32

    Notes
    -----
    .. math:: \alpha_a = (99\,\mathrm{kPa} / p_d)^{1.2} (T / 298\,\mathrm{K})^{0.6}

    with the dry-air pressure p_d = p - phi p_s(T).  99 kPa dry is the ISO 3046-1 reference
    (100 kPa at 30 % RH and 25 °C).  Validity as stated in ISO 1585 (from memory):
    0.93 <= alpha_a <= 1.07, 288 K <= T <= 308 K, 80 kPa <= p_d <= 110 kPa.  Note the
    direction: alpha_a corrects *to* reference (unlike alpha of eq. 2).

    References
    ----------
    ISO 1585:1992 [3]_; ISO 15550:2016 [2]_.

    Examples
    --------
    A test at 98 kPa, 303 K, 80 % RH:

    >>> a, _ = spark_ignition_correction_factor(98.0e3, 303.0, 0.8)
    >>> round(float(a), 4)
    1.0662
    """
    p = np.asarray(ambient_pressure, dtype=np.float64)
    T = np.asarray(ambient_temperature, dtype=np.float64)
    rh = np.asarray(ambient_relative_humidity, dtype=np.float64)
    shape = np.broadcast_shapes(p.shape, T.shape, rh.shape)
    status = np.zeros(shape, dtype=np.uint32)
    pb, Tb, rb = (np.broadcast_to(v, shape) for v in (p, T, rh))
    miss = np.isnan(pb) | np.isnan(Tb) | np.isnan(rb)
    with np.errstate(invalid="ignore"):
        nonphys = ~miss & ((pb <= 0) | (Tb <= 0) | (rb < 0) | (rb > 1))
    flag(status, miss, Reason.INPUT_MISSING)
    flag(status, nonphys, Reason.INPUT_NONPHYSICAL)
    ok = status == 0
    Ts = np.where(ok, Tb, 298.0)
    pd = np.where(ok, pb, 1e5) - np.where(ok, rb, 0.0) * humid_air.saturation_pressure(Ts)
    with np.errstate(invalid="ignore", divide="ignore"):
        alpha = (99.0e3 / pd) ** 1.2 * (Ts / 298.0) ** 0.6
        outside = ok & (
            (alpha < _SI_ALPHA_RANGE[0])
            | (alpha > _SI_ALPHA_RANGE[1])
            | (Ts < _SI_T_RANGE[0])
            | (Ts > _SI_T_RANGE[1])
            | (pd < _SI_PD_RANGE[0])
            | (pd > _SI_PD_RANGE[1])
        )
    flag(status, outside, Reason.CORRECTION_UNAVAILABLE)
    return np.where(status != 0, np.nan, alpha), status
