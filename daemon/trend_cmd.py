"""``brayscope trend``: degradation rate, wash steps and a threshold forecast for one unit.

For maintenance planners.  The stored results of a unit are reduced to a degradation record
(steady, valid results only; see :func:`trend_report`) and handed to :mod:`models.trends`:

* :func:`models.trends.fit_degradation` — the between-wash rate (recoverable plus
  non-recoverable) per 1000 fired hours, the post-wash rate (of the levels right after the
  washes: the non-recoverable part), one overall line;
* :func:`models.trends.detect_steps` — washes (or any recovery) found as level steps in the
  record; they split the fit into wash intervals;
* :func:`models.trends.forecast_crossing` — when the fitted line reaches a threshold, with a
  ±2 standard-error band.

Time axis: **fired hours**, counted from the result timestamps.  Of the trade's counters
(operating hours: rotor turning; fired hours: flame on; equivalent operating hours: fired
hours weighted for starts, trips and peak firing) degradation follows fired hours, and that is
what brayscope counts: the time between two consecutive results counts when the unit was
firing at both (fuel flow > 0) and the gap is at most ``max_gap_s`` (default 600 s).  Time
while the daemon was not running is therefore not counted, even if the unit fired; give the
unit's own fired-hours counter at the first result with ``--fired-hours-at-start`` to report
on its scale.  Equivalent operating hours are not computed.

The same computation serves ``GET /api/units/{unit}/trend`` (:mod:`daemon.http`).

Advisory monitoring only: a rate or a forecast is a statistical estimate from plant data,
not a maintenance instruction.  Follow the manufacturer's limits, site procedures, local
codes and licensed engineers.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any, Literal, TextIO

import numpy as np
from numpy.typing import NDArray

__all__ = [
    "KPIS",
    "TREND_CAUTION",
    "KpiSpec",
    "TrendRecord",
    "add_parser",
    "baseline_of",
    "collect",
    "collect_async",
    "fired_hours",
    "format_report",
    "parse_threshold",
    "run",
    "trend_report",
    "trend_svg",
]

FloatArray = NDArray[np.float64]

TREND_CAUTION = (
    "Advisory monitoring only: a degradation rate or a forecast crossing is a statistical "
    "estimate from plant data, not a maintenance instruction or a protection function. "
    "Follow the manufacturer's limits, site procedures, local codes and licensed engineers."
)

TIME_BASIS = (
    "fired hours counted from result timestamps: an interval between two results counts when "
    "the unit fired (fuel flow > 0) at both and they are at most max_gap_s apart; the unit's "
    "own counter is not read (give it as fired_hours_at_start)"
)


@dataclass(frozen=True)
class KpiSpec:
    """How a KPI is trended.

    Attributes
    ----------
    name : str
        Result name (glossary).
    unit : str
        Its unit as stored.
    limit : {"lower", "upper"}
        ``"lower"``: must stay above a threshold (efficiency, power); ``"upper"``: below.
    wash : {"up", "down"}
        Direction a wash moves it.
    scale, shown : float, str
        Display factor and unit for text and plots (``"%"`` for fractions shown as per cent).
    """

    name: str
    unit: str
    limit: Literal["lower", "upper"]
    wash: Literal["up", "down"]
    scale: float = 1.0
    shown: str = ""

    def label(self) -> str:
        """Unit of the KPI's values as shown to people."""
        return self.shown or self.unit

    @property
    def percent(self) -> bool:
        """The KPI is a fraction shown as per cent (its rates are percentage points)."""
        return self.shown == "%"

    def rate_label(self) -> str:
        """Unit of a rate (or a difference) of the KPI as shown: percentage points for a
        fraction shown as per cent, else the KPI's own unit."""
        return "percentage points" if self.percent else self.label()

    def digits(self) -> str:
        """Format of a value as shown (two decimals for per cent)."""
        return ".2f" if self.percent else ".5g"


#: KPIs that can be trended.
KPIS: dict[str, KpiSpec] = {
    k.name: k
    for k in (
        KpiSpec("compressor_isentropic_efficiency", "1", "lower", "up", 100.0, "%"),
        KpiSpec("turbine_isentropic_efficiency", "1", "lower", "up", 100.0, "%"),
        KpiSpec("thermal_efficiency", "1", "lower", "up", 100.0, "%"),
        KpiSpec("corrected_power", "W", "lower", "up", 1e-6, "MW"),
        KpiSpec("corrected_heat_rate_lhv_kj_per_kwh", "kJ/kWh", "upper", "down"),
        KpiSpec("heat_rate_lhv_kj_per_kwh", "kJ/kWh", "upper", "down"),
        KpiSpec("compressor_pressure_ratio", "1", "lower", "up"),
    )
}


