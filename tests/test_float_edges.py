"""Trials at the edges of float64, and what is not a trial at all."""

from __future__ import annotations

import datetime
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meanband import TrialError, diagnose, mean_interval

# Rescaling data by a power of two is exact, so an interval of scaled data must be the scaled
# interval (common practice: the t interval is equivariant under scaling).
SCALES = st.sampled_from([2.0**e for e in (-990, -500, -60, 0, 60, 500, 990)])
SAMPLES = st.lists(st.floats(min_value=1.0, max_value=2.0), min_size=3, max_size=40).filter(
    lambda v: max(v) - min(v) > 1e-6)


@settings(max_examples=60, deadline=None)
@given(values=SAMPLES, scale=SCALES)
def test_interval_is_equivariant_under_scaling_from_1e_minus_300_to_1e300(
    values: list[float], scale: float
) -> None:
    base = mean_interval(values)
    scaled = mean_interval(np.asarray(values) * scale)
    for name in ("mean", "low", "high", "sd"):
        got = getattr(scaled, name) / scale
        assert math.isfinite(getattr(scaled, name))
        assert got == pytest.approx(getattr(base, name), rel=1e-9), name


@settings(max_examples=30, deadline=None)
@given(values=SAMPLES.filter(lambda v: len(v) > 3), scale=SCALES)
def test_diagnostics_are_scale_free(values: list[float], scale: float) -> None:
    base, scaled = diagnose(values), diagnose(np.asarray(values) * scale)
    assert not scaled.zero_spread
    assert scaled.lag1 == pytest.approx(base.lag1, rel=1e-7, abs=1e-9)
    assert scaled.skewness == pytest.approx(base.skewness, rel=1e-7, abs=1e-9)


def test_data_near_1e_minus_300_have_their_spread() -> None:
    # The case that once went wrong: sd 0 and a false PASS, where the same data at 1e300 are UNDECIDED.
    tiny = mean_interval([1e-300, 1.2e-300, 0.9e-300, 1.1e-300])
    assert tiny.sd > 0 and tiny.low < 1e-300 < tiny.high


def test_cox_overflow_is_a_clear_error() -> None:
    with pytest.raises(TrialError, match="beyond the largest float64"):
        mean_interval([1.0, 187722.0], method="cox")


def test_masked_values_are_left_out() -> None:
    masked = np.ma.array([1.0, 2.0, 3.0, 100.0], mask=[False, False, False, True])
    assert mean_interval(masked).mean == pytest.approx(2.0)  # not the 26.5 of all four


@pytest.mark.parametrize("values", [
    ["1.0", "2.0", "3.0"], [True, False, True], [{"a": 1}, {}, {}], "123",
    [datetime.datetime(2026, 1, 1)] * 3, np.array(["1", "2", "3"]), np.array([True, False, True]),
])
def test_only_real_numbers_are_trials(values: object) -> None:
    with pytest.raises(TrialError, match="must be numbers"):
        mean_interval(values)  # type: ignore[arg-type]


def test_numpy_and_python_numbers_mix() -> None:
    assert mean_interval([np.float32(1.0), 2, np.int64(3)]).mean == pytest.approx(2.0)


def test_negative_timings_are_an_error(pytester: pytest.Pytester, run_suite) -> None:
    # They used to pass a budget without a word.
    pytester.makepyfile(test_stopwatch="def test_a(trials):\n"
                        "    trials.extend([0.001, -0.002, 0.0011, 0.0009], unit='s')\n"
                        "    trials.check(high='5ms')\n")
    result = run_suite()
    result.stdout.fnmatch_lines(["*TrialError: 1 of 4 timings are negative*"])
    assert result.ret == pytest.ExitCode.TESTS_FAILED


def test_confidence_above_one_suggests_only_a_percentage() -> None:
    # confidence=1.5 used to suggest "did you mean 0.015?".
    with pytest.raises(TrialError) as caught:
        mean_interval([1.0, 2.0, 3.0], confidence=1.5)
    assert "did you mean" not in str(caught.value) and "1.5" in str(caught.value)
    with pytest.raises(TrialError, match=r"did you mean 0\.99\?"):
        mean_interval([1.0, 2.0, 3.0], confidence=99)
