"""Inputs of the gas-turbine compute: defaults, plausibility bands and element-wise checks.

Every measurement and parameter of a block is checked on its own: NaN is INPUT_MISSING, a
value that cannot be physical (a pressure <= 0, an efficiency > 1) INPUT_NONPHYSICAL, a value
outside the range of the property data TEMPERATURE_OUT_OF_RANGE or PRESSURE_OUT_OF_RANGE.
Rejected elements are replaced by :data:`SAFE_VALUES` so that the vectorised solvers stay in
range; the reconstruction then returns NaN for exactly the results that depend on them, and
the other results of the same snapshot stay.

Advisory monitoring only: not a protection or control system.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from models.properties import humid_air, mixtures
from models.properties.fuel import FuelProperties
from models.status import Reason, flag
from models.units.gas_turbine.fluids import FuelData

__all__ = [
    "DEFAULT_FUEL_TEMPERATURE",
    "DEFAULT_PARAMETERS",
    "HEAT_RATE_BAND",
    "SAFE_VALUES",
    "Inputs",
    "check",
    "check_inputs",
    "fuel_enthalpy",
    "fuel_temperature_used",
]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]
StatusArray = NDArray[np.uint32]
Num = float | FloatArray

#: Fuel temperature assumed when none is measured [K]: the heating-value reference 25 °C, so
#: the fuel's sensible enthalpy is zero.  A gas preheated to 180 °C but not measured makes
#: the heat input about 0.5 % low.
DEFAULT_FUEL_TEMPERATURE: float = 298.15

#: Unit parameters and their defaults (glossary names).
DEFAULT_PARAMETERS: Mapping[str, float] = {
    "generator_efficiency": 0.985,
    "combustor_pressure_loss": 0.04,
    "combustion_efficiency": 0.995,
    "casing_heat_loss_fraction": 0.005,
    "mechanical_loss": 0.0,
}

#: Plausible simple-cycle heat rate, LHV basis [kJ/kWh] (common practice: heavy-duty units
#: 8 600-11 000, aeroderivatives from about 8 000, small old units up to about 14 000).
HEAT_RATE_BAND: tuple[float, float] = (8000.0, 14000.0)

#: Values substituted for rejected elements so the solvers stay in range (internal keys:
#: T0 p0 RH T1 p1 T2 p2 T4 p4 [K, Pa, -], mf [kg/s], P [W], ma [kg/s], Tf [K]).
SAFE_VALUES: Mapping[str, float] = {
    "T0": 288.15,
    "p0": 101325.0,
    "RH": 0.6,
    "T1": 288.15,
    "p1": 101325.0,
    "T2": 650.0,
    "p2": 1.5e6,
    "T4": 800.0,
    "p4": 103000.0,
    "mf": 2.5,
    "P": 40.0e6,
    "ma": 120.0,
    "Tf": 298.15,
}


def check(
    x: FloatArray,
    status: StatusArray,
    *,
    lo: float = 0.0,
    hi: float = np.inf,
    rng: tuple[float, float] | None = None,
    rng_reason: Reason = Reason.TEMPERATURE_OUT_OF_RANGE,
) -> BoolArray:
    r"""Flag the bad elements of one input and return them.

    Parameters
    ----------
    x : ndarray
        The input, in its SI unit.
    status : ndarray of uint32
        ORed in place: INPUT_MISSING (NaN), INPUT_NONPHYSICAL (x <= lo or x > hi),
        ``rng_reason`` (outside ``rng``).
    lo, hi : float
        Physical bounds, lo exclusive, hi inclusive (unit of ``x``).
    rng : (float, float), optional
        Range of validity of the models, inclusive (unit of ``x``).
    rng_reason : Reason
        Bit for a value outside ``rng``.

    Returns
    -------
    ndarray of bool
        True where the element is rejected.

    Notes
    -----
    .. math:: \mathrm{ok}(x) = (lo < x \le hi) \wedge (r_0 \le x \le r_1)

    References
    ----------
    .. [1] Common practice of vectorised scientific code: flag per element, never raise for
       plant data (``docs/validity.md`` lists the ranges).

    Examples
    --------
    >>> st = np.zeros(3, dtype=np.uint32)
    >>> check(np.array([300.0, np.nan, -1.0]), st, rng=(200.0, 3000.0)).tolist()
    [False, True, True]
    """
    a, b = (max(lo, rng[0]), min(hi, rng[1])) if rng is not None else (lo, hi)
    fine = (x > lo) & (x <= hi) if rng is None else (x >= a) & (x <= b) & (x > lo)
    if fine.all():
        return ~fine
    miss = np.isnan(x)
    bad = miss.copy()
    flag(status, miss, Reason.INPUT_MISSING)
    nonphys = ~miss & ~((x > lo) & (x <= hi))
    flag(status, nonphys, Reason.INPUT_NONPHYSICAL)
    bad |= nonphys
    if rng is not None:
        out = ~bad & ~((x >= rng[0]) & (x <= rng[1]))
        flag(status, out, rng_reason)
        bad |= out
    return bad


@dataclass(frozen=True, slots=True)
class Inputs:
    """The checked inputs of one block: safe values, and which elements were rejected.

    Temperatures [K], pressures [Pa] (absolute), RH [-], mass flows [kg/s], power [W],
    heating value [J/kg], fuel enthalpy [J/kg]; parameters as :data:`DEFAULT_PARAMETERS`.
    ``b*`` are the per-quantity reject masks, ``g_amb`` (ambient) and ``g_fp`` (fuel flow,
    power, fuel: the heat rate) their common unions.
    """

    T0: FloatArray
    p0: FloatArray
    RH: FloatArray
    T1: FloatArray
    p1: FloatArray
    T2: FloatArray
    p2: FloatArray
    T4: FloatArray
    p4: FloatArray
    mf: FloatArray
    P: FloatArray
    ma: FloatArray
    have_ma: BoolArray
    lhv: FloatArray
    hf: FloatArray
    eta_gen: Num
    dp: Num
    eta_b: Num
    closs: Num
    pmech: Num
    bT0: BoolArray
    bp0: BoolArray
    bRH: BoolArray
    bT1: BoolArray
    bp1: BoolArray
    bT2: BoolArray
    bp2: BoolArray
    bT4: BoolArray
    bp4: BoolArray
    bmf: BoolArray
    bP: BoolArray
    bTf: BoolArray
    bma: BoolArray
    bpar_gen: BoolArray
    bpar_cb: BoolArray
    bfuel: BoolArray
    g_amb: BoolArray
    g_fp: BoolArray


def check_inputs(
    m: Mapping[str, FloatArray],
    par: Mapping[str, Num],
    fd: FuelData,
    *,
    h_f: FloatArray,
    have_ma: BoolArray,
    status: StatusArray,
) -> Inputs:
    """Check every input of a block, flag the rejected elements and substitute safe values.

    Parameters
    ----------
    m : mapping of str to ndarray
        Measurements by internal key (``SAFE_VALUES`` keys), shape (n,), SI units.
    par : mapping of str to float or ndarray
        Unit parameters by glossary name (:data:`DEFAULT_PARAMETERS`).
    fd : FuelData
        The fuel's heating values and burnt species change.
    h_f : ndarray
        Fuel sensible enthalpy [J/kg], shape (n,) or ().
    have_ma : ndarray of bool
        Elements with a measured air flow.
    status : ndarray of uint32
        ORed in place with the Reason bits of the rejected elements.

    Returns
    -------
    Inputs
        Safe values and reject masks.

    Notes
    -----
    Ranges: temperatures ``T_MIN..T_MAX`` of the property data, pressures ``0..P_MAX_REAL``
    of the real-gas fit, RH ``0..1 + RH_TOLERANCE``, flows and power > 0; parameters:
    generator and combustion efficiency in (0, 1], pressure loss and casing heat loss in
    [0, 1), mechanical loss >= 0.
    """
    n = status.shape[0]
    st = status
    Tr = (mixtures.T_MIN, mixtures.T_MAX)
    pr = (0.0, mixtures.P_MAX_REAL)
    bT0 = check(m["T0"], st, rng=Tr)
    bp0 = check(m["p0"], st, rng=pr, rng_reason=Reason.PRESSURE_OUT_OF_RANGE)
    bRH = check(m["RH"], st, lo=-1e-300, hi=1.0 + humid_air.RH_TOLERANCE)
    bT1 = check(m["T1"], st, rng=Tr)
    bp1 = check(m["p1"], st, rng=pr, rng_reason=Reason.PRESSURE_OUT_OF_RANGE)
    bT2 = check(m["T2"], st, rng=Tr)
    bp2 = check(m["p2"], st, rng=pr, rng_reason=Reason.PRESSURE_OUT_OF_RANGE)
    bT4 = check(m["T4"], st, rng=Tr)
    bp4 = check(m["p4"], st, rng=pr, rng_reason=Reason.PRESSURE_OUT_OF_RANGE)
    bmf = check(m["mf"], st)
    bP = check(m["P"], st)
    bTf = check(m["Tf"], st, rng=Tr)
    bma = np.zeros(n, dtype=bool)
    if have_ma.any():
        bma = have_ma & check(np.where(have_ma, m["ma"], 1.0), st)
    eta_gen, dp, eta_b, closs, pmech = (
        par["generator_efficiency"],
        par["combustor_pressure_loss"],
        par["combustion_efficiency"],
        par["casing_heat_loss_fraction"],
        par["mechanical_loss"],
    )
    a_gen, a_dp, a_b, a_cl, a_pm = (np.asarray(v) for v in (eta_gen, dp, eta_b, closs, pmech))
    bpar_gen = np.broadcast_to(~((a_gen > 0) & (a_gen <= 1)) | ~(a_pm >= 0), (n,))
    bpar_cb = np.broadcast_to(
        ~((a_b > 0) & (a_b <= 1)) | ~((a_cl >= 0) & (a_cl < 1)) | ~((a_dp >= 0) & (a_dp < 1)),
        (n,),
    )
    flag(st, bpar_gen | bpar_cb, Reason.INPUT_NONPHYSICAL)
    bfuel = ~fd.valid
    flag(st, np.broadcast_to(bfuel, (n,)), Reason.FUEL_INVALID)

    def safe(key: str, bad: BoolArray) -> FloatArray:
        v = m[key]
        return np.where(bad, SAFE_VALUES[key], v) if bad.any() else v

    return Inputs(
        T0=safe("T0", bT0),
        p0=safe("p0", bp0),
        RH=safe("RH", bRH),
        T1=safe("T1", bT1),
        p1=safe("p1", bp1),
        T2=safe("T2", bT2),
        p2=safe("p2", bp2),
        T4=safe("T4", bT4),
        p4=safe("p4", bp4),
        mf=safe("mf", bmf),
        P=safe("P", bP),
        ma=m["ma"],
        have_ma=have_ma,
        lhv=np.where(bfuel, 50.0e6, fd.lhv) if np.any(bfuel) else fd.lhv,
        hf=np.where(bTf, 0.0, h_f) if bTf.any() else h_f,
        eta_gen=eta_gen,
        dp=dp,
        eta_b=eta_b,
        closs=closs,
        pmech=pmech,
        bT0=bT0,
        bp0=bp0,
        bRH=bRH,
        bT1=bT1,
        bp1=bp1,
        bT2=bT2,
        bp2=bp2,
        bT4=bT4,
        bp4=bp4,
        bmf=bmf,
        bP=bP,
        bTf=bTf,
        bma=bma,
        bpar_gen=bpar_gen,
        bpar_cb=bpar_cb,
        bfuel=bfuel,
        g_amb=bT0 | bp0 | bRH,
        g_fp=bmf | bP | bfuel,  # heat rate
    )


def fuel_temperature_used(Tf: FloatArray) -> FloatArray:
    """Fuel temperature the enthalpy is evaluated at: default for NaN, 298.15 K if invalid.

    Parameters
    ----------
    Tf : ndarray
        Measured fuel temperature [K], NaN where not measured.

    Returns
    -------
    ndarray
        [K]: :data:`DEFAULT_FUEL_TEMPERATURE` for NaN, 298.15 K outside the property range
        (the element is rejected by :func:`check_inputs` anyway).
    """
    T = np.where(np.isnan(Tf), DEFAULT_FUEL_TEMPERATURE, Tf)
    return np.where((T >= mixtures.T_MIN) & (T <= mixtures.T_MAX), T, mixtures.T_REF)


def fuel_enthalpy(fuel: FuelProperties, Tf: FloatArray) -> FloatArray:
    r"""Sensible enthalpy of the fuel [J/kg], 0 at 298.15 K.

    Parameters
    ----------
    fuel : FuelProperties
        The fuel.
    Tf : ndarray
        Fuel temperature [K] (from :func:`fuel_temperature_used`).

    Returns
    -------
    ndarray
        h_f(Tf) - h_f(298.15 K) [J/kg]; exactly 0 when every Tf is 298.15 K.

    Notes
    -----
    .. math::

        h_f(T_f) = \int_{298.15\,K}^{T_f} c_{p,f}\, dT

    References
    ----------
    .. [1] B. J. McBride, S. Gordon, M. A. Reno, NASA TM-4513, 1993 (gas fuels).
    .. [2] ISO 6976:2016 (reference temperature 25 °C of the heating values).
    """
    if np.all(Tf == mixtures.T_REF):
        return np.zeros(Tf.shape)
    return np.asarray(fuel.sensible_enthalpy(Tf), dtype=np.float64)