def parse_threshold(text: str | float, kpi: KpiSpec) -> float:
    """A planner's threshold in the KPI's stored unit, from ``0.85`` or ``85%``.

    A fraction KPI (an efficiency) takes a fraction or a percentage with ``%``; a bare number
    above 1 is refused, because ``85`` would otherwise mean 8500 %.

    Raises
    ------
    ValueError
        With a message that says what to write instead.

    >>> k = KPIS["compressor_isentropic_efficiency"]
    >>> parse_threshold("85%", k), parse_threshold("0.85", k)
    (0.85, 0.85)
    """
    raw = str(text).strip()
    percent = raw.endswith("%")
    number = raw[:-1].strip() if percent else raw
    try:
        value = float(number)
    except ValueError:
        raise ValueError(f"threshold {raw!r} is not a number") from None
    if not math.isfinite(value):
        raise ValueError(f"threshold {raw!r} is not a finite number")
    if percent:
        if not kpi.percent:
            raise ValueError(
                f"threshold {raw!r}: a percentage applies to efficiencies only; give "
                f"{kpi.name} in {kpi.unit}"
            )
        value /= 100.0
    if kpi.percent and not 0.0 < value <= 1.0:
        raise ValueError(
            f"threshold {raw!r}: {kpi.name} is a fraction; write {value / 100.0:g} or "
            f"{value:g}% (a bare {value:g} would mean {value * 100.0:g} %)"
        )
    return value


def fired_hours(
    ts_epoch_s: FloatArray, firing: NDArray[np.bool_], max_gap_s: float = 600.0
) -> FloatArray:
    """Fired hours at each result, counted from the timestamps [h].

    Parameters
    ----------
    ts_epoch_s : ndarray, shape (N,)
        Result times, increasing [s].
    firing : ndarray of bool, shape (N,)
        The unit was firing at that result (fuel flow > 0).
    max_gap_s : float
        Longest interval between two results that still counts [s].

    Returns
    -------
    ndarray, shape (N,)
        Hours counted up to each result (0 at the first): the sum of the intervals between
        consecutive results with both ends firing and at most ``max_gap_s`` apart.
    """
    t = np.asarray(ts_epoch_s, dtype=np.float64)
    f = np.asarray(firing, dtype=bool)
    if t.size == 0:
        return np.zeros(0)
    dt = np.diff(t)
    counts = f[1:] & f[:-1] & (dt > 0) & (dt <= max_gap_s)
    return np.concatenate([[0.0], np.cumsum(np.where(counts, dt, 0.0))]) / 3600.0


@dataclass
class TrendRecord:
    """Accumulates result rows (API objects, oldest first, possibly in chunks) into the
    degradation record of one KPI.

    Attributes
    ----------
    kpi : KpiSpec
    max_gap_s : float
        See :func:`fired_hours`.
    """

    kpi: KpiSpec
    max_gap_s: float = 600.0
    n_results: int = 0
    n_firing: int = 0
    _hours: float = 0.0
    _last_ts: float = math.nan
    _last_firing: bool = False
    ts: list[float] = field(default_factory=list)
    hours: list[float] = field(default_factory=list)
    value: list[float] = field(default_factory=list)
    first_ts: float = math.nan
    last_ts: float = math.nan

    def add(self, rows: Iterable[Mapping[str, Any]]) -> None:
        """Add result objects (``daemon.http.ResultOut`` shape), oldest first."""
        for r in rows:
            t = float(r["ts_epoch_s"])
            if math.isfinite(self._last_ts) and t <= self._last_ts:
                continue  # overlap between chunks
            fuel = (r.get("inputs") or {}).get("fuel_mass_flow")
            firing = bool(fuel is not None and fuel > 0.0)
            if self.n_results == 0:
                self.first_ts = t
            elif firing and self._last_firing and t - self._last_ts <= self.max_gap_s:
                self._hours += (t - self._last_ts) / 3600.0
            self.n_results += 1
            self.n_firing += firing
            self._last_ts, self._last_firing, self.last_ts = t, firing, t
            v = (r.get("results") or {}).get(self.kpi.name)
            steady = r.get("steady_state") == "steady"
            if steady and r.get("valid") and v is not None and math.isfinite(v):
                self.ts.append(t)
                self.hours.append(self._hours)
                self.value.append(float(v))

    @property
    def total_hours(self) -> float:
        """Fired hours counted over the whole record [h]."""
        return self._hours


