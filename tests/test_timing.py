"""The timing engine, run on a deterministic clock that the timed callables advance themselves."""

from __future__ import annotations

import gc
import itertools
import json
import math

import meanband.collect.timing as timing_module
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meanband.collect.clock import Clock, ClockInfo
from meanband.collect.timing import (
    parse_warmup,
    time_calls,
)
from meanband.errors import TrialError

READ_COST = 50  # ns that one read of the fake clock takes
NO_ENV: dict[str, str] = {}


class FakeClock:
    """Time moves only when the clock is read (by ``READ_COST``) or a callable spends it."""

    def __init__(self, *, step: float = 1.0, read_cost: int = READ_COST) -> None:
        self.now = 0
        self.read_cost = read_cost
        self.clock = Clock("fake", self.read, "test fake clock")
        self.info = ClockInfo("fake", "test fake clock", float(step), float(read_cost))

    def read(self) -> int:
        self.now += self.read_cost
        return self.now

    def spend(self, ns: int) -> None:
        self.now += ns

    def work(self, ns: int):
        """A callable that takes ``ns`` nanoseconds."""

        def call() -> None:
            self.now += ns

        return call


def run(fake: FakeClock, fn, **options):
    options.setdefault("environ", NO_ENV)
    return time_calls(fn, clock=fake.clock, clock_info=fake.info, **options)


# --- calibration -------------------------------------------------------------------------------


def test_k_grows_as_the_callable_gets_faster() -> None:
    target = 1e-3
    ks = []
    for cost in (2_000_000, 200_000, 20_000, 2_000, 200, 20):
        fake = FakeClock()
        timing = run(fake, fake.work(cost), n=5, min_trial_time=target)
        ks.append(timing.loops)
        # The chosen k makes a trial (k calls plus one read) last the minimum trial time ...
        assert timing.loops * cost + READ_COST >= target * 1e9
        # ... and the step before it was still too short.
        if len(timing.calibration) > 1:
            k_before = timing.calibration[-2][0]
            assert k_before * cost + READ_COST < target * 1e9
        # Seconds per call: the read inside each trial is spread over k calls.
        expected = (timing.loops * cost + READ_COST) / timing.loops * 1e-9
        np.testing.assert_allclose(timing.values, expected, rtol=1e-12)
    assert ks[0] == 1
    assert all(a < b for a, b in itertools.pairwise(ks)), ks


@settings(max_examples=40, deadline=None)
@given(
    cost=st.integers(min_value=2_000, max_value=5_000_000),
    target_us=st.integers(min_value=0, max_value=5_000),
)
def test_calibration_reaches_the_target_with_the_smallest_step_it_tried(cost, target_us) -> None:
    fake = FakeClock()
    target_ns = target_us * 1_000
    timing = run(fake, fake.work(cost), n=2, min_trial_time=target_ns * 1e-9)
    steps = [k for k, _ in timing.calibration]
    assert timing.loops * cost + READ_COST >= target_ns
    assert all(k * cost + READ_COST < target_ns for k in steps[:-1])
    assert all(a < b <= 10 * a for a, b in itertools.pairwise(steps))


def test_calibration_steps_grow_at_most_tenfold() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(50), n=3, min_trial_time=1e-3)
    steps = [k for k, _ in timing.calibration]
    assert steps[0] == 1
    assert all(b <= 10 * a for a, b in itertools.pairwise(steps))
    assert timing.loops == steps[-1]


def test_an_interrupted_last_calibration_step_does_not_leave_trials_short() -> None:
    fake = FakeClock()
    calls = itertools.count()

    def fn() -> None:
        # 100 ns a call, but call 200 (inside the k = 1000 step) is held up for 2 ms.
        fake.spend(100 + (2_000_000 if next(calls) == 200 else 0))

    timing = run(fake, fn, n=3, min_trial_time=1e-3)
    assert [k for k, _ in timing.calibration] == [1, 10, 100, 1000]
    # The k = 100 step ran at 100.5 ns a call: k is sized from that speed, 10% past 1 ms.
    assert timing.loops == math.ceil(1.1e6 / ((100 * 100 + READ_COST) / 100))
    assert np.all(timing.values * timing.loops * 1e9 >= 1e6)


