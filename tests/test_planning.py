"""Tests for meanband.stats.planning: trial counts for a half-width goal or a decisive verdict."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meanband import TrialError, trials_needed
from meanband.stats.planning import power_against_edge

EFFECTS = (0.1, 0.2, 0.35, 0.5, 0.8, 1.0, 1.5)
LEVELS = (0.9, 0.95, 0.99)
POWERS = (0.8, 0.9, 0.95)


def _statsmodels_n(effect: float, alpha: float, power: float) -> float:
    from statsmodels.stats.power import TTestPower

    # statsmodels TTestPower().solve_power(..., alternative="larger"): one-sample, one-sided
    # t test; it returns a real-valued n.
    n = TTestPower().solve_power(effect_size=effect, alpha=alpha, power=power, alternative="larger")
    return float(np.asarray(n).item())


class TestMarginAgainstStatsmodels:
    @pytest.mark.parametrize("effect", EFFECTS)
    @pytest.mark.parametrize("side", ["upper", "lower"])
    def test_one_sided_budget(self, effect: float, side: str) -> None:
        sd = 2.5
        for level in LEVELS:
            for power in POWERS:
                theirs = _statsmodels_n(effect, 1.0 - level, power)
                assert math.isfinite(theirs) and theirs > 2
                ours = trials_needed(
                    sd, margin=effect * sd, confidence=level, side=side, power=power
                )
                assert ours is not None
                # Ours is the smallest whole n; allow one either way for the root finder.
                assert abs(ours - math.ceil(theirs)) <= 1, (level, power, ours, theirs)

    @pytest.mark.parametrize("effect", EFFECTS)
    def test_two_sided_band_tests_each_edge_at_half_the_level(self, effect: float) -> None:
        for level in LEVELS:
            for power in POWERS:
                # Each edge of a two-sided band is a one-sided test at (1 - C) / 2.
                theirs = _statsmodels_n(effect, (1.0 - level) / 2.0, power)
                assert math.isfinite(theirs) and theirs > 2
                ours = trials_needed(1.0, margin=effect, confidence=level, power=power)
                assert ours is not None
                assert abs(ours - math.ceil(theirs)) <= 1, (level, power, ours, theirs)

    @pytest.mark.parametrize("n", [2, 5, 20, 100])
    @pytest.mark.parametrize("effect", [0.1, 0.5, 1.2])
    def test_power_matches_statsmodels(self, n: int, effect: float) -> None:
        from statsmodels.stats.power import TTestPower

        # statsmodels TTestPower().power(effect_size, nobs, alpha, alternative="larger").
        ref = TTestPower().power(effect_size=effect, nobs=n, alpha=0.05, alternative="larger")
        assert float(power_against_edge(effect, n, 0.05)) == pytest.approx(float(ref), rel=1e-9)

    def test_power_is_vectorised(self) -> None:
        n = np.arange(2, 50)
        powers = power_against_edge(0.5, n, 0.05)
        assert powers.shape == n.shape
        assert np.all(np.diff(powers) > 0)
        for i in (0, 10, 47):
            assert powers[i] == pytest.approx(float(power_against_edge(0.5, int(n[i]), 0.05)))

    def test_returned_n_is_the_smallest_that_reaches_the_power(self) -> None:
        for effect in EFFECTS:
            n = trials_needed(1.0, margin=effect, confidence=0.95, side="upper", power=0.9)
            assert n is not None and n > 2
            assert power_against_edge(effect, n, 0.05) >= 0.9
            assert power_against_edge(effect, n - 1, 0.05) < 0.9


class TestHalfWidthAgainstBruteForce:
    @staticmethod
    def _scan(sd: float, half_width: float, level: float, side: str) -> int:
        from scipy.stats import t

        # Brute force: every n from 2 to 100,000, and the first whose interval half-width
        # t(n-1) sd / sqrt(n) is small enough (scipy.stats.t.ppf for the quantile).
        q = (1.0 + level) / 2.0 if side == "two-sided" else level
        n = np.arange(2, 100_001)
        small_enough = np.flatnonzero(t.ppf(q, n - 1) * sd / np.sqrt(n) <= half_width)
        assert small_enough.size > 0
        return int(n[small_enough[0]])

    @pytest.mark.parametrize("side", ["two-sided", "upper", "lower"])
    @pytest.mark.parametrize("ratio", [0.05, 0.1, 0.25, 0.5, 1.0, 3.0])
    def test_matches_scan(self, side: str, ratio: float) -> None:
        sd = 0.004
        for level in (0.8, 0.95, 0.99):
            expected = self._scan(sd, ratio * sd, level, side)
            assert trials_needed(sd, half_width=ratio * sd, confidence=level, side=side) == expected

    def test_common_practice_example(self) -> None:
        # Common practice: halving the half-width takes roughly four times the trials, and with
        # sd = 1 a 95% half-width of 0.5 needs 18 trials (t(0.975, 17) = 2.110, e-Handbook
        # 1.3.6.7.2, from memory: 2.110 / sqrt(18) = 0.497).
        n = trials_needed(1.0, half_width=0.5, confidence=0.95)
        assert n == 18
        quarter = trials_needed(1.0, half_width=0.25, confidence=0.95)
        assert quarter is not None
        assert 3.5 * n < quarter < 4.5 * n

    def test_one_sided_needs_no_more_than_two_sided(self) -> None:
        for ratio in (0.1, 0.3, 1.0):
            two = trials_needed(1.0, half_width=ratio)
            one = trials_needed(1.0, half_width=ratio, side="upper")
            assert one is not None and two is not None
            assert one <= two


class TestEdgesAndErrors:
    def test_zero_margin_cannot_be_decided(self) -> None:
        assert trials_needed(1.0, margin=0.0) is None

    def test_negative_margin_is_a_distance(self) -> None:
        assert trials_needed(1.0, margin=-0.5) == trials_needed(1.0, margin=0.5)

    def test_zero_sd_needs_the_minimum(self) -> None:
        assert trials_needed(0.0, margin=0.1) == 2
        assert trials_needed(0.0, half_width=0.1) == 2

    def test_huge_effect_needs_the_minimum(self) -> None:
        assert trials_needed(1.0, half_width=1e6) == 2
        assert trials_needed(1.0, margin=1e3, side="upper") == 2

    def test_n_max_caps_the_search(self) -> None:
        needed = trials_needed(1.0, half_width=0.01)
        assert needed is not None and needed > 1000
        assert trials_needed(1.0, half_width=0.01, n_max=1000) is None
        assert trials_needed(1.0, half_width=0.01, n_max=needed) == needed
        assert trials_needed(1.0, margin=1e-4, n_max=10_000) is None

    def test_more_margin_needs_fewer_trials(self) -> None:
        counts = [trials_needed(1.0, margin=m, side="upper") for m in (0.1, 0.2, 0.4, 0.8)]
        assert all(c is not None for c in counts)
        assert counts == sorted(counts, reverse=True)
        assert len(set(counts)) == len(counts)

    def test_more_confidence_or_power_needs_more_trials(self) -> None:
        base = trials_needed(1.0, margin=0.3, confidence=0.9, power=0.8)
        assert base is not None
        assert trials_needed(1.0, margin=0.3, confidence=0.99, power=0.8) > base  # type: ignore[operator]
        assert trials_needed(1.0, margin=0.3, confidence=0.9, power=0.95) > base  # type: ignore[operator]

    @pytest.mark.parametrize(
        ("kwargs", "match"),
        [
            ({}, "exactly one goal"),
            ({"half_width": 0.1, "margin": 0.1}, "exactly one goal"),
            ({"half_width": 0.0}, "half_width must be a positive number"),
            ({"half_width": -1.0}, "half_width must be a positive number"),
            ({"half_width": math.nan}, "half_width must be a positive number"),
            ({"half_width": math.inf}, "half_width must be a positive number"),
            ({"margin": math.inf}, "margin must be a finite number"),
            ({"margin": math.nan}, "margin must be a finite number"),
            ({"margin": 0.1, "power": 1.0}, "power must lie strictly between 0 and 1"),
            ({"margin": 0.1, "power": 0.0}, "power must lie strictly between 0 and 1"),
            ({"margin": 0.1, "confidence": 1.5}, "confidence"),
            ({"margin": 0.1, "side": "left"}, "unknown side 'left'"),
        ],
    )
    def test_bad_arguments(self, kwargs: dict[str, object], match: str) -> None:
        with pytest.raises(TrialError, match=match):
            trials_needed(1.0, **kwargs)  # type: ignore[arg-type]

    @pytest.mark.parametrize("sd", [-1.0, math.nan, math.inf])
    def test_bad_sd(self, sd: float) -> None:
        with pytest.raises(TrialError, match="planning standard deviation"):
            trials_needed(sd, margin=0.1)


# -- both edges of a two-sided band ----------------------------------------------------------------


def test_power_inside_a_far_wide_band_is_the_one_sided_power() -> None:
    from meanband.stats.planning import power_against_edge, power_inside_band

    # Reference: scipy.stats.nct (through power_against_edge); with the far edge 1e3 sd away
    # the two one-sided tests reduce to the near edge's test.
    for effect, n in ((0.5, 10), (0.3, 40), (1.0, 5)):
        one = float(power_against_edge(effect, n, 0.025))
        assert power_inside_band(effect, 1e3, n, 0.025) == pytest.approx(one, abs=2e-4)


def test_power_inside_a_narrow_band_matches_simulation() -> None:
    from meanband.stats.planning import power_inside_band
    from scipy import stats as sstats

    # Reference: direct simulation of the two-sided t interval (common practice), 200,000
    # normal samples; SE of the rate about 0.001.
    rng = np.random.default_rng(19)
    n, half = 20, 0.8
    x = rng.normal(0.0, 1.0, (200_000, n))
    reach = sstats.t.ppf(0.975, n - 1) * x.std(axis=1, ddof=1) / np.sqrt(n)
    mean = x.mean(axis=1)
    rate = np.mean((mean - reach > -half) & (mean + reach < half))
    assert power_inside_band(half, half, n, 0.025) == pytest.approx(rate, abs=0.005)


def test_centred_band_plan_uses_both_edges_and_delivers_its_power() -> None:
    from meanband.stats.planning import power_inside_band

    near_only = trials_needed(1.0, margin=0.6, side="two-sided", power=0.9)
    both = trials_needed(1.0, margin=0.6, side="two-sided", power=0.9, other_margin=0.6)
    assert near_only is not None and both is not None and both > near_only
    # Before: the near-edge count delivers well under 90% when the mean sits mid-band.
    assert power_inside_band(0.6, 0.6, near_only, 0.025) < 0.87
    assert 0.9 <= power_inside_band(0.6, 0.6, both, 0.025) < 0.92


# -- the pilot's sd (and mean) taken with their uncertainty ------------------------------------


def test_expected_power_matches_direct_integration_over_the_sd() -> None:
    from meanband.stats.planning import expected_power
    from scipy import integrate
    from scipy import stats as sstats

    # Reference: the Julious & Owen (2006) average written as a direct numerical integral
    # (scipy.integrate.quad) over u = s / sigma, u^2 df ~ chi2(df): power of the one-sided t
    # test (scipy.stats.nct) at effect * u.
    for effect, n, df in ((0.4, 60, 7), (0.25, 150, 9), (0.8, 20, 29)):
        critical = sstats.t.ppf(0.95, n - 1)

        def integrand(u: float, effect: float, n: int, df: int, critical: float) -> float:
            density = sstats.chi2.pdf(u * u * df, df) * 2 * u * df
            return float(sstats.nct.sf(critical, n - 1, effect * u * math.sqrt(n)) * density)

        reference, _ = integrate.quad(integrand, 0, 6, args=(effect, n, df, critical), limit=200)
        assert expected_power(effect, n, 0.05, df) == pytest.approx(reference, abs=2e-3)


def test_expected_power_with_a_well_known_sd_is_the_noncentral_t_power() -> None:
    from meanband.stats.planning import expected_power, power_inside_band
    from statsmodels.stats.power import TTestPower

    # Reference: statsmodels.stats.power.TTestPower.power (one-sample t, one-sided) for the
    # budget; power_inside_band (checked against simulation above) for a band.
    for effect, n in ((0.5, 30), (0.3, 80)):
        ref = TTestPower().power(effect_size=effect, nobs=n, alpha=0.05, alternative="larger")
        assert expected_power(effect, n, 0.05, 1e7) == pytest.approx(float(ref), abs=1e-3)
    assert expected_power(0.6, 40, 0.025, 1e7, 0.9) == pytest.approx(
        power_inside_band(0.6, 0.9, 40, 0.025), abs=3e-3)


def test_assurance_matches_a_simulation_of_the_posterior() -> None:
    from meanband.stats.planning import expected_power
    from scipy import stats as sstats

    # Reference: Monte Carlo of the assurance (O'Hagan, Stevens & Campbell 2005) under the
    # reference prior: sigma = s sqrt(df / chi2), mu = mean + sigma z / sqrt(m); the chance of
    # the correct decision is the noncentral-t power against the edge on whichever side mu is.
    rng = np.random.default_rng(5)
    m, effect, n = 15, 0.5, 40
    sigma = np.sqrt((m - 1) / rng.chisquare(m - 1, 200_000))
    true = (effect - sigma * rng.standard_normal(200_000) / math.sqrt(m)) / sigma
    critical = sstats.t.ppf(0.95, n - 1)
    reference = float(np.mean(sstats.nct.sf(critical, n - 1, np.abs(true) * math.sqrt(n))))
    assert expected_power(effect, n, 0.05, m - 1, pilot_n=m) == pytest.approx(reference, abs=0.01)


@settings(max_examples=30, deadline=None)
@given(effect=st.floats(0.1, 2.0), df=st.integers(2, 200))
def test_an_uncertain_sd_asks_for_more_and_less_so_as_it_firms_up(effect, df):
    # Property (Julious & Owen 2006): averaging over the sd's uncertainty never lowers the count
    # below the known-sd one, and more pilot df never raise it.
    known = trials_needed(1.0, margin=effect, side="upper")
    loose = trials_needed(1.0, margin=effect, side="upper", sd_df=df)
    firm = trials_needed(1.0, margin=effect, side="upper", sd_df=df * 4)
    assert known is not None and loose is not None and firm is not None
    assert known <= firm <= loose


def test_bad_pilot_degrees_of_freedom_are_refused() -> None:
    with pytest.raises(TrialError, match="sd_df"):
        trials_needed(1.0, margin=0.3, sd_df=0)