def _bins(
    h: FloatArray, y: FloatArray, ts: FloatArray, width: float
) -> tuple[FloatArray, FloatArray, FloatArray, NDArray[np.int64]]:
    """Means of (hours, value, ts) per fired-hour bin of ``width``; counts per bin."""
    if h.size == 0:
        e = np.zeros(0)
        return e, e, e, np.zeros(0, dtype=np.int64)
    idx = np.floor((h - h[0]) / width).astype(np.int64)
    keys, inv, counts = np.unique(idx, return_inverse=True, return_counts=True)
    del keys

    def mean(x: FloatArray) -> FloatArray:
        return np.bincount(inv, weights=x) / counts

    return mean(h), mean(y), mean(ts), counts.astype(np.int64)


def _default_min_step(y: FloatArray, sigma: float, window: int) -> float:
    """Default smallest wash step: 5 standard errors of a difference of two window means,
    for white noise (σ √(2/w)) and for the record's own wander (the robust spread of all
    window-mean differences), whichever is larger."""
    if not sigma > 0 or y.size < 2 * window:
        return math.inf
    white = sigma * math.sqrt(2.0 / window)
    c = np.concatenate([[0.0], np.cumsum(y)])
    i = np.arange(window, y.size - window + 1)
    d = (c[i + window] - c[i]) / window - (c[i] - c[i - window]) / window
    wander = 1.4826 * float(np.median(np.abs(d - np.median(d))))
    return 5.0 * max(white, wander)


def _f(x: Any) -> float | None:
    v = float(x)
    return v if math.isfinite(v) else None


def _iso(ts: float) -> str:
    return datetime.fromtimestamp(ts, UTC).isoformat(timespec="seconds").replace("+00:00", "Z")


