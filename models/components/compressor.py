"""Compressor: isentropic and polytropic efficiency, specific work and power (station 1 → 2).

From the measured inlet and discharge states.

Working fluid: humid air, composition held through the machine.  Enthalpy and entropy are the
ideal-gas mixture values of :mod:`models.properties.mixtures` plus the real-gas departure
(:func:`models.properties.mixtures.residual`) at the state's own pressure, so ``h(T, p) = h°(T) +
Δh(T, p)`` at stations 1, 2 and 2s.  The departure matters: for dry air at pressure ratio 15 it
moves the isentropic efficiency by about 0.2 points, the size of a year of fouling.

Equations::

    r     = p2 / p1                                                          (1)
    T2s   : s(T2s, p2) = s(T1, p1)                                           (2)
    eta_c = (h(T2s, p2) - h(T1, p1)) / (h(T2, p2) - h(T1, p1))               (3)
    eta_p = R ln(p2/p1) / (s°(T2) - s°(T1))          (ideal gas)             (4)
    w_c   = h(T2, p2) - h(T1, p1)                                            (5)

References
----------
.. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen et al., *Gas Turbine Theory*,
   7th ed., Pearson, 2017, sections 2.1 and 2.2 (isentropic and polytropic efficiency).
.. [2] ASME PTC 10-1997, Performance Test Code on Compressors and Exhausters (polytropic
   analysis).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.properties import mixtures
from models.status import Reason, flag

__all__ = [
    "COMPRESSOR_EFFICIENCY_BAND",
    "CompressorState",
    "compressor",
    "compressor_discharge_temperature",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]

#: Plausible compressor isentropic efficiency band [-] of large axial compressors in service
#: (common practice); outside it ``EFFICIENCY_IMPLAUSIBLE`` is set as a warning.
COMPRESSOR_EFFICIENCY_BAND: tuple[float, float] = (0.80, 0.92)


@dataclass(frozen=True)
class CompressorState:
    """Result of :func:`compressor` (arrays of one shape; NaN where ``status`` has an error).

    Attributes
    ----------
    pressure_ratio : p2/p1 [-]
    T2s : isentropic discharge temperature [K]
    h1, h2, h2s : enthalpies at stations 1, 2, 2s [J/kg] (sensible, real gas)
    isentropic_efficiency : eta_c [-]
    polytropic_efficiency : eta_p [-] (ideal gas)
    specific_work : w_c = h2 - h1 [J/kg]
    status : Reason bits (uint32)
    """

    pressure_ratio: FloatArray
    T2s: FloatArray
    h1: FloatArray
    h2: FloatArray
    h2s: FloatArray
    isentropic_efficiency: FloatArray
    polytropic_efficiency: FloatArray
    specific_work: FloatArray
    status: StatusArray


def _check_states(T1: FloatArray, p1: FloatArray, T2: FloatArray, p2: FloatArray) -> StatusArray:
    shape = np.broadcast(T1, p1, T2, p2).shape
    status = np.zeros(shape, dtype=np.uint32)
    missing = np.isnan(T1) | np.isnan(p1) | np.isnan(T2) | np.isnan(p2)
    flag(status, missing, Reason.INPUT_MISSING)
    nonphys = ~missing & ~((T1 > 0.0) & (T2 > 0.0) & (p1 > 0.0) & (p2 > 0.0))
    flag(status, nonphys, Reason.INPUT_NONPHYSICAL)
    ok = ~missing & ~nonphys
    flag(
        status,
        ok & ~((T1 >= mixtures.T_MIN) & (T2 <= mixtures.T_MAX)),
        Reason.TEMPERATURE_OUT_OF_RANGE,
    )
    flag(status, ok & ~(T2 > T1), Reason.DISCHARGE_NOT_HOTTER)
    flag(status, ok & ~(p2 > p1), Reason.PRESSURE_RATIO_INVALID)
    return status


def compressor(
    mix: mixtures.Mixture,
    T1: ArrayLike,
    p1: ArrayLike,
    T2: ArrayLike,
    p2: ArrayLike,
    *,
    real_gas: bool = True,
) -> CompressorState:
    r"""Compressor performance from measured inlet and discharge states.

    Parameters
    ----------
    mix : models.properties.mixtures.Mixture
        Working fluid (humid air), one composition or one per element.
    T1, p1 : array_like
        Inlet temperature [K] and absolute pressure [Pa] (station 1).
    T2, p2 : array_like
        Discharge temperature [K] and absolute pressure [Pa] (station 2).
    real_gas : bool, optional
        Add the real-gas departure (default True); False gives the ideal-gas mixture.

    Returns
    -------
    CompressorState

    Notes
    -----
    .. math::

        \eta_c = \frac{h(T_{2s}, p_2) - h(T_1, p_1)}{h(T_2, p_2) - h(T_1, p_1)}, \qquad
        s(T_{2s}, p_2) = s(T_1, p_1)

        \eta_p = \frac{R \ln(p_2 / p_1)}{s^\circ(T_2) - s^\circ(T_1)}, \qquad w_c = h_2 - h_1

    Equations (1)-(5) of the module docstring.  Errors (NaN): ``INPUT_MISSING``,
    ``INPUT_NONPHYSICAL``, ``TEMPERATURE_OUT_OF_RANGE``, ``DISCHARGE_NOT_HOTTER``,
    ``PRESSURE_RATIO_INVALID``, ``NOT_CONVERGED``, ``EFFICIENCY_OUT_OF_RANGE``.  Warning
    (value kept): ``EFFICIENCY_IMPLAUSIBLE`` outside :data:`COMPRESSOR_EFFICIENCY_BAND`.

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
       *Gas Turbine Theory*, 7th ed., Pearson, 2017, sections 2.1 and 2.2.
    .. [2] ASME PTC 10-1997, Performance Test Code on Compressors and Exhausters.
    """
    T1a = np.asarray(T1, dtype=np.float64)
    p1a = np.asarray(p1, dtype=np.float64)
    T2a = np.asarray(T2, dtype=np.float64)
    p2a = np.asarray(p2, dtype=np.float64)
    status = _check_states(T1a, p1a, T2a, p2a)
    bad = status != 0
    # Keep the property code inside its range on rejected elements.
    T1c = np.where(bad, 300.0, T1a)
    T2c = np.where(bad, 600.0, T2a)
    p1c = np.where(bad, 1.0e5, p1a)
    p2c = np.where(bad, 1.0e6, p2a)
    T2s, st = mix.isentropic_T(T1c, p1c, p2c, real_gas=real_gas)
    status |= np.asarray(st, dtype=np.uint32)
    if real_gas:
        h1 = mix.h_real(T1c, p1c)
        h2 = mix.h_real(T2c, p2c)
        h2s = mix.h_real(T2s, p2c)
    else:
        h1 = np.asarray(mix.h(T1c), dtype=np.float64)
        h2 = np.asarray(mix.h(T2c), dtype=np.float64)
        h2s = np.asarray(mix.h(T2s), dtype=np.float64)
    w = h2 - h1
    eta = (h2s - h1) / w
    eta_p = mix.R * np.log(p2c / p1c) / (mix.s0(T2c) - mix.s0(T1c))
    flag(status, (status == 0) & ~((eta > 0.0) & (eta <= 1.0)), Reason.EFFICIENCY_OUT_OF_RANGE)
    lo, hi = COMPRESSOR_EFFICIENCY_BAND
    flag(status, (status == 0) & ~((eta >= lo) & (eta <= hi)), Reason.EFFICIENCY_IMPLAUSIBLE)
    err = (status & ~np.uint32(Reason.EFFICIENCY_IMPLAUSIBLE)) != 0

    def nan(a: FloatArray) -> FloatArray:
        return np.where(err, np.nan, a)

    return CompressorState(
        pressure_ratio=nan(p2c / p1c),
        T2s=nan(T2s),
        h1=nan(h1),
        h2=nan(h2),
        h2s=nan(h2s),
        isentropic_efficiency=nan(eta),
        polytropic_efficiency=nan(np.asarray(eta_p, dtype=np.float64)),
        specific_work=nan(w),
        status=status,
    )


def compressor_discharge_temperature(
    mix: mixtures.Mixture,
    T1: ArrayLike,
    p1: ArrayLike,
    p2: ArrayLike,
    isentropic_efficiency: ArrayLike,
) -> tuple[FloatArray, StatusArray]:
    r"""Forward: discharge temperature [K] from the inlet state, p2 and eta_c (real gas).

    ``h2 = h1 + (h2s - h1) / eta_c``, then T2 from h2 at p2 (Newton).

    Notes
    -----
    .. math::

        h(T_2, p_2) = h_1 + \frac{h(T_{2s}, p_2) - h_1}{\eta_c}

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
       *Gas Turbine Theory*, 7th ed., Pearson, 2017, section 2.1.
    """
    T2s, st = mix.isentropic_T(T1, p1, p2, real_gas=True)
    h1 = mix.h_real(T1, p1)
    h2 = h1 + (mix.h_real(T2s, p2) - h1) / np.asarray(isentropic_efficiency)
    T2, st2 = mix.T_from_h(h2, T_guess=T2s, p=p2)
    return T2, st | st2
