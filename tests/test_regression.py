"""A check against its baseline: verdict words, limits, and the trial count that would decide."""

from __future__ import annotations

import math

import numpy as np
import pytest
from meanband.report.baseline import format_limit, format_ratio
from meanband.stats.regression import CANNOT_TELL, NO_REGRESSION, REGRESSED, Limits, compare_samples

RNG = np.random.default_rng(20261207)


def exact_lognormal(log_mean: float, log_sd: float, n: int) -> np.ndarray:
    """Trials whose logs have exactly this mean and sd."""
    z = RNG.normal(size=n)
    return np.exp(log_mean + log_sd * (z - z.mean()) / z.std(ddof=1))


def test_three_words_for_timings() -> None:
    base = exact_lognormal(0.0, 0.1, 30)
    assert compare_samples(exact_lognormal(math.log(1.3), 0.1, 30), base,
                           timing=True)["status"] == REGRESSED
    assert compare_samples(exact_lognormal(math.log(0.9), 0.1, 30), base,
                           timing=True)["status"] == NO_REGRESSION
    assert compare_samples(exact_lognormal(math.log(1.05), 0.1, 30), base,
                           timing=True)["status"] == CANNOT_TELL


def test_values_may_move_either_way_within_max_change() -> None:
    base = RNG.normal(12.0, 0.01, 20)
    limits = Limits(max_change=0.02)
    down = compare_samples(base - 0.6, base, timing=False, limits=limits)
    assert down["status"] == REGRESSED and down["ratio"]["method"] == "fieller"
    assert compare_samples(base + 0.1, base, timing=False, limits=limits)["status"] == NO_REGRESSION
    assert format_limit(down) == "0.98x..1.02x"


def test_speed_up_is_never_a_regression_for_timings() -> None:
    base = exact_lognormal(0.0, 0.1, 30)
    result = compare_samples(exact_lognormal(math.log(0.5), 0.1, 30), base, timing=True)
    assert result["status"] == NO_REGRESSION and format_limit(result) == "<= 1.05x"
    assert format_ratio(result["ratio"]).startswith("0.500x [")


def test_suggested_trials_reach_the_planned_power() -> None:
    # Pilot: 10 trials a side, true ratio 1.15, 30% log-scale spread, limit 1.05: undecided.
    pilot = compare_samples(exact_lognormal(math.log(1.15), 0.3, 10),
                            exact_lognormal(0.0, 0.3, 10), timing=True)
    assert pilot["status"] == CANNOT_TELL
    n = pilot["suggested_n"]
    # Normal approximation (common practice): n = (z(0.975) + z(0.9))^2 * 2 * 0.3^2 / margin^2.
    margin = math.log(1.15 / 1.05)
    approx = (1.959964 + 1.281552) ** 2 * 2 * 0.09 / margin**2
    assert approx <= n <= approx * 1.05 + 3
    # Simulated at the suggested n, about 90% of comparisons decide (planning power 0.9).
    rng = np.random.default_rng(9)
    reps = 300
    decided = sum(
        compare_samples(rng.lognormal(math.log(1.15), 0.3, n), rng.lognormal(0.0, 0.3, n),
                        timing=True)["status"] == REGRESSED
        for _ in range(reps)
    )
    assert abs(decided / reps - 0.9) < 3.5 * math.sqrt(0.9 * 0.1 / reps)


def test_bad_trials_raise() -> None:
    from meanband import TrialError

    with pytest.raises(TrialError, match="at least 2"):
        compare_samples([1.0], [1.0, 2.0], timing=True)


def test_cannot_tell_counts_follow_the_stated_power() -> None:
    # Before: the "cannot tell yet" count ignored the power setting (always 90%).
    rng = np.random.default_rng(12)
    base = rng.lognormal(0.0, 0.05, 12)
    now = rng.lognormal(0.045, 0.05, 12)
    counts = {}
    for power in (0.5, 0.9, 0.99):
        result = compare_samples(now, base, timing=True, power=power)
        assert result["status"] == CANNOT_TELL
        counts[power] = result["suggested_n"]
    assert counts[0.5] < counts[0.9] < counts[0.99]
