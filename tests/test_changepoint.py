"""Change points in a series of run means: PELT placement and the verdict that allows for it."""

from __future__ import annotations

import numpy as np
import pytest
from meanband.errors import TrialError
from meanband.stats import changepoint
from meanband.stats.changepoint import NOT_ESTABLISHED, SHIFT, find_change_points


def runs(seed: int, n: int = 40, noise: float = 0.03, shift_at: int | None = None,
         shift: float = 0.15) -> np.ndarray:
    """Invented run means of a parcel-routing timing: lognormal run-to-run noise around 2 ms."""
    rng = np.random.default_rng(seed)
    means = 2e-3 * np.exp(rng.normal(0.0, noise, n))
    if shift_at is not None:
        means[shift_at:] *= 1.0 + shift
    return means


def test_planted_15_percent_shift_is_found_at_the_right_run() -> None:
    # The property the trend command promises; the rate over many seeds is in
    # studies/trend_change_points.py. Fixed seeds keep the test deterministic.
    found = []
    for seed in range(20):
        trend = find_change_points(runs(seed, shift_at=25), permutations=499, seed=seed)
        found.append([c.index for c in trend.confirmed])
    exact = sum(points == [25] for points in found)
    assert exact >= 18, found
    trend = find_change_points(runs(3, shift_at=25), permutations=499)
    (point,) = trend.confirmed
    assert point.verdict == SHIFT and point.adjusted_p <= 0.05
    assert point.shift == pytest.approx(0.15, abs=0.03)  # a relative shift on the log scale
    assert point.after / point.before == pytest.approx(1.0 + point.shift)


def test_pure_noise_confirms_no_change_point_beyond_alpha() -> None:
    confirmed = sum(bool(find_change_points(runs(seed), permutations=499, seed=seed).confirmed)
                    for seed in range(60))
    # The family-wise rate is at most 5% by construction (3 of 60 expected; 6 or more has binomial
    # chance about 8%). These fixed seeds confirm 1; judging each change point only within the stretch
    # between its unconfirmed neighbours confirmed 8 of them.
    assert confirmed <= 5
    trend = find_change_points(runs(11), permutations=499)
    assert trend.confirmed == () and trend.series_p > 0.05


def test_unconfirmed_change_point_keeps_its_place_and_says_so() -> None:
    # A 4% shift against 3% noise over 6 runs each side: PELT may place it, proof is lacking.
    means = np.r_[runs(5, n=6), runs(6, n=6) * 1.04]
    trend = find_change_points(means, permutations=499)
    assert all(c.verdict in (SHIFT, NOT_ESTABLISHED) for c in trend.change_points)
    assert all(c.confirmed == (max(c.adjusted_p, trend.series_p) <= 0.05) for c in trend.change_points)


def test_split_statistic_is_the_pooled_two_sample_t() -> None:
    # Reference: scipy.stats.ttest_ind(equal_var=True), the pooled-variance Student t.
    from scipy import stats

    x = runs(7, n=12)
    got = changepoint._split_statistics(x[None, :])[0]
    for i, k in enumerate(range(changepoint.MIN_SEGMENT, x.size - changepoint.MIN_SEGMENT + 1)):
        want = abs(stats.ttest_ind(x[:k], x[k:], equal_var=True).statistic)
        assert got[i] == pytest.approx(want, rel=1e-9)


def test_holm_matches_statsmodels() -> None:
    # Reference: statsmodels.stats.multitest.multipletests(method="holm").
    from statsmodels.stats.multitest import multipletests

    p = [0.01, 0.04, 0.03, 0.2, 0.005]
    assert changepoint._holm(p) == pytest.approx(list(multipletests(p, method="holm")[1]))


def test_pelt_agrees_with_exact_search_on_a_clear_two_shift_series() -> None:
    # Reference: ruptures' dynamic programming (exact least squares for a known count).
    import ruptures

    means = np.r_[runs(1, n=15), runs(2, n=15) * 1.3, runs(3, n=10) * 0.9]
    found = [c.index for c in find_change_points(means, permutations=199).change_points]
    exact = ruptures.Dynp(model="l2", min_size=3, jump=1).fit(np.log(means).reshape(-1, 1))
    assert found == exact.predict(n_bkps=2)[:-1] == [15, 30]


def test_same_history_gives_same_verdicts() -> None:
    means = runs(8, shift_at=20)
    assert find_change_points(means) == find_change_points(means)


def test_linear_scale_reports_differences() -> None:
    # Invented bench channel: a supply rail at 0.02 V offset that steps down by 0.05 V.
    rng = np.random.default_rng(4)
    rail = np.r_[rng.normal(0.02, 0.005, 20), rng.normal(-0.03, 0.005, 20)]
    trend = find_change_points(rail, permutations=499)
    assert trend.scale == "linear"
    (point,) = trend.confirmed
    assert point.index == 20 and point.shift == pytest.approx(-0.05, abs=0.005)


def test_short_and_flat_series_have_no_change_points_and_a_note() -> None:
    short = find_change_points([1.0, 1.1, 0.9, 1.0, 1.2])
    assert short.change_points == () and "at least 6" in (short.note or "")
    flat = find_change_points([2.0] * 10)
    assert flat.change_points == () and "same mean" in (flat.note or "")


@pytest.mark.parametrize(
    ("means", "kwargs", "message"),
    [
        ([1.0, float("nan")] * 4, {}, "finite"),
        ([[1.0, 2.0]], {}, "one series"),
        ([1.0] * 8, {"alpha": 1.5}, "alpha"),
        ([1.0] * 8, {"permutations": 10}, "at least 99"),
        ([1.0, -1.0] * 4, {"scale": "log"}, "positive"),
        ([1.0] * 8, {"scale": "cubic"}, "scale must be"),
    ],
)
def test_bad_input_is_a_clear_error(means: list, kwargs: dict, message: str) -> None:
    with pytest.raises(TrialError, match=message):
        find_change_points(means, **kwargs)
