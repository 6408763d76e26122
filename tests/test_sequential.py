"""Tests for sequential.py: the anytime-valid t bounds and the group-sequential boundaries."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meanband.errors import TrialError
from meanband.stats.methods import mean_interval
from meanband.stats.sequential import (
    DEFAULT_TIGHTEST_AT,
    METHOD,
    anytime_bounds,
    anytime_interval,
    anytime_multiplier,
    crossing_probabilities,
    expected_fraction,
    group_sequential_design,
    inflation_factor,
    log_mixture_ratio,
    prior_variance,
    spending,
    stop_or_go_on,
)
from scipy import integrate, optimize, stats

# ---------------------------------------------------------------------------------------------
# The confidence sequence
# ---------------------------------------------------------------------------------------------


def _mixture_ratio_by_quadrature(y: np.ndarray, tau2: float) -> float:
    """The defining integrals of the one-sided mixture, evaluated numerically (scipy.integrate).

    Numerator: the trials y ~ N(m, sigma^2) with m = delta * sigma, delta from twice the normal
    density N(0, tau^2) on delta < 0, and sigma from the scale-invariant measure dsigma/sigma;
    denominator: the same with m = 0. Both are integrated in log sigma; the normal likelihood
    is written through the sums of y and y^2 only to keep the integrand cheap.
    """
    n, total, squares = y.size, float(y.sum()), float(np.square(y).sum())
    scale = math.sqrt(squares / n)  # centre the integral on the data's own scale

    def log_like(m: float, sigma: float) -> float:
        return -n * math.log(sigma / scale) - (squares - 2 * m * total + n * m * m) / (2 * sigma**2) + n / 2

    def null(log_sigma: float) -> float:
        return math.exp(log_like(0.0, math.exp(log_sigma)))

    def alternative(delta: float, log_sigma: float) -> float:
        sigma = math.exp(log_sigma)
        prior = 2.0 * math.exp(-delta * delta / (2 * tau2)) / math.sqrt(2 * math.pi * tau2)
        return prior * math.exp(log_like(delta * sigma, sigma))

    lo, hi = math.log(scale) - 6.0, math.log(scale) + 4.0
    denominator = integrate.quad(null, lo, hi, epsabs=0, epsrel=1e-10, limit=200)[0]
    numerator = integrate.dblquad(
        alternative, lo, hi, -12.0 * math.sqrt(tau2), 0.0, epsabs=0, epsrel=1e-8
    )[0]
    return numerator / denominator


@pytest.mark.parametrize("seed, n, tau2", [(1, 3, 0.4), (2, 6, 0.4), (3, 9, 1.5), (4, 12, 0.1)])
def test_closed_form_matches_the_mixture_integral(seed, n, tau2):
    # Reference: direct numerical integration of the mixture that defines the bound (Lai 1976;
    # Wang & Ramdas 2023), scipy.integrate.quad/dblquad, against the closed form in sequential.py.
    rng = np.random.default_rng(seed)
    x = rng.normal(0.0, 1.0, n)
    candidate = float(x.mean() + 0.8 * x.std(ddof=1))  # a candidate mean above the sample mean
    y = x - candidate
    w = math.sqrt(n) * (candidate - x.mean()) / x.std(ddof=1)
    closed = float(np.exp(log_mixture_ratio(np.array([w]), np.array([float(n)]), tau2))[0])
    assert closed == pytest.approx(_mixture_ratio_by_quadrature(y, tau2), rel=1e-5)


def test_multiplier_is_the_root_of_the_mixture_ratio():
    # The bound sits where the mixture ratio reaches 1/alpha (Ville's inequality, Ville 1939).
    n = np.array([8, 20, 100, 1000])
    w = anytime_multiplier(n, 0.95, "upper")
    tau2 = prior_variance(0.05, DEFAULT_TIGHTEST_AT)
    np.testing.assert_allclose(log_mixture_ratio(w, n.astype(float), tau2), math.log(20.0), rtol=1e-9)


def test_unbounded_while_the_ratio_cannot_reach_its_level():
    # The ratio's supremum (1 + n tau^2)^((n-1)/2) * 2 F_n(n tau) (the limit w -> inf of the
    # closed form) is below 1/alpha up to n = 5 with the default tuning at C = 0.95, one-sided.
    tau2 = prior_variance(0.05, DEFAULT_TIGHTEST_AT)
    n = np.arange(2, 12)
    supremum = (1 + n * tau2) ** ((n - 1) / 2) * 2 * stats.t.cdf(n * math.sqrt(tau2), n)
    w = anytime_multiplier(n, 0.95, "upper")
    np.testing.assert_array_equal(np.isinf(w), supremum <= 20.0)
    assert np.isinf(w[:4]).all() and np.isfinite(w[4:]).all()  # finite from n = 6 on


def test_tuning_rule_is_nearly_tightest_where_it_says():
    # Reference: a direct search (scipy.optimize.minimize_scalar) over the prior scale for the
    # narrowest bound at n*; the rule of Howard et al. (2021) must come within 0.5%.
    for n_star, alpha in [(10, 0.05), (20, 0.05), (50, 0.005)]:
        def width(log_tau2, n_star=n_star, alpha=alpha):
            tau2 = math.exp(log_tau2)
            target = math.log(1 / alpha)
            return optimize.brentq(
                lambda w: float(log_mixture_ratio(np.array([w]), np.array([float(n_star)]), tau2)[0]) - target,
                0.0, 100.0,
            )
        best = optimize.minimize_scalar(width, bounds=(-6, 4), method="bounded").fun
        ruled = float(anytime_multiplier([n_star], 1 - alpha, "upper", n_star)[0])
        assert best <= ruled <= best * 1.005


def test_two_sided_interval_is_two_one_sided_bounds_at_half_the_level():
    x = np.random.default_rng(5).normal(3.0, 0.5, 40)
    both = anytime_interval(x, 0.95, "two-sided")
    upper = anytime_interval(x, 0.975, "upper")
    lower = anytime_interval(x, 0.975, "lower")
    assert both.high == pytest.approx(upper.high) and both.low == pytest.approx(lower.low)
    assert both.method == METHOD and both.n == 40 and math.isinf(upper.low) and math.isinf(lower.high)


def test_prefix_bounds_equal_the_interval_of_each_prefix():
    x = np.random.default_rng(6).normal(1e6, 2.0, 60)  # a large offset: prefix sums are shifted
    bounds = anytime_bounds(x, 0.9, "two-sided")
    assert bounds.n.tolist() == list(range(2, 61))
    for k in (2, 7, 30, 60):
        one = anytime_interval(x[:k], 0.9, "two-sided")
        i = k - 2
        assert bounds.mean[i] == pytest.approx(one.mean, rel=1e-14)
        assert bounds.sd[i] == pytest.approx(one.sd, rel=1e-6)
        assert bounds.low[i] == pytest.approx(one.low, rel=1e-12)
        assert bounds.high[i] == pytest.approx(one.high, rel=1e-12)


@settings(max_examples=60, deadline=None)
@given(
    n=st.integers(2, 3000),
    confidence=st.floats(0.5, 0.999),
    side=st.sampled_from(["two-sided", "upper", "lower"]),
    tightest_at=st.integers(2, 500),
    seed=st.integers(0, 2**32 - 1),
)
def test_anytime_interval_contains_the_fixed_n_t_interval(n, confidence, side, tightest_at, seed):
    # A confidence sequence is never narrower than the fixed-n interval; the fixed-n t interval comes from interval.py (Student 1908).
    x = np.random.default_rng(seed).normal(0.0, 1.0, min(n, 400)) if n <= 400 else None
    if x is None:  # large n: compare the multipliers, which are all the data enter through
        w = float(anytime_multiplier([n], confidence, side, tightest_at)[0])
        q = (1 + confidence) / 2 if side == "two-sided" else confidence
        assert w >= stats.t.ppf(q, n - 1)
        return
    wide = anytime_interval(x, confidence, side, tightest_at)
    fixed = mean_interval(x, confidence, side)
    assert wide.low <= fixed.low and fixed.high <= wide.high


@settings(max_examples=60, deadline=None)
@given(
    n=st.integers(2, 5000),
    more=st.integers(1, 5000),
    confidence=st.floats(0.5, 0.999),
    side=st.sampled_from(["two-sided", "upper", "lower"]),
    tightest_at=st.integers(2, 500),
)
def test_anytime_interval_narrows_as_n_grows(n, more, confidence, side, tightest_at):
    # For a fixed sample mean and sd the half-width is w_n * sd / sqrt(n): it never grows with n,
    # and shrinks strictly once it is finite.
    w = anytime_multiplier([n, n + more], confidence, side, tightest_at)
    reach = w / np.sqrt([n, n + more])
    assert reach[1] <= reach[0]
    if math.isfinite(reach[1]):
        assert reach[1] < reach[0]


def test_looking_after_every_trial_keeps_false_pass_within_one_minus_c():
    # Monte Carlo, fixed seed: true mean on a one-sided budget, looked at after every trial from
    # n = 2 to 150. The anytime bound must stay within 1 - C = 10% (plus 3 SE); the fixed t bound,
    # looked at the same way, exceeds it (so this check can tell the two apart).
    rng = np.random.default_rng(20261202)
    streams, length, confidence = 2000, 150, 0.90
    x = rng.normal(0.0, 1.0, (streams, length))
    n = np.arange(1, length + 1)
    mean = np.cumsum(x, axis=1) / n
    var = (np.cumsum(x * x, axis=1) - n * mean**2)[:, 1:] / (n[1:] - 1)
    sem = np.sqrt(var) / np.sqrt(n[1:])
    w = anytime_multiplier(n[1:], confidence, "upper")
    with np.errstate(invalid="ignore"):
        anytime = (mean[:, 1:] + w * sem <= 0.0).any(axis=1).mean()
    fixed = (mean[:, 1:] + stats.t.ppf(confidence, n[1:] - 1) * sem <= 0.0).any(axis=1).mean()
    se = math.sqrt(0.1 * 0.9 / streams)
    assert anytime <= 0.10 + 3 * se
    assert fixed > 0.10 + 3 * se


def test_stops_at_the_first_decided_prefix():
    rng = np.random.default_rng(7)
    clear = rng.normal(1.0, 0.1, 100)  # budget 2.0, ten sds above the mean
    decision = stop_or_go_on(clear, high=2.0, confidence=0.95)
    assert decision.verdict == "PASS" and decision.stop
    assert decision.n == 6  # the first count with a finite bound at these settings (see above)
    assert decision.seen == 100 and decision.interval.n == 6 and decision.interval.high <= 2.0
    # Trials alternating 0.9, 1.1 against a budget of 1.0: every prefix mean lies within 0.05 of
    # the edge, every bound straddles it, so the stream runs to its end undecided.
    edge = np.tile([0.9, 1.1], 50)
    late = stop_or_go_on(edge, high=1.0, confidence=0.95)
    assert late.verdict == "UNDECIDED" and not late.stop and late.n == 100
    over = stop_or_go_on(clear, high=0.5, confidence=0.95)
    assert over.verdict == "FAIL" and over.counter is not None and over.counter.low > 0.5


def test_first_look_skips_the_early_prefixes():
    clear = np.random.default_rng(7).normal(1.0, 0.1, 30)
    decision = stop_or_go_on(clear, high=2.0, first_look=12)
    assert decision.verdict == "PASS" and decision.n == 12
    short = stop_or_go_on(clear[:8], high=2.0, first_look=12)
    assert short.verdict == "UNDECIDED" and short.n == 8
    with pytest.raises(TrialError, match="first_look"):
        stop_or_go_on(clear, high=2.0, first_look=1)


def test_verdict_at_the_stop_matches_the_prefix_bounds():
    x = np.random.default_rng(8).normal(10.0, 1.0, 80)
    decision = stop_or_go_on(x, low=9.0, high=11.0, confidence=0.95)
    bounds = anytime_bounds(x, 0.95, "two-sided")
    inside = (bounds.low >= 9.0) & (bounds.high <= 11.0)
    assert decision.verdict == "PASS"
    assert decision.n == int(bounds.n[np.argmax(inside)])
    assert decision.interval.side == "two-sided" and decision.counter is None
    lower_budget = stop_or_go_on(x, low=12.0)
    assert lower_budget.verdict == "FAIL" and lower_budget.interval.side == "lower"


@pytest.mark.parametrize(
    "call, message",
    [
        (lambda: anytime_interval([1.0]), "at least 2"),
        (lambda: anytime_interval([1.0, math.nan, 2.0]), "NaN"),
        (lambda: anytime_interval([1.0, 2.0, 3.0], confidence=95), "did you mean 0.95"),
        (lambda: anytime_interval([1.0, 2.0, 3.0], side="both"), "unknown side"),
        (lambda: anytime_interval([1.0, 2.0, 3.0], tightest_at=1), "tightest_at"),
        (lambda: anytime_interval([1.0, 2.0, 3.0], tightest_at=20.5), "tightest_at"),
        (lambda: anytime_multiplier([1, 5]), ">= 2"),
        (lambda: anytime_multiplier([2.5]), "whole numbers"),
        (lambda: stop_or_go_on([1.0, 2.0, 3.0]), "at least one finite edge"),
        (lambda: stop_or_go_on([1.0, 2.0, 3.0], low=3.0, high=1.0), "swap them"),
        (lambda: stop_or_go_on([1.0, 2.0, 3.0], high=math.nan), "must be numbers"),
    ],
)
def test_bad_input_is_refused_with_a_remedy(call, message):
    with pytest.raises(TrialError, match=message):
        call()


# ---------------------------------------------------------------------------------------------
# Group-sequential boundaries
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "looks, shape, expected",
    [
        # Lan & DeMets (1983) O'Brien-Fleming-type spending, one-sided alpha 0.025, equally spaced
        # looks: the widely reproduced boundaries, from memory.
        (3, "obrien-fleming", [3.710, 2.511, 1.993]),
        (5, "obrien-fleming", [4.877, 3.357, 2.680, 2.290, 2.031]),
        # Lan & DeMets (1983) Pocock-type spending, same settings, from memory.
        (5, "pocock", [2.438, 2.427, 2.410, 2.397, 2.386]),
    ],
)
def test_spending_boundaries_match_published_values(looks, shape, expected):
    design = group_sequential_design(looks, confidence=0.975, shape=shape)
    np.testing.assert_allclose(design.bounds, expected, atol=6e-4)
    assert sum(design.spent) == pytest.approx(0.025, rel=1e-12)


@pytest.mark.parametrize(
    "looks, pocock, obrien_fleming",
    # Jennison & Turnbull (2000), Table 2.1 (Pocock constants C_P(K, alpha=0.05)) and Table 2.3
    # (O'Brien-Fleming constants C_B(K, alpha=0.05)), two-sided 0.05, from memory. The chance of
    # crossing the upper boundary alone is 0.025 up to the rounding of the tables (the chance of
    # crossing both boundaries of the two-sided test is negligible).
    [(2, 2.178, 1.977), (3, 2.289, 2.004), (4, 2.361, 2.024), (5, 2.413, 2.040)],
)
def test_recursion_reproduces_the_classical_constant_boundaries(looks, pocock, obrien_fleming):
    t = np.arange(1, looks + 1) / looks
    assert crossing_probabilities([pocock] * looks, t).sum() == pytest.approx(0.025, abs=1e-4)
    shaped = obrien_fleming * np.sqrt(looks / np.arange(1, looks + 1))
    assert crossing_probabilities(shaped, t).sum() == pytest.approx(0.025, abs=1e-4)


@pytest.mark.parametrize(
    "bounds, expected",
    # Jennison & Turnbull (2000), Tables 2.2 and 2.4: inflation factors R for two-sided 0.05,
    # power 0.9 (Pocock K=2: 1.100, K=5: 1.207; O'Brien-Fleming K=5: 1.026), from memory.
    [
        ([2.178] * 2, 1.100),
        ([2.413] * 5, 1.207),
        (list(2.040 * np.sqrt(5 / np.arange(1, 6))), 1.026),
    ],
)
def test_inflation_factors_match_the_table(bounds, expected):
    k = len(bounds)
    _, inflation = inflation_factor(bounds, np.arange(1, k + 1) / k, alpha=0.025, power=0.9)
    assert inflation == pytest.approx(expected, abs=2e-3)


def _crossing_by_multivariate_normal(bounds, t, drift):
    """Reference: first-crossing chances from scipy.stats.multivariate_normal (Genz's method)."""
    t = np.asarray(t)
    cov = np.sqrt(np.minimum.outer(t, t) / np.maximum.outer(t, t))
    below = [1.0]
    for j in range(1, t.size + 1):
        law = stats.multivariate_normal(drift * np.sqrt(t[:j]), cov[:j, :j], abseps=1e-7, releps=1e-7)
        below.append(float(law.cdf(np.asarray(bounds[:j]))) if j > 1
                     else float(stats.norm.cdf(bounds[0] - drift * math.sqrt(t[0]))))
    return -np.diff(below)


@pytest.mark.parametrize("shape", ["obrien-fleming", "pocock"])
def test_unequal_looks_against_scipy_multivariate_normal(shape):
    fractions = [0.25, 0.6, 0.8, 1.0]
    design = group_sequential_design(fractions, confidence=0.95, shape=shape, power=0.8)
    reference = _crossing_by_multivariate_normal(design.bounds, fractions, 0.0)
    np.testing.assert_allclose(reference, design.spent, atol=2e-6)
    np.testing.assert_allclose(design.spent, np.diff(np.concatenate([[0], spending(fractions, 0.05, shape)])))
    powered = _crossing_by_multivariate_normal(design.bounds, fractions, design.drift)
    assert powered.sum() == pytest.approx(0.8, abs=2e-6)


def test_monte_carlo_spending_and_expected_count():
    # Monte Carlo with a fixed seed: Brownian motion observed at the looks (Z_j = B(t_j)/sqrt(t_j)).
    # The share first crossing at each look matches the spent alpha within 4 SE; under the
    # planned effect the average fraction used matches expected_fraction.
    design = group_sequential_design(5, confidence=0.95, shape="obrien-fleming")
    t = np.asarray(design.fractions)
    rng = np.random.default_rng(20261203)
    paths = 200_000
    steps = rng.normal(0.0, 1.0, (paths, t.size)) * np.sqrt(np.diff(np.concatenate([[0], t])))
    for drift in (0.0, design.drift):
        z = np.cumsum(steps + drift * np.diff(np.concatenate([[0], t])), axis=1) / np.sqrt(t)
        crossed = z >= np.asarray(design.bounds)
        first = np.where(crossed.any(axis=1), np.argmax(crossed, axis=1), t.size - 1)
        if drift == 0.0:
            shares = np.bincount(np.where(crossed.any(axis=1), first, t.size), minlength=t.size + 1)[:-1] / paths
            se = np.sqrt(np.asarray(design.spent) * (1 - np.asarray(design.spent)) / paths)
            assert np.all(np.abs(shares - design.spent) <= 4 * se + 1e-9)
            assert crossed.any(axis=1).mean() == pytest.approx(0.05, abs=4 * math.sqrt(0.05 * 0.95 / paths))
        else:
            used = t[first]
            assert used.mean() == pytest.approx(expected_fraction(design.bounds, t, drift), abs=4 * used.std() / math.sqrt(paths))
            assert crossed.any(axis=1).mean() == pytest.approx(0.9, abs=4 * math.sqrt(0.09 / paths))


def test_obrien_fleming_costs_little_and_saves_under_an_effect():
    # The figures quoted for group-sequential designs: about +3% in maximum n and about 25% less expected n for 5 looks
    # (Jennison & Turnbull 2000, ch. 7, from memory: R about 1.02-1.03 for this spending).
    design = group_sequential_design(5, confidence=0.975, shape="obrien-fleming", power=0.9)
    assert 1.015 < design.inflation < 1.035
    assert 0.72 < design.expected_fraction < 0.80
    assert design.expected_fraction_null == pytest.approx(design.expected_fraction_at(0.0))
    assert design.expected_fraction_at(1.0) == pytest.approx(design.expected_fraction)
    counts = design.look_counts(100)
    assert counts[-1] == math.ceil(design.inflation * 100) and list(counts) == sorted(counts)


@pytest.mark.parametrize(
    "call, message",
    [
        (lambda: group_sequential_design([0.5, 0.4, 1.0]), "rise strictly"),
        (lambda: group_sequential_design([0.5, 0.9]), "last look"),
        (lambda: group_sequential_design([0.0, 1.0]), "rise strictly"),
        (lambda: group_sequential_design(0), "looks must be"),
        (lambda: group_sequential_design(2.5), "looks must be"),
        (lambda: group_sequential_design(5, shape="linear"), "unknown spending shape"),
        (lambda: group_sequential_design(5, power=1.0), "power"),
        (lambda: group_sequential_design(5, confidence=1.5), "confidence"),
        (lambda: crossing_probabilities([2.0, 2.0], [0.5, 0.75, 1.0]), "one boundary per look"),
        (lambda: group_sequential_design(3).look_counts(1), "fixed_n"),
    ],
)
def test_bad_design_input_is_refused_with_a_remedy(call, message):
    with pytest.raises(TrialError, match=message):
        call()