def test_fixed_loops_skip_calibration() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(100), n=4, loops=7)
    assert timing.loops == 7
    assert timing.calibration == ()
    np.testing.assert_allclose(timing.values, (7 * 100 + READ_COST) / 7 * 1e-9)


def test_min_trial_time_zero_gives_one_call_per_trial() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(5_000_000), n=3, min_trial_time=0.0)
    assert timing.loops == 1
    assert [k for k, _ in timing.calibration] == [1]


def test_the_default_min_trial_time_is_large_against_the_clock() -> None:
    fake = FakeClock(step=1.0, read_cost=50)
    assert run(fake, fake.work(10), n=2).min_trial_time == pytest.approx(1e-3)
    coarse = FakeClock(step=10_000.0, read_cost=50)
    # 1000 steps of 10 us: the clock's step is at most 0.1% of a trial.
    assert run(coarse, coarse.work(10), n=2).min_trial_time == pytest.approx(1e-2)
    # A 15.6 ms step would ask for 15.6 s trials: the default stops at 0.1 s, with a note.
    very = FakeClock(step=15_600_000.0, read_cost=50)
    timing = run(very, very.work(1_000_000), n=2)
    assert timing.min_trial_time == pytest.approx(0.1)
    assert "coarse-clock" in {note.code for note in timing.notes}


def test_calibration_stops_at_the_loop_limit_with_a_note(monkeypatch) -> None:
    monkeypatch.setattr(timing_module, "MAX_LOOPS", 5_000)
    fake = FakeClock(read_cost=0)
    clock_reads = itertools.count()
    # A clock that only ever moves by one tick per read and a callable that takes no time.
    fake.clock = Clock("fake", lambda: next(clock_reads), "test")
    timing = run(fake, lambda: None, n=2, min_trial_time=1.0)
    assert timing.loops == 5_000
    assert "loop-limit" in {note.code for note in timing.notes}


# --- warm-up -----------------------------------------------------------------------------------


def cooling(fake: FakeClock, cold_calls: int, cold: int, warm: int):
    """A callable that costs ``cold`` ns for its first calls and ``warm`` ns after."""
    calls = itertools.count()

    def call() -> None:
        fake.spend(cold if next(calls) < cold_calls else warm)

    return call


def test_warm_up_trials_are_kept_apart_from_the_values() -> None:
    fake = FakeClock()
    fn = cooling(fake, cold_calls=4, cold=900_000, warm=100_000)
    timing = run(fake, fn, n=6, warmup=3, loops=1)
    assert timing.warmup.size == 3
    assert timing.values.size == 6
    np.testing.assert_allclose(timing.warmup, (900_000 + READ_COST) * 1e-9)
    # Only the fourth cold call lands among the trials here: three warm-up trials absorb the rest.
    np.testing.assert_allclose(timing.values[1:], (100_000 + READ_COST) * 1e-9)
    assert timing.to_dict()["warmup_trials"] == 3


def test_warm_up_by_duration_runs_trials_until_the_time_is_spent() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(1_000_000), n=3, warmup="4500us", loops=1)
    # Each warm-up trial and the read after it take just over 1 ms: five fill 4.5 ms.
    assert timing.warmup.size == 5
    assert timing.values.size == 3


@pytest.mark.parametrize(
    ("value", "expected"),
    [(None, (0, 0.0)), (0, (0, 0.0)), (5, (5, 0.0)), ("7", (7, 0.0)), ("200ms", (0, 0.2))],
)
def test_parse_warmup(value, expected) -> None:
    count, seconds = parse_warmup(value)
    assert count == expected[0]
    assert seconds == pytest.approx(expected[1])


@pytest.mark.parametrize("value", [-1, 1.5, True, "soon", "-5ms", [3]])
def test_a_bad_warm_up_is_an_error(value) -> None:
    with pytest.raises(TrialError, match="warmup"):
        parse_warmup(value)


