"""Degradation trends for maintenance planning: rates, wash steps, threshold forecasts, smoothing.

Length (about 670 lines, above the project's 600): one function per published method (EWMA,
wash-step detection, the piecewise degradation fit, the Fieller forecast) sharing the fit
types; half of it is documentation.

A corrected key performance indicator (KPI: corrected compressor isentropic efficiency,
corrected power, corrected heat rate ...) drifts with fired hours.  Part of the loss is
*recoverable* (compressor fouling, largely removed by a wash); the rest is *non-recoverable*
(erosion, tip clearances, seal wear; only an overhaul restores it).  This module fits both
rates from a KPI record and the fired hours of the washes, finds wash/recovery steps in a
record, forecasts when a fitted line reaches a planner's threshold, and smooths live values.

All functions take the KPI in its own unit (efficiency as a fraction, power in W, heat rate in
kJ/kWh ...) and time in fired hours [h]; rates are returned *per 1000 fired hours*,
the planners' unit.  Statistics are ordinary least squares (NumPy), with standard errors
from the residual scatter: they assume independent residuals, which a KPI sampled every
minute does not have (ambient and load cycles correlate neighbouring points).  Fit daily or
hourly steady-state means, not raw ticks, or the standard errors come out too small.

Advisory only: this is monitoring, not a protection or control system; maintenance decisions
follow the manufacturer's limits, site procedures and the judgement of qualified engineers.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal, NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from models.status import ModelInputError

__all__ = [
    "PER_1000_HOURS",
    "Crossing",
    "DegradationFit",
    "FitLine",
    "Steps",
    "detect_steps",
    "ewma",
    "ewma_step",
    "fit_degradation",
    "forecast_crossing",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.intp]

#: Fired hours per rate unit: rates are reported per 1000 fired hours.
PER_1000_HOURS = 1000.0


@dataclass(frozen=True)
class FitLine:
    """A fitted straight line with its covariance.

    ``y(t) = level + rate_per_1000h * (t - t_ref) / 1000``.

    Attributes
    ----------
    t_ref : float
        Reference time of ``level`` [fired h].
    level : float
        Fitted KPI at ``t_ref`` [KPI unit].
    rate_per_1000h : float
        Slope [KPI unit per 1000 fired h], the planners' unit.
    cov : ndarray, shape (2, 2)
        Covariance of (``level``, ``rate_per_1000h``).
    """

    t_ref: float
    level: float
    rate_per_1000h: float
    cov: FloatArray

    def value(self, t: ArrayLike) -> FloatArray:
        """Fitted KPI at fired hours ``t`` [KPI unit]."""
        u = np.asarray(t, dtype=np.float64) - self.t_ref
        return np.asarray(self.level + self.rate_per_1000h * u / PER_1000_HOURS)

    def std_error(self, t: ArrayLike) -> FloatArray:
        """Return the standard error of the line (the mean, not a new point) at ``t`` [KPI unit]."""
        u = (np.asarray(t, dtype=np.float64) - self.t_ref) / PER_1000_HOURS
        c = self.cov
        return np.asarray(np.sqrt(np.maximum(c[0, 0] + 2 * u * c[0, 1] + u * u * c[1, 1], 0.0)))


def _line(t_ref: float, level: float, slope_per_hour: float, cov_per_hour: FloatArray) -> FitLine:
    """Make a :class:`FitLine` from a slope per fired hour and the covariance of (level, slope)."""
    scale = np.array([1.0, PER_1000_HOURS])
    return FitLine(
        t_ref, level, slope_per_hour * PER_1000_HOURS, cov_per_hour * np.outer(scale, scale)
    )


_NAN_LINE = FitLine(np.nan, np.nan, np.nan, np.full((2, 2), np.nan))


@dataclass(frozen=True)
class DegradationFit:
    """Result of :func:`fit_degradation`.  Rates are per 1000 fired hours.

    Attributes
    ----------
    between_wash_rate_per_1000h, between_wash_rate_per_1000h_se : float
        Common slope within wash intervals and its standard error [KPI unit / 1000 h].  This
        is the fouling rate plus the non-recoverable rate (both act between washes).
    post_wash_rate_per_1000h, post_wash_rate_per_1000h_se : float
        Slope of the post-wash levels versus fired hours [KPI unit / 1000 h]: the
        non-recoverable part, which washing does not restore; NaN without a wash in the
        record.
    overall_rate_per_1000h, overall_rate_per_1000h_se : float
        Slope of one straight line through all points [KPI unit / 1000 h].
    r_squared : float
        Coefficient of determination of the piecewise model; NaN for a constant record.
    n : int
        Finite points used.
    n_dropped : int
        Points dropped for a non-finite time or KPI.
    n_segments : int
        Wash intervals holding at least one point.
    segment_start : ndarray
        Start of each interval [fired h]: the first point, then the wash times.
    segment_level : ndarray
        Fitted KPI at each interval's start (the post-wash level) [KPI unit].
    segment_level_se : ndarray
        Standard errors of ``segment_level`` [KPI unit].
    residual_std : float
        Residual standard deviation of the piecewise model [KPI unit].
    current : FitLine
        The line of the latest interval at the between-wash rate (what happens if no wash
        is done).
    post_wash : FitLine
        The line of the post-wash levels (what a perfect wash would give).
    overall : FitLine
        The single straight line through all points.
    t_first, t_last : float
        Earliest and latest fired hours in the record [h].
    reason : str
        ``"ok"``, or why figures are NaN / limited: ``"too_few_points"``,
        ``"no_spread_in_fired_hours"``, ``"no_wash_in_record"``, ``"constant_record"``.
    """

    between_wash_rate_per_1000h: float
    between_wash_rate_per_1000h_se: float
    post_wash_rate_per_1000h: float
    post_wash_rate_per_1000h_se: float
    overall_rate_per_1000h: float
    overall_rate_per_1000h_se: float
    r_squared: float
    n: int
    n_dropped: int
    n_segments: int
    segment_start: FloatArray
    segment_level: FloatArray
    segment_level_se: FloatArray
    residual_std: float
    current: FitLine
    post_wash: FitLine
    overall: FitLine
    t_first: float
    t_last: float
    reason: str


def _nan_fit(n: int, n_dropped: int, reason: str, t_first: float, t_last: float) -> DegradationFit:
    e = np.array([], dtype=np.float64)
    return DegradationFit(
        *(np.nan,) * 7,
        n=n,
        n_dropped=n_dropped,
        n_segments=0,
        segment_start=e,
        segment_level=e,
        segment_level_se=e,
        residual_std=np.nan,
        current=_NAN_LINE,
        post_wash=_NAN_LINE,
        overall=_NAN_LINE,
        t_first=t_first,
        t_last=t_last,
        reason=reason,
    )


def _ols_line(t: FloatArray, y: FloatArray) -> FitLine:
    """Straight line by OLS, centred at mean(t); needs >= 3 points with spread."""
    n = t.size
    tm = float(t.mean())
    u = t - tm
    stt = float(u @ u)
    slope = float(u @ (y - y.mean())) / stt
    level = float(y.mean())
    res = y - level - slope * u
    s2 = float(res @ res) / (n - 2)
    return _line(tm, level, slope, np.array([[s2 / n, 0.0], [0.0, s2 / stt]]))


def fit_degradation(
    t_fired_hours: ArrayLike,
    y: ArrayLike,
    wash_events: ArrayLike | None = None,
) -> DegradationFit:
    r"""Fit the between-wash and post-wash degradation rates of a corrected KPI.

    Parameters
    ----------
    t_fired_hours : array_like of float, shape (N,)
        Fired hours of each KPI value [h] (any order).
    y : array_like of float, shape (N,)
        Corrected KPI [its own unit]; NaN points are dropped and counted.
    wash_events : array_like of float, optional
        Fired hours of the compressor washes (or any recovery: inlet-filter change ...) [h].
        A point at or after a wash time belongs to the interval after it.

    Returns
    -------
    DegradationFit
        Rates per 1000 fired hours with standard errors, R², counts and the fitted lines.

    Notes
    -----
    Stage 1 (fixed-effects least squares): in wash interval k, starting at
    :math:`\tau_k` (the first point for k = 0, the wash time after that),

    .. math:: y_i = c_k + r\,(t_i - \tau_k) + e_i,

    one level :math:`c_k` per interval (the post-wash level) and one common slope r (the
    rate between washes), solved by ``numpy.linalg.lstsq``; the covariance is
    :math:`s^2 (X^T X)^{-1}` with :math:`s^2 = \mathrm{RSS}/(N - K - 1)`.

    Stage 2: the post-wash (non-recoverable) rate is the slope of :math:`c_k` versus
    :math:`\tau_k`.  With three or more intervals it is an OLS line whose standard error
    comes from the scatter of the levels (so washes of uneven effectiveness widen it); with
    two it is the difference quotient, its standard error propagated from stage 1 only.

    The model assumes degradation linear in fired hours within an interval and an equal
    rate in every interval; fouling often slows as deposits saturate, so fit a window of
    recent intervals rather than the whole life.  The first interval's level is taken at
    the first point, which is a post-wash level only if the record starts after a wash or
    an overhaul.

    References
    ----------
    .. [1] N. R. Draper and H. Smith, Applied Regression Analysis, 3rd ed., Wiley, 1998
       (least squares, standard errors of coefficients, R²).
    """
    t_all = np.asarray(t_fired_hours, dtype=np.float64).ravel()
    y_all = np.asarray(y, dtype=np.float64).ravel()
    if t_all.shape != y_all.shape:
        raise ModelInputError("y", y_all.shape, f"same shape as t_fired_hours {t_all.shape}")
    ok = np.isfinite(t_all) & np.isfinite(y_all)
    t = t_all[ok]
    yv = y_all[ok]
    n = int(t.size)
    n_dropped = int(t_all.size - n)
    t_last = float(t.max()) if n else np.nan
    t_first = float(t.min()) if n else np.nan

    washes = np.array([], dtype=np.float64)
    if wash_events is not None:
        washes = np.sort(np.asarray(wash_events, dtype=np.float64).ravel())
        if not np.all(np.isfinite(washes)):
            raise ModelInputError("wash_events", wash_events, "finite fired hours")
    if n < 3:
        return _nan_fit(n, n_dropped, "too_few_points", t_first, t_last)

    raw_seg = np.searchsorted(washes, t, side="right")
    used, seg = np.unique(raw_seg, return_inverse=True)
    K = int(used.size)
    tau = np.concatenate([[t.min()], washes])[used]
    if n < K + 2:
        return _nan_fit(n, n_dropped, "too_few_points", t_first, t_last)

    u = t - tau[seg]
    X = np.zeros((n, K + 1))
    X[np.arange(n), seg] = 1.0
    X[:, K] = u
    # the slope is identifiable only if some interval has spread in time
    within = u - np.bincount(seg, weights=u, minlength=K)[seg] / np.bincount(seg, minlength=K)[seg]
    if float(within @ within) <= 0.0 or np.ptp(t) <= 0.0:
        return _nan_fit(n, n_dropped, "no_spread_in_fired_hours", t_first, t_last)

    beta, *_ = np.linalg.lstsq(X, yv, rcond=None)
    res = yv - X @ beta
    rss = float(res @ res)
    dof = n - K - 1
    s2 = rss / dof
    cov = s2 * np.linalg.inv(X.T @ X)
    tss = float(((yv - yv.mean()) ** 2).sum())
    reason = "ok"
    r2 = 1.0 - rss / tss if tss > 0.0 else np.nan
    if tss == 0.0:
        reason = "constant_record"

    levels = np.asarray(beta[:K], dtype=np.float64)
    levels_se = np.sqrt(np.diag(cov)[:K])
    r = float(beta[K])
    r_se = float(np.sqrt(cov[K, K]))
    last = K - 1
    current = _line(
        float(tau[last]),
        float(levels[last]),
        r,
        np.array([[cov[last, last], cov[last, K]], [cov[K, last], cov[K, K]]]),
    )

    overall = _ols_line(t, yv)

    if K >= 3:
        post_wash = _ols_line(tau, levels)
    elif K == 2:
        dt = float(tau[1] - tau[0])
        J = np.array([[0.5, 0.5], [-1.0 / dt, 1.0 / dt]])
        cc = cov[:2, :2]
        post_wash = _line(
            float(tau.mean()), float(levels.mean()), float(levels[1] - levels[0]) / dt, J @ cc @ J.T
        )
    else:
        post_wash = _NAN_LINE
        if reason == "ok":
            reason = "no_wash_in_record"

    return DegradationFit(
        between_wash_rate_per_1000h=r * PER_1000_HOURS,
        between_wash_rate_per_1000h_se=r_se * PER_1000_HOURS,
        post_wash_rate_per_1000h=post_wash.rate_per_1000h,
        post_wash_rate_per_1000h_se=float(np.sqrt(post_wash.cov[1, 1])),
        overall_rate_per_1000h=overall.rate_per_1000h,
        overall_rate_per_1000h_se=float(np.sqrt(overall.cov[1, 1])),
        r_squared=float(r2),
        n=n,
        n_dropped=n_dropped,
        n_segments=K,
        segment_start=np.asarray(tau, dtype=np.float64),
        segment_level=np.asarray(levels, dtype=np.float64),
        segment_level_se=np.asarray(levels_se, dtype=np.float64),
        residual_std=float(np.sqrt(s2)),
        current=current,
        post_wash=post_wash,
        overall=overall,
        t_first=t_first,
        t_last=t_last,
        reason=reason,
    )


class Steps(NamedTuple):
    """Result of :func:`detect_steps`.

    Attributes
    ----------
    position : ndarray of intp
        Index (into the caller's arrays) of the first sample after each step.
    t : ndarray of float
        Time of that sample [unit of t].
    size : ndarray of float
        Step size: median after minus median before [KPI unit].
    """

    position: IntArray
    t: FloatArray
    size: FloatArray


def detect_steps(
    t: ArrayLike,
    y: ArrayLike,
    min_step: float,
    window: int,
    direction: Literal["up", "down", "both"] = "both",
) -> Steps:
    r"""Find wash / recovery steps: level shifts between two adjacent windows.

    Parameters
    ----------
    t : array_like of float, shape (N,)
        Times, increasing [fired h or s].
    y : array_like of float, shape (N,)
        KPI [its unit]; non-finite points are skipped.
    min_step : float
        Smallest step reported, > 0 [KPI unit]; set it well above the KPI's noise (a few
        times its standard deviation divided by sqrt(window)).
    window : int
        Points in each of the two windows (>= 2).  Steps closer together than ``window``
        points are reported as one.
    direction : {"up", "down", "both"}
        Report only rising steps (a wash raises efficiency and power), only falling ones (a
        wash lowers heat rate), or both.

    Returns
    -------
    Steps
        Indices, times and sizes of the steps, in time order.

    Notes
    -----
    Two-window test: at each candidate point i the mean of the ``window`` finite points
    from i onward minus the mean of the ``window`` points before i,

    .. math:: d_i = \bar y_{[i, i+w)} - \bar y_{[i-w, i)},

    peaks (triangularly) at the true change point.  A step is reported at a local maximum
    of :math:`|d_i|` (within ±w points) with :math:`|d_i| \ge` ``min_step``, and confirmed
    with the robust estimate (median after minus median before), which must also reach
    ``min_step`` with the same sign: a lone outlier moves a window mean but not its median.
    Windows count points, not hours: with irregular sampling, resample first.

    References
    ----------
    .. [1] M. Basseville and I. V. Nikiforov, Detection of Abrupt Changes: Theory and
       Application, Prentice Hall, 1993 (two-window change detection).
    .. [2] E. S. Page, "Continuous inspection schemes", Biometrika 41(1/2):100-115, 1954
       (the CUSUM alternative, better for small sustained shifts on-line).
    """
    if window < 2:
        raise ModelInputError("window", window, "window >= 2 points")
    if not (min_step > 0.0):
        raise ModelInputError("min_step", min_step, "min_step > 0")
    if direction not in ("up", "down", "both"):
        raise ModelInputError("direction", direction, '"up", "down" or "both"')
    t_all = np.asarray(t, dtype=np.float64).ravel()
    y_all = np.asarray(y, dtype=np.float64).ravel()
    if t_all.shape != y_all.shape:
        raise ModelInputError("y", y_all.shape, f"same shape as t {t_all.shape}")
    keep = np.flatnonzero(np.isfinite(t_all) & np.isfinite(y_all))
    tv = t_all[keep]
    yv = y_all[keep]
    if np.any(np.diff(tv) < 0):
        raise ModelInputError("t", "unsorted", "times in increasing order")
    empty = Steps(np.array([], dtype=np.intp), np.array([]), np.array([]))
    n = yv.size
    w = int(window)
    if n < 2 * w:
        return empty

    c = np.concatenate([[0.0], np.cumsum(yv - yv[0])])
    idx = np.arange(w, n - w + 1)  # first index of the right window
    d = np.full(n, np.nan)
    d[idx] = (c[idx + w] - c[idx]) / w - (c[idx] - c[idx - w]) / w
    score = np.abs(d)
    if direction == "up":
        score = np.where(d > 0, score, 0.0)
    elif direction == "down":
        score = np.where(d < 0, score, 0.0)
    score = np.nan_to_num(score, nan=0.0)

    padded = np.concatenate([np.zeros(w - 1), score, np.zeros(w - 1)])
    local_max = np.lib.stride_tricks.sliding_window_view(padded, 2 * w - 1).max(axis=-1)
    cand = np.flatnonzero((score >= min_step) & (score >= local_max))

    chosen: list[int] = []
    sizes: list[float] = []
    for i in cand:
        if chosen and i - chosen[-1] < w:
            continue  # a plateau of equal maxima: keep the first
        robust = float(np.median(yv[i : i + w]) - np.median(yv[i - w : i]))
        if abs(robust) >= min_step and np.sign(robust) == np.sign(d[i]):
            chosen.append(int(i))
            sizes.append(robust)
    ci = np.asarray(chosen, dtype=np.intp)
    return Steps(keep[ci].astype(np.intp), tv[ci], np.asarray(sizes, dtype=np.float64))


class Crossing(NamedTuple):
    """Result of :func:`forecast_crossing` (arrays shaped like ``threshold``).

    Attributes
    ----------
    t : ndarray of float
        Fired hours at which the fitted line reaches the threshold [h]; NaN if it never does
        ahead, or (for ``"already_beyond"``) if the line was past it before the record began.
    t_low, t_high : ndarray of float
        Band: the fired hours between which the threshold lies inside the line's ±k standard
        error band [h]; ±Inf where the band does not close (the rate is not significant at
        the chosen k); NaN where ``t`` is NaN.
    status : ndarray of str
        ``"ahead"`` (crossing after the last point), ``"already_beyond"`` (the line was past
        the limit at the last point), ``"never"`` (flat or moving away from the limit),
        ``"no_fit"`` (the fit line is NaN).
    """

    t: FloatArray
    t_low: FloatArray
    t_high: FloatArray
    status: NDArray[np.str_]


def forecast_crossing(
    fit: DegradationFit,
    threshold: ArrayLike,
    limit: Literal["lower", "upper"] = "lower",
    which: Literal["current", "post_wash", "overall"] = "current",
    k: float = 2.0,
) -> Crossing:
    r"""Return the fired hours at which a fitted degradation line reaches a threshold.

    Parameters
    ----------
    fit : DegradationFit
        From :func:`fit_degradation`.
    threshold : array_like of float
        Threshold(s) [KPI unit].
    limit : {"lower", "upper"}
        ``"lower"``: the KPI must stay above the threshold (efficiency, power);
        ``"upper"``: it must stay below (heat rate).
    which : {"current", "post_wash", "overall"}
        Line to extrapolate: the latest wash interval (no further wash), the post-wash
        levels (a perfect wash every time: when an overhaul is due), or the overall line.
    k : float
        Coverage factor of the band (k = 2 is about 95 % for a normal error, JCGM 100:2008).

    Returns
    -------
    Crossing
        Crossing fired hours, band and status, shaped like ``threshold``.

    Notes
    -----
    The line :math:`y(t) = L + r (t - t_0)` with covariance of :math:`(L, r)` reaches the
    threshold :math:`y^*` at :math:`t^* = t_0 + (y^* - L)/r`.  The band is the set of t for
    which :math:`y^*` lies within :math:`\pm k\,\mathrm{se}(t)` of the line, the roots
    of

    .. math:: (y^* - L - r u)^2 = k^2 (V_{LL} + 2u V_{Lr} + u^2 V_{rr}), \quad u = t - t_0,

    the inverse-regression (calibration) interval of Fieller's theorem.  It closes only if
    :math:`r^2 > k^2 V_{rr}` (the rate is significant); otherwise one end is infinite.
    The band covers the uncertainty of the fitted line, not changes of duty, ambient or
    wash practice ahead: a planning aid, never a guarantee.

    References
    ----------
    .. [1] E. C. Fieller, "Some problems in interval estimation", J. Royal Statistical
       Society B 16(2):175-185, 1954.
    .. [2] JCGM 100:2008, Evaluation of measurement data -- Guide to the expression of
       uncertainty in measurement (coverage factor).
    """
    if limit not in ("lower", "upper"):
        raise ModelInputError("limit", limit, '"lower" or "upper"')
    lines = {"current": fit.current, "post_wash": fit.post_wash, "overall": fit.overall}
    if which not in lines:
        raise ModelInputError("which", which, '"current", "post_wash" or "overall"')
    if not (k >= 0.0):
        raise ModelInputError("k", k, "k >= 0")
    line = lines[which]
    thr = np.asarray(threshold, dtype=np.float64)
    # the line per fired hour: slope [KPI unit/h] and covariance of (level, slope)
    L, r, t0 = line.level, line.rate_per_1000h / PER_1000_HOURS, line.t_ref
    scale = np.array([1.0, 1.0 / PER_1000_HOURS])
    V = line.cov * np.outer(scale, scale)
    shape = thr.shape
    if not (np.isfinite(L) and np.isfinite(r) and np.isfinite(t0)):
        nan = np.full(shape, np.nan)
        return Crossing(nan, nan.copy(), nan.copy(), np.full(shape, "no_fit"))

    sign = 1.0 if limit == "lower" else -1.0  # sign * (y - thr) > 0 is the good side
    y_last = L + r * (fit.t_last - t0)
    beyond = sign * (y_last - thr) <= 0.0
    heading = sign * r < 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        t_star = np.asarray(t0 + (thr - L) / r) if r != 0.0 else np.full(shape, np.nan)
    ahead = ~beyond & heading
    already = beyond & np.isfinite(t_star) & (t_star >= fit.t_first) & (t_star <= fit.t_last)
    t_out = np.where(ahead | already, t_star, np.nan)
    status = np.where(ahead, "ahead", np.where(beyond, "already_beyond", "never"))

    # Fieller band: a u^2 + b u + c = 0
    dd = thr - L
    a = r * r - k * k * V[1, 1]
    b = -2.0 * dd * r - 2.0 * k * k * V[0, 1]
    c = dd * dd - k * k * V[0, 0]
    disc = b * b - 4.0 * a * c
    u_star = t_out - t0
    with np.errstate(divide="ignore", invalid="ignore"):
        sq = np.sqrt(np.maximum(disc, 0.0))
        if a != 0.0:
            r1 = (-b - sq) / (2.0 * a)
            r2 = (-b + sq) / (2.0 * a)
        else:
            r1 = r2 = -c / b
        lo_root = np.minimum(r1, r2)
        hi_root = np.maximum(r1, r2)
    if a > 0.0:
        lo, hi = lo_root, hi_root
    else:
        # the threshold is inside the band outside [lo_root, hi_root] (or everywhere)
        right = u_star >= hi_root
        lo = np.where(disc < 0, -np.inf, np.where(right, hi_root, -np.inf))
        hi = np.where(disc < 0, np.inf, np.where(right, np.inf, lo_root))
    t_low = np.where(np.isfinite(t_out), t0 + lo, np.nan)
    t_high = np.where(np.isfinite(t_out), t0 + hi, np.nan)
    return Crossing(
        np.asarray(t_out, dtype=np.float64),
        np.asarray(t_low, dtype=np.float64),
        np.asarray(t_high, dtype=np.float64),
        np.asarray(status, dtype=np.str_),
    )


def ewma_step(previous: ArrayLike, x_new: ArrayLike, alpha: float) -> FloatArray:
    r"""One step of :func:`ewma` for live use: ``alpha * x + (1 - alpha) * previous``.

    A NaN ``previous`` starts from ``x_new``; a NaN ``x_new`` keeps ``previous``.

    Notes
    -----
    .. math::

        S_i = \alpha x_i + (1 - \alpha) S_{i-1}

    References
    ----------
    .. [1] S. W. Roberts, "Control chart tests based on geometric moving averages",
       Technometrics 1(3):239-250, 1959.
    """
    if not (0.0 < alpha <= 1.0):
        raise ModelInputError("alpha", alpha, "0 < alpha <= 1")
    p = np.asarray(previous, dtype=np.float64)
    x = np.asarray(x_new, dtype=np.float64)
    fin = np.isfinite(x)
    out = np.where(np.isfinite(p), alpha * x + (1.0 - alpha) * p, x)
    return np.asarray(np.where(fin, out, p), dtype=np.float64)


def ewma(x: ArrayLike, alpha: float, axis: int = -1) -> FloatArray:
    r"""Exponentially weighted moving average along one axis, vectorised across series.

    Parameters
    ----------
    x : array_like of float
        Samples along ``axis`` [any unit]; other axes are independent series.
    alpha : float
        Weight of the newest sample, 0 < alpha <= 1 [-]; the time constant is about
        ``1 / alpha`` samples.
    axis : int
        Time axis.

    Returns
    -------
    ndarray of float
        Smoothed series, same shape; NaN where the input is NaN (the average is held over
        the gap and continues after it) and before the first finite sample.

    Notes
    -----
    .. math::

        S_0 = x_0, \qquad S_i = \alpha x_i + (1 - \alpha) S_{i-1}

    :math:`S_0 = x_0`, :math:`S_i = \alpha x_i + (1-\alpha) S_{i-1}` (Roberts 1959).

    References
    ----------
    .. [1] S. W. Roberts, "Control chart tests based on geometric moving averages",
       Technometrics 1(3):239-250, 1959.

    Examples
    --------
    >>> ewma([0.0, 1.0, 1.0], 0.5).tolist()
    [0.0, 0.5, 0.75]
    """
    if not (0.0 < alpha <= 1.0):
        raise ModelInputError("alpha", alpha, "0 < alpha <= 1")
    arr = np.moveaxis(np.asarray(x, dtype=np.float64), axis, -1)
    out = np.empty(arr.shape, dtype=np.float64)
    s = np.full(arr.shape[:-1], np.nan)
    for i in range(arr.shape[-1]):
        s = ewma_step(s, arr[..., i], alpha)
        out[..., i] = np.where(np.isfinite(arr[..., i]), s, np.nan)
    return np.moveaxis(out, -1, axis)
