"""Tests for meanband.stats.bands: bands, and the PASS / FAIL / UNDECIDED verdict of a check."""

from __future__ import annotations

import json
import math
from collections import Counter
from dataclasses import dataclass

import numpy as np
import pytest
from meanband import Band, Decision, TrialError, Verdict, decide, diagnose, make_band, trials_needed
from meanband.stats.decision import edge_margin
from meanband.stats.planning import sd_upper_bound


@dataclass(frozen=True)
class HandInterval:
    """The t interval computed in the test with scipy, independently of meanband."""

    mean: float
    low2: float  # two-sided C interval
    high2: float
    upper1: float  # one-sided upper C bound
    lower1: float  # one-sided lower C bound

    @property
    def reach(self) -> float:
        return self.high2 - self.mean


def hand_interval(x: np.ndarray, confidence: float) -> HandInterval:
    from scipy.stats import t

    # Student (1908): mean +/- t(q, n-1) s / sqrt(n), with scipy.stats.t.ppf for the quantile,
    # numpy.mean and numpy.std(ddof=1) for the mean and s.
    n = x.size
    mean = float(np.mean(x))
    sem = float(np.std(x, ddof=1)) / math.sqrt(n)
    two = float(t.ppf((1 + confidence) / 2, n - 1)) * sem
    one = float(t.ppf(confidence, n - 1)) * sem
    return HandInterval(mean, mean - two, mean + two, mean + one, mean - one)


def expected_verdict(h: HandInterval, low: float, high: float) -> Verdict:
    """The rule of DESIGN.md ("Semantics of a check"), applied to the hand-computed interval."""
    if math.isfinite(low) and math.isfinite(high):
        if low <= h.low2 and h.high2 <= high:
            return Verdict.PASS
        if h.high2 < low or h.low2 > high:
            return Verdict.FAIL
        return Verdict.UNDECIDED
    if math.isfinite(high):  # a budget: the one-sided upper bound must be under it
        if h.upper1 <= high:
            return Verdict.PASS
        return Verdict.FAIL if h.lower1 > high else Verdict.UNDECIDED
    if h.lower1 >= low:  # a floor: the one-sided lower bound must be over it
        return Verdict.PASS
    return Verdict.FAIL if h.upper1 < low else Verdict.UNDECIDED


def _near_a_bound(h: HandInterval, edges: tuple[float, float]) -> bool:
    bounds = (h.low2, h.high2, h.upper1, h.lower1)
    return any(
        math.isfinite(e) and abs(e - b) < 1e-9 * h.reach for e in edges for b in bounds
    )


KINDS = ("two-sided", "upper", "lower")


