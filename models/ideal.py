"""Comparison cycles: the air-standard Brayton cycle, the Brayton cycle on the real working
fluid, and the Carnot bound.

Reported beside the reconstructed thermal efficiency, the three tell where the gap to the
ideal is: the air-standard figure is the textbook limit at the measured pressure ratio, the
real-fluid ideal cycle removes the constant-property and no-fuel assumptions (same pressure
ratio, same turbine inlet temperature, isentropic machines, variable properties, the same fuel
chemistry), and Carnot is the bound between the same two temperature extremes.

References
----------
.. [1] Y. A. Çengel, M. A. Boles, *Thermodynamics: An Engineering Approach*, McGraw-Hill,
   section on the Brayton cycle (Examples 9-5 and 9-6 in the editions we checked against).
.. [2] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen et al., *Gas Turbine Theory*,
   7th ed., Pearson, 2017, ch. 2.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.status import Reason

__all__ = [
    "air_standard_brayton_efficiency",
    "carnot_efficiency",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]


def _flag(status: StatusArray, mask: NDArray[np.bool_], reason: Reason) -> None:
    status |= mask.astype(np.uint32) * np.uint32(reason)


def air_standard_brayton_efficiency(
    pressure_ratio: ArrayLike, gamma: ArrayLike = 1.4
) -> tuple[FloatArray, StatusArray]:
    """Thermal efficiency of the ideal air-standard Brayton cycle (cold-air standard).

    Parameters
    ----------
    pressure_ratio : array_like
        Compressor pressure ratio r = p2/p1 [1], > 1.
    gamma : array_like, optional
        Ratio of specific heats [1], > 1 (default 1.4, cold air).

    Returns
    -------
    eta : ndarray
        ``1 - r**(-(gamma - 1)/gamma)`` [1]; NaN where r <= 1 or gamma <= 1.
    status : ndarray of uint32

    Examples
    --------
    >>> eta, _ = air_standard_brayton_efficiency([8.0, 16.0])
    >>> [round(float(e), 4) for e in eta]
    [0.448, 0.5471]
    """
    r = np.asarray(pressure_ratio, dtype=np.float64)
    g = np.asarray(gamma, dtype=np.float64)
    status = np.zeros(np.broadcast(r, g).shape, dtype=np.uint32)
    _flag(status, np.isnan(r) | np.isnan(g), Reason.INPUT_MISSING)
    _flag(status, ~np.isnan(r) & ~(r > 1.0), Reason.PRESSURE_RATIO_INVALID)
    _flag(status, ~np.isnan(g) & ~(g > 1.0), Reason.INPUT_NONPHYSICAL)
    with np.errstate(invalid="ignore", divide="ignore"):
        eta = 1.0 - r ** (-(g - 1.0) / g)
    return np.where(status != 0, np.nan, eta), status


def carnot_efficiency(T_cold: ArrayLike, T_hot: ArrayLike) -> tuple[FloatArray, StatusArray]:
    """Carnot efficiency between two temperatures.

    Parameters
    ----------
    T_cold : array_like
        Lower temperature [K] (compressor inlet), > 0.
    T_hot : array_like
        Upper temperature [K] (turbine inlet), > T_cold.

    Returns
    -------
    eta : ndarray
        ``1 - T_cold / T_hot`` [1].
    status : ndarray of uint32

    Examples
    --------
    >>> round(float(carnot_efficiency(300.0, 1300.0)[0]), 4)
    0.7692
    """
    Tc = np.asarray(T_cold, dtype=np.float64)
    Th = np.asarray(T_hot, dtype=np.float64)
    status = np.zeros(np.broadcast(Tc, Th).shape, dtype=np.uint32)
    _flag(status, np.isnan(Tc) | np.isnan(Th), Reason.INPUT_MISSING)
    _flag(status, ~(Tc > 0.0) & ~np.isnan(Tc), Reason.INPUT_NONPHYSICAL)
    _flag(status, ~(Th > Tc) & ~np.isnan(Tc) & ~np.isnan(Th), Reason.INPUT_NONPHYSICAL)
    with np.errstate(invalid="ignore", divide="ignore"):
        eta = 1.0 - Tc / Th
    return np.where(status != 0, np.nan, eta), status
