"""Tests of models.trends.

Sources of expected values:
- Round trips: synthetic KPI records built from known rates, wash times and step sizes; the
  generator's own parameters are the truth.
- scipy.stats.linregress and numpy.linalg (reference libraries from the package registry) for
  the straight-line slope, its standard error and R².
- scipy.signal.lfilter for the EWMA recursion (Roberts 1959, Technometrics 1(3):239-250).
- Coverage: a k = 2 band of a normal estimate covers the truth about 95 % of the time
  (JCGM 100:2008, coverage factor), checked by seeded Monte-Carlo.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal, stats

from models.status import ModelInputError
from models.trends import (
    detect_steps,
    ewma,
    ewma_step,
    fit_degradation,
    forecast_crossing,
)

# Generator parameters (invented, KR-GT2-like): corrected compressor efficiency 0.870 when
# new and clean, fouling 0.004 per 1000 h recovered by each wash, non-recoverable 0.0005 per
# 1000 h, noise 0.0008.
ETA0 = 0.870
REC = 0.004 / 1000.0  # per fired hour
NONREC = 0.0005 / 1000.0
SIGMA = 0.0008
WASHES = np.array([1500.0, 3000.0, 4500.0, 6000.0])


def synthetic(rng: np.random.Generator, n: int = 600, t_end: float = 7500.0) -> tuple:
    t = np.sort(rng.uniform(0.0, t_end, n))
    last_wash = np.concatenate([[0.0], WASHES])[np.searchsorted(WASHES, t, side="right")]
    y = ETA0 - NONREC * t - REC * (t - last_wash) + rng.normal(0.0, SIGMA, n)
    return t, y


def test_round_trip_rates_from_generator() -> None:
    t, y = synthetic(np.random.default_rng(1))
    fit = fit_degradation(t, y, WASHES)
    assert fit.reason == "ok"
    assert fit.n == 600 and fit.n_segments == 5
    # within an interval both parts act: slope = -(REC + NONREC)
    want_between = -(REC + NONREC) * 1000.0
    assert (
        abs(fit.between_wash_rate_per_1000h - want_between) < 4 * fit.between_wash_rate_per_1000h_se
    )
    assert fit.between_wash_rate_per_1000h_se < 0.05 * abs(want_between)
    assert (
        abs(fit.post_wash_rate_per_1000h - (-NONREC * 1000.0)) < 4 * fit.post_wash_rate_per_1000h_se
    )
    assert fit.r_squared > 0.8
    assert fit.residual_std == pytest.approx(SIGMA, rel=0.1)
    np.testing.assert_allclose(fit.segment_start[1:], WASHES)


def test_standard_errors_match_replica_scatter() -> None:
    # the reported SE should match the spread of the estimate over independent records
    rng = np.random.default_rng(2)
    rates, ses = [], []
    for _ in range(300):
        t, y = synthetic(rng, n=200)
        f = fit_degradation(t, y, WASHES)
        rates.append(f.between_wash_rate_per_1000h)
        ses.append(f.between_wash_rate_per_1000h_se)
    assert np.std(rates, ddof=1) == pytest.approx(np.mean(ses), rel=0.15)
    assert np.mean(rates) == pytest.approx(-(REC + NONREC) * 1000.0, rel=0.02)


def test_overall_line_matches_scipy_linregress() -> None:
    t, y = synthetic(np.random.default_rng(3))
    fit = fit_degradation(t, y)  # no washes given
    ref = stats.linregress(t, y)
    assert fit.overall_rate_per_1000h == pytest.approx(ref.slope * 1000.0, rel=1e-10)
    assert fit.overall_rate_per_1000h_se == pytest.approx(ref.stderr * 1000.0, rel=1e-10)
    # with a single interval the piecewise model is that same line
    assert fit.between_wash_rate_per_1000h == pytest.approx(ref.slope * 1000.0, rel=1e-9)
    assert fit.r_squared == pytest.approx(ref.rvalue**2, rel=1e-9)
    assert fit.reason == "no_wash_in_record"
    assert np.isnan(fit.post_wash_rate_per_1000h)


def test_piecewise_model_matches_numpy_lstsq_with_dummies() -> None:
    # oracle: the same fixed-effects model assembled independently with numpy
    t, y = synthetic(np.random.default_rng(4), n=120)
    fit = fit_degradation(t, y, WASHES)
    seg = np.searchsorted(WASHES, t, side="right")
    start = np.concatenate([[t.min()], WASHES])[seg]
    X = np.column_stack([(seg == k).astype(float) for k in range(5)] + [t - start])
    beta, rss, *_ = np.linalg.lstsq(X, y, rcond=None)
    cov = rss[0] / (len(y) - 6) * np.linalg.inv(X.T @ X)
    assert fit.between_wash_rate_per_1000h == pytest.approx(beta[5] * 1000.0, rel=1e-9)
    assert fit.between_wash_rate_per_1000h_se == pytest.approx(
        np.sqrt(cov[5, 5]) * 1000.0, rel=1e-9
    )
    np.testing.assert_allclose(fit.segment_level, beta[:5], rtol=1e-12)
    ref = stats.linregress(np.concatenate([[t.min()], WASHES]), beta[:5])
    assert fit.post_wash_rate_per_1000h == pytest.approx(ref.slope * 1000.0, rel=1e-9)
    assert fit.post_wash_rate_per_1000h_se == pytest.approx(ref.stderr * 1000.0, rel=1e-9)


def test_edge_cases() -> None:
    f = fit_degradation([1.0, 2.0], [0.8, 0.8])
    assert f.reason == "too_few_points" and np.isnan(f.between_wash_rate_per_1000h) and f.n == 2
    # one point per wash interval: no slope information
    f = fit_degradation([0.0, 10.0, 20.0], [0.8, 0.81, 0.82], wash_events=[5.0, 15.0])
    assert f.reason == "too_few_points"
    f = fit_degradation([5.0, 5.0, 5.0, 5.0], [0.8, 0.81, 0.82, 0.83])
    assert f.reason == "no_spread_in_fired_hours" and np.isnan(f.overall_rate_per_1000h)
    # constant record: zero rate, zero uncertainty, R² undefined
    f = fit_degradation(np.arange(10.0), np.full(10, 0.86))
    assert f.between_wash_rate_per_1000h == pytest.approx(0.0, abs=1e-9)
    assert f.between_wash_rate_per_1000h_se == pytest.approx(0.0, abs=1e-9)
    assert np.isnan(f.r_squared) and f.reason == "constant_record"
    # NaNs dropped and counted, the rest fitted as if they were absent
    t, y = synthetic(np.random.default_rng(5), n=100)
    y2 = y.copy()
    y2[[3, 50]] = np.nan
    t2 = t.copy()
    t2[70] = np.inf
    f = fit_degradation(t2, y2, WASHES)
    g = fit_degradation(np.delete(t, [3, 50, 70]), np.delete(y, [3, 50, 70]), WASHES)
    assert f.n == 97 and f.n_dropped == 3
    assert f.between_wash_rate_per_1000h == pytest.approx(g.between_wash_rate_per_1000h, rel=1e-12)
    with pytest.raises(ModelInputError):
        fit_degradation([1.0, 2.0, 3.0], [1.0, 2.0])
    with pytest.raises(ModelInputError):
        fit_degradation([1.0, 2.0, 3.0], [1.0, 2.0, 3.0], [np.nan])


def test_two_intervals_propagated_error() -> None:
    rng = np.random.default_rng(6)
    t = np.linspace(0, 3000, 300)
    seg = t >= 1500.0
    y = ETA0 - NONREC * t - REC * (t - np.where(seg, 1500.0, 0.0)) + rng.normal(0, SIGMA, 300)
    f = fit_degradation(t, y, [1500.0])
    assert f.n_segments == 2 and f.reason == "ok"
    assert np.isfinite(f.post_wash_rate_per_1000h_se) and f.post_wash_rate_per_1000h_se > 0
    assert abs(f.post_wash_rate_per_1000h + NONREC * 1000) < 4 * f.post_wash_rate_per_1000h_se


def test_forecast_noise_free_exact() -> None:
    # y = 0.86 - 0.002 per 1000 h from t = 0: reaches 0.85 at 5000 h (arithmetic)
    t = np.linspace(0.0, 2000.0, 21)
    y = 0.86 - 0.002e-3 * t
    fit = fit_degradation(t, y)
    c = forecast_crossing(fit, 0.85, limit="lower")
    assert float(c.t) == pytest.approx(5000.0, rel=1e-9)
    assert str(c.status) == "ahead"
    # heat-rate-like rising KPI against an upper limit
    fit_hr = fit_degradation(t, 9500.0 + 0.05 * t)
    c = forecast_crossing(fit_hr, [9700.0, 9550.0, 9400.0], limit="upper")
    np.testing.assert_allclose(c.t[:2], [4000.0, 1000.0], rtol=1e-9)
    assert list(c.status) == ["ahead", "already_beyond", "already_beyond"]
    assert np.isnan(c.t[2])  # 9400 was passed before the record began
    # moving away from the limit: never
    c = forecast_crossing(fit_hr, 9400.0, limit="lower")
    assert np.isnan(c.t) and str(c.status) == "never"
    # below a lower limit now, though recovering: already beyond, no crossing in the record
    c = forecast_crossing(fit_hr, 9700.0, limit="lower")
    assert np.isnan(c.t) and str(c.status) == "already_beyond"


def test_forecast_band_is_where_the_line_band_meets_threshold() -> None:
    t, y = synthetic(np.random.default_rng(7), n=300)
    fit = fit_degradation(t, y, WASHES)
    thr = 0.855
    c = forecast_crossing(fit, thr, limit="lower", k=2.0)
    line = fit.current
    assert float(c.t_low) < float(c.t) < float(c.t_high)
    # at each end the threshold sits exactly k standard errors from the line
    for te in (float(c.t_low), float(c.t_high)):
        gap = abs(float(line.value(te)) - thr)
        assert gap == pytest.approx(2.0 * float(line.std_error(te)), rel=1e-8)


def test_forecast_band_coverage_monte_carlo() -> None:
    # JCGM 100:2008: k = 2 covers about 95 % for a normal estimate.
    rng = np.random.default_rng(8)
    t = np.linspace(0.0, 1000.0, 40)
    rate = -0.01e-3
    thr = 0.86 + rate * 3000.0  # true crossing at 3000 h
    hits = 0
    trials = 400
    for _ in range(trials):
        f = fit_degradation(t, 0.86 + rate * t + rng.normal(0, 0.002, t.size))
        c = forecast_crossing(f, thr, k=2.0)
        hits += bool(c.t_low <= 3000.0 <= c.t_high)
    assert 0.90 <= hits / trials <= 0.99


def test_forecast_insignificant_rate_gives_open_band() -> None:
    rng = np.random.default_rng(9)
    t = np.linspace(0.0, 100.0, 10)
    f = fit_degradation(t, 0.86 - 1e-6 * t + rng.normal(0, 0.005, 10))
    c = forecast_crossing(f, 0.80, k=2.0)
    assert np.isinf(c.t_high) or np.isnan(c.t)
    nofit = forecast_crossing(fit_degradation([1.0], [1.0]), 0.5)
    assert str(nofit.status) == "no_fit" and np.isnan(nofit.t)


def test_detect_steps_round_trip() -> None:
    rng = np.random.default_rng(10)
    n = 900
    t = np.arange(n) * 8.0  # one point per 8 fired hours
    y = 0.86 - 2e-6 * t + rng.normal(0, 0.0008, n)
    steps_at = [200, 450, 700]
    sizes = [0.006, 0.004, 0.008]
    for i, s in zip(steps_at, sizes, strict=True):
        y[i:] += s
    y[300] += 0.05  # a lone spike (bad sample): must not be reported
    y[600] = np.nan
    res = detect_steps(t, y, min_step=0.002, window=25)
    assert len(res.position) == 3
    np.testing.assert_allclose(res.position, steps_at, atol=2)
    np.testing.assert_allclose(res.size, sizes, atol=0.0012)
    np.testing.assert_allclose(res.t, t[res.position])
    # direction filter
    assert len(detect_steps(t, y, 0.002, 25, direction="down").position) == 0
    assert len(detect_steps(t, -y, 0.002, 25, direction="down").position) == 3


def test_detect_steps_none_in_noise_and_short_records() -> None:
    rng = np.random.default_rng(11)
    y = rng.normal(0, 0.0008, 2000)
    # min_step = 10 sigma / sqrt(w): far above the window-mean noise
    assert len(detect_steps(np.arange(2000.0), y, 10 * 0.0008 / 5, 25).position) == 0
    assert len(detect_steps(np.arange(10.0), y[:10], 0.001, 25).position) == 0
    with pytest.raises(ModelInputError):
        detect_steps(np.arange(10.0)[::-1], y[:10], 0.001, 2)
    with pytest.raises(ModelInputError):
        detect_steps(np.arange(10.0), y[:10], 0.0, 2)


def test_ewma_matches_lfilter_and_skips_nan() -> None:
    rng = np.random.default_rng(12)
    x = rng.normal(size=(3, 500))
    a = 0.1
    got = ewma(x, a)
    # S_i = a x_i + (1 - a) S_{i-1}, S_0 = x_0  ->  lfilter with zi = (1 - a) x_0 on x[1:]
    ref = np.empty_like(x)
    ref[:, 0] = x[:, 0]
    ref[:, 1:] = signal.lfilter([a], [1, -(1 - a)], x[:, 1:], axis=-1, zi=(1 - a) * x[:, :1])[0]
    np.testing.assert_allclose(got, ref, rtol=1e-12)
    np.testing.assert_allclose(ewma(x.T, a, axis=0), ref.T, rtol=1e-12)
    y = x[0].copy()
    y[[0, 10, 11]] = np.nan
    e = ewma(y, a)
    assert np.isnan(e[[0, 10, 11]]).all() and np.isfinite(e[12:]).all()
    np.testing.assert_allclose(np.delete(e, [0, 10, 11]), ewma(np.delete(y, [0, 10, 11]), a))
    assert float(ewma_step(np.nan, 2.0, 0.3)) == 2.0
    assert float(ewma_step(1.0, np.nan, 0.3)) == 1.0
    with pytest.raises(ModelInputError):
        ewma(x, 0.0)