class TestVerdictAgainstHandInterval:
    @pytest.mark.parametrize("kind", KINDS)
    @pytest.mark.parametrize("confidence", [0.8, 0.95, 0.99])
    def test_random_bands(self, kind: str, confidence: float) -> None:
        rng = np.random.default_rng([KINDS.index(kind), round(confidence * 1000)])
        seen: Counter[Verdict] = Counter()
        for _ in range(60):
            n = int(rng.integers(2, 60))
            x = rng.normal(rng.uniform(-100, 100), rng.uniform(0.01, 10), size=n)
            h = hand_interval(x, confidence)
            # Edges scattered over a few interval widths around the mean hit every verdict.
            a, b = sorted(h.mean + h.reach * rng.uniform(-4.0, 4.0, size=2))
            low, high = {"two-sided": (a, b), "upper": (-math.inf, b), "lower": (a, math.inf)}[kind]
            if _near_a_bound(h, (low, high)):
                continue
            band = make_band(
                None if kind == "upper" else low, None if kind == "lower" else high
            )
            decision = decide(x, band, confidence=confidence)
            assert decision.verdict is expected_verdict(h, low, high), (n, low, high, h)
            seen[decision.verdict] += 1
        assert set(seen) == set(Verdict), seen  # every verdict was exercised

    def test_two_sided_edges_at_the_bounds(self) -> None:
        x = np.array([10.2, 9.7, 10.4, 10.1, 9.9, 10.0, 10.3, 9.8])
        h = hand_interval(x, 0.95)
        eps = 1e-9 * h.reach
        assert decide(x, make_band(h.low2 - eps, h.high2 + eps)).verdict is Verdict.PASS
        assert decide(x, make_band(h.low2 + eps, h.high2 + eps)).verdict is Verdict.UNDECIDED
        assert decide(x, make_band(h.low2 - eps, h.high2 - eps)).verdict is Verdict.UNDECIDED
        # Wholly outside on one edge: the whole interval lies above the band.
        assert decide(x, make_band(0.0, h.low2 - eps)).verdict is Verdict.FAIL
        assert decide(x, make_band(0.0, h.low2 + eps)).verdict is Verdict.UNDECIDED
        assert decide(x, make_band(h.high2 + eps, 20.0)).verdict is Verdict.FAIL
        assert decide(x, make_band(h.high2 - eps, 20.0)).verdict is Verdict.UNDECIDED
        # A band narrower than the interval around the mean cannot pass or fail.
        narrow = make_band(h.mean - h.reach / 2, h.mean + h.reach / 2)
        assert decide(x, narrow).verdict is Verdict.UNDECIDED

    def test_budget_edges_at_the_one_sided_bounds(self) -> None:
        x = np.array([2.9, 3.1, 3.0, 3.3, 2.8, 3.2, 3.05, 2.95, 3.1, 3.0])
        h = hand_interval(x, 0.9)
        eps = 1e-9 * h.reach
        # Upper budget: PASS needs the one-sided upper bound under it, not the two-sided one.
        assert h.upper1 < h.high2

        def verdict(**edge: float) -> Verdict:
            return decide(x, make_band(**edge), confidence=0.9).verdict

        assert verdict(high=h.upper1 + eps) is Verdict.PASS
        assert verdict(high=h.upper1 - eps) is Verdict.UNDECIDED
        assert verdict(high=h.lower1 + eps) is Verdict.UNDECIDED
        assert verdict(high=h.lower1 - eps) is Verdict.FAIL
        # Lower floor: mirror image.
        assert verdict(low=h.lower1 - eps) is Verdict.PASS
        assert verdict(low=h.lower1 + eps) is Verdict.UNDECIDED
        assert verdict(low=h.upper1 - eps) is Verdict.UNDECIDED
        assert verdict(low=h.upper1 + eps) is Verdict.FAIL

    def test_interval_and_counter_bound(self) -> None:
        x = np.array([5.0, 5.5, 4.5, 5.2, 4.8])
        h = hand_interval(x, 0.95)
        upper = decide(x, make_band(high=7.0))
        assert upper.interval.side == "upper"
        assert upper.interval.high == pytest.approx(h.upper1, rel=1e-14)
        assert upper.counter is not None
        assert upper.counter.side == "lower"
        assert upper.counter.low == pytest.approx(h.lower1, rel=1e-14)
        lower = decide(x, make_band(low=3.0))
        assert lower.interval.side == "lower"
        assert lower.counter is not None and lower.counter.side == "upper"
        two = decide(x, make_band(3.0, 7.0))
        assert two.interval.side == "two-sided"
        assert (two.interval.low, two.interval.high) == pytest.approx((h.low2, h.high2), rel=1e-14)
        assert two.counter is None

    def test_zarr13_against_its_published_interval(self) -> None:
        from reference_data import load_values

        x = load_values("ZARR13")
        # e-Handbook 1.3.5.2: the 95% interval is (9.258242, 9.264679).
        assert decide(x, make_band(9.2582, 9.2647)).verdict is Verdict.PASS
        assert decide(x, make_band(9.2583, 9.2647)).verdict is Verdict.UNDECIDED
        assert decide(x, make_band(9.2582, 9.2646)).verdict is Verdict.UNDECIDED
        assert decide(x, make_band(9.0, 9.2582)).verdict is Verdict.FAIL
        assert decide(x, make_band(9.2647, 9.5)).verdict is Verdict.FAIL


