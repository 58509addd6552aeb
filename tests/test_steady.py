"""Tests of models.steady against the published behaviour of the Cao & Rhinehart R-statistic.

Sources:
- [CR95] S. Cao, R. R. Rhinehart, "An efficient method for on-line identification of steady
  state", J. Process Control 5(6):363-374, 1995: at steady state (independent noise about a
  constant) E[nu2_f] / E[delta2_f] = 1 / (2 - lambda1), so R is near 1; trends and steps give
  R well above 1.
- [CR97] S. Cao, R. R. Rhinehart, "Critical values for a steady-state identifier",
  J. Process Control 7(2):149-152, 1997: for lambda1 = 0.2, lambda2 = lambda3 = 0.1 the
  critical value at about 5 % risk is near 1.4-1.5 (from memory).
- A naive re-implementation of the recursion written straight from the paper's equations
  (pure Python, scalar) is the oracle for the vectorised code.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from models.status import ModelInputError, Reason
from models.steady import (
    RStatisticState,
    r_statistic,
    steady_flags,
    steady_status,
    steady_step,
    update,
    window_stability,
)


def naive_r(x: list[float], l1: float = 0.2, l2: float = 0.1, l3: float = 0.1) -> list[float]:
    """Scalar recursion typed from [CR95]; no warm-up masking, zero start of the variances."""
    xf = x[0]
    nu2 = 0.0
    d2 = 0.0
    out = [math.nan]
    for i in range(1, len(x)):
        nu2 = l2 * (x[i] - xf) ** 2 + (1 - l2) * nu2
        xf = l1 * x[i] + (1 - l1) * xf
        d2 = l3 * (x[i] - x[i - 1]) ** 2 + (1 - l3) * d2
        out.append((2 - l1) * nu2 / d2 if d2 > 0 else math.nan)
    return out


def test_matches_naive_recursion_from_the_paper() -> None:
    # oracle: the equations of [CR95] typed out independently
    x = list(np.random.default_rng(11).normal(50.0, 2.0, 300) + np.linspace(0, 5, 300))
    got = r_statistic(np.array(x), warmup=0)
    ref = np.array(naive_r(x))
    np.testing.assert_allclose(got[1:], ref[1:], rtol=1e-12)


def test_steady_white_noise_gives_r_near_one() -> None:
    # [CR95]: at steady state (2 - lambda1) E[nu2_f] / E[delta2_f] = 1 and R is near 1.
    rng = np.random.default_rng(2024)
    x = 1.0e7 + rng.normal(0.0, 5.0e4, (20, 20_000))  # e.g. 10 MW with 50 kW noise
    state = RStatisticState.empty(x.shape[0])
    nu2 = np.zeros(x.shape)
    d2 = np.zeros(x.shape)
    R = np.empty(x.shape)
    for i in range(x.shape[1]):
        state, R[:, i] = update(state, x[:, i])
        nu2[:, i] = state.nu2_filtered
        d2[:, i] = state.delta2_filtered
    ratio = (2 - 0.2) * nu2[:, 100:].mean() / d2[:, 100:].mean()
    assert ratio == pytest.approx(1.0, abs=0.01)
    # R itself is a ratio of noisy filters: its median is near 1, its mean a little above
    # (Jensen); 4e5 samples make both estimates tight.
    assert np.median(R[:, 100:]) == pytest.approx(1.0, abs=0.03)
    assert 1.0 < R[:, 100:].mean() < 1.1


def test_null_quantiles_near_published_critical_values() -> None:
    # [CR97], from memory: R_crit near 1.4-1.5 at ~5 % risk for (0.2, 0.1, 0.1).
    rng = np.random.default_rng(7)
    R = r_statistic(rng.normal(size=(50, 20_000)))[:, 100:]
    q95 = np.quantile(R, 0.95)
    assert 1.35 < q95 < 1.55
    # the default leave threshold (2.0) is rarely exceeded at steady state
    assert np.mean(R > 2.0) < 0.01


def test_ramp_gives_r_much_greater_than_one() -> None:
    # [CR95]: a trend makes the deviation from the lagging filtered mean dominate.
    rng = np.random.default_rng(3)
    n = 400
    x = 0.5 * np.arange(n) + rng.normal(0.0, 1.0, n)  # 0.5 sigma per sample
    R = r_statistic(x)
    assert np.nanmedian(R[100:]) > 3.0


@pytest.mark.parametrize("slope", [0.1, 0.3, 1.0])
def test_ramp_filters_match_expected_values(slope: float) -> None:
    # From the definitions in [CR95]: on a ramp of s per sample with noise sigma the filtered
    # mean lags by s (1 - l1) / l1, so E[nu2_f] = 2 sigma^2 / (2 - l1) + (s / l1)^2 and
    # E[delta2_f] = 2 sigma^2 + s^2 (our derivation, noise independent of the ramp).
    rng = np.random.default_rng(13)
    n, l1 = 20_000, 0.2
    x = slope * np.arange(n) + rng.normal(0.0, 1.0, (8, n))
    state = RStatisticState.empty(8)
    nu2 = np.zeros(x.shape)
    d2 = np.zeros(x.shape)
    for i in range(n):
        state, _ = update(state, x[:, i])
        nu2[:, i], d2[:, i] = state.nu2_filtered, state.delta2_filtered
    assert nu2[:, 200:].mean() == pytest.approx(2 / (2 - l1) + (slope / l1) ** 2, rel=0.02)
    assert d2[:, 200:].mean() == pytest.approx(2 + slope**2, rel=0.02)


def test_step_gives_r_spike_then_recovers() -> None:
    # [CR95]: a step is a transient, then steady again once the filters have forgotten it.
    rng = np.random.default_rng(4)
    x = np.concatenate([np.zeros(300), np.full(300, 10.0)]) + rng.normal(0, 1.0, 600)
    R = r_statistic(x)
    assert np.nanmax(R[300:320]) > 5.0
    assert np.nanmedian(R[500:]) < 1.3


def test_online_update_equals_batch() -> None:
    rng = np.random.default_rng(5)
    x = rng.normal(0, 1, (4, 500)) + np.linspace(0, 3, 500)
    x[1, 50:60] = np.nan
    batch = r_statistic(x)
    state = RStatisticState.empty(4)
    online = np.empty_like(x)
    for i in range(x.shape[1]):
        state, online[:, i] = update(state, x[:, i])
    np.testing.assert_array_equal(online, batch)


def test_vectorised_equals_per_series_and_axis() -> None:
    rng = np.random.default_rng(6)
    x = rng.normal(0, 1, (3, 2, 400)).cumsum(axis=-1) * 0.1 + rng.normal(0, 1, (3, 2, 400))
    x[0, 1, 77] = np.nan
    whole = r_statistic(x)
    for i in range(3):
        for j in range(2):
            np.testing.assert_array_equal(whole[i, j], r_statistic(x[i, j]))
    np.testing.assert_array_equal(
        r_statistic(np.moveaxis(x, -1, 0), axis=0), np.moveaxis(whole, -1, 0)
    )


def test_nan_is_skipped_not_poisoning() -> None:
    rng = np.random.default_rng(8)
    x = rng.normal(0, 1, 600)
    y = x.copy()
    y[200] = np.nan
    y[300] = np.inf
    R = r_statistic(y)
    assert np.isnan(R[200]) and np.isnan(R[300])
    assert np.all(np.isfinite(R[301:]))
    # skip semantics: identical to the series with the bad samples removed
    ref = r_statistic(np.delete(x, [200, 300]))
    np.testing.assert_allclose(np.delete(R, [200, 300]), ref, rtol=1e-13)


def test_warmup_and_flat_signal_give_nan() -> None:
    R = r_statistic(np.random.default_rng(9).normal(size=100))
    assert np.all(np.isnan(R[:20])) and np.all(np.isfinite(R[20:]))  # default warm-up 20
    flat = r_statistic(np.full(100, 288.15))
    assert np.all(np.isnan(flat))  # no variation at all: cannot judge (stuck sensor?)


def test_hysteresis() -> None:
    R = np.array([3.0, 1.5, 1.1, 1.5, 1.9, 2.1, 1.5, 1.19, np.nan, 1.5, 1.0])
    want = np.array([0, 0, 1, 1, 1, 0, 0, 1, 0, 0, 1], dtype=bool)
    np.testing.assert_array_equal(steady_flags(R, enter=1.2, leave=2.0), want)
    # initial state honoured; between the thresholds the previous flag is kept
    np.testing.assert_array_equal(steady_flags([1.5, 1.5], initial=True), [True, True])
    np.testing.assert_array_equal(steady_flags([1.5, 1.5], initial=False), [False, False])
    # vectorised across series, step function agrees with the batch one
    RR = np.stack([R, R[::-1]])
    flags = steady_flags(RR)
    prev = np.zeros(2, dtype=bool)
    for i in range(RR.shape[1]):
        prev = steady_step(RR[:, i], prev)
        np.testing.assert_array_equal(prev, flags[:, i])
    st = steady_status(R, want)
    assert st[8] == Reason.NOT_STEADY | Reason.INPUT_MISSING
    assert st[2] == Reason.OK
    assert st[0] == Reason.NOT_STEADY
    with pytest.raises(ModelInputError):
        steady_flags(R, enter=2.5, leave=2.0)


def test_end_to_end_ramp_flagged_transient_steady_flagged_steady() -> None:
    rng = np.random.default_rng(10)
    steady = rng.normal(0, 1, 1000)
    ramp = 0.5 * np.arange(1000) + rng.normal(0, 1, 1000)
    flags = steady_flags(r_statistic(np.stack([steady, ramp])))
    assert flags[0, 100:].mean() > 0.95
    assert flags[1, 100:].mean() < 0.05


def test_window_stability_against_numpy_std() -> None:
    rng = np.random.default_rng(12)
    n, w = 500, 30
    power = 45.0e6 + rng.normal(0, 1.0e5, n)
    t1 = 288.0 + rng.normal(0, 0.2, n)
    t1[300:] += np.linspace(0, 40, 200)  # inlet temperature swings
    fuel = 2.5 + rng.normal(0, 0.01, n)
    fuel[100] = np.nan
    x = np.stack([power, t1, fuel])
    lim = np.array([3.0e5, 0.5, 0.05])
    res = window_stability(x, lim, w)
    for k in range(3):
        for i in range(w - 1, n):
            seg = x[k, i - w + 1 : i + 1]
            if np.all(np.isfinite(seg)):
                assert res.std[k, i] == pytest.approx(np.std(seg, ddof=1), rel=1e-9)
            else:
                assert np.isnan(res.std[k, i])
    assert np.all(np.isnan(res.std[:, : w - 1]))
    assert res.stable[0, w:].all()
    assert not res.stable[1, 350:].any()
    assert not res.stable[2, 100 : 100 + w].any()
    assert res.status[2, 110] == Reason.NOT_STEADY | Reason.INPUT_MISSING
    # with min_valid below the window a single gap still gets a verdict
    res2 = window_stability(fuel, 0.05, w, min_valid=w - 1)
    assert res2.std[110] == pytest.approx(np.nanstd(fuel[81:111], ddof=1), rel=1e-9)
    with pytest.raises(ModelInputError):
        window_stability(x, lim, 1)
