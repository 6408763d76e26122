"""Tests for meanband.assert_mean_within: the stand-alone check and its failure message."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from meanband import BandViolation, Decision, TrialError, Verdict, assert_mean_within
from reference_data import load_values

# An invented bench log: a probe reading 85 degC with a little noise.
PROBE = np.array(
    [85.02, 84.97, 85.05, 84.99, 85.01, 85.03, 84.96, 85.00, 85.04, 84.98, 85.02, 85.00]
)


def test_pass_returns_the_decision() -> None:
    decision = assert_mean_within(PROBE, low=84.6, high=85.4)
    assert isinstance(decision, Decision)
    assert decision.verdict is Verdict.PASS
    assert decision.band.low == 84.6
    assert decision.interval.n == PROBE.size


def test_center_and_tolerance() -> None:
    decision = assert_mean_within(PROBE, center=85.0, tolerance=0.4, unit="degC")
    assert decision.passed
    assert decision.unit == "degC"


def test_zarr13_inside_a_band_around_its_published_interval() -> None:
    # e-Handbook 1.3.5.2: the 95% interval of ZARR13 is (9.258242, 9.264679); it lies inside
    # [9.2582, 9.2647] but not inside [9.2583, 9.2647].
    x = load_values("ZARR13")
    assert assert_mean_within(x, 9.2582, 9.2647).verdict is Verdict.PASS
    with pytest.raises(BandViolation) as info:
        assert_mean_within(x, 9.2583, 9.2647)
    assert info.value.decision.verdict is Verdict.UNDECIDED


def test_fail_raises_an_assertion_error_with_the_decision() -> None:
    with pytest.raises(AssertionError) as info:
        assert_mean_within(PROBE, high=84.0)
    error = info.value
    assert isinstance(error, BandViolation)
    assert error.decision.verdict is Verdict.FAIL
    message = str(error)
    assert message.startswith("meanband FAIL: the mean is confidently outside the band")
    iv = error.decision.interval
    assert re.search(r"^  n +12$", message, re.M)
    shown_mean = re.search(r"^  mean +([-\d.]+)$", message, re.M)
    assert shown_mean is not None
    assert float(shown_mean.group(1)) == pytest.approx(iv.mean, rel=1e-5)
    shown_bound = re.search(r"^  interval +\[-inf, ([-\d.]+)\] \(95% upper bound, t", message, re.M)
    assert shown_bound is not None
    assert float(shown_bound.group(1)) == pytest.approx(iv.high, rel=1e-5)
    assert re.search(r"^  band +<= 84(\.0*)?$", message, re.M)
    assert re.search(r"^  verdict +FAIL$", message, re.M)
    assert "normality  Shapiro-Wilk" in message
    # The skewness and how far it moves a 95% bound stay visible when no note is written:
    # 0.1102 |G1| / sqrt(n) (Hall 1992 Edgeworth term, as meanband.stats.notes.skew_shift).
    shown = re.search(r"skewness G1 = ([-\d.]+), moves a 95% bound by about ([\d.]+) points",
                      message)
    assert shown is not None
    g1 = error.decision.diagnostics.skewness
    assert float(shown.group(1)) == pytest.approx(g1, abs=0.006)
    assert float(shown.group(2)) == pytest.approx(100 * 0.1102 * abs(g1) / math.sqrt(12),
                                                  abs=0.06)
    assert "lag-1 r" in message
    assert "to decide" not in message


def test_undecided_says_how_many_trials_would_decide() -> None:
    x = PROBE[:5]
    with pytest.raises(BandViolation) as info:
        assert_mean_within(x, high=85.02)
    decision = info.value.decision
    assert decision.verdict is Verdict.UNDECIDED
    assert decision.suggested_n is not None and decision.suggested_n > x.size
    message = str(info.value)
    assert message.startswith("meanband UNDECIDED: the interval straddles a band edge")
    assert f"about {decision.suggested_n} trials would likely decide it" in message
    # Five trials are fewer than the default minimum of ten: the message says so.
    assert "only 5 trials (fewer than 10)" in message


def test_undecided_on_the_edge_says_no_count_will_do() -> None:
    x = np.array([1.0, 2.0, 3.0])  # mean exactly 2.0, on the edge
    with pytest.raises(BandViolation) as info:
        assert_mean_within(x, high=2.0)
    assert info.value.decision.suggested_n is None
    assert "no number of trials is likely to decide" in str(info.value)


def test_timings_are_shown_in_a_readable_unit() -> None:
    latency = [0.0021, 0.0023, 0.0022, 0.0024, 0.0020, 0.0022, 0.0021, 0.0023, 0.0022, 0.0022]
    assert_mean_within(latency, high="3ms", unit="s")
    with pytest.raises(BandViolation) as info:
        assert_mean_within(latency, high="2ms", unit="s")
    message = str(info.value)
    assert re.search(r"^  mean +2\.20* ms$", message, re.M)
    assert re.search(r"^  band +<= 2(\.0*)? ms$", message, re.M)


def test_notes_on_assumptions() -> None:
    # A drifting series: strongly autocorrelated trials (lag-1 r near 1).
    drift = np.linspace(10.0, 11.0, 40) + np.tile([0.01, -0.01], 20)
    with pytest.raises(BandViolation) as info:
        assert_mean_within(drift, high=10.0)
    assert "trials autocorrelated" in str(info.value)
    # A sample with an outlier: Shapiro-Wilk rejects normality.
    skewed = np.concatenate([np.full(19, 1.0) + np.linspace(0, 0.01, 19), [5.0]])
    with pytest.raises(BandViolation) as info:
        assert_mean_within(skewed, high=1.0)
    assert "normality matters here" in str(info.value)


def test_zero_spread_message() -> None:
    with pytest.raises(BandViolation) as info:
        assert_mean_within([5.0] * 12, high=4.0)
    message = str(info.value)
    assert "not testable (all trials are equal)" in message
    assert "all trials are equal: the interval is the single point [mean, mean]" in message


@pytest.mark.parametrize(
    ("values", "kwargs", "match"),
    [
        ([1.0, math.nan, 2.0], {"high": 3.0}, r"positions 1\)"),
        ([1.0], {"high": 3.0}, "at least 2 trials"),
        ([1.0, 2.0], {}, "at least one edge"),
        ([1.0, 2.0], {"low": 3.0, "high": 1.0}, "swap them"),
        ([1.0, 2.0], {"high": 3.0, "confidence": 1.0}, "confidence"),
        ([1.0, 2.0], {"high": "3ms"}, "needs trials in a time unit"),
        ([1.0, 2.0], {"high": "3 parsecs", "unit": "s"}, "cannot read"),
        ([1.0, 2.0], {"high": 3.0, "method": "median"}, "unknown interval method"),
    ],
)
def test_bad_input_is_a_trial_error_not_a_violation(
    values: list[float], kwargs: dict[str, object], match: str
) -> None:
    with pytest.raises(TrialError, match=match) as info:
        assert_mean_within(values, **kwargs)  # type: ignore[arg-type]
    assert not isinstance(info.value, AssertionError)