class TestDecisionContents:
    def test_diagnostics_are_those_of_the_trials(self) -> None:
        x = np.random.default_rng(5).normal(1.0, 0.1, 30)
        decision = decide(x, make_band(0.0, 2.0), alpha=0.1)
        assert decision.diagnostics == diagnose(x, alpha=0.1)

    def test_suggested_n_on_undecided(self) -> None:
        x = np.array([0.99, 1.03, 1.01, 0.97, 1.02, 0.98])
        band = make_band(high=1.01)
        decision = decide(x, band, confidence=0.95, power=0.8)
        assert decision.verdict is Verdict.UNDECIDED
        # Planned with the sd's 80% upper confidence bound (Browne 1995), as suggestions are.
        expected = trials_needed(
            sd_upper_bound(decision.interval.sd, x.size - 1), margin=1.01 - decision.interval.mean,
            confidence=0.95, side="upper", power=0.8,
        )
        assert decision.suggested_n == expected
        known = trials_needed(decision.interval.sd, margin=1.01 - decision.interval.mean,
                              confidence=0.95, side="upper", power=0.8)
        assert known is not None and expected is not None and expected > known
        assert decision.suggested_n is not None and decision.suggested_n > x.size

    def test_suggested_n_uses_the_nearest_edge(self) -> None:
        x = np.array([4.0, 4.2, 3.9, 4.1, 4.05, 3.95])
        decision = decide(x, make_band(3.98, 10.0))
        assert decision.verdict is Verdict.UNDECIDED
        margin = decision.interval.mean - 3.98
        assert edge_margin(decision.interval.mean, decision.band) == pytest.approx(margin)
        assert decision.suggested_n == trials_needed(sd_upper_bound(decision.interval.sd, 5),
                                                     margin=margin)

    def test_no_suggestion_on_fail(self) -> None:
        decision = decide([10.0, 10.1, 9.9, 10.05], make_band(high=5.0))
        assert decision.verdict is Verdict.FAIL
        assert decision.suggested_n is None
        assert not decision.passed

    def test_passed(self) -> None:
        decision = decide([1.0, 1.1, 0.9, 1.05], make_band(0.0, 2.0))
        assert decision.passed
        assert decision.verdict == "PASS"
        assert str(decision.verdict) == "PASS"

    def test_zero_spread_decides_on_the_point(self) -> None:
        assert decide([2.0] * 5, make_band(1.0, 3.0)).verdict is Verdict.PASS
        assert decide([2.0] * 5, make_band(high=2.0)).verdict is Verdict.PASS
        assert decide([2.0] * 5, make_band(high=1.5)).verdict is Verdict.FAIL
        assert decide([2.0] * 5, make_band(low=2.5)).verdict is Verdict.FAIL

    def test_to_dict_survives_json(self) -> None:
        x = [0.0021, 0.0023, 0.0022, 0.0024, 0.0020]
        for band in (make_band(high="3ms", unit="s"), make_band(0.001, 0.003, unit="s")):
            decision = decide(x, band)
            data = decision.to_dict()
            again = json.loads(json.dumps(data))
            assert again["verdict"] == decision.verdict.value
            assert again["band"] == {"low": band.low, "high": band.high, "unit": "s"}
            assert again["interval"]["n"] == 5
            assert again["unit"] == "s"
            assert again["diagnostics"]["n"] == 5
            assert (again["counter"] is None) == (band.side == "two-sided")

    def test_decision_is_frozen(self) -> None:
        decision = decide([1.0, 2.0, 3.0], make_band(0.0, 4.0))
        assert isinstance(decision, Decision)
        with pytest.raises(AttributeError):
            decision.verdict = Verdict.FAIL  # type: ignore[misc]


class TestDecideBadInput:
    def test_nan_positions(self) -> None:
        with pytest.raises(TrialError, match=r"positions 1\)"):
            decide([1.0, math.nan, 2.0], make_band(0.0, 3.0))

    def test_too_few_trials(self) -> None:
        with pytest.raises(TrialError, match="at least 2 trials"):
            decide([1.0], make_band(0.0, 3.0))

    @pytest.mark.parametrize("confidence", [0.0, 1.0, 95.0])
    def test_bad_confidence(self, confidence: float) -> None:
        with pytest.raises(TrialError, match="confidence"):
            decide([1.0, 2.0], make_band(0.0, 3.0), confidence=confidence)

    def test_unknown_method(self) -> None:
        with pytest.raises(TrialError, match="unknown interval method"):
            decide([1.0, 2.0], make_band(0.0, 3.0), method="median")


