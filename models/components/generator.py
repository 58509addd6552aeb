"""Generator and mechanical losses: the link between the generator terminals and the shaft.

Shaft power is what the turbine delivers net of the compressor; generator power is what the
plant meters.  The losses in between are a generator efficiency (a unit parameter, usually
from the generator's test sheet) and an optional fixed mechanical loss (bearings, gearbox,
shaft-driven auxiliaries) in watts::

    P_shaft = P_gen / eta_gen + P_mech          (1)

All functions are vectorised over NumPy arrays and return NaN plus :class:`models.status.Reason`
bits for elements that cannot be computed.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.status import Reason, flag

__all__ = ["generator_power", "shaft_power"]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]


def _loss_status(
    eta_gen: FloatArray, mechanical_loss: FloatArray
) -> tuple[NDArray[np.bool_], StatusArray]:
    status = np.zeros(np.broadcast(eta_gen, mechanical_loss).shape, dtype=np.uint32)
    missing = np.isnan(eta_gen) | np.isnan(mechanical_loss)
    flag(status, missing, Reason.INPUT_MISSING)
    eff_bad = ~missing & ~((eta_gen > 0.0) & (eta_gen <= 1.0))
    flag(status, eff_bad, Reason.EFFICIENCY_OUT_OF_RANGE)
    mech_bad = ~missing & ~(mechanical_loss >= 0.0)
    flag(status, mech_bad, Reason.INPUT_NONPHYSICAL)
    return missing | eff_bad | mech_bad, status


def shaft_power(
    generator_power: ArrayLike,
    generator_efficiency: ArrayLike,
    mechanical_loss: ArrayLike = 0.0,
) -> tuple[FloatArray, StatusArray]:
    r"""Shaft power from measured generator power.

    Parameters
    ----------
    generator_power : array_like
        Generator terminal power P_gen [W]; must be > 0.
    generator_efficiency : array_like
        Generator efficiency eta_gen [-], 0 < eta_gen <= 1.
    mechanical_loss : array_like, optional
        Fixed mechanical and shaft-driven auxiliary loss P_mech [W], >= 0 (default 0).

    Returns
    -------
    P_shaft : ndarray
        Shaft power [W], NaN where not computable.
    status : ndarray of uint32
        :class:`models.status.Reason` bits.

    Notes
    -----
    .. math::

        P_{shaft} = \frac{P_{gen}}{\eta_{gen}} + P_{mech}

    ``P_shaft = P_gen / eta_gen + P_mech``.  Part-load dependence of the generator efficiency
    is left to the caller (pass an array).

    References
    ----------
    .. [1] ASME PTC 22-2014, Performance Test Code on Gas Turbines (shaft power from the
       generator output and its losses).

    Examples
    --------
    >>> P, st = shaft_power(45.0e6, 0.985, 100.0e3)
    >>> round(float(P) / 1e6, 4), int(st)
    (45.7853, 0)
    """
    P = np.asarray(generator_power, dtype=np.float64)
    eta = np.asarray(generator_efficiency, dtype=np.float64)
    mech = np.asarray(mechanical_loss, dtype=np.float64)
    _, status = _loss_status(eta, mech)
    shape = np.broadcast(P, eta, mech).shape
    status = np.broadcast_to(status, shape).copy()
    flag(status, np.broadcast_to(np.isnan(P), shape), Reason.INPUT_MISSING)
    flag(status, np.broadcast_to(~np.isnan(P) & ~(P > 0.0), shape), Reason.INPUT_NONPHYSICAL)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = P / eta + mech
    out = np.where(status != 0, np.nan, out)
    return out, status


def generator_power(
    shaft_power: ArrayLike,
    generator_efficiency: ArrayLike,
    mechanical_loss: ArrayLike = 0.0,
) -> tuple[FloatArray, StatusArray]:
    r"""Return the generator power from the shaft power (the inverse of :func:`shaft_power`).

    Parameters
    ----------
    shaft_power : array_like
        Shaft power P_shaft [W].
    generator_efficiency : array_like
        Generator efficiency eta_gen [-], 0 < eta_gen <= 1.
    mechanical_loss : array_like, optional
        Fixed mechanical loss P_mech [W], >= 0 (default 0).

    Returns
    -------
    P_gen : ndarray
        Generator terminal power [W]; NaN with ``INPUT_NONPHYSICAL`` where the shaft power
        does not cover the mechanical loss.
    status : ndarray of uint32
        :class:`models.status.Reason` bits.

    Notes
    -----
    .. math::

        P_{gen} = \eta_{gen} \, (P_{shaft} - P_{mech})

    ``P_gen = eta_gen (P_shaft - P_mech)``.

    References
    ----------
    .. [1] ASME PTC 22-2014, Performance Test Code on Gas Turbines (shaft power from the
       generator output and its losses).
    """
    Ps = np.asarray(shaft_power, dtype=np.float64)
    eta = np.asarray(generator_efficiency, dtype=np.float64)
    mech = np.asarray(mechanical_loss, dtype=np.float64)
    _, status = _loss_status(eta, mech)
    shape = np.broadcast(Ps, eta, mech).shape
    status = np.broadcast_to(status, shape).copy()
    out = eta * (Ps - mech)
    flag(status, np.isnan(out) & (status == 0), Reason.INPUT_MISSING)
    flag(status, ~np.isnan(out) & ~(out > 0.0), Reason.INPUT_NONPHYSICAL)
    out = np.where(status != 0, np.nan, out)
    return out, status
