"""In-run comparison: interleaved pairs, their ratio interval, and ``trials.compare``."""

from __future__ import annotations

import math

import numpy as np
import pytest
from meanband import TrialError, Verdict
from meanband.collect.paired import time_pairs
from meanband.stats.ratio import check_ratio
from scipy import stats


class FakeMachine:
    """A deterministic clock: each callable advances it by its own cost; the log says who ran."""

    def __init__(self) -> None:
        self.now = 0
        self.log: list[str] = []

    def clock(self) -> int:
        return self.now

    def work(self, name: str, cost: int, spikes: dict[int, int] | None = None):
        calls = {"n": 0}

        def fn() -> None:
            calls["n"] += 1
            self.now += cost + (spikes or {}).get(calls["n"], 0)
            self.log.append(name)

        fn.__name__ = name
        return fn


def test_pairs_are_timed_in_random_order_and_ratio_is_exact() -> None:
    machine = FakeMachine()
    new, old = machine.work("new", 55_000), machine.work("old", 50_000)
    times = time_pairs(new, old, 200, repeats=1, warmup=0, seed=1, clock=machine.clock)
    assert times.batch == 1  # 50 µs is above the 20 µs floor: one call per measurement
    np.testing.assert_allclose(times.first, 55e-6)
    np.testing.assert_allclose(times.second, 50e-6)
    # After the two calibration calls, calls come in pairs; count who went first.
    firsts = machine.log[2::2]
    share = firsts.count("new") / len(firsts)
    assert 0.35 < share < 0.65  # Binomial(200, 1/2): 0.35..0.65 is beyond 4 sd (common practice)
    assert times.first_went_first.sum() == firsts.count("new")


def test_quick_callables_are_batched_alike() -> None:
    machine = FakeMachine()
    new, old = machine.work("new", 300), machine.work("old", 200)
    times = time_pairs(new, old, 5, repeats=1, warmup=0, seed=2, clock=machine.clock)
    assert times.batch == 100  # 20 µs / 200 ns
    np.testing.assert_allclose(times.first / times.second, 1.5)


def test_a_descheduled_measurement_is_dropped_as_interference() -> None:
    machine = FakeMachine()
    # Call 10 of "new" is hit by a 5 ms interruption: one long measurement that no callable
    # explains; its round is dropped and the pair keeps its other rounds.
    new = machine.work("new", 55_000, spikes={10: 5_000_000})
    old = machine.work("old", 50_000)
    times = time_pairs(new, old, 20, repeats=3, warmup=0, seed=3, clock=machine.clock)
    assert times.dropped == 1
    np.testing.assert_allclose(times.first, 55e-6)
    result = check_ratio(times.first, times.second, at_most=1.05)
    assert result.verdict is Verdict.FAIL and result.interval.ratio == pytest.approx(1.1)


def test_a_slow_path_on_some_calls_counts_in_the_ratio() -> None:
    machine = FakeMachine()
    # Every tenth call of "new" takes 8x as long (a slow path, mean 1.7x); the quickest round
    # of 5 would hide it, the mean of all calls must not. Extremes all on one side are kept.
    slow = {k: 7 * 50_000 for k in range(10, 400, 10)}
    new = machine.work("new", 50_000, spikes=slow)
    old = machine.work("old", 50_000)
    times = time_pairs(new, old, 40, repeats=5, warmup=0, seed=5, clock=machine.clock)
    assert times.dropped == 0
    # 200 calls of new were timed after calibration's one call; those at 10, 20, ... are slow.
    assert np.nanmean(times.first_rounds) == pytest.approx(50e-6 * (1 + 7 * 20 / 200), rel=1e-9)
    result = check_ratio(times.first, times.second, at_most=1.05)
    assert result.verdict is Verdict.FAIL, result.interval


def test_check_ratio_matches_paired_fieller_by_hand() -> None:
    rng = np.random.default_rng(8)
    old = rng.lognormal(math.log(50e-6), 0.2, 40)
    new = old * rng.lognormal(math.log(1.03), 0.04, 40)
    result = check_ratio(new, old, at_most=1.05, confidence=0.9)
    # Reference: Fieller (1954) for paired means, solved here the long way. The bounds are the
    # ratios rho where the paired t statistic of new_i - rho old_i (scipy.stats.ttest_1samp)
    # equals the two-sided 90% critical value.
    from scipy.optimize import brentq

    crit = stats.t.ppf(0.95, 39)

    def excess(rho: float) -> float:
        return float(stats.ttest_1samp(new - rho * old, 0.0).statistic) ** 2 - crit**2

    ratio = new.mean() / old.mean()
    assert result.interval.ratio == pytest.approx(ratio, rel=1e-12)
    assert result.interval.low == pytest.approx(brentq(excess, 0.5, ratio), rel=1e-9)
    assert result.interval.high == pytest.approx(brentq(excess, ratio, 2.0), rel=1e-9)
    assert result.interval.estimand == "paired means"
    high = result.interval.high
    expected = (Verdict.PASS if high <= 1.05 else
                Verdict.FAIL if result.interval.low > 1.05 else Verdict.UNDECIDED)
    assert result.verdict is expected


