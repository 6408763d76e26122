"""Tests for meanband.stats.interval: the Student-t interval of the mean and its critical values."""

from __future__ import annotations

import json
import math
import warnings
from collections import Counter

import meanband
import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from meanband import Interval, TrialError, critical_t, mean_interval
from meanband.stats.interval import SIDES
from meanband.stats.methods import METHODS
from reference_data import STRD_NAMES, STRD_RTOL, load_values, strd_certified

LEVELS = (0.5, 0.8, 0.9, 0.95, 0.975, 0.99, 0.999)
SIZES = (2, 3, 4, 5, 7, 10, 15, 25, 40, 60, 100, 170, 250, 400, 500)

# Upper critical values of Student's t, t(1 - a, df), for upper-tail areas a; NIST/SEMATECH
# e-Handbook of Statistical Methods, section 1.3.6.7.2 "Critical Values of the Student's t
# Distribution". From memory: that table page is not in tests/data. It prints 3 decimals.
T_TABLE_TAILS = (0.10, 0.05, 0.025, 0.01, 0.005)
T_TABLE = {
    1: (3.078, 6.314, 12.706, 31.821, 63.657),
    2: (1.886, 2.920, 4.303, 6.965, 9.925),
    3: (1.638, 2.353, 3.182, 4.541, 5.841),
    4: (1.533, 2.132, 2.776, 3.747, 4.604),
    5: (1.476, 2.015, 2.571, 3.365, 4.032),
    6: (1.440, 1.943, 2.447, 3.143, 3.707),
    7: (1.415, 1.895, 2.365, 2.998, 3.499),
    8: (1.397, 1.860, 2.306, 2.896, 3.355),
    9: (1.383, 1.833, 2.262, 2.821, 3.250),
    10: (1.372, 1.812, 2.228, 2.764, 3.169),
    15: (1.341, 1.753, 2.131, 2.602, 2.947),
    20: (1.325, 1.725, 2.086, 2.528, 2.845),
    25: (1.316, 1.708, 2.060, 2.485, 2.787),
    30: (1.310, 1.697, 2.042, 2.457, 2.750),
    40: (1.303, 1.684, 2.021, 2.423, 2.704),
    60: (1.296, 1.671, 2.000, 2.390, 2.660),
    100: (1.290, 1.660, 1.984, 2.364, 2.626),
}
# The table's last row, df = infinity: the standard normal quantiles (from memory).
T_TABLE_INFINITE_DF = (1.282, 1.645, 1.960, 2.326, 2.576)
# Half a unit in the third decimal, plus room for the binary representation of the quantile.
TABLE_ATOL = 5e-4 + 1e-12


def _table_cases() -> list[tuple[float, float, float]]:
    cases = [
        (df, tail, value)
        for df, row in T_TABLE.items()
        for tail, value in zip(T_TABLE_TAILS, row, strict=True)
    ]
    cases += [
        (math.inf, tail, value)
        for tail, value in zip(T_TABLE_TAILS, T_TABLE_INFINITE_DF, strict=True)
    ]
    return cases


