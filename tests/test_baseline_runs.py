"""Baselines of several runs, suite-level error control and the undecided option, as a user runs
pytest."""

from __future__ import annotations

import math

import numpy as np
import pytest
from meanband.stats.regression import compare_with_runs
from meanband.stats.run_noise import Between

PATTERN = np.tile([-1.0, 1.0], 10)  # exact spread: sd 1.026 around the mean
BASE = (100.0 + PATTERN).tolist()

SUITE = """
BASE = {base!r}

def test_pump_a(trials):
    trials.extend([v * {a!r} for v in BASE], unit="kPa")

def test_pump_b(trials):
    trials.extend([v * {b!r} for v in BASE], unit="kPa")
"""


def factor_for(p_target: float) -> float:
    """The scale of BASE whose comparison with BASE has p-value ``p_target`` (bisection on the
    pure comparison, so the suite below can sit exactly between two thresholds)."""
    base = [np.asarray(BASE)]
    low, high = 1.05, 1.2
    for _ in range(80):
        mid = (low + high) / 2
        p = compare_with_runs(np.asarray(BASE) * mid, base, Between(0.0, math.inf, "none", 1),
                              timing=False)["p_value"]
        low, high = (mid, high) if p > p_target else (low, mid)
    return (low + high) / 2


@pytest.fixture
def two_marginal_checks(pytester: pytest.Pytester, run_suite):
    """A baseline, then two checks whose p-values (0.015 and 0.02) pass the per-check threshold
    of 0.025 / 2 but are rejected together by Benjamini-Hochberg at the end."""
    pytester.makepyfile(test_pumps=SUITE.format(base=BASE, a=1.0, b=1.0))
    assert run_suite("--meanband-record=bench").ret == 0
    pytester.makepyfile(test_pumps=SUITE.format(base=BASE, a=factor_for(0.015),
                                                b=factor_for(0.02)))
    return lambda *args: run_suite("--meanband-baseline=bench", *args)


def test_holm_keeps_marginal_checks_undecided(two_marginal_checks) -> None:
    result = two_marginal_checks()
    result.assert_outcomes(passed=2)
    assert result.ret == 0
    result.stdout.fnmatch_lines(["  regression verdicts adjusted: Holm, family-wise, over 2 "
                                 "comparisons"])
    assert result.stdout.str().count("cannot tell yet") >= 2
    unadjusted = two_marginal_checks("--meanband-regression-adjust=none")
    unadjusted.assert_outcomes(failed=2)  # 0.015 and 0.02 are both below 0.025


def test_benjamini_hochberg_finds_both_at_the_end_and_fails_the_session(
    two_marginal_checks,
) -> None:
    result = two_marginal_checks("--meanband-regression-adjust=bh")
    result.assert_outcomes(passed=2)  # neither met 0.025 / 2 while its test ran
    assert result.ret == 1
    result.stdout.fnmatch_lines([
        "  regression verdicts adjusted: Benjamini-Hochberg, false discovery rate, over 2 "
        "comparisons",
        "meanband: REGRESSION: 2 check(s) regressed by the Benjamini-Hochberg step-up over the "
        "whole run, after their tests had passed; the session fails:",
        "  test_pumps.py::test_pump_a",
        "  test_pumps.py::test_pump_b",
    ])


def test_cannot_tell_yet_fails_its_test_when_asked(two_marginal_checks) -> None:
    result = two_marginal_checks("--meanband-baseline-undecided=fail")
    result.assert_outcomes(failed=2)
    result.stdout.fnmatch_lines([
        "meanband baseline: test_pumps.py::test_pump_a: CANNOT TELL YET against run 1 'bench'*",
        "*cannot tell yet fails this test because --meanband-baseline-undecided=fail",
    ])


