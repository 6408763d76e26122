"""Skewness-corrected intervals of the mean, each checked against an independent computation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st
from meanband import TrialError
from meanband.stats.interval import t_interval
from meanband.stats.skewed_intervals import (
    bootstrap_t_bounds,
    bootstrap_t_interval,
    hall_bootstrap_bounds,
    hall_bootstrap_interval,
    hall_bounds,
    hall_interval,
    hall_statistic,
    johnson_bounds,
    johnson_interval,
    resample_pivots,
    row_moments,
)
from reference_data import load_values, strd_certified
from scipy import optimize, stats

SIDES = ("two-sided", "upper", "lower")
INTERVALS = (johnson_interval, hall_interval, bootstrap_t_interval, hall_bootstrap_interval)
CLOSED_FORM = (johnson_bounds, hall_bounds)
# Invented response times (ms) of a queue poll: right-skewed, one slow call.
TIMES = np.array([2.1, 2.4, 2.2, 2.9, 2.3, 5.8, 2.5, 2.2, 3.1, 2.6, 2.4, 2.7])


def _bootstrap_bounds(method, x: np.ndarray, confidence: float, side: str, seed: int = 5):
    low, high = method(x[np.newaxis, :], confidence, side, n_resamples=199,
                       rng=np.random.default_rng(seed))
    return float(low[0]), float(high[0])


def _closed_bounds(method, x: np.ndarray, confidence: float, side: str):
    low, high = method(x[np.newaxis, :], confidence, side)
    return float(low[0]), float(high[0])


# --- limiting case: no skewness --------------------------------------------------------------


@pytest.mark.parametrize("method", [johnson_interval, hall_interval])
@pytest.mark.parametrize("side", SIDES)
@pytest.mark.parametrize("confidence", [0.9, 0.95, 0.99])
def test_zero_skewness_gives_the_t_interval_exactly(method, side: str, confidence: float) -> None:
    # Johnson (1978) and Hall (1992): with m3 = 0 both corrections vanish and T1 = T (from memory);
    # symmetric data have m3 = 0 exactly in floating point.
    x = np.array([3.0, 5.0, 6.0, 7.0, 9.0, 4.0, 8.0])
    got, ref = method(x, confidence, side), t_interval(x, confidence, side)
    assert (got.low, got.high, got.mean, got.sd, got.sem) == (ref.low, ref.high, ref.mean, ref.sd, ref.sem)


# --- reference checks --------------------------------------------------------------------------


def test_row_moments_against_nist_and_scipy() -> None:
    # NIST StRD univariate, Michelso: certified mean and s; third moment against scipy.stats.moment.
    x = load_values("Michelso")
    cert = strd_certified("Michelso")
    mean, sd, sem, m3, _ = row_moments(x[np.newaxis, :])
    assert mean[0] == pytest.approx(cert.mean, rel=1e-12)
    assert sd[0] == pytest.approx(cert.sd, rel=1e-12)
    assert sem[0] == pytest.approx(cert.sd / math.sqrt(x.size), rel=1e-12)
    assert m3[0] == pytest.approx(float(stats.moment(x, 3)), rel=1e-10)


@pytest.mark.parametrize("name", ["Michelso", "Mavro", "ZARR13"])
@pytest.mark.parametrize("side", SIDES)
def test_johnson_by_hand_on_published_data(name: str, side: str) -> None:
    # Johnson (1978): xbar + m3 / (6 s^2 n) +/- t(n-1) s / sqrt(n), computed here with math.fsum
    # on NIST data (StRD Michelso and Mavro; e-Handbook ZARR13), quantile from scipy.stats.t.
    x = load_values(name)
    n = x.size
    xbar = math.fsum(x) / n
    s2 = math.fsum((v - xbar) ** 2 for v in x) / (n - 1)
    m3 = math.fsum((v - xbar) ** 3 for v in x) / n
    center = xbar + m3 / (6.0 * s2 * n)
    q = 0.975 if side == "two-sided" else 0.95
    reach = float(stats.t.ppf(q, n - 1)) * math.sqrt(s2 / n)
    got = johnson_interval(x, 0.95, side)
    scale = math.sqrt(s2)
    if side != "upper":
        assert got.low == pytest.approx(center - reach, abs=1e-12 * scale + 1e-14 * abs(xbar))
    if side != "lower":
        assert got.high == pytest.approx(center + reach, abs=1e-12 * scale + 1e-14 * abs(xbar))


def _hall_t1_by_hand(x: np.ndarray, mu: float) -> float:
    # Hall (1992), from memory: S = (xbar - mu) / s, g = m3 / s^3,
    # T1 = sqrt(n) (S + g S^2 / 3 + g^2 S^3 / 27 + g / (6 n)).
    n = x.size
    xbar = math.fsum(x) / n
    s = math.sqrt(math.fsum((v - xbar) ** 2 for v in x) / (n - 1))
    g = math.fsum((v - xbar) ** 3 for v in x) / n / s**3
    big_s = (xbar - mu) / s
    return math.sqrt(n) * (big_s + g * big_s**2 / 3 + g**2 * big_s**3 / 27 + g / (6 * n))


@pytest.mark.parametrize("side", ["upper", "lower"])
def test_hall_bound_solves_halls_equation(side: str) -> None:
    # Hall (1992): the bound is the mu at which T1 equals the quantile; solved here by scipy's
    # brentq on the hand-written statistic, independent of the closed-form inverse.
    x = TIMES
    crit = float(stats.t.ppf(0.95, x.size - 1))
    target = -crit if side == "upper" else crit
    root = optimize.brentq(lambda mu: _hall_t1_by_hand(x, mu) - target, 0.0, 20.0, xtol=1e-14)
    got = hall_interval(x, 0.95, side)
    assert (got.high if side == "upper" else got.low) == pytest.approx(root, rel=1e-11)


def test_hall_statistic_rises_with_t() -> None:
    # Hall (1992): dT1/dT = (1 + g T / (3 sqrt n))^2 >= 0, so T1 is monotone and invertible.
    t = np.linspace(-40.0, 40.0, 2001)
    for g in (-3.0, -0.5, 0.0, 0.7, 4.0):
        values = hall_statistic(t, np.full_like(t, g), 10)
        assert np.all(np.diff(values) >= 0.0)


def _studentised(x: np.ndarray):
    xbar, n = float(np.mean(x)), x.size

    def statistic(sample: np.ndarray, axis: int = -1) -> np.ndarray:
        return (sample.mean(axis=axis) - xbar) / (sample.std(axis=axis, ddof=1) / math.sqrt(n))
    return statistic


@pytest.mark.parametrize(("side", "alternative"), [("two-sided", "two-sided"), ("upper", "greater"),
                                                   ("lower", "less")])
def test_bootstrap_t_equals_scipy_percentile_of_the_studentised_mean(side: str, alternative: str) -> None:
    # scipy.stats.bootstrap, method="percentile", on T* = (xbar* - xbar) / sem*, with the same
    # generator: its quantiles q give the bootstrap-t bounds xbar - q sem (Efron & Tibshirani 1993,
    # section 12.5). An upper bound of mu comes from the lower quantile of T* (alternative greater).
    x = TIMES
    res = stats.bootstrap((x,), _studentised(x), n_resamples=999, method="percentile",
                          alternative=alternative, rng=np.random.default_rng(11), vectorized=True)
    sem = float(np.std(x, ddof=1)) / math.sqrt(x.size)
    xbar = float(np.mean(x))
    want_low = -math.inf if side == "upper" else xbar - res.confidence_interval.high * sem
    want_high = math.inf if side == "lower" else xbar - res.confidence_interval.low * sem
    low, high = bootstrap_t_bounds(x[np.newaxis, :], 0.95, side, n_resamples=999,
                                   rng=np.random.default_rng(11))
    assert low[0] == pytest.approx(want_low, rel=1e-10)
    assert high[0] == pytest.approx(want_high, rel=1e-10)


def test_hall_bootstrap_equals_scipy_percentile_of_halls_statistic() -> None:
    # scipy.stats.bootstrap on Hall's T1* (hand-written, with scipy.stats.moment for m3*), same
    # generator; each bound then solves T1 = q by brentq (Hall 1992).
    x = TIMES
    n, xbar = x.size, float(np.mean(x))

    def t1_star(sample: np.ndarray, axis: int = -1) -> np.ndarray:
        s = sample.std(axis=axis, ddof=1)
        g = stats.moment(sample, 3, axis=axis) / s**3
        big_s = (sample.mean(axis=axis) - xbar) / s
        return math.sqrt(n) * (big_s + g * big_s**2 / 3 + g**2 * big_s**3 / 27 + g / (6 * n))

    res = stats.bootstrap((x,), t1_star, n_resamples=999, method="percentile",
                          rng=np.random.default_rng(12), vectorized=True)
    want = [optimize.brentq(lambda mu, q=q: _hall_t1_by_hand(x, mu) - q, 0.0, 20.0, xtol=1e-14)
            for q in (res.confidence_interval.high, res.confidence_interval.low)]
    low, high = hall_bootstrap_bounds(x[np.newaxis, :], 0.95, "two-sided", n_resamples=999,
                                      rng=np.random.default_rng(12))
    assert (low[0], high[0]) == pytest.approx(want, rel=1e-9)


def test_pivots_can_be_shared_across_confidences() -> None:
    # Common practice: one bootstrap distribution serves every level.
    rows = np.vstack([TIMES, TIMES[::-1] * 2.0 + 1.0])
    pivots = resample_pivots(rows, n_resamples=499, rng=np.random.default_rng(3))
    for confidence in (0.9, 0.99):
        shared = bootstrap_t_bounds(rows, confidence, "upper", pivots=pivots)
        fresh = bootstrap_t_bounds(rows, confidence, "upper", n_resamples=499, rng=np.random.default_rng(3))
        np.testing.assert_array_equal(shared[1], fresh[1])


# --- the 1-D methods are their companions on one row ------------------------------------------


def test_rows_are_independent_of_one_another() -> None:
    # Common practice: a vectorised companion must give each row what the row gives alone.
    rng = np.random.default_rng(8)
    rows = rng.lognormal(0.0, 0.7, (5, 15))
    for method in CLOSED_FORM:
        together = method(rows, 0.95, "two-sided")
        for i in range(len(rows)):
            alone = method(rows[i:i + 1], 0.95, "two-sided")
            assert (together[0][i], together[1][i]) == pytest.approx((alone[0][0], alone[1][0]), rel=1e-14)


def test_interval_fields() -> None:
    for method in INTERVALS:
        got = method(TIMES, 0.95, "upper")
        assert got.low == -math.inf and math.isfinite(got.high)
        assert got.n == TIMES.size and got.df == TIMES.size - 1 and got.estimand == "mean"
        assert got.mean == pytest.approx(float(np.mean(TIMES)), rel=1e-15)
        # Right skew moves the upper bound above that of t (Johnson 1978; Hall 1992).
        assert got.high > t_interval(TIMES, 0.95, "upper").high


# --- properties -----------------------------------------------------------------------------------

samples = st.lists(st.floats(0.1, 100.0, allow_nan=False), min_size=4, max_size=25).map(np.array).filter(
    lambda x: float(np.std(x)) > 1e-3 * float(np.mean(np.abs(x)))
)
levels = st.floats(0.6, 0.995)


@settings(max_examples=40, deadline=None)
@given(samples, levels)
def test_bounds_are_ordered(x: np.ndarray, confidence: float) -> None:
    for method in CLOSED_FORM:
        low, high = _closed_bounds(method, x, confidence, "two-sided")
        assert low <= high
    for method in (bootstrap_t_bounds, hall_bootstrap_bounds):
        low, high = _bootstrap_bounds(method, x, confidence, "two-sided")
        assert low <= high


@settings(max_examples=40, deadline=None)
@given(samples, levels)
def test_one_sided_bound_is_the_end_of_the_two_sided_interval_at_2c_minus_1(
    x: np.ndarray, confidence: float
) -> None:
    # Common practice: a one-sided C bound is one end of the two-sided (2C - 1) interval.
    scale = float(np.std(x)) + 1e-300
    for method in CLOSED_FORM:
        two = _closed_bounds(method, x, 2 * confidence - 1, "two-sided")
        assert _closed_bounds(method, x, confidence, "upper")[1] == pytest.approx(two[1], abs=1e-9 * scale)
        assert _closed_bounds(method, x, confidence, "lower")[0] == pytest.approx(two[0], abs=1e-9 * scale)
    for method in (bootstrap_t_bounds, hall_bootstrap_bounds):
        two = _bootstrap_bounds(method, x, 2 * confidence - 1, "two-sided")
        assert _bootstrap_bounds(method, x, confidence, "upper")[1] == pytest.approx(two[1], abs=1e-9 * scale)
        assert _bootstrap_bounds(method, x, confidence, "lower")[0] == pytest.approx(two[0], abs=1e-9 * scale)


@settings(max_examples=40, deadline=None)
@given(samples, st.floats(0.01, 100.0), st.floats(-1000.0, 1000.0))
# Found by hypothesis: tied resamples once read rounding of e2 - e1^2 as a spread.
@example(np.array([30.189826161629764, 26.0, 26.0, 26.0, 1.0, 15.0]), 33.0, 0.0)
@example(np.array([26.75, 26.8343915188942, 1.0, 2.0]), 1.5, 0.0)
def test_scale_and_shift_equivariance(x: np.ndarray, factor: float, offset: float) -> None:
    # Common practice: an interval of the mean moves with the units and the origin of the data.
    y = factor * x + offset
    for method in CLOSED_FORM:
        base, moved = _closed_bounds(method, x, 0.95, "two-sided"), _closed_bounds(method, y, 0.95, "two-sided")
        tol = 1e-8 * (abs(offset) + factor * float(np.max(np.abs(x))))
        # rel as well: on tiny, very skewed samples Hall's bound can lie far beyond the data.
        expected = (factor * base[0] + offset, factor * base[1] + offset)
        assert moved == pytest.approx(expected, rel=1e-8, abs=tol)
    # The resampled skewness comes from raw moments by matrix products, which cancel on nearly
    # tied resamples of a tiny sample: Hall's bootstrap bound keeps about five digits there.
    for method, rel in ((bootstrap_t_bounds, 1e-6), (hall_bootstrap_bounds, 1e-5)):
        base, moved = _bootstrap_bounds(method, x, 0.95, "two-sided"), _bootstrap_bounds(method, y, 0.95, "two-sided")
        if not all(np.isfinite([*base, *moved])):
            continue  # a tied, tiny sample can give an open bootstrap bound on one scale only
        tol = rel * (abs(offset) + factor * float(np.max(np.abs(x))))
        expected = (factor * base[0] + offset, factor * base[1] + offset)
        assert moved == pytest.approx(expected, rel=rel, abs=tol)


@settings(max_examples=30, deadline=None)
@given(samples)
def test_reflection_mirrors_the_interval(x: np.ndarray) -> None:
    # Johnson (1978), Hall (1992): the correction follows the sign of the skewness.
    for method in CLOSED_FORM:
        low, high = _closed_bounds(method, x, 0.95, "two-sided")
        mirrored = _closed_bounds(method, -x, 0.95, "two-sided")
        assert mirrored == pytest.approx((-high, -low), abs=1e-9 * float(np.max(np.abs(x))))


# --- bad input --------------------------------------------------------------------------------


@pytest.mark.parametrize("method", INTERVALS)
def test_bad_trials_are_refused(method) -> None:
    with pytest.raises(TrialError, match="NaN or infinite"):
        method(np.array([1.0, np.nan, 2.0, 3.0]), 0.95, "upper")
    with pytest.raises(TrialError, match="at least 3 trials"):
        method(np.array([1.0, 2.0]), 0.95, "upper")
    with pytest.raises(TrialError, match="strictly between 0 and 1"):
        method(TIMES, 1.5, "upper")
    with pytest.raises(TrialError, match="unknown side 'both'"):
        method(TIMES, 0.95, "both")


def test_companions_refuse_bad_arrays() -> None:
    with pytest.raises(TrialError, match="2-D array"):
        hall_bounds(TIMES, 0.95, "upper")
    with pytest.raises(TrialError, match="at least 3 trials per sample"):
        johnson_bounds(np.ones((4, 2)), 0.95, "upper")
    with pytest.raises(TrialError, match="NaN or infinite"):
        bootstrap_t_bounds(np.array([[1.0, np.inf, 2.0]]), 0.95, "upper")
    with pytest.raises(TrialError, match="n_resamples must be at least 99"):
        resample_pivots(TIMES[np.newaxis, :], n_resamples=10)


def test_zero_spread_gives_the_point_interval() -> None:
    # As meanband.mean_interval does for t: zero spread gives [mean, mean].
    x = np.full(6, 4.25)
    for method in INTERVALS:
        got = method(x, 0.95, "two-sided")
        assert (got.low, got.high) == (4.25, 4.25)