class TestCriticalValues:
    @pytest.mark.parametrize(("df", "tail", "value"), _table_cases())
    def test_one_sided_against_the_handbook_table(
        self, df: float, tail: float, value: float
    ) -> None:
        # e-Handbook 1.3.6.7.2 (from memory): the one-sided bound at confidence 1 - a.
        assert critical_t(1.0 - tail, df, "upper") == pytest.approx(value, abs=TABLE_ATOL)
        assert critical_t(1.0 - tail, df, "lower") == pytest.approx(value, abs=TABLE_ATOL)

    @pytest.mark.parametrize(("df", "tail", "value"), _table_cases())
    def test_two_sided_uses_half_the_tail(self, df: float, tail: float, value: float) -> None:
        # e-Handbook 1.3.6.7.2 (from memory): a two-sided interval at confidence 1 - 2a uses the
        # same upper critical value t(1 - a, df).
        assert critical_t(1.0 - 2.0 * tail, df, "two-sided") == pytest.approx(value, abs=TABLE_ATOL)

    def test_the_table_grid_is_large_enough(self) -> None:
        assert len(_table_cases()) >= 30

    def test_common_practice_values(self) -> None:
        # Common practice, no source: t(0.975, 15) is about 2.13 and t(0.975, 8) about 2.31.
        assert critical_t(0.95, 15) == pytest.approx(2.13, abs=5e-3)
        assert critical_t(0.95, 8) == pytest.approx(2.31, abs=5e-3)

    def test_zarr13_critical_values(self) -> None:
        # e-Handbook 1.3.5.2 (tests/data/SOURCES.md section 2): t(1-0.025, 194) = 1.9723 and the
        # upper one-tailed t(0.95, 194) = 1.6527, both printed to 4 decimals.
        assert critical_t(0.95, 194) == pytest.approx(1.9723, abs=5e-5)
        assert critical_t(0.95, 194, "upper") == pytest.approx(1.6527, abs=5e-5)

    @pytest.mark.parametrize("df", [1, 2, 5, 30, 1000])
    @pytest.mark.parametrize("confidence", LEVELS)
    def test_matches_scipy_quantiles(self, df: int, confidence: float) -> None:
        from scipy.stats import t

        # scipy.stats.t.ppf: the two-sided value is the (1+C)/2 quantile, one-sided the C quantile.
        two_sided = t.ppf((1 + confidence) / 2, df)
        assert critical_t(confidence, df) == pytest.approx(two_sided, rel=1e-13)
        one_sided = t.ppf(confidence, df)
        assert critical_t(confidence, df, "upper") == pytest.approx(one_sided, rel=1e-13)

    def test_grows_as_degrees_of_freedom_shrink(self) -> None:
        # Why the interval widens when the sd is only estimated (Student 1908).
        values = [critical_t(0.95, df) for df in (math.inf, 1000, 100, 30, 10, 5, 2, 1)]
        assert values == sorted(values)
        assert len(set(values)) == len(values)

    @pytest.mark.parametrize("confidence", [0.0, 1.0, 1.2, -0.5, math.nan])
    def test_bad_confidence(self, confidence: float) -> None:
        with pytest.raises(TrialError, match="confidence"):
            critical_t(confidence, 10)

    def test_bad_side(self) -> None:
        with pytest.raises(TrialError, match="unknown side 'both'"):
            critical_t(0.95, 10, "both")

    @pytest.mark.parametrize("df", [0, -1, math.nan, -math.inf])
    def test_bad_degrees_of_freedom(self, df: float) -> None:
        with pytest.raises(TrialError, match="degrees of freedom"):
            critical_t(0.95, df)


class TestZARR13:
    """e-Handbook 1.3.5.2 "Confidence Limits for the Mean", heat flow meter data ZARR13.DAT."""

    def test_two_sided_95_percent_interval(self) -> None:
        x = load_values("ZARR13")
        iv = mean_interval(x, 0.95)
        # e-Handbook 1.3.5.2 (SOURCES.md section 2): N = 195, mean 9.261460, sd 0.022789,
        # interval (9.258242, 9.264679), printed to 6 decimals. The page cuts digits off rather
        # than rounding some of them (the mean 9.2614608 prints as 9.261460), so allow one unit
        # in the last printed place.
        assert iv.n == 195
        assert iv.df == 194
        assert iv.mean == pytest.approx(9.261460, abs=1e-6)
        assert iv.sd == pytest.approx(0.022789, abs=1e-6)
        assert iv.low == pytest.approx(9.258242, abs=1e-6)
        assert iv.high == pytest.approx(9.264679, abs=1e-6)
        assert iv.critical == pytest.approx(1.9723, abs=5e-5)

    def test_one_sample_t_statistic(self) -> None:
        # e-Handbook 1.3.5.2 (SOURCES.md section 2): T = 2611.284 against mu0 = 5. The page
        # worked from its 6-decimal mean; the full-precision T is 2611.2857 (SOURCES.md), so the
        # published figure agrees to about 7e-7 relative: compare at 1e-6.
        iv = mean_interval(load_values("ZARR13"))
        assert (iv.mean - 5.0) / iv.sem == pytest.approx(2611.284, rel=1e-6)

    def test_one_sided_bounds_use_the_one_tailed_value(self) -> None:
        # e-Handbook 1.3.5.2: upper one-tailed critical value t(0.95, 194) = 1.6527.
        x = load_values("ZARR13")
        upper = mean_interval(x, 0.95, "upper")
        lower = mean_interval(x, 0.95, "lower")
        assert upper.critical == pytest.approx(1.6527, abs=5e-5)
        assert upper.high == pytest.approx(9.261460 + 1.6527 * 0.022789 / math.sqrt(195), abs=2e-6)
        assert lower.low == pytest.approx(9.261460 - 1.6527 * 0.022789 / math.sqrt(195), abs=2e-6)
        assert upper.low == -math.inf
        assert lower.high == math.inf