# --- setup -------------------------------------------------------------------------------------


def test_setup_time_does_not_show_in_the_trials() -> None:
    fake = FakeClock()

    def slow_setup() -> None:
        fake.spend(10**9)  # a one-second setup

    timing = run(fake, fake.work(300_000), n=5, setup=slow_setup, loops=1)
    np.testing.assert_allclose(timing.values, (300_000 + READ_COST) * 1e-9)
    assert timing.elapsed > 5.0  # the setups did run, outside the timed regions


def test_setup_gives_every_call_a_fresh_input() -> None:
    fake = FakeClock()
    made = itertools.count()
    seen: list[int] = []

    def take(batch: list[int]) -> None:
        seen.append(batch.pop())  # consumes its input
        fake.spend(100_000)

    timing = run(fake, take, n=4, setup=lambda: [next(made)], min_trial_time=0.0005)
    assert timing.loops * 100_000 >= 500_000
    assert seen == sorted(set(seen))  # every call popped from its own list
    assert len(seen) == sum(k for k, _ in timing.calibration) + 4 * timing.loops
    assert timing.to_dict()["setup"] is True


def test_setup_value_goes_before_the_other_arguments() -> None:
    fake = FakeClock()
    calls: list[tuple] = []

    def fn(data, scale, *, offset):
        calls.append((data, scale, offset))

    time_calls(
        fn, (3,), {"offset": 1}, n=2, setup=lambda: "fresh", loops=2,
        clock=fake.clock, clock_info=fake.info, environ=NO_ENV,
    )
    assert calls == [("fresh", 3, 1)] * 4


def test_setup_returning_none_passes_nothing() -> None:
    fake = FakeClock()
    calls: list[tuple] = []
    time_calls(
        lambda *a: calls.append(a), ("x",), n=2, setup=lambda: None, loops=3,
        clock=fake.clock, clock_info=fake.info, environ=NO_ENV,
    )
    assert calls == [("x",)] * 6


def test_setup_returning_none_only_sometimes_is_an_error() -> None:
    fake = FakeClock()
    answers = itertools.cycle([None, 1])
    with pytest.raises(TrialError, match="setup returned None for 1 of 2 calls"):
        run(fake, lambda *a: None, n=2, setup=lambda: next(answers), loops=2)


# --- garbage collection ------------------------------------------------------------------------


def test_gc_is_off_during_trials_and_restored_after() -> None:
    fake = FakeClock()
    states: list[bool] = []

    def fn() -> None:
        states.append(gc.isenabled())
        fake.spend(1_000_000)

    assert gc.isenabled()
    run(fake, fn, n=3, warmup=2)
    assert states and not any(states)
    assert gc.isenabled()


def test_gc_can_stay_on() -> None:
    fake = FakeClock()
    states: list[bool] = []
    timing = run(fake, lambda: states.append(gc.isenabled()), n=3, loops=1, gc_enabled=True)
    assert all(states)
    assert timing.to_dict()["gc_enabled"] is True


@pytest.mark.parametrize("fail_at", [1, 5, 40])  # calibration, warm-up, trials
def test_gc_state_is_restored_when_the_callable_raises(fail_at: int) -> None:
    fake = FakeClock()
    calls = itertools.count(1)

    def fn() -> None:
        if next(calls) == fail_at:
            raise RuntimeError("sensor bus fault")
        fake.spend(1_000_000)

    assert gc.isenabled()
    with pytest.raises(RuntimeError, match="sensor bus fault"):
        run(fake, fn, n=50, warmup=3)
    assert gc.isenabled()


def test_gc_state_is_restored_when_setup_raises() -> None:
    fake = FakeClock()

    def setup() -> None:
        raise OSError("fixture file missing")

    with pytest.raises(OSError):
        run(fake, fake.work(10), n=3, setup=setup)
    assert gc.isenabled()