def test_machine_drift_cancels_in_the_paired_means() -> None:
    # Common practice, no source: a speed factor shared by both sides of each pair leaves the
    # ratio of means exact and the interval of zero width.
    speed = np.linspace(1.0, 3.0, 30)
    result = check_ratio(1.08 * speed, speed, at_most=1.05)
    assert result.interval.low == pytest.approx(1.08) and result.interval.high == pytest.approx(1.08)
    assert result.verdict is Verdict.FAIL


def test_interruptions_on_both_sides_are_dropped_and_one_sided_extremes_kept() -> None:
    from meanband.stats.ratio import side_blind_outliers

    base = np.ones((20, 5))
    a, b = base.copy(), base.copy()
    a[3, 1] = b[7, 2] = a[12, 4] = 100.0
    assert side_blind_outliers(a, b).sum() == 3
    a2 = base.copy()
    a2[::2, 0] = 8.0  # ten long measurements, all of one callable: a slow path
    assert not side_blind_outliers(a2, base).any()


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({}, "needs a limit"),
        ({"at_most": 0.9, "at_least": 1.1}, "swap them"),
        ({"at_most": -1.0}, "positive finite ratio"),
        ({"at_most": "fast"}, "ratio such as 1.05"),
    ],
)
def test_bad_limits_are_refused(kwargs: dict[str, object], message: str) -> None:
    with pytest.raises(TrialError, match=message):
        check_ratio(np.ones(3), np.ones(3), **kwargs)  # type: ignore[arg-type]


@pytest.mark.parametrize(("n", "repeats", "warmup"), [(1, 5, 2), (10, 0, 2), (10, 5, -1), (True, 5, 2)])
def test_bad_counts_are_refused(n: int, repeats: int, warmup: int) -> None:
    with pytest.raises(TrialError, match="a comparison needs"):
        time_pairs(lambda: None, lambda: None, n, repeats=repeats, warmup=warmup)


# -- real callables --------------------------------------------------------------------------------


def spin(k: int) -> None:
    for _ in range(k):
        pass


def test_ten_percent_slower_real_callable_is_detected() -> None:
    # Busy loops of about 50 µs (5000 and 5500 turns of an empty loop on a typical machine).
    def old() -> None:
        spin(5000)

    def new() -> None:
        spin(5500)

    times = time_pairs(new, old, 60, seed=4)
    slower = check_ratio(times.first, times.second, at_most=1.02)
    assert slower.verdict is Verdict.FAIL, slower.interval
    faster = check_ratio(times.second, times.first, at_most=0.98)
    assert faster.verdict is Verdict.PASS, faster.interval


COMPARE_SUITE = """
import pytest

def spin(k):
    for _ in range(k):
        pass

def parse_v1():
    spin(5000)

def parse_v2():
    spin(6500)  # 30% slower: the suite tests the plumbing, the 10% case is tested directly above

def test_v2_not_slower(trials):
    trials.compare(parse_v2, parse_v1, at_most=1.02, n=60, seed=1)

def test_v1_faster(trials):
    result = trials.compare(parse_v1, parse_v2, at_most=0.98, n=60, seed=2)
    assert result.passed

def test_needs_limit(trials):
    trials.compare(parse_v1, parse_v2)
"""


@pytest.mark.parametrize("workers", [[], ["-n", "2"]])
def test_trials_compare_in_a_suite(pytester: pytest.Pytester, run_suite, workers: list[str]) -> None:
    pytester.makepyfile(test_parsers=COMPARE_SUITE)
    result = run_suite(*workers, "-rf")
    result.assert_outcomes(passed=1, failed=2)
    result.stdout.fnmatch_lines([
        "*BandViolation: parse_v2 / parse_v1: time ratio 1.*x, 95% interval [[]1.*, 1.*[]] from 60 "
        "interleaved pairs; allowed at most 1.02x: FAIL, the whole interval lies above the "
        "allowed range",
    ])
    result.stdout.fnmatch_lines(["*TrialError: a comparison needs a limit*"])
    result.stdout.re_match_lines([
        r"test_parsers.py::test_v1_faster \[parse_v1 / parse_v2\]\s+60\s+0\.\d+ x\s+\[.*\] x\s+"
        r"95% paired-fieller \(time ratio\)\s+<= 0\.98 x\s+PASS",
        r"test_parsers.py::test_v2_not_slower \[parse_v2 / parse_v1\]\s+60\s+1\.\d+ x .* FAIL",
    ])