class TestStRDIntervals:
    @pytest.mark.parametrize("name", STRD_NAMES)
    def test_interval_from_certified_mean_and_sd(self, name: str) -> None:
        # NIST StRD certified mean and s (lines 41-42 of <name>.dat) with t from scipy.stats.t.ppf,
        # as in SOURCES.md section 1's interval column; tolerance from the s tolerance there.
        certified = strd_certified(name)
        from scipy.stats import t

        reach = t.ppf(0.975, certified.n - 1) * certified.sd / math.sqrt(certified.n)
        iv = mean_interval(load_values(name), 0.95)
        tolerance = STRD_RTOL[name][1] * reach + 4 * np.spacing(abs(certified.mean))
        assert iv.low == pytest.approx(certified.mean - reach, rel=0, abs=tolerance)
        assert iv.high == pytest.approx(certified.mean + reach, rel=0, abs=tolerance)


def _random_sample(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return rng.normal(loc=rng.uniform(-50.0, 50.0), scale=rng.uniform(0.01, 20.0), size=n)


class TestAgainstReferenceLibraries:
    @pytest.mark.parametrize("n", SIZES)
    def test_two_sided_matches_scipy_and_statsmodels(self, n: int) -> None:
        from scipy.stats import ttest_1samp
        from statsmodels.stats.weightstats import DescrStatsW

        x = _random_sample(n, seed=1000 + n)
        for level in LEVELS:
            iv = mean_interval(x, level)
            # scipy.stats.ttest_1samp(x, 0).confidence_interval(confidence_level=C).
            ref = ttest_1samp(x, 0.0).confidence_interval(confidence_level=level)
            tol = 1e-12 * (abs(iv.mean) + iv.half_width())
            assert iv.low == pytest.approx(ref.low, abs=tol)
            assert iv.high == pytest.approx(ref.high, abs=tol)
            # statsmodels DescrStatsW(x).tconfint_mean(alpha=1-C).
            sm_low, sm_high = DescrStatsW(x).tconfint_mean(alpha=1.0 - level)
            assert iv.low == pytest.approx(sm_low, abs=tol)
            assert iv.high == pytest.approx(sm_high, abs=tol)

    @pytest.mark.parametrize("n", SIZES)
    def test_one_sided_matches_scipy(self, n: int) -> None:
        from scipy.stats import ttest_1samp

        x = _random_sample(n, seed=2000 + n)
        for level in LEVELS:
            upper = mean_interval(x, level, "upper")
            lower = mean_interval(x, level, "lower")
            tol = 1e-12 * (abs(upper.mean) + upper.half_width())
            # scipy.stats.ttest_1samp(..., alternative="less"): the interval (-inf, upper bound],
            # which is meanband's side="upper"; alternative="greater" is side="lower".
            less = ttest_1samp(x, 0.0, alternative="less").confidence_interval(level)
            greater = ttest_1samp(x, 0.0, alternative="greater").confidence_interval(level)
            assert less.low == upper.low == -math.inf
            assert upper.high == pytest.approx(less.high, abs=tol)
            assert greater.high == lower.high == math.inf
            assert lower.low == pytest.approx(greater.low, abs=tol)

    @pytest.mark.parametrize("n", [2, 9, 60, 500])
    def test_one_sided_matches_statsmodels(self, n: int) -> None:
        from statsmodels.stats.weightstats import DescrStatsW

        x = _random_sample(n, seed=3000 + n)
        for level in LEVELS:
            # statsmodels DescrStatsW.tconfint_mean(alpha, alternative="smaller") gives the upper
            # bound (side="upper"), alternative="larger" the lower bound (side="lower").
            _, sm_high = DescrStatsW(x).tconfint_mean(alpha=1.0 - level, alternative="smaller")
            sm_low, _ = DescrStatsW(x).tconfint_mean(alpha=1.0 - level, alternative="larger")
            upper = mean_interval(x, level, "upper")
            tol = 1e-12 * (abs(upper.mean) + upper.half_width())
            assert upper.high == pytest.approx(sm_high, abs=tol)
            assert mean_interval(x, level, "lower").low == pytest.approx(sm_low, abs=tol)

    def test_fields_match_scipy_and_numpy(self) -> None:
        from scipy.stats import sem

        x = _random_sample(33, seed=4)
        iv = mean_interval(x, 0.9)
        assert iv.n == 33
        assert iv.df == 32
        assert iv.confidence == 0.9
        assert iv.side == "two-sided"
        assert iv.method == "t"
        assert iv.estimand == "mean"
        assert iv.sd == pytest.approx(float(np.std(x, ddof=1)), rel=1e-13)  # numpy.std(ddof=1)
        assert iv.sem == pytest.approx(float(sem(x)), rel=1e-13)  # scipy.stats.sem
        assert iv.half_width() == pytest.approx(iv.critical * iv.sem, rel=1e-15)


class TestIntervalObject:
    def test_half_width_per_side(self) -> None:
        x = [1.0, 2.0, 4.0, 7.0]
        two = mean_interval(x)
        upper = mean_interval(x, side="upper")
        lower = mean_interval(x, side="lower")
        assert two.half_width() == pytest.approx(two.high - two.mean)
        assert two.half_width() == pytest.approx(two.mean - two.low)
        assert upper.half_width() == upper.high - upper.mean
        assert lower.half_width() == lower.mean - lower.low

    def test_contains_is_closed(self) -> None:
        iv = mean_interval([1.0, 2.0, 3.0])
        assert iv.contains(iv.low)
        assert iv.contains(iv.high)
        assert iv.contains(iv.mean)
        assert not iv.contains(iv.high + 1e-9)
        assert not iv.contains(iv.low - 1e-9)
        assert mean_interval([1.0, 2.0, 3.0], side="upper").contains(-1e300)

    def test_is_frozen(self) -> None:
        iv = mean_interval([1.0, 2.0])
        with pytest.raises(AttributeError):
            iv.mean = 0.0  # type: ignore[misc]

    def test_to_dict_is_builtin_and_json_safe(self) -> None:
        for side in SIDES:
            data = mean_interval(np.array([1.0, 2.5, 2.0]), 0.9, side).to_dict()
            assert set(data) == {
                "mean", "low", "high", "confidence", "side", "n", "df", "sd", "sem", "method",
                "critical", "estimand",
            }
            assert all(type(v) in (float, int, str) for v in data.values())
            assert Interval(**json.loads(json.dumps(data))) == Interval(**data)

    def test_top_level_names(self) -> None:
        assert meanband.mean_interval is mean_interval
        assert meanband.critical_t is critical_t


class TestBadInput:
    def test_nan_positions_are_named(self) -> None:
        with pytest.raises(TrialError, match=r"positions 2, 4\)"):
            mean_interval([1.0, 2.0, math.nan, 3.0, -math.inf])

    @pytest.mark.parametrize("values", [[], [3.0]])
    def test_fewer_than_two_values(self, values: list[float]) -> None:
        with pytest.raises(TrialError, match="at least 2 trials"):
            mean_interval(values)

    @pytest.mark.parametrize("confidence", [0.0, 1.0, 95, -0.1, math.nan, "high"])
    def test_confidence_outside_the_unit_interval(self, confidence: object) -> None:
        with pytest.raises(TrialError, match="confidence"):
            mean_interval([1.0, 2.0, 3.0], confidence)  # type: ignore[arg-type]

    @pytest.mark.parametrize("side", ["both", "Upper", "", None])
    def test_unknown_side(self, side: object) -> None:
        with pytest.raises(TrialError, match="unknown side"):
            mean_interval([1.0, 2.0, 3.0], side=side)  # type: ignore[arg-type]

    def test_unknown_method(self) -> None:
        with pytest.raises(TrialError, match="unknown interval method 'median'; choose one"):
            mean_interval([1.0, 2.0, 3.0], method="median")

    def test_zero_spread_is_a_point_without_warnings(self) -> None:
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            for side in SIDES:
                iv = mean_interval([0.1] * 12, side=side)
                assert iv.mean == 0.1
                assert iv.sd == 0.0
                assert iv.sem == 0.0
                if side != "lower":
                    assert iv.high == 0.1
                if side != "upper":
                    assert iv.low == 0.1

    def test_two_values_give_the_widest_finite_interval(self) -> None:
        # t(0.975, 1) = 12.706 (e-Handbook 1.3.6.7.2, from memory).
        iv = mean_interval([1.0, 3.0])
        assert iv.half_width() == pytest.approx(12.706 * 1.0, abs=5e-4)


class TestMethodRegistry:
    def test_a_registered_method_is_dispatched(self, monkeypatch: pytest.MonkeyPatch) -> None:
        seen: list[tuple[int, float, str]] = []

        def widest(x: np.ndarray, confidence: float, side: str) -> Interval:
            seen.append((x.size, confidence, side))
            lo, hi = float(x.min()), float(x.max())
            return Interval(float(x.mean()), lo, hi, confidence, side, x.size, x.size - 1.0,
                            0.0, 0.0, "range")

        monkeypatch.setitem(METHODS, "range", widest)
        iv = mean_interval([4.0, 1.0, 9.0], 0.8, "two-sided", method="range")
        assert (iv.low, iv.high, iv.method) == (1.0, 9.0, "range")
        assert seen == [(3, 0.8, "two-sided")]

    def test_validation_comes_before_the_method(self, monkeypatch: pytest.MonkeyPatch) -> None:
        def never(x: np.ndarray, confidence: float, side: str) -> Interval:
            raise AssertionError("the method must not see bad input")

        monkeypatch.setitem(METHODS, "never", never)
        with pytest.raises(TrialError):
            mean_interval([1.0, math.nan], method="never")
        with pytest.raises(TrialError):
            mean_interval([1.0, 2.0], confidence=2.0, method="never")


# Hypothesis property tests: the interval's algebra, on arbitrary (finite, moderate) data.
finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)
samples = st.lists(finite, min_size=2, max_size=40)
levels = st.floats(min_value=0.01, max_value=0.999)
integer_samples = st.lists(st.integers(-1000, 1000), min_size=2, max_size=40)