def trend_report(
    record: TrendRecord,
    *,
    threshold: float | None = None,
    which: Literal["current", "post_wash", "overall"] = "current",
    bin_h: float | None = None,
    min_step: float | None = None,
    window: int | None = None,
    fired_hours_at_start: float = 0.0,
    baseline: float | None = None,
    k: float = 2.0,
) -> dict[str, Any]:
    """The trend of one KPI as a JSON-ready mapping.

    Parameters
    ----------
    record : TrendRecord
        The accumulated record.
    threshold : float, optional
        Planner's limit in the KPI's stored unit (efficiency as a fraction ...).
    which : {"current", "post_wash", "overall"}
        Line to forecast with (:func:`models.trends.forecast_crossing`).
    bin_h : float, optional
        Width of the fired-hour bins whose means are fitted [h]; default 1 h, or
        span / 100 for records shorter than 100 fired hours.
    min_step : float, optional
        Smallest wash step [KPI unit]; default 5 standard errors of the difference of two
        window means: the larger of σ √(2 / window), σ from the median absolute successive
        difference of the binned record, and the robust spread (1.4826 × median absolute
        deviation) of all window-mean differences, which also covers slow wander from
        ambient or load left in a corrected KPI.  Both estimates are robust to the few
        steps themselves.
    window : int, optional
        Bins in each window of the step test (>= 2); default a day of operation
        (24 h / ``bin_h``, so that the daily ambient cycle left in a corrected KPI averages
        out), at least 5 and at most an eighth of the bins.
    fired_hours_at_start : float
        The unit's fired hours at the first result [h]; added to every time.
    baseline : float, optional
        New-and-clean value from the plant file, reported beside the fit.
    k : float
        Coverage factor of the forecast band.

    Returns
    -------
    dict
        ``fit`` (rates per 1000 fired hours with standard errors, R², levels per wash
        interval), ``washes`` (fired hours, time, size), ``forecast`` (when ``threshold``
        is given), ``points`` (the binned record), counts and the time basis.  NaN and ±Inf
        are null.

    Notes
    -----
    Only steady (``steady_state`` "steady") and valid results with a finite KPI enter the
    record.
    Binning follows the advice of :mod:`models.trends`: standard errors from raw ticks come
    out too small because neighbouring ticks are correlated.
    """
    from models.trends import detect_steps, fit_degradation, forecast_crossing

    kpi = record.kpi
    h = np.asarray(record.hours, dtype=np.float64)
    y = np.asarray(record.value, dtype=np.float64)
    ts = np.asarray(record.ts, dtype=np.float64)
    span = float(h[-1] - h[0]) if h.size else 0.0
    if bin_h is None:
        bin_h = 1.0 if span >= 100.0 else max(span / 100.0, 1e-9)
    hb, yb, tb, nb = _bins(h, y, ts, bin_h)
    hb = hb + fired_hours_at_start
    if window is None:
        window = max(5, min(round(24.0 / bin_h), yb.size // 8))
    window = max(2, int(window))
    sigma = math.nan
    if yb.size >= 3:
        sigma = 1.4826 * float(np.median(np.abs(np.diff(yb)))) / math.sqrt(2.0)
    if min_step is None:
        min_step = _default_min_step(yb, sigma, window)
    washes: list[dict[str, Any]] = []
    wash_h = np.zeros(0)
    if yb.size >= 2 * window and math.isfinite(min_step) and min_step > 0:
        steps = detect_steps(hb, yb, min_step, window, direction=kpi.wash)
        wash_h = np.asarray(steps.t, dtype=np.float64)
        washes = [
            {"fired_hours": _f(t), "ts": _iso(float(tb[p])), "size": _f(s)}
            for p, t, s in zip(steps.position, steps.t, steps.size, strict=True)
        ]
    fit = fit_degradation(hb, yb, wash_h if wash_h.size else None)
    out: dict[str, Any] = {
        "kpi": kpi.name,
        "kpi_unit": kpi.unit,
        "caution": TREND_CAUTION,
        "time_basis": TIME_BASIS,
        "max_gap_s": record.max_gap_s,
        "fired_hours_at_start": fired_hours_at_start,
        "first_ts": _iso(record.first_ts) if math.isfinite(record.first_ts) else None,
        "last_ts": _iso(record.last_ts) if math.isfinite(record.last_ts) else None,
        "n_results": record.n_results,
        "n_firing": record.n_firing,
        "n_steady": int(y.size),
        "fired_hours": record.total_hours,
        "bin_h": bin_h,
        "n_points": int(yb.size),
        "noise_std": _f(sigma),
        "min_step": _f(min_step),
        "window": window,
        "baseline": baseline,
        "fit": {
            "reason": fit.reason,
            "between_wash_rate_per_1000h": _f(fit.between_wash_rate_per_1000h),
            "between_wash_rate_per_1000h_se": _f(fit.between_wash_rate_per_1000h_se),
            "post_wash_rate_per_1000h": _f(fit.post_wash_rate_per_1000h),
            "post_wash_rate_per_1000h_se": _f(fit.post_wash_rate_per_1000h_se),
            "overall_rate_per_1000h": _f(fit.overall_rate_per_1000h),
            "overall_rate_per_1000h_se": _f(fit.overall_rate_per_1000h_se),
            "r_squared": _f(fit.r_squared),
            "residual_std": _f(fit.residual_std),
            "n": fit.n,
            "intervals": [
                {"start_fired_hours": _f(a), "level": _f(b), "level_se": _f(c)}
                for a, b, c in zip(
                    fit.segment_start, fit.segment_level, fit.segment_level_se, strict=True
                )
            ],
            "current_line": {
                "t_ref_fired_hours": _f(fit.current.t_ref),
                "level": _f(fit.current.level),
                "rate_per_1000h": _f(fit.current.rate_per_1000h),
            },
            "latest_value": _f(fit.current.value(fit.t_last)) if fit.n else None,
        },
        "washes": washes,
        "forecast": None,
        "points": [
            {"fired_hours": _f(a), "ts": _iso(float(c)), "value": _f(b), "n": int(d)}
            for a, b, c, d in zip(hb, yb, tb, nb, strict=True)
        ],
    }
    if threshold is not None:
        cr = forecast_crossing(fit, threshold, limit=kpi.limit, which=which, k=k)
        t_star, lo, hi = float(cr.t), float(cr.t_low), float(cr.t_high)
        status = str(cr.status)
        ahead_h = t_star - fit.t_last if math.isfinite(t_star) else math.nan
        # calendar estimate at the record's ratio of fired to calendar hours
        cal_h = (record.last_ts - record.first_ts) / 3600.0 if record.n_results > 1 else 0.0
        ratio = record.total_hours / cal_h if cal_h > 0 else math.nan
        eta: str | None = None
        if status == "ahead" and math.isfinite(ahead_h) and ratio > 0:
            days = ahead_h / ratio / 24.0
            if days < 3.6e6:
                eta = _iso(record.last_ts + days * 86400.0)
        out["forecast"] = {
            "threshold": threshold,
            "limit": kpi.limit,
            "line": which,
            "k": k,
            "status": status,
            "fired_hours": _f(t_star),
            "fired_hours_low": _f(lo),
            "fired_hours_high": _f(hi),
            "band_closed": bool(math.isfinite(lo) and math.isfinite(hi)),
            "fired_hours_after_last": _f(ahead_h),
            "fired_fraction": _f(ratio),
            "estimated_date": eta,
        }
    return out


# --------------------------------------------------------------------------------------------
# SVG plot
# --------------------------------------------------------------------------------------------


def _esc(s: str) -> str:
    return s.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def trend_svg(report: Mapping[str, Any], unit: str, width: int = 760, height: int = 360) -> str:
    """A self-contained SVG of a :func:`trend_report`: binned points, fitted interval lines,
    washes, baseline and threshold."""
    kpi = KPIS[report["kpi"]]
    sc = kpi.scale
    pts = [(p["fired_hours"], p["value"]) for p in report["points"] if p["value"] is not None]
    left, right, top, bottom = 70, 20, 40, 46
    W, H = width - left - right, height - top - bottom
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
        f'viewBox="0 0 {width} {height}" font-family="sans-serif" font-size="12">',
        f'<rect width="{width}" height="{height}" fill="#ffffff"/>',
        f'<text x="{left}" y="20" font-size="14" fill="#222">{_esc(unit)} · '
        f"{_esc(kpi.name)} ({_esc(kpi.label())}), steady results</text>",
    ]
    if not pts:
        parts.append(f'<text x="{left}" y="{top + 20}" fill="#555">no steady results</text>')
        parts.append("</svg>")
        return "\n".join(parts)
    xs = [float(p[0]) for p in pts]
    ys = [float(p[1]) * sc for p in pts]
    extra = [v * sc for v in (report.get("baseline"), (report.get("forecast") or {}).get(
        "threshold")) if v is not None]  # fmt: skip
    x0, x1 = float(min(xs)), float(max(xs))
    if x1 <= x0:
        x1 = x0 + 1.0
    y0, y1 = float(min(ys + extra)), float(max(ys + extra))
    pad = (y1 - y0) * 0.08 or abs(y0) * 0.01 or 1.0
    y0, y1 = y0 - pad, y1 + pad

    def X(x: float) -> float:
        return left + (x - x0) / (x1 - x0) * W

    def Y(y: float) -> float:
        return top + (y1 - y) / (y1 - y0) * H

    parts.append(f'<rect x="{left}" y="{top}" width="{W}" height="{H}" fill="none" stroke="#bbb"/>')
    for i in range(5):
        yv = y0 + (y1 - y0) * i / 4
        parts.append(
            f'<line x1="{left}" x2="{left + W}" y1="{Y(yv):.1f}" y2="{Y(yv):.1f}" '
            f'stroke="#eee"/><text x="{left - 6}" y="{Y(yv) + 4:.1f}" text-anchor="end" '
            f'fill="#555">{yv:.4g}</text>'
        )
        xv = x0 + (x1 - x0) * i / 4
        parts.append(
            f'<text x="{X(xv):.1f}" y="{top + H + 16}" text-anchor="middle" '
            f'fill="#555">{xv:.4g}</text>'
        )
    parts.append(
        f'<text x="{left + W / 2}" y="{height - 8}" text-anchor="middle" fill="#333">'
        "fired hours (counted from result timestamps)</text>"
    )
    for name, v, dash in (
        ("baseline", report.get("baseline"), "6 3"),
        ("threshold", (report.get("forecast") or {}).get("threshold"), "2 3"),
    ):
        if v is not None:
            parts.append(
                f'<line x1="{left}" x2="{left + W}" y1="{Y(v * sc):.1f}" y2="{Y(v * sc):.1f}" '
                f'stroke="#555" stroke-dasharray="{dash}"/><text x="{left + W - 4}" '
                f'y="{Y(v * sc) - 4:.1f}" text-anchor="end" fill="#555">{name}</text>'
            )
    for w in report.get("washes", []):
        if w["fired_hours"] is not None:
            xw = X(w["fired_hours"])
            parts.append(
                f'<line x1="{xw:.1f}" x2="{xw:.1f}" y1="{top}" y2="{top + H}" stroke="#7a9cc6"/>'
                f'<text x="{xw + 3:.1f}" y="{top + 12}" fill="#4a6c96">wash</text>'
            )
    parts.append(
        '<g fill="#444">'
        + "".join(
            f'<circle cx="{X(a):.1f}" cy="{Y(b):.1f}" r="1.8"/>'
            for a, b in zip(xs, ys, strict=True)
        )
        + "</g>"
    )
    fit = report["fit"]
    rate = fit["between_wash_rate_per_1000h"]
    starts = [iv["start_fired_hours"] for iv in fit["intervals"]]
    levels = [iv["level"] for iv in fit["intervals"]]
    if rate is not None:
        ends = [*starts[1:], x1]
        for a, b, lv in zip(starts, ends, levels, strict=True):
            if a is None or lv is None:
                continue
            ya, yb = lv * sc, (lv + rate / 1000.0 * (b - a)) * sc
            parts.append(
                f'<line x1="{X(a):.1f}" y1="{Y(ya):.1f}" x2="{X(b):.1f}" y2="{Y(yb):.1f}" '
                'stroke="#b5651d" stroke-width="2"/>'
            )
        parts.append(
            f'<text x="{left + 6}" y="{top + 14}" fill="#b5651d">fit: '
            f"{rate * sc:+.4g} {_esc(kpi.rate_label())} per 1000 fired hours between "
            "washes</text>"
        )
    parts.append("</svg>")
    return "\n".join(parts)


# --------------------------------------------------------------------------------------------
# Text output and command line
# --------------------------------------------------------------------------------------------


def _fmt(v: float | None, sc: float = 1.0, spec: str = ".5g") -> str:
    return "—" if v is None else format(v * sc, spec)


def format_report(report: Mapping[str, Any], unit: str) -> str:
    """The report as text for a terminal (efficiencies in per cent, their rates in
    percentage points)."""
    kpi = KPIS[report["kpi"]]
    sc, lab, rlab, dg = kpi.scale, kpi.label(), kpi.rate_label(), kpi.digits()
    fit = report["fit"]
    lines = [
        f"{unit} · {kpi.name} ({lab}) · {report['first_ts']} .. {report['last_ts']}",
        f"  record       {report['n_results']} results, {report['n_firing']} firing, "
        f"{report['n_steady']} steady and valid; {report['fired_hours']:.4g} fired hours "
        f"in {report['n_points']} bins of {report['bin_h']:.3g} h",
        "  time basis   " + report["time_basis"],
    ]
    if report["baseline"] is not None:
        latest = fit["latest_value"]
        dev = (
            ""
            if latest is None
            else f" (latest fit {(latest - report['baseline']) * sc:+.3g} {rlab})"
        )
        lines.append(f"  baseline     {_fmt(report['baseline'], sc, dg)} {lab}{dev}")
    reason = fit["reason"]
    if reason == "no_wash_in_record":
        reason = "ok; no wash in the record, so no post-wash rate"
    lines.append(f"  fit          {reason}, R² {_fmt(fit['r_squared'], 1, '.3f')}")
    if report["fired_hours"] < 100.0:
        lines.append(
            "  note         fewer than 100 fired hours: the rate reflects ambient, load and "
            "noise more than degradation"
        )
    lines.append(
        f"  between wash {_fmt(fit['between_wash_rate_per_1000h'], sc)} ± "
        f"{_fmt(fit['between_wash_rate_per_1000h_se'], sc, '.2g')} {rlab} per 1000 fired "
        "hours (± one standard error; fouling plus wear)"
    )
    lines.append(
        f"  post-wash    {_fmt(fit['post_wash_rate_per_1000h'], sc)} ± "
        f"{_fmt(fit['post_wash_rate_per_1000h_se'], sc, '.2g')} {rlab} per 1000 fired hours "
        "(levels right after each wash: the part a wash does not recover)"
    )
    lines.append(
        f"  overall      {_fmt(fit['overall_rate_per_1000h'], sc)} {rlab} per 1000 fired "
        "hours (one straight line)"
    )
    if report["washes"]:
        lines.extend(
            f"  wash step    {w['ts']} at {_fmt(w['fired_hours'])} fired hours: "
            f"{_fmt(w['size'], sc, '+.3g')} {rlab}"
            for w in report["washes"]
        )
    else:
        lines.append(
            f"  wash steps   none of {_fmt(report['min_step'], sc, '.2g')} {rlab} or more "
            f"(window {report['window']} bins)"
        )
    fc = report["forecast"]
    if fc is not None:
        line = fc["line"].replace("_", "-")
        head = f"  forecast     {line} line reaches {_fmt(fc['threshold'], sc, dg)} {lab}: "
        if fc["status"] == "ahead":
            band = (
                f"{_fmt(fc['fired_hours_low'])}..{_fmt(fc['fired_hours_high'])} fired hours"
                if fc["band_closed"]
                else "band open: the rate is not significant at this k"
            )
            when = f", about {fc['estimated_date']}" if fc["estimated_date"] else ""
            lines.append(
                head + f"at {_fmt(fc['fired_hours'])} fired hours, "
                f"{_fmt(fc['fired_hours_after_last'])} after the last result{when} "
                f"(±{fc['k']:g} standard errors: {band})"
            )
        elif fc["status"] == "already_beyond":
            lines.append(head + "already beyond it at the last result")
        elif fc["status"] == "never":
            lines.append(head + "never (flat or moving away from the threshold)")
        else:
            lines.append(head + "no fit")
    lines.append("  " + TREND_CAUTION)
    return "\n".join(lines)


EPILOG_EXAMPLES = """\
examples:
  brayscope trend -c plant.toml --unit KR-GT1
  brayscope trend -c plant.toml --unit KR-GT1 --since 2026-01-01 --threshold 85%
  brayscope trend -c plant.toml --unit KR-GT2 --kpi corrected_heat_rate_lhv_kj_per_kwh \\
      --threshold 10900 --plot gt2-heat-rate.svg
  brayscope trend -c plant.toml --unit KR-GT1 --json > gt1-trend.json"""


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``brayscope trend``."""
    from daemon.renames import (
        RENAMED_RESULTS,
        RENAMED_TREND_LINES,
        add_renamed_option,
        renamed_value,
    )

    kpis = ", ".join(KPIS)
    p: argparse.ArgumentParser = subparsers.add_parser(
        "trend",
        help="degradation rate, wash steps and a threshold forecast of one unit's KPI",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        description=(
            "Read a unit's stored results, keep the steady and valid ones, average them in\n"
            "fired-hour bins and fit a degradation line per wash interval:\n\n"
            "  between wash  change per 1000 fired hours between washes (fouling plus wear)\n"
            "  post-wash     change of the level right after each wash per 1000 fired hours\n"
            "                (what a wash cannot recover; needs at least one wash)\n"
            "  wash steps    recoveries found as level steps (a wash raises efficiency and\n"
            "                power, lowers heat rate)\n"
            "  forecast      with --threshold: when the fitted line reaches it, with a band\n"
            "                of ±2 standard errors (open when the rate is not significant)\n\n"
            "Efficiencies are shown in per cent and their rates in percentage points; the\n"
            "JSON keeps fractions.  Give an efficiency threshold as 0.85 or 85%.\n\n"
            "Time axis: fired hours, counted from result timestamps while the unit fires\n"
            "(fuel flow > 0); gaps longer than --max-gap-s are not counted, so time while\n"
            "brayscope was down is missing.  Give the unit's own fired-hours counter at the\n"
            "first result with --fired-hours-at-start to report on its scale.\n\n"
            "Fit months, not minutes: rates from a short or unsteady record are dominated by\n"
            "ambient and load effects.  In the demo, time is compressed, so rates per 1000 h\n"
            "are meaningless there.\n\n" + TREND_CAUTION + f"\n\nKPIs: {kpis}"
        ),
        epilog=EPILOG_EXAMPLES,
    )
    p.add_argument("-c", "--config", required=True, metavar="PLANT.toml", help="the plant file")
    p.add_argument("--unit", required=True, help="unit name as in the plant file")
    p.add_argument(
        "--kpi", default="compressor_isentropic_efficiency", choices=list(KPIS), metavar="KPI",
        type=renamed_value(RENAMED_RESULTS, "--kpi"),
        help="result to trend (default compressor_isentropic_efficiency; see the list above)",
    )  # fmt: skip
    p.add_argument(
        "--since", default=None, metavar="TIME",
        help="ISO 8601 (naive = UTC) or epoch seconds (default: 90 days before --until)",
    )  # fmt: skip
    p.add_argument("--until", default=None, metavar="TIME", help="end of the range (default now)")
    p.add_argument(
        "--threshold", default=None, metavar="Y",
        help="planner's limit: an efficiency as 0.85 or 85%%, power in W, heat rate in kJ/kWh",
    )  # fmt: skip
    p.add_argument(
        "--line", choices=("current", "post_wash", "overall"), default="current",
        type=renamed_value(RENAMED_TREND_LINES, "--line"),
        help=(
            "line to forecast with: current (latest wash interval, no further wash; default), "
            "post_wash (post-wash levels: when even a wash no longer suffices), overall"
        ),
    )  # fmt: skip
    p.add_argument(
        "--bin-h", type=float, default=None, metavar="H", dest="bin_h",
        help="fired hours per averaged point (default 1, or span/100 if shorter than 100 h)",
    )  # fmt: skip
    add_renamed_option(p, "--bin", "--bin-h", "bin_h", type=float, metavar="H")
    p.add_argument(
        "--min-step", type=float, default=None, metavar="Y",
        help="smallest wash step in the KPI's stored unit (default: 5 standard errors)",
    )  # fmt: skip
    p.add_argument(
        "--window", type=int, default=None, metavar="N",
        help="points in each window of the wash-step test (default: a day of operation)",
    )  # fmt: skip
    p.add_argument(
        "--max-gap-s", type=float, default=600.0, metavar="S", dest="max_gap_s",
        help="longest interval between results counted as fired time (default 600 s)",
    )  # fmt: skip
    add_renamed_option(p, "--max-gap", "--max-gap-s", "max_gap_s", type=float, metavar="S")
    p.add_argument(
        "--fired-hours-at-start", type=float, default=0.0, metavar="H",
        help="the unit's fired-hours counter at the first result (default 0)",
    )  # fmt: skip
    p.add_argument("--plot", type=Path, default=None, metavar="FILE.svg", help="write an SVG plot")
    p.add_argument("--json", action="store_true", help="print the report as JSON")
    return p


def baseline_of(plant: Any, unit: str, kpi: str) -> float | None:
    """The plant file's new-and-clean baseline of ``kpi`` for ``unit`` (None if not given)."""
    base = getattr(plant.units[unit], "baseline", {}) or {}
    v = base.get(kpi)
    return None if v is None else float(v)


def collect(
    fetch: Any,
    unit: str,
    t0: float,
    t1: float,
    record: TrendRecord,
    *,
    chunk_s: float = 6 * 3600.0,
    limit: int | None = None,
) -> int:
    """Fill ``record`` from ``fetch(unit, a, b)`` (API result objects, oldest first).

    Reads chunks of ``chunk_s`` seconds, so that a long range never sits in memory as rows.
    After an empty chunk the next one is twice as long (up to 64 chunks), so that a range
    starting long before the first result costs a few queries only; a chunk returning more
    than ``limit`` rows (the fetch may have cut it) is read again in halves.  Returns the
    number of queries.
    """
    a, step, queries = t0, chunk_s, 0
    while a < t1:
        b = min(a + step, t1)
        rows = fetch(unit, a, b)
        queries += 1
        if limit is not None and len(rows) > limit and b - a > 1.0:
            step = (b - a) / 2.0
            continue
        record.add(rows)
        step = chunk_s if rows else min(step * 2.0, 64.0 * chunk_s)
        a = b
    return queries


async def collect_async(
    fetch: Any,
    unit: str,
    t0: float,
    t1: float,
    record: TrendRecord,
    *,
    chunk_s: float = 6 * 3600.0,
    limit: int | None = None,
) -> int:
    """:func:`collect` for an awaitable ``fetch`` (the HTTP API's backend)."""
    a, step, queries = t0, chunk_s, 0
    while a < t1:
        b = min(a + step, t1)
        rows = await fetch(unit, a, b)
        queries += 1
        if limit is not None and len(rows) > limit and b - a > 1.0:
            step = (b - a) / 2.0
            continue
        record.add(rows)
        step = chunk_s if rows else min(step * 2.0, 64.0 * chunk_s)
        a = b
    return queries


def run(args: argparse.Namespace, out: TextIO | None = None, err: TextIO | None = None) -> int:
    """Entry point of ``brayscope trend``."""
    import json

    from daemon.config import PlantConfigError, load_plant
    from daemon.http import parse_time
    from daemon.runtime import row_to_api
    from daemon.storage import Store
    from daemon.urls import mask_urls

    out = out if out is not None else sys.stdout
    err = err if err is not None else sys.stderr
    try:
        plant = load_plant(args.config)
    except PlantConfigError as exc:
        for issue in exc.issues:
            print(str(issue), file=err)
        return 2
    for issue in plant.deprecations:
        print(f"warning: {issue}", file=err)
    if args.unit not in plant.units:
        print(f"brayscope trend: no unit {args.unit!r} (units: {', '.join(plant.units)})", file=err)
        return 2
    try:
        t1 = parse_time(args.until, datetime.now(UTC))
        t0 = parse_time(args.since, t1 - timedelta(days=90))
    except (ValueError, OverflowError, OSError):
        print("brayscope trend: --since/--until: ISO 8601 or epoch seconds", file=err)
        return 2
    if t1 <= t0:
        print("brayscope trend: --since must be before --until", file=err)
        return 2
    if args.window is not None and args.window < 2:
        print("brayscope trend: --window must be >= 2", file=err)
        return 2
    kpi = KPIS[args.kpi]
    threshold: float | None = None
    if args.threshold is not None:
        try:
            threshold = parse_threshold(args.threshold, kpi)
        except ValueError as exc:
            print(f"brayscope trend: --threshold: {exc}", file=err)
            return 2
    record = TrendRecord(kpi, max_gap_s=args.max_gap_s)
    store = Store.from_config(plant.database)
    started = time.perf_counter()
    try:

        def fetch(u: str, a: float, b: float) -> list[dict[str, Any]]:
            return [row_to_api(r) for r in store.results_between(u, a, b)]

        collect(fetch, args.unit, t0.timestamp(), t1.timestamp(), record)
    except Exception as exc:
        why = mask_urls(str(exc))
        print(f"brayscope trend: cannot read results: {exc.__class__.__name__}: {why}", file=err)
        return 1
    finally:
        store.close()
    report = trend_report(
        record,
        threshold=threshold,
        which=args.line,
        bin_h=args.bin_h,
        min_step=args.min_step,
        window=args.window,
        fired_hours_at_start=args.fired_hours_at_start,
        baseline=baseline_of(plant, args.unit, kpi.name),
    )
    report["unit"] = args.unit
    if args.json:
        print(json.dumps(report, indent=2), file=out)
    else:
        print(format_report(report, args.unit), file=out)
        print(f"  ({time.perf_counter() - started:.2f} s)", file=out)
    if args.plot is not None:
        args.plot.write_text(trend_svg(report, args.unit), encoding="utf-8")
        if not args.json:
            print(f"  plot written to {args.plot}", file=out)
    return 0 if record.n_results else 3