def test_a_collector_disabled_by_the_caller_stays_disabled() -> None:
    fake = FakeClock()
    gc.disable()
    try:
        run(fake, fake.work(1_000_000), n=2)
        assert not gc.isenabled()
    finally:
        gc.enable()


# --- time limit --------------------------------------------------------------------------------


def test_the_time_limit_stops_collection_with_a_note() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(1_000_000), n=100, time_limit=0.02, loops=1)
    assert timing.stopped_early
    assert 2 <= timing.trials < 100
    # The limit is passed by the trial that ends after 20 ms; that trial is kept.
    assert timing.trials == pytest.approx(20, abs=1)
    [note] = [note for note in timing.notes if note.code == "time-limit"]
    assert f"took {timing.trials} of 100 trials" in note.text
    row = timing.to_dict()
    assert row["stopped_early"] is True
    assert row["trials"] == timing.trials
    assert row["requested"] == 100


def test_the_time_limit_still_leaves_the_minimum_of_trials() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(50_000_000), n=30, time_limit=0.001, min_trials=3)
    assert timing.trials == 3
    assert timing.stopped_early


def test_the_time_limit_cuts_warm_up_first() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(1_000_000), n=10, warmup=50, time_limit=0.005, loops=1)
    assert timing.warmup.size < 50
    assert timing.trials == 2
    [note] = [note for note in timing.notes if note.code == "time-limit"]
    assert "warm-up cut" in note.text


def test_no_limit_no_stop() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(1_000_000), n=40, loops=1)
    assert timing.trials == 40
    assert not timing.stopped_early
    assert "time-limit" not in {note.code for note in timing.notes}


# --- notes -------------------------------------------------------------------------------------


def codes(timing) -> set[str]:
    return {note.code for note in timing.notes}


def test_a_quiet_run_has_no_notes() -> None:
    fake = FakeClock()
    rng = np.random.default_rng(20261201)
    costs = iter(rng.normal(200_000, 5_000, size=10_000).astype(int))
    timing = run(fake, lambda: fake.spend(next(costs)), n=40, loops=1)
    assert codes(timing) == set()


def test_inside_an_xdist_worker_the_note_names_the_worker() -> None:
    fake = FakeClock()
    env = {"PYTEST_XDIST_WORKER": "gw1", "PYTEST_XDIST_WORKER_COUNT": "2"}
    timing = run(fake, fake.work(1_000_000), n=3, environ=env)
    [note] = [note for note in timing.notes if note.code == "xdist-worker"]
    assert "gw1" in note.text and "2" in note.text


def test_a_slowing_trend_across_trials_is_noted_as_drift() -> None:
    fake = FakeClock()
    calls = itertools.count()
    rng = np.random.default_rng(7)
    noise = iter(rng.normal(0, 5_000, size=1_000).astype(int))
    # 1% slower per trial, on top of noise: a throttling CPU.
    timing = run(
        fake, lambda: fake.spend(200_000 + 2_000 * next(calls) + next(noise)), n=30, loops=1
    )
    assert "drift" in codes(timing)
    assert timing.drift is not None and timing.drift.statistic > 0.5
    # Sen's slope over the run: about 2,000 ns x 29 trials on a level of about 230,000 ns.
    assert timing.drift.change / float(np.median(timing.values)) > 0.1
    [note] = [note for note in timing.notes if note.code == "drift"]
    assert "upward" in note.text and "Mann-Kendall" in note.text


def test_a_coarse_clock_is_noted() -> None:
    fake = FakeClock(step=50_000.0)
    timing = run(fake, fake.work(1_000_000), n=3, loops=1)
    assert "coarse-clock" in codes(timing)
    fine = FakeClock(step=1.0)
    assert "coarse-clock" not in codes(run(fine, fine.work(1_000_000), n=3, loops=1))


def test_one_call_per_trial_near_the_read_cost_is_noted() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(400), n=3, min_trial_time=0.0)
    assert timing.loops == 1
    [note] = [note for note in timing.notes if note.code == "read-cost"]
    assert "--meanband-min-trial-time" in note.text
    # Calibrated to the default minimum trial time, the same callable needs no note.
    calibrated = FakeClock()
    assert "read-cost" not in codes(run(calibrated, calibrated.work(400), n=3))