class TestMakeBand:
    def test_low_and_high(self) -> None:
        assert make_band(1, 2) == Band(1.0, 2.0, None)
        assert make_band(1, 2).side == "two-sided"

    def test_one_edge(self) -> None:
        budget = make_band(high=3.0)
        assert (budget.low, budget.high, budget.side) == (-math.inf, 3.0, "upper")
        floor = make_band(low=3.0)
        assert (floor.low, floor.high, floor.side) == (3.0, math.inf, "lower")

    def test_open_edges_as_infinities(self) -> None:
        assert make_band(low=2.0, high=math.inf).side == "lower"
        assert make_band(low=-math.inf, high=2.0).side == "upper"

    def test_center_and_tolerance(self) -> None:
        band = make_band(center=85.0, tolerance=0.4, unit="degC")
        assert band.low == pytest.approx(84.6)
        assert band.high == pytest.approx(85.4)
        assert band.unit == "degC"

    def test_zero_tolerance_is_a_point(self) -> None:
        assert make_band(center=1.0, tolerance=0.0) == Band(1.0, 1.0)

    def test_duration_strings_for_timings(self) -> None:
        assert make_band(high="3ms", unit="s").high == pytest.approx(3e-3)
        band = make_band(center="2ms", tolerance="250us", unit="s")
        assert (band.low, band.high) == pytest.approx((1.75e-3, 2.25e-3))

    def test_to_dict(self) -> None:
        assert make_band(high=2, unit="V").to_dict() == {"low": -math.inf, "high": 2.0, "unit": "V"}

    @pytest.mark.parametrize(
        ("kwargs", "match"),
        [
            ({}, "at least one edge"),
            ({"low": 2.0, "high": 1.0}, "lies above its high edge"),
            ({"low": 1.0, "center": 2.0, "tolerance": 1.0}, "not both"),
            ({"center": 2.0}, "go together"),
            ({"tolerance": 2.0}, "go together"),
            ({"center": 2.0, "tolerance": -0.1}, "tolerance must be >= 0"),
            ({"center": math.inf, "tolerance": 0.1}, "center= must be a finite number"),
            ({"center": 1.0, "tolerance": math.nan}, "tolerance= must be a finite number"),
            ({"low": math.nan}, "low= must be a finite number"),
            ({"high": "fast"}, "high= must be a number"),
            # Before: the refusal of a unit-less series did not say what fixes it.
            ({"high": "1ms"}, r"record them with unit='s'"),
            ({"high": "1ms", "unit": "V"}, "give a plain number in V"),
            ({"high": "3ms", "unit": "degC"}, "needs trials in a time unit"),
            ({"high": "3 lightyears", "unit": "s"}, "cannot read"),
            ({"high": [3.0]}, "high= must be a number"),
            ({"low": -math.inf, "high": math.inf}, "at least one finite edge"),
            ({"high": math.inf}, "at least one finite edge"),
            ({"low": math.inf}, "beyond all values"),
            ({"high": -math.inf}, "beyond all values"),
        ],
    )
    def test_bad_bands(self, kwargs: dict[str, object], match: str) -> None:
        with pytest.raises(TrialError, match=match):
            make_band(**kwargs)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("unit", "edge", "expected"),
    [("ms", "1.5ms", 1.5), ("ms", "1500us", 1.5), ("us", "1.5ms", 1500.0), ("ns", "2us", 2000.0),
     ("s", "250ms", 0.25), ("µs", "3µs", 3.0)],
)
def test_duration_edges_convert_to_the_trials_time_unit(unit: str, edge: str, expected: float) -> None:
    # Before: only unit="s" took duration strings; ms trials against "1.5ms" were refused.
    # Conversion factors: SI prefixes (BIPM SI Brochure, 9th ed., table 7).
    band = make_band(high=edge, unit=unit)
    assert band.high == pytest.approx(expected, rel=1e-12)
    assert band.unit == unit


class TestVerdictEnum:
    def test_values_and_str(self) -> None:
        assert [v.value for v in Verdict] == ["PASS", "FAIL", "UNDECIDED"]
        assert str(Verdict.UNDECIDED) == "UNDECIDED"
        assert Verdict("FAIL") is Verdict.FAIL