def test_bad_baseline_settings_are_usage_errors(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makepyfile(test_pumps=SUITE.format(base=BASE, a=1.0, b=1.0))
    run_suite("--meanband-record=bench")
    for option, words in (
        ("--meanband-regression-adjust=sidak", "unknown adjustment 'sidak'; choose one of holm"),
        ("--meanband-baseline-runs=0", "at least 1 run"),
        ("--meanband-baseline-undecided=maybe", "neither 'pass' nor 'fail'"),
        ("--meanband-baseline-max-age=-3", "more than 0 days"),
        ("--meanband-run-noise=lots", "cannot read --meanband-run-noise='lots'"),
    ):
        result = run_suite("--meanband-baseline=bench", option)
        assert result.ret == pytest.ExitCode.USAGE_ERROR, option
        assert words in result.stderr.str(), (option, result.stderr.str())


TIMING_SUITE = """
import numpy as np

def test_route(trials):
    rng = np.random.default_rng({seed})
    trials.extend(np.exp(np.log(3e-4) + {run_shift!r} + rng.normal(0, 0.05, 30)), unit="s")

def test_fare(trials):
    rng = np.random.default_rng({seed} + 1000)
    trials.extend(np.exp(np.log(8e-4) + {run_shift!r} + rng.normal(0, 0.05, 30)), unit="s")
"""


def test_baseline_of_several_runs_measures_their_spread(pytester: pytest.Pytester,
                                                       run_suite) -> None:
    # Three recorded runs of unchanged code whose run means moved by a few per cent.
    for seed, shift in ((1, 0.0), (2, 0.04), (3, -0.03)):
        pytester.makepyfile(test_routes=TIMING_SUITE.format(seed=seed, run_shift=shift))
        assert run_suite("--meanband-record=main").ret == 0
    pytester.makepyfile(test_routes=TIMING_SUITE.format(seed=4, run_shift=0.05))
    result = run_suite("--meanband-baseline=main", "--meanband-baseline-runs=3")
    # 5% above the first run: within the run-to-run noise of three runs, so no test fails.
    result.assert_outcomes(passed=2)
    out = result.stdout.str()
    assert "baseline: run 3 'main'" in out
    line = next(x for x in result.outlines if x.startswith("test_routes.py::test_route "))
    assert "(3 runs)" in line or "(suite)" in line
    # Only the newest two: their spread is what the comparison allows for.
    two = run_suite("--meanband-baseline=main", "--meanband-baseline-runs=2")
    assert "(2 runs)" in two.stdout.str() or "(suite)" in two.stdout.str()
    # A 40% slowdown still fails its test, with the runs named in the block.
    pytester.makepyfile(test_routes=TIMING_SUITE.format(seed=5, run_shift=math.log(1.4)))
    slow = run_suite("--meanband-baseline=main", "--meanband-baseline-runs=3")
    slow.assert_outcomes(failed=2)
    slow.stdout.fnmatch_lines([
        "meanband baseline: test_routes.py::test_route: REGRESSED against run 3 'main' * "
        "(baseline of runs 3, 2, 1)",
        "  run-to-run noise allowed for: *% between runs (*)",
    ])


def test_busy_machine_on_one_side_cannot_compare(
    pytester: pytest.Pytester, run_suite, monkeypatch: pytest.MonkeyPatch
) -> None:
    from meanband.store import environment

    pytester.makepyfile(test_routes=TIMING_SUITE.format(seed=1, run_shift=0.0))
    monkeypatch.setattr(environment, "load_per_cpu", lambda: 0.2)  # an idle machine
    assert run_suite("--meanband-record=main").ret == 0
    pytester.makepyfile(test_routes=TIMING_SUITE.format(seed=2, run_shift=math.log(2.0)))
    monkeypatch.setattr(environment, "load_per_cpu", lambda: 2.5)  # 2.5 runnable per core
    result = run_suite("--meanband-baseline=main")
    result.assert_outcomes(passed=2)  # twice as slow, but the queue may be why
    result.stdout.fnmatch_lines([
        "  test_routes.py::test_fare: cannot compare: the machine was busier at this check (load "
        "2.50 per CPU) than when the baseline ran (0.20): the queue, not the code, would move "
        "the timing; --meanband-compare-anywhere compares anyway",
    ])
    forced = run_suite("--meanband-baseline=main", "--meanband-compare-anywhere")
    forced.assert_outcomes(failed=2)
    monkeypatch.setattr(environment, "load_per_cpu", lambda: 0.4)  # idle again: compared
    run_suite("--meanband-baseline=main").assert_outcomes(failed=2)


def test_busy_words() -> None:
    from meanband.store.environment import busy_difference

    assert busy_difference(None, [0.1]) is None and busy_difference(0.5, []) is None
    assert busy_difference(0.5, [0.1, 0.9, 0.2]) is None  # idle on both sides
    assert busy_difference(2.2, [2.0, 1.1, 2.5]) is None  # equally busy: 2.2 / 2.0 = 1.1
    # 3.3 per CPU against 2.4: the queue alone stretches timings by about 1.4x.
    assert "busier at this check (load 3.30 per CPU) than when the baseline ran (2.40)" in (
        busy_difference(3.3, [2.4, 2.3, 2.6]) or "")
    assert "quieter at this check (load 0.30 per CPU)" in (
        busy_difference(0.3, [1.6, 1.4, 0.2]) or "")


def test_the_suite_estimate_is_used_unless_a_check_is_noisier_beyond_chance() -> None:
    from meanband.store.baseline import choose_between
    from meanband.store.history import NoiseFloor
    from scipy import stats

    pooled = Between(0.02**2, 24.0, "suite", 3)
    # Reference: the F distribution's 99th percentile (scipy.stats.f), the variance-ratio test.
    critical = stats.f.ppf(0.99, 2, 24)
    near = Between(pooled.variance * critical * 0.99, 2.0, "baseline runs", 3)
    far = Between(pooled.variance * critical * 1.01, 2.0, "baseline runs", 3)
    assert choose_between(near, pooled, None, 0.03) is pooled
    assert choose_between(far, pooled, None, 0.03) is far
    assert choose_between(near, None, None, 0.03) is near
    floor = NoiseFloor("t", "", 0.05, 3, 4)
    assert choose_between(near, pooled, floor, 0.03) == Between(0.05**2, 3.0, "calibration", 4)
    small_floor = NoiseFloor("t", "", 0.001, 3, 4)
    assert choose_between(near, pooled, small_floor, 0.03) is pooled
    assert choose_between(None, None, None, 0.03) == Between(0.03**2, math.inf, "assumed", 1)
    assert choose_between(None, None, None, 0.0).source == "none measured"


def test_timing_counts_far_apart_are_not_compared(pytester: pytest.Pytester, run_suite) -> None:
    suite = """
import numpy as np

def test_route(trials):
    rng = np.random.default_rng({seed})
    trials.extend(np.exp(np.log(3e-4) + rng.normal(0, 0.05, {n})), unit="s")
"""
    pytester.makepyfile(test_routes=suite.format(seed=1, n=10))
    assert run_suite("--meanband-record=main").ret == 0
    pytester.makepyfile(test_routes=suite.format(seed=2, n=40))
    result = run_suite("--meanband-baseline=main")
    result.assert_outcomes(passed=1)
    result.stdout.fnmatch_lines([
        "  test_routes.py::test_route: not compared: this run has 40 trials and run 1 10 per "
        "run: counts more than 2x apart make the ratio interval unreliable on skewed timings; "
        "use the same n in both*",
    ])
    pytester.makepyfile(test_routes=suite.format(seed=3, n=20))  # 2x apart: still compared
    assert "not compared" not in run_suite("--meanband-baseline=main").stdout.str()