def test_comparison_row_carries_both_sides(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makeconftest(
        """
        def pytest_meanband_result(config, row):
            c = row["comparison"]
            print("\\nROW", row["source"], row["unit"], len(row["values"]), c["new"], c["old"],
                  len(c["new_values"]), len(c["old_values"]), c["at_most"], row["timing"]["repeats"])
        """
    )
    pytester.makepyfile(test_parsers=COMPARE_SUITE)
    result = run_suite("-s", "-k", "v1_faster")
    result.stdout.fnmatch_lines(["*ROW compare x 60 parse_v1 parse_v2 60 60 0.98 5"])


def test_compare_reads_the_clock_the_settings_name() -> None:
    # The clock module owns the clock: a comparison on the CPU clock says so in its row.
    from meanband.record.comparison import compare_callables

    def new() -> int:
        return sum(range(200))

    def old() -> int:
        return sum(range(200))

    for name in ("wall", "cpu"):
        _result, row, _message = compare_callables(
            new, old, n=4, at_most=100.0, at_least=None, confidence=0.95, repeats=1, warmup=0,
            seed=1, clock=name,
        )
        assert row["timing"]["clock"] == name
    with pytest.raises(TrialError, match="unknown clock 'sundial'"):
        compare_callables(new, old, n=4, at_most=2.0, at_least=None, confidence=0.95, clock="sundial")


def test_paired_times_compare_with_equals() -> None:
    # Before: == on PairedTimes raised "the truth value of an array is ambiguous".
    machine = FakeMachine()
    new, old = machine.work("new", 1_000), machine.work("old", 2_000)
    times = time_pairs(new, old, 4, repeats=1, warmup=0, seed=1, clock=machine.clock)
    assert times == times and times != time_pairs(new, old, 5, repeats=1, warmup=0, seed=1,
                                                   clock=machine.clock)


COMPARE_LIKE_TIME = """
import functools

LINE = "fare,zone-3,adult," * 40


def parse_v1(text, sep=","):
    return text.split(sep)


def parse_v2(text, sep=","):
    return [part for part in text.split(sep)]


def test_arguments_like_time(trials):
    # Before: trials.compare(new, old, LINE, at_most=1.05) was a TypeError.
    result = trials.compare(parse_v2, parse_v1, LINE, sep=",", at_most=50.0, n=6, seed=3)
    assert result.passed


def test_setup_per_call(trials):
    seen = []

    def fresh():
        seen.append(1)
        return LINE

    trials.compare(parse_v2, parse_v1, setup=fresh, at_most=50.0, n=4, repeats=2, seed=4)
    assert len(seen) >= 2 * 4 * 2  # every call of both sides got its own input


def test_partial_names(trials):
    trials.compare(functools.partial(parse_v2, LINE), functools.partial(parse_v1, LINE, sep=","),
                   at_most=50.0, n=4, seed=5)


def test_lambdas_need_a_name(trials):
    trials.compare(lambda: parse_v2(LINE), lambda: parse_v1(LINE), at_most=50.0, n=4)


def test_lambdas_with_a_name(trials):
    trials.compare(lambda: parse_v2(LINE), lambda: parse_v1(LINE), at_most=50.0, n=4, seed=6,
                   name="list copy / split")
"""


def test_compare_is_shaped_like_time(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makepyfile(test_shape=COMPARE_LIKE_TIME)
    result = run_suite("-rf")
    result.assert_outcomes(passed=4, failed=1)
    text = result.stdout.str()
    # Before: lambdas gave rows named "<lambda> / <lambda>".
    result.stdout.fnmatch_lines(["*test_lambdas_need_a_name*TrialError: cannot name this "
                                 "comparison's row from a lambda*pass name=*"])
    assert "<lambda>" not in text
    assert "test_shape.py::test_arguments_like_time [parse_v2 / parse_v1]" in text
    assert "[parse_v2('fare,zone-3,adul...) / parse_v1('fare,zone-3,adul..., sep=',')]" in text
    assert "test_shape.py::test_lambdas_with_a_name [list copy / split]" in text


def test_callable_names() -> None:
    import functools

    from meanband.record.comparison import callable_name

    class Parser:
        def parse(self) -> None: ...

        def __call__(self) -> None: ...

    def outer():
        def inner() -> None: ...
        return inner

    assert callable_name(Parser().parse) == "test_callable_names.<locals>.Parser.parse".rsplit(
        "<locals>.", 1)[-1]
    assert callable_name(outer()) == "inner"
    assert callable_name(Parser()) == "Parser"
    assert callable_name(functools.partial(outer, 3)) == "test_callable_names.<locals>.outer(3)".rsplit(
        "<locals>.", 1)[-1]
    assert callable_name(lambda: None) is None
    assert callable_name(functools.partial(lambda x: x, 1)) is None