def test_notes_serialise_as_code_and_text() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(400), n=3, loops=1)
    assert timing.notes
    assert all(note.to_dict().keys() == {"code", "text"} for note in timing.notes)


# --- the row entry and bad input ---------------------------------------------------------------


def test_the_row_entry_is_builtin_types_only() -> None:
    fake = FakeClock()
    timing = run(fake, fake.work(20_000), n=12, warmup=2, time_limit=5.0)
    row = timing.to_dict()
    assert json.loads(json.dumps(row)) == row
    assert {
        "clock", "resolution_ns", "read_cost_ns", "k", "min_trial_time", "trials",
        "stopped_early",
    } <= row.keys()
    assert row["clock"] == "fake"
    assert row["k"] == timing.loops
    assert row["read_cost_ns"] == READ_COST
    assert row["elapsed"] >= timing.values.sum() * timing.loops


@pytest.mark.parametrize(
    ("options", "match"),
    [
        ({"n": 0}, "n=0 must be a whole number >= 1"),
        ({"n": 2.5}, "n=2.5"),
        ({"n": 3, "loops": 0}, "loops=0"),
        ({"n": 3, "min_trial_time": -1.0}, "min_trial_time"),
        ({"n": 3, "min_trial_time": math.nan}, "min_trial_time"),
        ({"n": 3, "time_limit": 0.0}, "time_limit"),
        ({"n": 3, "setup": 5}, "setup=5 is not callable"),
        ({"n": 3, "clock": "sundial"}, "unknown clock"),
    ],
)
def test_bad_arguments_are_errors_that_say_what_to_do(options, match) -> None:
    fake = FakeClock()
    options.setdefault("clock", fake.clock)
    with pytest.raises(TrialError, match=match):
        time_calls(fake.work(10), clock_info=fake.info, **options)


def test_a_single_trial_is_allowed_and_the_minimum_follows_n() -> None:
    # Two-stage collection may ask for one more trial; statistics need two, but that is the
    # caller's concern.
    fake = FakeClock()
    timing = run(fake, fake.work(2_000_000), n=1, time_limit=1e-3)
    assert timing.trials == 1 and not timing.stopped_early


def test_a_non_callable_is_an_error() -> None:
    with pytest.raises(TrialError, match="needs a callable"):
        time_calls(42, n=3)  # type: ignore[arg-type]


def test_a_coroutine_function_is_an_error() -> None:
    async def fetch_quote() -> float:
        return 1.0

    with pytest.raises(TrialError, match="coroutine function"):
        time_calls(fetch_quote, n=3)


def test_the_real_clock_times_a_call() -> None:
    timing = time_calls(sum, (range(100),), n=5, min_trial_time=1e-4, environ=NO_ENV)
    assert timing.trials == 5
    assert timing.loops >= 1
    assert np.all(timing.values > 0)
    assert timing.clock.clock == "wall"


def test_long_runs_test_drift_on_block_means() -> None:
    # The engine's drift test reads at most DRIFT_MAX_POINTS points, so its cost does not grow
    # with n, and still finds a trend hidden in the jitter of single trials.
    from meanband.collect.timing import DRIFT_MAX_POINTS, _drift

    x = np.random.default_rng(3).normal(size=5 * DRIFT_MAX_POINTS)
    flat = _drift(x)
    assert flat is not None and flat.used <= DRIFT_MAX_POINTS
    trend = _drift(x + np.linspace(0, 1, x.size))
    assert trend is not None and trend.rejects(0.01)
    assert trend.change == pytest.approx(1.0, rel=0.2)


def test_timings_compare_with_equals() -> None:
    # Before: == on the engine's Timing compared identity only; arrays now compare by value.
    def timed(n: int):
        fake = FakeClock()
        return run(fake, fake.work(1_000), n=n, loops=1)

    assert timed(4) == timed(4)
    assert timed(4) != timed(5)
