"""Turbine: isentropic efficiency and power from the inlet and exhaust states (station 3 → 4).

Equations, per kg of exhaust gas (composition frozen through the expansion)::

    T4s   : s(T4s, p4) = s(T3, p3)                                                (1)
    eta_t = (h3 - h4) / (h3 - h4s)                                                (2)
    w_t   = h3 - h4,  W_t = m_g w_t                                               (3)

Enthalpy and entropy include the real-gas departure (:func:`models.properties.mixtures.residual`) at
each state's pressure.  With the heat-balance (mixed-mean) turbine inlet temperature of a cooled
turbine, eta_t is an *equivalent uncooled* efficiency: it lumps the cooling-air mixing losses
and reads lower than the blade-row efficiency.

References
----------
.. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen et al., *Gas Turbine Theory*,
   7th ed., Pearson, 2017, section 2.1.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.properties import mixtures
from models.status import Reason, flag

__all__ = ["TURBINE_EFFICIENCY_BAND", "TurbineState", "turbine", "turbine_exit_temperature"]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]

#: Plausible turbine isentropic efficiency on the heat-balance inlet temperature [-]
#: (common practice); outside it ``EFFICIENCY_IMPLAUSIBLE`` is set as a warning.
TURBINE_EFFICIENCY_BAND: tuple[float, float] = (0.80, 0.95)


@dataclass(frozen=True)
class TurbineState:
    """Result of :func:`turbine`.

    Attributes
    ----------
    T4s : isentropic exhaust temperature [K]
    h3, h4, h4s : enthalpies [J/kg gas] (sensible, real gas)
    isentropic_efficiency : eta_t [-]
    specific_work : w_t = h3 - h4 [J/kg gas]
    status : Reason bits
    """

    T4s: FloatArray
    h3: FloatArray
    h4: FloatArray
    h4s: FloatArray
    isentropic_efficiency: FloatArray
    specific_work: FloatArray
    status: StatusArray


def turbine(
    exhaust: mixtures.Mixture,
    T3: ArrayLike,
    p3: ArrayLike,
    T4: ArrayLike,
    p4: ArrayLike,
    *,
    h3: ArrayLike | None = None,
) -> TurbineState:
    r"""Turbine performance from inlet and exhaust states.

    Parameters
    ----------
    exhaust : models.properties.mixtures.Mixture
        Exhaust-gas composition (e.g. :attr:`models.components.combustor.CombustorState.exhaust`).
    T3, p3 : array_like
        Turbine inlet temperature [K] and pressure [Pa].
    T4, p4 : array_like
        Exhaust temperature [K] and pressure [Pa].
    h3 : array_like, optional
        Inlet enthalpy [J/kg] if already known from the combustor balance (keeps the energy
        balance exact); default ``exhaust.h_real(T3, p3)``.

    Returns
    -------
    TurbineState

    Notes
    -----
    .. math::

        \eta_t = \frac{h_3 - h_4}{h_3 - h(T_{4s}, p_4)}, \qquad s(T_{4s}, p_4) = s(T_3, p_3),
        \qquad w_t = h_3 - h_4

    Errors (NaN): INPUT_MISSING, INPUT_NONPHYSICAL, PRESSURE_RATIO_INVALID (p3 <= p4),
    NOT_CONVERGED, EFFICIENCY_OUT_OF_RANGE.  Warning: EFFICIENCY_IMPLAUSIBLE outside
    :data:`TURBINE_EFFICIENCY_BAND`.

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
       *Gas Turbine Theory*, 7th ed., Pearson, 2017, section 2.1.
    """
    T3a, p3a, T4a, p4a = (np.asarray(v, dtype=np.float64) for v in (T3, p3, T4, p4))
    shape = np.broadcast(T3a, p3a, T4a, p4a, exhaust.M).shape
    status = np.zeros(shape, dtype=np.uint32)
    miss = np.isnan(T3a) | np.isnan(p3a) | np.isnan(T4a) | np.isnan(p4a)
    flag(status, np.broadcast_to(miss, shape), Reason.INPUT_MISSING)
    nonphys = ~miss & ~((T3a > 0) & (T4a > 0) & (p3a > 0) & (p4a > 0))
    flag(status, np.broadcast_to(nonphys, shape), Reason.INPUT_NONPHYSICAL)
    ok = ~miss & ~nonphys
    flag(status, np.broadcast_to(ok & ~(p3a > p4a), shape), Reason.PRESSURE_RATIO_INVALID)
    bad = status != 0
    T3c = np.where(bad, 1400.0, T3a)
    p3c = np.where(bad, 1.4e6, p3a)
    T4c = np.where(bad, 800.0, T4a)
    p4c = np.where(bad, 1.03e5, p4a)
    T4s, st = exhaust.isentropic_T(T3c, p3c, p4c, real_gas=True)
    status |= st
    h3v = exhaust.h_real(T3c, p3c) if h3 is None else np.asarray(h3, dtype=np.float64)
    h4 = exhaust.h_real(T4c, p4c)
    h4s = exhaust.h_real(T4s, p4c)
    eta = (h3v - h4) / (h3v - h4s)
    flag(status, (status == 0) & ~((eta > 0) & (eta <= 1)), Reason.EFFICIENCY_OUT_OF_RANGE)
    lo, hi = TURBINE_EFFICIENCY_BAND
    flag(status, (status == 0) & ~((eta >= lo) & (eta <= hi)), Reason.EFFICIENCY_IMPLAUSIBLE)
    err = (status & ~np.uint32(Reason.EFFICIENCY_IMPLAUSIBLE)) != 0

    def nan(a: FloatArray) -> FloatArray:
        return np.where(err, np.nan, a)

    return TurbineState(
        T4s=nan(T4s),
        h3=nan(np.broadcast_to(h3v, shape)),
        h4=nan(h4),
        h4s=nan(h4s),
        isentropic_efficiency=nan(eta),
        specific_work=nan(h3v - h4),
        status=status,
    )


def turbine_exit_temperature(
    exhaust: mixtures.Mixture,
    T3: ArrayLike,
    p3: ArrayLike,
    p4: ArrayLike,
    isentropic_efficiency: ArrayLike,
) -> tuple[FloatArray, StatusArray]:
    r"""Forward: exhaust temperature [K] from the inlet state and eta_t.

    ``h4 = h3 - eta_t (h3 - h4s)``, then T4 from h4 at p4 (Newton, real gas).

    Notes
    -----
    .. math::

        h(T_4, p_4) = h_3 - \eta_t \left(h_3 - h(T_{4s}, p_4)\right)

    References
    ----------
    .. [1] H. I. H. Saravanamuttoo, G. F. C. Rogers, H. Cohen, P. V. Straznicky, A. C. Nix,
       *Gas Turbine Theory*, 7th ed., Pearson, 2017, section 2.1.
    """
    T4s, st = exhaust.isentropic_T(T3, p3, p4, real_gas=True)
    h3 = exhaust.h_real(T3, p3)
    h4 = h3 - np.asarray(isentropic_efficiency) * (h3 - exhaust.h_real(T4s, p4))
    T4, st2 = exhaust.T_from_h(h4, T_guess=T4s, p=p4)
    return T4, st | st2
