"""Ideal comparison cycles of reciprocating engines: Otto, Diesel and dual (limited-pressure).

Length (about 850 lines, above the project's 600): Otto, Diesel and dual cycles, each with
constant and variable properties, share the state types and the isentrope solver.

A closed system of unit mass of working fluid goes round four or five processes between
bottom dead centre (BDC) and top dead centre (TDC).  Corners, in the order of
:data:`CORNERS`::

    1   BDC, start of compression               (T1, p1, v1)
    2   TDC, end of isentropic compression      v2 = v1 / r
    3a  end of heat addition at constant volume v3a = v2,   p3a = alpha p2
    3b  end of heat addition at constant p      p3b = p3a,  v3b = rc v3a
    4   BDC, end of isentropic expansion        v4 = v1

The Otto cycle is the dual cycle with rc = 1 (3b = 3a), the Diesel cycle the dual cycle with
alpha = 1 (3a = 2).  Heat is rejected at constant volume (4 -> 1).  Per unit mass::

    q_in  = (u3a - u2) + (h3b - h3a)                                              (1)
    q_out = u4 - u1                                                               (2)
    w_net = q_in - q_out,   eta = w_net / q_in,   mep = w_net / (v1 - v2)         (3)

Two property models
-------------------
*Constant specific heats* (``fluid=None``, the air-standard form): ideal gas with fixed gamma
and gas constant R; every corner in closed form, and the efficiencies reduce to the textbook
relations (:func:`otto_efficiency`, :func:`diesel_efficiency`, :func:`dual_efficiency`).

*Temperature-dependent properties* (``fluid=`` a :class:`models.properties.mixtures.Mixture`): the
same ideal gas of frozen composition with NASA-polynomial h(T) and s°(T).  Isentropes by volume
follow ``s°(T_b) - R ln T_b = s°(T_a) - R ln T_a + R ln(v_a / v_b)`` (Newton, vectorised, bounded);
heat at constant volume raises u = h - R T, at constant pressure h.  No real-gas departure:
cylinder pressures exceed the 6 MPa of :func:`models.properties.mixtures.residual`, and the ideal
cycle is an ideal-gas construct by definition.

How a cycle is specified
------------------------
Either by its ratios (compression ratio r, peak-pressure ratio alpha = p3a/p2, cut-off ratio
rc = v3b/v3a) or by the heat added per unit mass, ``cycle_heat_input`` (from the fuel burnt per
cycle and the trapped charge): the Otto cycle adds it all at constant volume, the Diesel cycle
all at constant pressure, and the dual cycle at constant volume until the measured
``peak_cylinder_pressure`` is reached and the rest at constant pressure.  A peak pressure
below the compression end pressure p2 (the cycle becomes a Diesel cycle) or above what the
heat input can reach at constant volume (an Otto cycle) is clipped and flagged
``PEAK_PRESSURE_CLIPPED`` (a warning).

Status (per element; NaN on error): ``INPUT_MISSING`` (NaN input), ``INPUT_NONPHYSICAL``
(T1 <= 0, p1 <= 0, r <= 1, alpha < 1, rc < 1, q < 0, gamma <= 1, R <= 0, peak pressure <= 0),
``TEMPERATURE_OUT_OF_RANGE`` (a corner outside 200-3000 K, variable properties only),
``NOT_CONVERGED``; warning ``PEAK_PRESSURE_CLIPPED``.

References
----------
.. [1] J. B. Heywood, *Internal Combustion Engine Fundamentals*, 2nd ed., McGraw-Hill, 2018,
   ch. 5 (ideal models of engine cycles: constant-volume, constant-pressure and
   limited-pressure cycles).
.. [2] Y. A. Çengel, M. A. Boles, *Thermodynamics: An Engineering Approach*, McGraw-Hill,
   ch. 9 (Otto, Diesel and dual cycles; air-standard assumptions).
.. [3] B. J. McBride, S. Gordon, M. A. Reno, NASA TM-4513, 1993 (property data of
   :mod:`models.properties.mixtures`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal, Protocol

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.properties import humid_air, mixtures
from models.status import ModelInputError, Reason, flag

__all__ = [
    "CORNERS",
    "GAMMA_AIR",
    "R_DRY_AIR",
    "ReciprocatingCycle",
    "diesel_cycle",
    "diesel_efficiency",
    "dual_cycle",
    "dual_efficiency",
    "otto_cycle",
    "otto_efficiency",
]

FloatArray = NDArray[np.float64]
StatusArray = NDArray[np.uint32]

#: Corner names, the order of the last axis of :attr:`ReciprocatingCycle.T`, ``.p``, ``.v``.
CORNERS: tuple[str, ...] = ("1", "2", "3a", "3b", "4")
#: Ratio of specific heats of the cold-air standard [-].
GAMMA_AIR: float = 1.4
#: Specific gas constant of :data:`models.properties.humid_air.DRY_AIR` [J/(kg K)] (287.04).
R_DRY_AIR: float = float(mixtures.R_UNIVERSAL / (humid_air.DRY_AIR @ mixtures.MOLAR_MASS))

_MAX_ITER = 25
_T_TOL = 1e-9  # K, Newton step at convergence


def _f(a: ArrayLike) -> FloatArray:
    return np.asarray(a, dtype=np.float64)


# --------------------------------------------------------------------------------------------
# Closed-form air-standard efficiencies
# --------------------------------------------------------------------------------------------
def _ratio_status(
    shape: tuple[int, ...], gamma: FloatArray, *pairs: tuple[FloatArray, float, bool]
) -> StatusArray:
    """Status of ratio inputs: (value, bound, strict) means value > bound (strict) or >=."""
    status = np.zeros(shape, dtype=np.uint32)
    for val, bound, strict in (*pairs, (gamma, 1.0, True)):
        vb = np.broadcast_to(val, shape)
        miss = np.isnan(vb)
        with np.errstate(invalid="ignore"):
            ok = vb > bound if strict else vb >= bound
        flag(status, miss, Reason.INPUT_MISSING)
        flag(status, ~miss & ~ok, Reason.INPUT_NONPHYSICAL)
    return status


def otto_efficiency(
    compression_ratio: ArrayLike, gamma: ArrayLike = GAMMA_AIR
) -> tuple[FloatArray, StatusArray]:
    r"""Thermal efficiency of the air-standard Otto cycle (constant specific heats).

    Parameters
    ----------
    compression_ratio : array_like
        r = V_BDC / V_TDC [-], > 1.
    gamma : array_like, optional
        Ratio of specific heats cp/cv [-], > 1 (default 1.4, cold air).

    Returns
    -------
    eta : ndarray
        [-]; NaN where status is not zero.
    status : ndarray of uint32
        ``INPUT_MISSING``, ``INPUT_NONPHYSICAL`` (r <= 1, gamma <= 1).

    Notes
    -----
    .. math:: \eta_{Otto} = 1 - r^{1-\gamma}

    Independent of the heat added; valid for the ideal cycle on an ideal gas of constant
    specific heats only (with variable properties use :func:`otto_cycle` with ``fluid``).

    References
    ----------
    Heywood (2018), section 5.3, eq. for the constant-volume cycle [1]_ of the module.

    Examples
    --------
    >>> eta, _ = otto_efficiency([8.0, 12.0])
    >>> [round(float(e), 4) for e in eta]
    [0.5647, 0.6299]
    """
    r = _f(compression_ratio)
    g = _f(gamma)
    status = _ratio_status(np.broadcast(r, g).shape, g, (r, 1.0, True))
    with np.errstate(invalid="ignore", divide="ignore"):
        eta = 1.0 - r ** (1.0 - g)
    return np.where(status != 0, np.nan, eta), status


def diesel_efficiency(
    compression_ratio: ArrayLike, cutoff_ratio: ArrayLike, gamma: ArrayLike = GAMMA_AIR
) -> tuple[FloatArray, StatusArray]:
    r"""Thermal efficiency of the air-standard Diesel cycle (constant specific heats).

    Parameters
    ----------
    compression_ratio : array_like
        r = V_BDC / V_TDC [-], > 1.
    cutoff_ratio : array_like
        rc = V_3b / V_TDC, volume at the end of heat addition over the TDC volume [-], >= 1.
    gamma : array_like, optional
        cp/cv [-], > 1 (default 1.4).

    Returns
    -------
    eta : ndarray
        [-]; NaN where status is not zero.
    status : ndarray of uint32
        ``INPUT_MISSING``, ``INPUT_NONPHYSICAL`` (r <= 1, rc < 1, gamma <= 1).

    Notes
    -----
    .. math::
        \eta_{Diesel} = 1 - r^{1-\gamma} \frac{r_c^{\gamma} - 1}{\gamma (r_c - 1)}

    At rc = 1 the limit is the Otto efficiency (taken exactly there).

    References
    ----------
    Heywood (2018), section 5.3 (constant-pressure cycle); Çengel & Boles, ch. 9 (Diesel
    cycle).

    Examples
    --------
    >>> eta, _ = diesel_efficiency(18.0, [1.0, 2.0, 3.0])
    >>> [round(float(e), 4) for e in eta]
    [0.6853, 0.6316, 0.5891]
    """
    r = _f(compression_ratio)
    rc = _f(cutoff_ratio)
    g = _f(gamma)
    status = _ratio_status(np.broadcast(r, rc, g).shape, g, (r, 1.0, True), (rc, 1.0, False))
    return _dual_eta(r, np.ones_like(rc), rc, g, status), status


def dual_efficiency(
    compression_ratio: ArrayLike,
    peak_pressure_ratio: ArrayLike,
    cutoff_ratio: ArrayLike,
    gamma: ArrayLike = GAMMA_AIR,
) -> tuple[FloatArray, StatusArray]:
    r"""Thermal efficiency of the air-standard dual (limited-pressure) cycle.

    Parameters
    ----------
    compression_ratio : array_like
        r = V_BDC / V_TDC [-], > 1.
    peak_pressure_ratio : array_like
        alpha = p_3a / p_2, peak pressure over compression end pressure [-], >= 1.
    cutoff_ratio : array_like
        rc = V_3b / V_TDC [-], >= 1.
    gamma : array_like, optional
        cp/cv [-], > 1 (default 1.4).

    Returns
    -------
    eta : ndarray
        [-]; NaN where status is not zero.
    status : ndarray of uint32
        ``INPUT_MISSING``, ``INPUT_NONPHYSICAL`` (r <= 1, alpha < 1, rc < 1, gamma <= 1).

    Notes
    -----
    .. math::
        \eta_{dual} = 1 - r^{1-\gamma}
        \frac{\alpha r_c^{\gamma} - 1}{(\alpha - 1) + \alpha \gamma (r_c - 1)}

    alpha = 1 gives the Diesel, rc = 1 the Otto efficiency.

    References
    ----------
    Heywood (2018), section 5.3 (limited-pressure cycle).

    Examples
    --------
    >>> eta, _ = dual_efficiency(16.0, [1.0, 1.5], [2.0, 1.5])
    >>> [round(float(e), 4) for e in eta]
    [0.6138, 0.6497]
    """
    r = _f(compression_ratio)
    a = _f(peak_pressure_ratio)
    rc = _f(cutoff_ratio)
    g = _f(gamma)
    shape = np.broadcast(r, a, rc, g).shape
    status = _ratio_status(shape, g, (r, 1.0, True), (a, 1.0, False), (rc, 1.0, False))
    return _dual_eta(r, a, rc, g, status), status


def _dual_eta(
    r: FloatArray, a: FloatArray, rc: FloatArray, g: FloatArray, status: StatusArray
) -> FloatArray:
    with np.errstate(invalid="ignore", divide="ignore"):
        den = (a - 1.0) + a * g * (rc - 1.0)
        frac = np.where(den > 0.0, (a * rc**g - 1.0) / np.where(den > 0.0, den, 1.0), 1.0)
        eta = 1.0 - r ** (1.0 - g) * frac
    return np.where(status != 0, np.nan, eta)


# --------------------------------------------------------------------------------------------
# Property models
# --------------------------------------------------------------------------------------------
class _Props(Protocol):
    R: FloatArray

    def u(self, T: FloatArray) -> FloatArray: ...
    def h(self, T: FloatArray) -> FloatArray: ...
    def isentropic_v(self, T: FloatArray, ratio: FloatArray, status: StatusArray) -> FloatArray:
        """T at the end of an isentrope from T with v_start / v_end = ratio."""
        ...

    def T_from_u(self, u: FloatArray, guess: FloatArray, status: StatusArray) -> FloatArray: ...
    def T_from_h(self, h: FloatArray, guess: FloatArray, status: StatusArray) -> FloatArray: ...


class _ConstantCp:
    """Ideal gas with constant cp, cv; u = cv T, h = cp T (0 K reference)."""

    def __init__(self, gamma: FloatArray, R: FloatArray) -> None:
        self.g = gamma
        self.R = R
        with np.errstate(invalid="ignore", divide="ignore"):
            self.cv = R / (gamma - 1.0)
        self.cp = self.cv + R

    def u(self, T: FloatArray) -> FloatArray:
        return np.asarray(self.cv * T, dtype=np.float64)

    def h(self, T: FloatArray) -> FloatArray:
        return np.asarray(self.cp * T, dtype=np.float64)

    def isentropic_v(self, T: FloatArray, ratio: FloatArray, status: StatusArray) -> FloatArray:
        return np.asarray(T * ratio ** (self.g - 1.0), dtype=np.float64)

    def T_from_u(self, u: FloatArray, guess: FloatArray, status: StatusArray) -> FloatArray:
        return np.asarray(u / self.cv, dtype=np.float64)

    def T_from_h(self, h: FloatArray, guess: FloatArray, status: StatusArray) -> FloatArray:
        return np.asarray(h / self.cp, dtype=np.float64)


class _Variable:
    """Ideal gas of frozen composition with NASA-polynomial properties (a mixture)."""

    def __init__(self, mix: mixtures.Mixture) -> None:
        self.mix = mix
        self.R = mix.R

    def u(self, T: FloatArray) -> FloatArray:
        return np.asarray(self.mix.h(T) - self.R * T, dtype=np.float64)

    def h(self, T: FloatArray) -> FloatArray:
        return np.asarray(self.mix.h(T), dtype=np.float64)

    def _newton(
        self,
        fun: Literal["u", "s"],
        target: FloatArray,
        T: FloatArray,
        status: StatusArray,
    ) -> FloatArray:
        """Solve u(T) = target or s°(T) - R ln T = target for T (bounded Newton)."""
        T = np.clip(np.array(T, dtype=np.float64), mixtures.T_MIN, mixtures.T_MAX)
        done = np.zeros(T.shape, dtype=bool)
        pinned = np.zeros(T.shape, dtype=bool)
        for _ in range(_MAX_ITER):
            cv = self.mix.cp(T) - self.R
            if fun == "u":
                res = self.u(T) - target
                dT = res / cv
            else:
                res = self.mix.s0(T) - self.R * np.log(T) - target
                dT = res * T / cv
            T_new = np.clip(T - dT, mixtures.T_MIN, mixtures.T_MAX)
            pinned = (T_new != T - dT) & (np.abs(T_new - T) < _T_TOL)
            done = np.abs(T_new - T) < _T_TOL * np.maximum(1.0, T)
            T = T_new
            if done.all():
                break
        oor = pinned & (status == 0)
        flag(status, oor, Reason.TEMPERATURE_OUT_OF_RANGE)
        flag(status, ~done & ~oor & (status == 0), Reason.NOT_CONVERGED)
        return T

    def isentropic_v(self, T: FloatArray, ratio: FloatArray, status: StatusArray) -> FloatArray:
        target = self.mix.s0(T) - self.R * np.log(T) + self.R * np.log(ratio)
        g = self.mix.gamma(T)
        return self._newton("s", target, T * ratio ** (g - 1.0), status)

    def T_from_u(self, u: FloatArray, guess: FloatArray, status: StatusArray) -> FloatArray:
        cv = self.mix.cp(guess) - self.R
        return self._newton("u", u, guess + (u - self.u(guess)) / cv, status)

    def T_from_h(self, h: FloatArray, guess: FloatArray, status: StatusArray) -> FloatArray:
        T, st = self.mix.T_from_h(h, T_guess=guess)
        status |= st
        return np.asarray(T, dtype=np.float64)


def _check_range(status: StatusArray, *Ts: FloatArray) -> None:
    for T in Ts:
        with np.errstate(invalid="ignore"):
            bad = ~((T >= mixtures.T_MIN) & (T <= mixtures.T_MAX))
        flag(status, bad & (status == 0), Reason.TEMPERATURE_OUT_OF_RANGE)


# --------------------------------------------------------------------------------------------
# The cycle
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class ReciprocatingCycle:
    """States and figures of an ideal Otto, Diesel or dual cycle, per unit mass of charge.

    Arrays share the batch shape ``(...)``; the corner arrays have a last axis of length 5 in
    the order of :data:`CORNERS` (1, 2, 3a, 3b, 4).  NaN where ``status`` has an error bit.

    Attributes
    ----------
    T : ndarray (..., 5)
        Temperature per corner [K].
    p : ndarray (..., 5)
        Pressure per corner [Pa].
    v : ndarray (..., 5)
        Specific volume per corner [m3/kg].
    compression_ratio : ndarray
        r = v1 / v2 [-].
    peak_pressure_ratio : ndarray
        alpha = p3a / p2 [-] (1 for the Diesel cycle).
    cutoff_ratio : ndarray
        rc = v3b / v3a [-] (1 for the Otto cycle).
    cycle_heat_input : ndarray
        q_in, eq. (1) of the module [J/kg].
    cycle_heat_rejected : ndarray
        q_out = u4 - u1 [J/kg].
    net_work : ndarray
        w_net = q_in - q_out [J/kg].
    efficiency : ndarray
        w_net / q_in [-].
    mean_effective_pressure : ndarray
        w_net / (v1 - v2) [Pa].
    status : ndarray of uint32
        :class:`models.status.Reason` bits.
    """

    T: FloatArray
    p: FloatArray
    v: FloatArray
    compression_ratio: FloatArray
    peak_pressure_ratio: FloatArray
    cutoff_ratio: FloatArray
    cycle_heat_input: FloatArray
    cycle_heat_rejected: FloatArray
    net_work: FloatArray
    efficiency: FloatArray
    mean_effective_pressure: FloatArray
    status: StatusArray

    def corner(self, name: str) -> tuple[FloatArray, FloatArray, FloatArray]:
        """(T [K], p [Pa], v [m3/kg]) of one corner, ``name`` in :data:`CORNERS`."""
        if name not in CORNERS:
            raise ModelInputError("name", name, f"one of {', '.join(CORNERS)}")
        i = CORNERS.index(name)
        return self.T[..., i], self.p[..., i], self.v[..., i]

    @property
    def peak_pressure(self) -> FloatArray:
        """Highest pressure of the cycle, p3a = p3b [Pa]."""
        return self.p[..., 2]

    @property
    def peak_temperature(self) -> FloatArray:
        """Highest temperature of the cycle, T3b [K]."""
        return self.T[..., 3]


def _props(
    fluid: mixtures.Mixture | None, gamma: ArrayLike, gas_constant: ArrayLike
) -> tuple[_Props, tuple[int, ...], FloatArray, FloatArray]:
    if fluid is None:
        g = _f(gamma)
        R = _f(gas_constant)
        return _ConstantCp(g, R), np.broadcast(g, R).shape, g, R
    if not isinstance(fluid, mixtures.Mixture):
        raise ModelInputError(
            "fluid", type(fluid).__name__, "a models.properties.mixtures.Mixture or None"
        )
    return _Variable(fluid), fluid.shape, np.asarray(2.0), fluid.R


@dataclass(frozen=True)
class _Fluid:
    """The property model asked for: a mixture, or constant gamma and R."""

    fluid: mixtures.Mixture | None
    gamma: ArrayLike
    gas_constant: ArrayLike


def _cycle(
    kind: Literal["otto", "diesel", "dual"],
    T1: ArrayLike,
    p1: ArrayLike,
    compression_ratio: ArrayLike,
    how: _Fluid,
    *,
    peak_pressure_ratio: ArrayLike | None = None,
    cutoff_ratio: ArrayLike | None = None,
    cycle_heat_input: ArrayLike | None = None,
    peak_cylinder_pressure: ArrayLike | None = None,
) -> ReciprocatingCycle:
    mode = "ratios" if cycle_heat_input is None else "heat"
    fluid = how.fluid
    props, pshape, g, R = _props(fluid, how.gamma, how.gas_constant)
    T1a, p1a, r = _f(T1), _f(p1), _f(compression_ratio)
    al, rc, q, pmax = (
        _f(1.0 if peak_pressure_ratio is None else peak_pressure_ratio),
        _f(1.0 if cutoff_ratio is None else cutoff_ratio),
        _f(0.0 if cycle_heat_input is None else cycle_heat_input),
        _f(np.inf if peak_cylinder_pressure is None else peak_cylinder_pressure),
    )
    shape = np.broadcast_shapes(
        T1a.shape, p1a.shape, r.shape, al.shape, rc.shape, q.shape, pmax.shape, pshape
    )
    status = np.zeros(shape, dtype=np.uint32)
    checks: list[tuple[FloatArray, float, bool, float]] = [
        (T1a, 0.0, True, 300.0),
        (p1a, 0.0, True, 1.0e5),
        (r, 1.0, True, 10.0),
        (al, 1.0, False, 1.0),
        (rc, 1.0, False, 1.0),
        (q, 0.0, False, 1.0e6),
        (pmax, 0.0, True, np.inf),
        (g, 1.0, True, 1.4),
        (np.asarray(R), 0.0, True, 287.0),
    ]
    safe: list[FloatArray] = []
    for val, bound, strict, fill in checks:
        vb = np.broadcast_to(val, shape)
        miss = np.isnan(vb)
        with np.errstate(invalid="ignore"):
            ok = vb > bound if strict else vb >= bound
        flag(status, miss, Reason.INPUT_MISSING)
        flag(status, ~miss & ~ok, Reason.INPUT_NONPHYSICAL)
        safe.append(np.where(miss | ~ok, fill, vb))
    T1s, p1s, rs, als, rcs, qs, pms = safe[:7]
    if fluid is None:
        props = _ConstantCp(safe[7], safe[8])
    else:
        _check_range(status, T1s)
        T1s = np.where(status != 0, 300.0, T1s)
    Rb = np.broadcast_to(props.R, shape)

    v1 = Rb * T1s / p1s
    v2 = v1 / rs
    T2 = props.isentropic_v(T1s, rs, status)
    p2 = Rb * T2 / v2
    u2 = props.u(T2)
    if mode == "ratios":
        T3a = als * T2
        T3b = rcs * T3a
        if fluid is not None:
            _check_range(status, T3a, T3b)
    else:
        T_cv = props.T_from_u(u2 + qs, T2, status)  # all heat at constant volume
        if kind == "otto":
            T3a = T_cv
            T3b = T3a
        else:
            if kind == "diesel":
                T3a = np.array(T2)
            else:
                with np.errstate(invalid="ignore", over="ignore"):
                    T_peak = T2 * (pms / p2)
                below = pms < p2  # peak below compression end: a Diesel cycle
                above = T_peak > T_cv  # the heat cannot reach the peak: an Otto cycle
                flag(status, (below | above) & (status == 0), Reason.PEAK_PRESSURE_CLIPPED)
                T3a = np.where(below, T2, np.where(above, T_cv, T_peak))
            q_rest = np.maximum(qs - (props.u(T3a) - u2), 0.0)
            T3b = props.T_from_h(props.h(T3a) + q_rest, T3a, status)
    v3b = Rb * T3b / (Rb * T3a / v2)
    T4 = props.isentropic_v(T3b, v3b / v1, status)
    p3 = Rb * T3a / v2
    q_in = (props.u(T3a) - u2) + (props.h(T3b) - props.h(T3a))
    q_out = props.u(T4) - props.u(T1s)
    w = q_in - q_out
    bad = status & ~np.uint32(Reason.PEAK_PRESSURE_CLIPPED) != 0

    def nan(a: FloatArray) -> FloatArray:
        a = np.broadcast_to(a, shape)
        return np.where(bad, np.nan, a) if bad.any() else np.array(a, dtype=np.float64)

    def corners(*a: FloatArray) -> FloatArray:
        return np.stack([nan(x) for x in a], axis=-1)

    with np.errstate(invalid="ignore", divide="ignore"):
        eta = np.where(q_in > 0.0, w / np.where(q_in > 0.0, q_in, 1.0), np.nan)
    return ReciprocatingCycle(
        T=corners(T1s, T2, T3a, T3b, T4),
        p=corners(p1s, p2, p3, p3, Rb * T4 / v1),
        v=corners(v1, v2, v2, v3b, v1),
        compression_ratio=nan(rs),
        peak_pressure_ratio=nan(T3a / T2),
        cutoff_ratio=nan(T3b / T3a),
        cycle_heat_input=nan(q_in),
        cycle_heat_rejected=nan(q_out),
        net_work=nan(w),
        efficiency=nan(eta),
        mean_effective_pressure=nan(w / (v1 - v2)),
        status=status,
    )


def _one_of(who: str, **given: ArrayLike | None) -> None:
    named = [k for k, v in given.items() if v is not None]
    if len(named) != 1:
        keys = " or ".join(given)
        raise ModelInputError(who, named or None, f"exactly one of {keys}")


def otto_cycle(
    T1: ArrayLike,
    p1: ArrayLike,
    compression_ratio: ArrayLike,
    *,
    cycle_heat_input: ArrayLike | None = None,
    peak_pressure_ratio: ArrayLike | None = None,
    fluid: mixtures.Mixture | None = None,
    gamma: ArrayLike = GAMMA_AIR,
    gas_constant: ArrayLike = R_DRY_AIR,
) -> ReciprocatingCycle:
    r"""Ideal Otto cycle (all heat added at constant volume).

    Parameters
    ----------
    T1 : array_like
        Temperature at BDC before compression [K].
    p1 : array_like
        Pressure at BDC before compression [Pa].
    compression_ratio : array_like
        r = v1/v2 [-], > 1.
    cycle_heat_input : array_like, optional
        Heat added per unit mass of charge [J/kg], >= 0.  Give this or ``peak_pressure_ratio``.
    peak_pressure_ratio : array_like, optional
        alpha = p3/p2 [-], >= 1.
    fluid : models.properties.mixtures.Mixture, optional
        None (default): constant specific heats from ``gamma`` and ``gas_constant`` (the
        air-standard cycle).  A mixture: its temperature-dependent properties.
    gamma : array_like, optional
        cp/cv for constant specific heats [-] (default 1.4).
    gas_constant : array_like, optional
        R for constant specific heats [J/(kg K)] (default :data:`R_DRY_AIR`).

    Returns
    -------
    ReciprocatingCycle
        Corners 3a and 3b coincide (rc = 1).

    Raises
    ------
    ModelInputError
        Neither or both of ``cycle_heat_input`` and ``peak_pressure_ratio``; ``fluid`` not a
        Mixture.

    Notes
    -----
    .. math::

        u(T_3) = u(T_2) + q, \qquad \eta_{Otto} = 1 - r^{1 - \gamma} \;\text{(constant } c_v)

    Equations (1)-(3) of the module.  With constant specific heats
    ``T2 = T1 r^(gamma-1)``, ``T3 = T2 + q/cv``, ``T4 = T3 r^(1-gamma)`` and the efficiency
    equals :func:`otto_efficiency`; with a mixture it falls as the heat input rises (cv grows
    with temperature).  Valid for an ideal gas of frozen composition; corners must stay in
    200-3000 K with a mixture.

    References
    ----------
    Heywood (2018), section 5.3; Çengel & Boles, ch. 9.

    Examples
    --------
    Air standard, r = 10, 300 K, 100 kPa, 1800 kJ/kg:

    >>> c = otto_cycle(300.0, 1.0e5, 10.0, cycle_heat_input=1.8e6)
    >>> round(float(c.efficiency), 4), round(float(c.peak_temperature))
    (0.6019, 3262)
    """
    _one_of(
        "otto_cycle", cycle_heat_input=cycle_heat_input, peak_pressure_ratio=peak_pressure_ratio
    )
    how = _Fluid(fluid, gamma, gas_constant)
    return _cycle(
        "otto",
        T1,
        p1,
        compression_ratio,
        how,
        cycle_heat_input=cycle_heat_input,
        peak_pressure_ratio=peak_pressure_ratio,
    )


def diesel_cycle(
    T1: ArrayLike,
    p1: ArrayLike,
    compression_ratio: ArrayLike,
    *,
    cycle_heat_input: ArrayLike | None = None,
    cutoff_ratio: ArrayLike | None = None,
    fluid: mixtures.Mixture | None = None,
    gamma: ArrayLike = GAMMA_AIR,
    gas_constant: ArrayLike = R_DRY_AIR,
) -> ReciprocatingCycle:
    r"""Ideal Diesel cycle (all heat added at constant pressure).

    Parameters
    ----------
    T1 : array_like
        Temperature at BDC before compression [K].
    p1 : array_like
        Pressure at BDC before compression [Pa].
    compression_ratio : array_like
        r = v1/v2 [-], > 1.
    cycle_heat_input : array_like, optional
        Heat added per unit mass of charge [J/kg], >= 0.  Give this or ``cutoff_ratio``.
    cutoff_ratio : array_like, optional
        rc = v3/v2 [-], >= 1.
    fluid : models.properties.mixtures.Mixture, optional
        None: constant specific heats (air standard); a mixture: its variable properties.
    gamma : array_like, optional
        cp/cv for constant specific heats [-] (default 1.4).
    gas_constant : array_like, optional
        R for constant specific heats [J/(kg K)] (default :data:`R_DRY_AIR`).

    Returns
    -------
    ReciprocatingCycle
        Corners 2 and 3a coincide (alpha = 1).  Given ``cycle_heat_input``, ``cutoff_ratio`` is
        the estimate rc = T3/T2 of the heat added at constant pressure.

    Raises
    ------
    ModelInputError
        Neither or both of ``cycle_heat_input`` and ``cutoff_ratio``; ``fluid`` not a Mixture.

    Notes
    -----
    .. math::

        T_3 = T_2 + q / c_p, \quad r_c = T_3 / T_2, \quad T_4 = T_3 (r_c / r)^{\gamma - 1}

    Constant specific heats: ``T3 = T2 + q/cp`` (so ``rc = 1 + q/(cp T2)``),
    ``T4 = T3 (rc/r)^(gamma-1)``, efficiency :func:`diesel_efficiency`.  With a mixture,
    ``h(T3) = h(T2) + q``.

    References
    ----------
    Heywood (2018), section 5.3; Çengel & Boles, ch. 9.

    Examples
    --------
    >>> c = diesel_cycle(300.0, 1.0e5, 18.0, cutoff_ratio=2.0)
    >>> round(float(c.efficiency), 4), round(float(c.peak_pressure / 1e5), 1)
    (0.6316, 57.2)
    """
    _one_of("diesel_cycle", cycle_heat_input=cycle_heat_input, cutoff_ratio=cutoff_ratio)
    how = _Fluid(fluid, gamma, gas_constant)
    return _cycle(
        "diesel",
        T1,
        p1,
        compression_ratio,
        how,
        cycle_heat_input=cycle_heat_input,
        cutoff_ratio=cutoff_ratio,
    )


def dual_cycle(
    T1: ArrayLike,
    p1: ArrayLike,
    compression_ratio: ArrayLike,
    *,
    cycle_heat_input: ArrayLike | None = None,
    peak_cylinder_pressure: ArrayLike | None = None,
    peak_pressure_ratio: ArrayLike | None = None,
    cutoff_ratio: ArrayLike | None = None,
    fluid: mixtures.Mixture | None = None,
    gamma: ArrayLike = GAMMA_AIR,
    gas_constant: ArrayLike = R_DRY_AIR,
) -> ReciprocatingCycle:
    r"""Ideal dual (limited-pressure) cycle: heat at constant volume, then constant pressure.

    Parameters
    ----------
    T1 : array_like
        Temperature at BDC before compression [K].
    p1 : array_like
        Pressure at BDC before compression [Pa].
    compression_ratio : array_like
        r = v1/v2 [-], > 1.
    cycle_heat_input : array_like, optional
        Heat added per unit mass of charge [J/kg], >= 0; give it with ``peak_cylinder_pressure``.
    peak_cylinder_pressure : array_like, optional
        Measured peak cylinder (firing) pressure [Pa], > 0; the constant-volume heat addition
        stops there.
    peak_pressure_ratio : array_like, optional
        alpha = p3a/p2 [-], >= 1; give it with ``cutoff_ratio`` (instead of the heat form).
    cutoff_ratio : array_like, optional
        rc = v3b/v3a [-], >= 1.
    fluid : models.properties.mixtures.Mixture, optional
        None: constant specific heats (air standard); a mixture: its variable properties.
    gamma : array_like, optional
        cp/cv for constant specific heats [-] (default 1.4).
    gas_constant : array_like, optional
        R for constant specific heats [J/(kg K)] (default :data:`R_DRY_AIR`).

    Returns
    -------
    ReciprocatingCycle
        In the heat form, ``peak_pressure_ratio`` is p_peak/p2 and ``cutoff_ratio`` the estimate
        from the heat left for the constant-pressure part.

    Raises
    ------
    ModelInputError
        Not exactly one of the forms (cycle_heat_input + peak_cylinder_pressure,
        peak_pressure_ratio + cutoff_ratio); ``fluid`` not a Mixture.

    Notes
    -----
    .. math::

        T_{3a} = T_2 \frac{p_{peak}}{p_2}, \quad u(T_{3a}) = u(T_2) + q_v, \quad
        h(T_{3b}) = h(T_{3a}) + (q - q_v)

    Heat form: T3a = T2 p_peak/p2 and ``u(T3a) = u(T2) + q_v``; the rest, q - q_v, raises
    h at constant pressure to T3b.  A peak pressure below p2 gives the Diesel cycle, one the
    heat input cannot reach gives the Otto cycle; both set ``PEAK_PRESSURE_CLIPPED``
    (warning).  The ideal p2 uses isentropic compression from the BDC state: a real engine
    compresses with heat loss and blow-by, so a measured peak pressure near p2 is often
    clipped; read the flag.

    References
    ----------
    Heywood (2018), section 5.3 (limited-pressure cycle).

    Examples
    --------
    >>> c = dual_cycle(330.0, 3.0e5, 15.0, peak_pressure_ratio=1.5, cutoff_ratio=1.6)
    >>> round(float(c.efficiency), 4), round(float(c.peak_pressure / 1e5), 1)
    (0.6353, 199.4)
    """
    heat_form = cycle_heat_input is not None or peak_cylinder_pressure is not None
    ratio_form = peak_pressure_ratio is not None or cutoff_ratio is not None
    if heat_form == ratio_form or (
        heat_form and (cycle_heat_input is None or peak_cylinder_pressure is None)
    ):
        raise ModelInputError(
            "dual_cycle",
            "arguments",
            "cycle_heat_input with peak_cylinder_pressure, or peak_pressure_ratio with "
            "cutoff_ratio",
        )
    how = _Fluid(fluid, gamma, gas_constant)
    return _cycle(
        "dual",
        T1,
        p1,
        compression_ratio,
        how,
        cycle_heat_input=cycle_heat_input,
        peak_cylinder_pressure=peak_cylinder_pressure,
        peak_pressure_ratio=peak_pressure_ratio,
        cutoff_ratio=cutoff_ratio,
    )
