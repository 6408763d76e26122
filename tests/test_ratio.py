"""Ratio intervals: Welch on the log scale, Fieller, delta method, paired; and their error rates."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meanband import TrialError, Verdict
from meanband.stats.ratio import (
    judge_ratio,
    mean_difference,
    paired_ratio_interval,
    parse_fraction,
    ratio_interval,
)
from scipy import stats

DATA = Path(__file__).parent / "data"

RNG = np.random.default_rng(20261205)


# -- the log-scale interval against an independent computation ---------------------------------


@pytest.mark.parametrize("seed", range(5))
def test_log_ratio_matches_scipy_welch_on_logs(seed: int) -> None:
    rng = np.random.default_rng(seed)
    current = rng.lognormal(np.log(60e-6), 0.25, 25 + seed)
    baseline = rng.lognormal(np.log(50e-6), 0.4, 40 - seed)
    got = ratio_interval(current, baseline, 0.95, "log")
    # Reference: scipy.stats.ttest_ind(equal_var=False) on the logs, its confidence_interval()
    # exponentiated (the log-ratio approach; Welch 1947).
    ref = stats.ttest_ind(np.log(current), np.log(baseline), equal_var=False)
    ci = ref.confidence_interval(0.95)
    assert got.low == pytest.approx(math.exp(ci.low), rel=1e-12)
    assert got.high == pytest.approx(math.exp(ci.high), rel=1e-12)
    assert got.df == pytest.approx(float(ref.df), rel=1e-12)
    geometric = stats.gmean(current) / stats.gmean(baseline)
    assert got.ratio == pytest.approx(geometric, rel=1e-12)
    assert got.estimand == "geometric means"


@pytest.mark.parametrize("confidence", [0.8, 0.9, 0.99])
def test_log_ratio_levels_match_scipy(confidence: float) -> None:
    current, baseline = RNG.lognormal(0.1, 0.3, 12), RNG.lognormal(0.0, 0.3, 9)
    got = ratio_interval(current, baseline, confidence)
    # Reference: scipy.stats.ttest_ind(equal_var=False).confidence_interval(confidence_level).
    ci = stats.ttest_ind(np.log(current), np.log(baseline), equal_var=False).confidence_interval(
        confidence
    )
    assert (got.low, got.high) == pytest.approx((math.exp(ci.low), math.exp(ci.high)), rel=1e-12)


# -- the two-sample t machinery against the e-Handbook example ---------------------------------


def _auto83b() -> tuple[np.ndarray, np.ndarray]:
    return np.loadtxt(DATA / "AUTO83B_US.txt"), np.loadtxt(DATA / "AUTO83B_Japan.txt")


def test_auto83b_pooled_t_matches_e_handbook() -> None:
    us, japan = _auto83b()
    got = mean_difference(us, japan, pooled=True)
    # NIST/SEMATECH e-Handbook 1.3.5.3, AUTO83B.DAT (as quoted; tests/data/SOURCES.md section 3):
    # T = -12.62059 with 326 degrees of freedom.
    assert got.statistic == pytest.approx(-12.62059, abs=5e-6)
    assert got.df == 326
    # Reference: scipy.stats.ttest_ind(equal_var=True).
    ref = stats.ttest_ind(us, japan, equal_var=True)
    assert got.statistic == pytest.approx(float(ref.statistic), rel=1e-12)


def test_auto83b_welch_t_matches_reference() -> None:
    us, japan = _auto83b()
    got = mean_difference(us, japan)
    # tests/data/SOURCES.md section 3, computed column: Welch T -12.946273274932006,
    # df 136.87497667258336 (the e-Handbook quotes the pooled test only).
    assert got.statistic == pytest.approx(-12.946273274932006, rel=1e-10)
    assert got.df == pytest.approx(136.87497667258336, rel=1e-10)
    # Reference: scipy.stats.ttest_ind(equal_var=False) and its confidence_interval().
    ref = stats.ttest_ind(us, japan, equal_var=False)
    ci = ref.confidence_interval(0.95)
    assert (got.low, got.high) == pytest.approx((ci.low, ci.high), rel=1e-12)


# -- Fieller, delta, paired ---------------------------------------------------------------------


def test_fieller_bounds_solve_fieller_equation() -> None:
    current, baseline = RNG.normal(10.5, 1.0, 15), RNG.normal(10.0, 2.0, 20)
    got = ratio_interval(current, baseline, 0.95, "fieller")
    mc, mb = current.mean(), baseline.mean()
    vc, vb = current.var(ddof=1) / 15, baseline.var(ddof=1) / 20
    t = stats.t.ppf(0.975, got.df)
    # Fieller (1954): the bounds are the roots of (mc - r mb)^2 = t^2 (vc + r^2 vb).
    for r in (got.low, got.high):
        assert (mc - r * mb) ** 2 == pytest.approx(t**2 * (vc + r**2 * vb), rel=1e-9)
    assert got.low < mc / mb < got.high
    # Welch-Satterthwaite df at the point ratio (common practice for Fieller with unequal
    # variances, no single source).
    r = mc / mb
    df = (vc + r**2 * vb) ** 2 / (vc**2 / 14 + (r**2 * vb) ** 2 / 19)
    assert got.df == pytest.approx(df, rel=1e-12)


def test_fieller_and_delta_agree_when_precise_and_delta_matches_formula() -> None:
    current, baseline = RNG.normal(12.0, 0.1, 50), RNG.normal(10.0, 0.1, 50)
    fieller = ratio_interval(current, baseline, 0.95, "fieller")
    delta = ratio_interval(current, baseline, 0.95, "delta")
    # With means 100 standard errors from zero the two methods agree closely (common practice).
    assert fieller.low == pytest.approx(delta.low, rel=1e-4)
    assert fieller.high == pytest.approx(delta.high, rel=1e-4)
    r = current.mean() / baseline.mean()
    se = r * math.sqrt(current.var(ddof=1) / 50 / current.mean() ** 2
                       + baseline.var(ddof=1) / 50 / baseline.mean() ** 2)
    t = stats.t.ppf(0.975, delta.df)
    # Delta method (first-order Taylor expansion of a ratio; common practice).
    assert delta.high - delta.ratio == pytest.approx(t * se, rel=1e-10)


def test_fieller_unbounded_when_baseline_mean_is_near_zero() -> None:
    got = ratio_interval([1.0, 1.2, 0.9, 1.1], [0.1, -0.2, 0.15, 0.0], method="fieller")
    assert not got.bounded and got.low == -math.inf and got.high == math.inf
    assert judge_ratio(got, 0.95, 1.05) is Verdict.UNDECIDED


def test_paired_ratio_matches_paired_t_on_logs() -> None:
    old = RNG.lognormal(np.log(50e-6), 0.3, 30)
    new = old * RNG.lognormal(np.log(1.1), 0.05, 30)
    got = paired_ratio_interval(new, old)
    # Reference: scipy.stats.ttest_rel on the logs, confidence_interval() exponentiated.
    ci = stats.ttest_rel(np.log(new), np.log(old)).confidence_interval(0.95)
    assert (got.low, got.high) == pytest.approx((math.exp(ci.low), math.exp(ci.high)), rel=1e-12)


# -- verdicts and error rates --------------------------------------------------------------------


def test_injected_twenty_percent_slowdown_on_noisy_timings_is_regressed() -> None:
    rng = np.random.default_rng(7)
    baseline = rng.lognormal(np.log(200e-6), 0.3, 30)   # 30% log-scale noise
    current = rng.lognormal(np.log(240e-6), 0.3, 30)    # 20% slower
    got = ratio_interval(current, baseline)
    assert judge_ratio(got, high=1.05) is Verdict.FAIL


def test_power_against_twenty_percent_slowdown_matches_noncentral_t() -> None:
    rng = np.random.default_rng(11)
    reps, n, sd = 400, 40, 0.3
    flagged = 0
    for _ in range(reps):
        baseline = rng.lognormal(0.0, sd, n)
        current = rng.lognormal(math.log(1.2), sd, n)
        flagged += judge_ratio(ratio_interval(current, baseline), high=1.05) is Verdict.FAIL
    # Expected power: the low end of the 95% interval clears 1.05 when the t statistic against
    # log(1.05) exceeds t(0.975, df); noncentral t with noncentrality (log 1.2 - log 1.05) / se
    # (scipy.stats.nct; common practice for the power of a t test).
    df = 2 * n - 2
    nc = (math.log(1.2) - math.log(1.05)) / (sd * math.sqrt(2 / n))
    expected = float(stats.nct.sf(stats.t.ppf(0.975, df), df, nc))
    assert abs(flagged / reps - expected) < 4 * math.sqrt(expected * (1 - expected) / reps)


def _rate(reps: int, true_ratio: float, limit: float, seed: int) -> float:
    rng = np.random.default_rng(seed)
    regressed = 0
    for _ in range(reps):
        baseline = rng.lognormal(0.0, 0.35, 15)
        current = rng.lognormal(math.log(true_ratio), 0.35, 20)
        regressed += judge_ratio(ratio_interval(current, baseline), high=limit) is Verdict.FAIL
    return regressed / reps


def test_false_regression_rate_at_the_limit_is_half_the_miss_rate() -> None:
    # True ratio exactly on the limit: "regressed" when the interval's low end is above it,
    # which happens with probability (1 - C) / 2 = 2.5% (Welch 1947 is near exact here).
    reps = 2000
    rate = _rate(reps, 1.0, 1.0, seed=3)
    slack = 3.5 * math.sqrt(0.025 * 0.975 / reps)  # binomial, common practice
    assert abs(rate - 0.025) < slack


def test_identical_distributions_rarely_regress_with_the_default_limit() -> None:
    reps = 1000
    rate = _rate(reps, 1.0, 1.05, seed=4)
    assert rate <= 0.025


def test_fieller_false_change_rate_on_identical_normal_data() -> None:
    rng = np.random.default_rng(5)
    reps = 1500
    outside = 0
    for _ in range(reps):
        a, b = rng.normal(5.0, 0.5, 12), rng.normal(5.0, 0.5, 12)
        outside += not ratio_interval(a, b, method="fieller").contains(1.0)
    # Two-sided 95% interval misses the true ratio 1 in 5% of samples; binomial slack.
    assert abs(outside / reps - 0.05) < 3.5 * math.sqrt(0.05 * 0.95 / reps)


def test_judge_ratio_three_states() -> None:
    current, baseline = np.array([1.0, 1.1, 0.9]), np.array([1.0, 1.05, 0.95])
    iv = ratio_interval(current, baseline)
    assert judge_ratio(iv, high=iv.high) is Verdict.PASS
    assert judge_ratio(iv, high=iv.low * 0.99) is Verdict.FAIL
    assert judge_ratio(iv, high=iv.ratio) is Verdict.UNDECIDED
    assert judge_ratio(iv, low=iv.high * 1.01) is Verdict.FAIL
    with pytest.raises(TrialError, match="low edge"):
        judge_ratio(iv, 2.0, 1.0)


# -- bad input -------------------------------------------------------------------------------------


def test_log_ratio_refuses_non_positive_values_with_remedy() -> None:
    with pytest.raises(TrialError, match=r"zero or negative.*fieller"):
        ratio_interval([1.0, 0.0, 2.0], [1.0, 2.0])


def test_ratio_refuses_unknown_method_nan_and_zero_baseline() -> None:
    with pytest.raises(TrialError, match="unknown ratio method"):
        ratio_interval([1.0, 2.0], [1.0, 2.0], method="median")
    with pytest.raises(TrialError, match="NaN"):
        ratio_interval([1.0, float("nan")], [1.0, 2.0])
    with pytest.raises(TrialError, match="baseline mean is exactly 0"):
        ratio_interval([1.0, 2.0], [-1.0, 1.0], method="delta")
    with pytest.raises(TrialError, match="same count"):
        paired_ratio_interval([1.0, 2.0, 3.0], [1.0, 2.0])


def test_zero_spread_gives_a_point_interval() -> None:
    got = ratio_interval([2.0, 2.0, 2.0], [1.0, 1.0])
    assert (got.low, got.ratio, got.high) == pytest.approx((2.0, 2.0, 2.0))


@pytest.mark.parametrize(("text", "value"), [("5%", 0.05), ("0.05", 0.05), (" 12.5 % ", 0.125),
                                             (0.1, 0.1), ("0", 0.0)])
def test_parse_fraction(text: str | float, value: float) -> None:
    assert parse_fraction(text, "max_increase") == pytest.approx(value)


@pytest.mark.parametrize("text", ["-5%", "five", "5 percent", "inf", "nan%", ""])
def test_parse_fraction_refuses_bad_text(text: str) -> None:
    with pytest.raises(TrialError, match="max_increase"):
        parse_fraction(text, "max_increase")


# -- properties ------------------------------------------------------------------------------------

positive_samples = st.lists(st.floats(1e-3, 1e3), min_size=3, max_size=30).filter(
    lambda xs: max(xs) / min(xs) > 1.0001
)


@settings(max_examples=60, deadline=None)
@given(positive_samples, positive_samples, st.floats(1e-6, 1e6))
def test_log_ratio_is_unit_free_and_inverts(a: list[float], b: list[float], scale: float) -> None:
    forward = ratio_interval(a, b)
    # Same answer in any unit (seconds or microseconds): the log method only sees ratios.
    scaled = ratio_interval(np.array(a) * scale, np.array(b) * scale)
    assert (scaled.low, scaled.high) == pytest.approx((forward.low, forward.high), rel=1e-9)
    # Swapping the samples inverts the interval exactly.
    backward = ratio_interval(b, a)
    assert (backward.low, backward.high) == pytest.approx((1 / forward.high, 1 / forward.low),
                                                          rel=1e-9)
    assert forward.low <= forward.ratio <= forward.high


@settings(max_examples=60, deadline=None)
@given(positive_samples, positive_samples, st.floats(1e-6, 1e6))
def test_fieller_is_unit_free(a: list[float], b: list[float], scale: float) -> None:
    forward = ratio_interval(a, b, method="fieller")
    scaled = ratio_interval(np.array(a) * scale, np.array(b) * scale, method="fieller")
    assert scaled.bounded == forward.bounded
    if forward.bounded:
        assert (scaled.low, scaled.high) == pytest.approx((forward.low, forward.high), rel=1e-7)
        assert forward.low <= forward.ratio <= forward.high