@settings(max_examples=100, deadline=None)
@given(samples, levels)
def test_interval_contains_the_mean(values: list[float], level: float) -> None:
    assert mean_interval(values, level).contains(mean_interval(values, level).mean)
    # A one-sided bound at a confidence below 1/2 lies on the far side of the mean (its t
    # quantile is negative): only from 1/2 up does it have to contain the mean.
    for side in ("upper", "lower"):
        iv = mean_interval(values, level, side)
        assert iv.low <= iv.high
        if level >= 0.5:
            assert iv.contains(iv.mean)
        elif side == "upper":
            assert iv.high <= iv.mean
        else:
            assert iv.low >= iv.mean


@settings(max_examples=100, deadline=None)
@given(samples, levels, levels)
def test_interval_widens_with_confidence(values: list[float], a: float, b: float) -> None:
    low_level, high_level = sorted((a, b))
    assume(high_level - low_level > 1e-6)
    for side in SIDES:
        narrow = mean_interval(values, low_level, side)
        wide = mean_interval(values, high_level, side)
        assert wide.critical > narrow.critical
        assert wide.low <= narrow.low
        assert wide.high >= narrow.high
        if narrow.sd > 0:
            # Compared as critical * sem: next to a large mean, the bounds themselves may round
            # to the same double.
            assert wide.critical * wide.sem > narrow.critical * narrow.sem


@settings(max_examples=100, deadline=None)
@given(
    integer_samples,
    st.floats(min_value=0.01, max_value=100.0),
    st.floats(min_value=-1e4, max_value=1e4),
    st.booleans(),
    levels,
)
def test_interval_is_affine_equivariant(
    counts: list[int], scale: float, shift: float, flip: bool, level: float
) -> None:
    # Integer data keep the spread far above rounding, so the comparison can be tight.
    x = np.asarray(counts, dtype=np.float64)
    a = -scale if flip else scale
    y = a * x + shift
    base = mean_interval(x, level)
    moved = mean_interval(y, level)
    size = abs(a) * float(np.max(np.abs(x))) + abs(shift)
    assert moved.mean == pytest.approx(a * base.mean + shift, rel=0, abs=1e-12 * size)
    assert moved.sd == pytest.approx(abs(a) * base.sd, rel=1e-9, abs=1e-12 * size)
    expected = sorted((a * base.low + shift, a * base.high + shift))
    tol = 1e-9 * (abs(a) * base.half_width()) + 1e-12 * size
    assert moved.low == pytest.approx(expected[0], rel=0, abs=tol)
    assert moved.high == pytest.approx(expected[1], rel=0, abs=tol)
    # A negative scale swaps the one-sided bounds: an upper bound becomes a lower bound.
    upper = mean_interval(x, level, "upper")
    mirrored = mean_interval(y, level, "lower" if flip else "upper")
    bound = mirrored.low if flip else mirrored.high
    assert bound == pytest.approx(a * upper.high + shift, rel=0, abs=tol)


@settings(max_examples=100, deadline=None)
@given(samples, st.floats(min_value=0.5, max_value=0.999))
def test_one_sided_bound_is_tighter_than_the_two_sided_edge(
    values: list[float], level: float
) -> None:
    two = mean_interval(values, level)
    upper = mean_interval(values, level, "upper")
    lower = mean_interval(values, level, "lower")
    assert upper.critical < two.critical
    assert upper.high <= two.high
    assert lower.low >= two.low
    if two.sd > 0:
        assert upper.critical * upper.sem < two.critical * two.sem
        assert lower.critical * lower.sem < two.critical * two.sem


def test_coverage_with_few_trials_needs_t_not_z() -> None:
    # Student (1908): with n = 4 normal trials the 90% t interval misses the true mean 10% of
    # the time per one-sided bound (and 10% two-sided), while a z interval (1.645 two-sided,
    # 1.282 one-sided) would miss about 20% and 15% (common practice). 1000 seeded samples give
    # a binomial sd of about 9.5 around 100 misses; the bounds below are 3 sd wide.
    rng = np.random.default_rng(19080301)
    samples = rng.normal(loc=7.0, scale=3.0, size=(1000, 4))
    misses = Counter()
    for x in samples:
        two = mean_interval(x, 0.9)
        misses["two-sided"] += not two.contains(7.0)
        misses["upper"] += mean_interval(x, 0.9, "upper").high < 7.0
        misses["lower"] += mean_interval(x, 0.9, "lower").low > 7.0
    for side in SIDES:
        assert 70 <= misses[side] <= 130, misses
