"""Timing through the ``trials`` fixture, as a user runs it; a fake clock makes time exact."""

from __future__ import annotations

import json

import pytest

# The inner suites' conftest: a fixture that swaps the wall clock for a fake one that moves only
# when read (by READ ns) or when a timed callable spends time, and a hook that saves every row.
CONFTEST = """
import itertools
import json

import numpy as np
import pytest

import meanband.collect.clock as clock_module

READ = 50


class FakeClock:
    def __init__(self, read_cost=READ, tick=1):
        self.now = 0
        self.read_cost = read_cost
        self.tick = tick

    def read(self):
        self.now += self.read_cost
        return self.now // self.tick * self.tick

    def work(self, ns):
        def call(*args):
            self.now += ns
        return call

    def install(self, monkeypatch):
        clock = clock_module.Clock("wall", self.read, "fake clock", stated_resolution_ns=1.0)
        monkeypatch.setitem(clock_module.CLOCKS, "wall", clock)
        return self


@pytest.fixture
def fake(monkeypatch):
    return FakeClock().install(monkeypatch)


@pytest.fixture
def coarse(monkeypatch):
    return FakeClock(tick=20_000).install(monkeypatch)


def pytest_meanband_session_finish(config, rows):
    path = config.rootpath / "rows.json"
    path.write_text(json.dumps(rows))
"""


@pytest.fixture
def suite(pytester: pytest.Pytester, run_suite):
    """Write an inner suite, run it, return (result, rows by test name)."""
    pytester.makeconftest(CONFTEST)

    def run(body: str, *args: str):
        pytester.makepyfile(test_timed="import gc\nimport itertools\nimport pytest\n" + body)
        result = run_suite(*args)
        path = pytester.path / "rows.json"
        rows = json.loads(path.read_text()) if path.exists() else []
        by_test: dict[str, list[dict]] = {}
        for row in rows:
            by_test.setdefault(row["nodeid"].split("::")[-1], []).append(row)
        return result, by_test

    return run


def one(rows: dict, name: str) -> dict:
    [row] = rows[name]
    return row


def codes(row: dict) -> set[str]:
    return {note["code"] for note in row["notes"]}


READ = 50  # the fake clock's read cost, as in CONFTEST


def test_k_grows_as_the_callable_gets_faster_and_the_row_says_so(suite) -> None:
    result, rows = suite(
        """
@pytest.mark.meanband(n=5)
def test_slow(trials, fake):
    trials.time(fake.work(400_000))

@pytest.mark.meanband(n=5)
def test_fast(trials, fake):
    trials.time(fake.work(4_000))

@pytest.mark.meanband(n=5)
def test_fastest(trials, fake):
    trials.time(fake.work(40))
"""
    )
    assert result.ret == 0
    ks = {name: one(rows, name)["timing"]["k"] for name in ("test_slow", "test_fast", "test_fastest")}
    assert ks["test_slow"] < ks["test_fast"] < ks["test_fastest"]
    for name, cost in (("test_slow", 400_000), ("test_fast", 4_000), ("test_fastest", 40)):
        row = one(rows, name)
        timing = row["timing"]
        assert row["source"] == "time" and row["unit"] == "s"
        # A trial (k calls and the read that ends it) lasts at least the 1 ms minimum ...
        assert timing["k"] * cost + READ >= 1e6
        assert timing["min_trial_time"] == pytest.approx(1e-3)
        # ... and each value is the trial's time over k.
        assert row["values"] == pytest.approx([(timing["k"] * cost + READ) / timing["k"] * 1e-9] * 5)
        assert timing["clock"] == "wall" and timing["source"] == "fake clock"
        assert timing["read_cost_ns"] == pytest.approx(READ)
        assert timing["resolution_ns"] == 1.0
        assert timing["trials"] == 5 and timing["stopped_early"] is False
        assert row["settings"]["clock"] == "wall" and row["settings"]["gc"] is False


def test_the_minimum_trial_time_comes_from_option_ini_or_marker(suite, pytester) -> None:
    pytester.makeini("[pytest]\nmeanband_min_trial_time = 4ms\n")
    body = """
def test_ini(trials, fake):
    trials.time(fake.work(10_000), n=3)

@pytest.mark.meanband(min_trial_time="200us")
def test_marker(trials, fake):
    trials.time(fake.work(10_000), n=3)
"""
    _, rows = suite(body)
    assert one(rows, "test_ini")["timing"]["min_trial_time"] == pytest.approx(4e-3)
    assert one(rows, "test_marker")["timing"]["min_trial_time"] == pytest.approx(2e-4)
    assert one(rows, "test_ini")["timing"]["k"] > one(rows, "test_marker")["timing"]["k"]
    _, rows = suite(body, "--meanband-min-trial-time=0.002")
    assert one(rows, "test_ini")["timing"]["min_trial_time"] == pytest.approx(2e-3)


def test_warm_up_is_kept_apart_from_the_statistics(suite) -> None:
    result, rows = suite(
        """
@pytest.mark.meanband(n=6, warmup=3, min_trial_time=0)
def test_cooling(trials, fake):
    calls = itertools.count()
    def service():
        fake.now += 900_000 if next(calls) < 4 else 100_000
    trials.time(service)
    trials.check(high="0.2ms")
"""
    )
    assert result.ret == 0
    row = one(rows, "test_cooling")
    # One calibration call and three warm-up trials absorb the four slow calls.
    assert row["warmup"] == pytest.approx([(900_000 + READ) * 1e-9] * 3)
    assert row["values"] == pytest.approx([(100_000 + READ) * 1e-9] * 6)
    assert row["decision"]["interval"]["n"] == 6
    assert row["timing"]["warmup_trials"] == 3


def test_a_duration_warm_up_from_the_command_line(suite) -> None:
    _, rows = suite(
        """
def test_warm(trials, fake):
    trials.time(fake.work(1_000_000), n=3)
""",
        "--meanband-warmup=5ms",
    )
    # Trials of 1 ms (k = 1) and a 5 ms warm-up: warm-up runs until 5 ms have passed.
    assert len(one(rows, "test_warm")["warmup"]) == 5


def test_setup_runs_outside_the_timed_region(suite) -> None:
    result, rows = suite(
        """
import time

def test_sort(trials, fake, monkeypatch):
    # Sleeping moves the fake clock, as a real sleep moves the real one.
    monkeypatch.setattr(time, "sleep", lambda seconds: setattr(fake, "now", fake.now + int(seconds * 1e9)))
    seen = []
    def slow_fresh_input():
        time.sleep(1.0)            # a one-second setup
        return [3, 1, 2]
    def sort_in_place(data):
        seen.append(data)
        data.sort()
        fake.now += 20_000
    trials.time(sort_in_place, setup=slow_fresh_input, n=8)
    assert all(item == [1, 2, 3] for item in seen) and len({id(x) for x in seen}) > 8
    trials.check(high="25us")
"""
    )
    assert result.ret == 0, result.stdout.str()
    row = one(rows, "test_sort")
    k = row["timing"]["k"]
    assert row["values"] == pytest.approx([(k * 20_000 + READ) / k * 1e-9] * 8)
    assert row["timing"]["setup"] is True
    # The sleeps happened (k of them per trial, plus calibration), just not inside a trial.
    assert row["timing"]["elapsed"] > 8 * k


def test_gc_is_restored_when_the_timed_callable_raises(suite) -> None:
    result, rows = suite(
        """
def test_boom(trials, fake):
    calls = itertools.count()
    def flaky():
        if next(calls) == 30:
            raise ConnectionError("quote service dropped")
        fake.now += 100_000
    assert gc.isenabled()
    with pytest.raises(ConnectionError):
        trials.time(flaky, n=50)
    assert gc.isenabled()

def test_off_during_trials(trials, fake):
    states = []
    trials.time(lambda: states.append(gc.isenabled()) or fake.work(500_000)(), n=3)
    assert not any(states) and gc.isenabled()

@pytest.mark.meanband(gc=True)
def test_kept_on(trials, fake):
    states = []
    trials.time(lambda: states.append(gc.isenabled()) or fake.work(500_000)(), n=3)
    assert all(states)
"""
    )
    result.assert_outcomes(passed=3)
    assert one(rows, "test_kept_on")["timing"]["gc_enabled"] is True


def test_the_time_limit_stops_early_with_a_note(suite) -> None:
    result, rows = suite(
        """
@pytest.mark.meanband(n=100, min_trial_time=0)
def test_limited(trials, fake):
    trials.time(fake.work(1_000_000))

@pytest.mark.meanband(n=100, min_trial_time=0, time_limit="50ms")
def test_marker_wins(trials, fake):
    trials.time(fake.work(1_000_000))

@pytest.mark.meanband(n=15, min_trial_time=0)
def test_limit_spans_the_test(trials, fake):
    trials.time(fake.work(1_000_000))
    trials.series("again").time(fake.work(1_000_000))
""",
        "--meanband-time-limit=20ms",
    )
    assert result.ret == 0
    row = one(rows, "test_limited")
    taken = row["timing"]["trials"]
    assert taken == pytest.approx(20, abs=1) and row["timing"]["stopped_early"] is True
    assert row["timing"]["time_limit"] == pytest.approx(0.02)
    [note] = [n for n in row["notes"] if n["code"] == "time-limit"]
    assert f"took {taken} of 100 trials" in note["text"]
    result.stdout.fnmatch_lines([f"*test_limited*time limit 20.0 ms reached: took {taken} of 100*"])
    assert one(rows, "test_marker_wins")["timing"]["trials"] == pytest.approx(50, abs=1)
    # The limit is per test: 15 trials of the first call leave 5 ms for the second.
    first, second = rows["test_limit_spans_the_test"]
    assert first["timing"]["trials"] == 15 and not first["timing"]["stopped_early"]
    assert second["timing"]["trials"] < 15 and second["timing"]["stopped_early"]


def test_drift_is_noted(suite) -> None:
    result, rows = suite(
        """
@pytest.mark.meanband(n=30, min_trial_time=0)
def test_throttling(trials, fake):
    calls = itertools.count()
    noise = iter(__import__("numpy").random.default_rng(5).normal(0, 5_000, 1000).astype(int))
    trials.time(lambda: fake.work(200_000 + 2_000 * next(calls) + int(next(noise)))())
""",
        "-v",  # notes on trials never checked show at -v
    )
    assert "drift" in codes(one(rows, "test_throttling"))
    result.stdout.fnmatch_lines(["*test_throttling*trials trend upward*Mann-Kendall*"])


def test_a_coarse_clock_and_a_one_call_trial_near_the_read_cost_are_noted(suite) -> None:
    _, rows = suite(
        """
@pytest.mark.meanband(n=3, min_trial_time="1ms")
def test_coarse(trials, coarse):
    trials.time(coarse.work(1_000_000))

@pytest.mark.meanband(n=3, min_trial_time=0)
def test_tiny(trials, fake):
    trials.time(fake.work(400))

@pytest.mark.meanband(n=3)
def test_calibrated(trials, fake):
    trials.time(fake.work(400))
"""
    )
    coarse = one(rows, "test_coarse")
    assert coarse["timing"]["resolution_ns"] == 20_000.0
    assert codes(coarse) == {"coarse-clock"}
    assert codes(one(rows, "test_tiny")) == {"read-cost"}
    assert codes(one(rows, "test_calibrated")) == set()


def test_verbose_summary_shows_the_clock_and_how_each_series_was_timed(suite) -> None:
    body = """
@pytest.mark.meanband(n=4, warmup=2)
def test_quote(trials, fake):
    trials.time(fake.work(25_000))
    trials.check(high="1ms")
"""
    result, rows = suite(body, "-v")
    k = one(rows, "test_quote")["timing"]["k"]
    result.stdout.fnmatch_lines(
        [
            "timing clocks (measured once per test process):",
            "  wall (fake clock): step 1.00 ns, one read 50.0 ns",
            "timed series:",
            f"  test_timed.py::test_quote: {k} calls per trial, 4 trials of about *, warm-up 2, "
            "gc off, wall clock",
        ]
    )
    quiet, _ = suite(body)
    assert "timing clocks" not in quiet.stdout.str()


def test_under_xdist_rows_carry_timing_and_the_worker_note(suite) -> None:
    result, rows = suite(
        """
@pytest.mark.meanband(n=4)
def test_a(trials, fake):
    trials.time(fake.work(30_000))

@pytest.mark.meanband(n=4)
def test_b(trials, fake):
    trials.time(fake.work(30_000))
""",
        "-n",
        "2",
        "-v",  # notes on trials never checked show at -v
    )
    assert result.ret == 0
    for name in ("test_a", "test_b"):
        row = one(rows, name)
        assert row["timing"]["k"] >= 1 and row["timing"]["trials"] == 4
        [note] = [n for n in row["notes"] if n["code"] == "xdist-worker"]
        assert "gw" in note["text"] and "(of 2)" in note["text"]
    result.stdout.fnmatch_lines(["*timed inside xdist worker gw*"])


def test_no_worker_note_without_xdist(suite) -> None:
    _, rows = suite(
        """
def test_alone(trials, fake):
    trials.time(fake.work(30_000), n=3)
"""
    )
    assert "xdist-worker" not in codes(one(rows, "test_alone"))


def test_the_cpu_clock_is_chosen_by_marker(suite) -> None:
    result, rows = suite(
        """
@pytest.mark.meanband(clock="cpu", n=3, min_trial_time="100us")
def test_cpu(trials):
    trials.time(sum, range(200))
"""
    )
    assert result.ret == 0
    timing = one(rows, "test_cpu")["timing"]
    assert timing["clock"] == "cpu" and timing["source"] == "time.process_time_ns"


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (("--meanband-clock=sundial",), "option --meanband-clock: bad value 'sundial'*cpu, wall"),
        (("--meanband-time-limit=0",), "option --meanband-time-limit: bad value '0'*> 0*"),
        (("--meanband-min-trial-time=soon",), "option --meanband-min-trial-time: bad value 'soon'*"),
        (("--meanband-gc=maybe",), "option --meanband-gc: bad value 'maybe'*on or off*"),
    ],
)
def test_bad_timing_options_are_usage_errors(suite, args, message) -> None:
    result, _ = suite("def test_x(trials):\n    pass\n", *args)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines([f"*{message}"])


def test_a_bad_marker_value_names_the_marker(suite) -> None:
    result, _ = suite(
        """
@pytest.mark.meanband(time_limit="-2s")
def test_x(trials):
    trials.time(sum, range(3), n=3)
"""
    )
    result.stdout.fnmatch_lines(["*marker @pytest.mark.meanband on test_timed.py::test_x*time_limit*"])


def test_clock_gc_and_time_limit_from_the_ini_file(suite, pytester) -> None:
    pytester.makeini(
        "[pytest]\nmeanband_clock = cpu\nmeanband_gc = on\nmeanband_time_limit = 30ms\n"
    )
    result, rows = suite(
        """
def test_from_ini(trials):
    states = []
    trials.time(lambda: states.append(gc.isenabled()), n=5, setup=None)
    assert all(states)
"""
    )
    assert result.ret == 0
    row = one(rows, "test_from_ini")
    assert row["settings"]["clock"] == "cpu" and row["timing"]["clock"] == "cpu"
    assert row["settings"]["gc"] is True and row["timing"]["gc_enabled"] is True
    assert row["timing"]["time_limit"] == pytest.approx(0.03)


def test_verbose_timing_lines_skip_rows_timed_elsewhere(suite) -> None:
    result, rows = suite(
        """
def test_mixed(trials, fake):
    trials.series("engine").time(fake.work(25_000), n=3)
    trials.compare(lambda: sum(range(50)), lambda: sum(range(50)), at_most=10.0, n=4, seed=1,
                   name="sum / sum")
""",
        "-v",
    )
    assert result.ret == 0, result.stdout.str()
    assert {row["source"] for row in rows["test_mixed"]} == {"time", "compare"}
    result.stdout.fnmatch_lines(
        [
            "timing clocks (measured once per test process):",
            "  wall (fake clock): step 1.00 ns, one read 50.0 ns",
            "timed series:",
            "  test_timed.py::test_mixed [[]engine[]]: * per trial, *",
        ]
    )
    clock_lines = result.stdout.str().split("timing clocks")[1].split("timed series:")[0]
    assert [line.strip() for line in clock_lines.strip().splitlines()] == [
        "(measured once per test process):",
        "wall (fake clock): step 1.00 ns, one read 50.0 ns",
    ]


def test_timing_lines_show_the_range_when_worker_processes_measured_differently() -> None:
    from meanband.report.timing import timing_lines

    def row(test: str, read_cost: float) -> dict:
        timing = {
            "clock": "wall", "source": "time.perf_counter_ns", "resolution_ns": 1.0,
            "read_cost_ns": read_cost, "k": 10, "min_trial_time": 1e-3, "trials": 3,
            "warmup_trials": 0, "gc_enabled": False, "setup": False, "stopped_early": False,
        }
        return {"nodeid": f"t.py::{test}", "series": "", "source": "time",
                "values": [1e-4, 1.1e-4, 1.2e-4], "timing": timing}

    lines = timing_lines([row("test_a", 43.0), row("test_b", 45.0)])
    assert "  wall (time.perf_counter_ns): step 1.00 ns, one read 43.0 ns to 45.0 ns" in lines
    assert any(line.startswith("  t.py::test_b: 10 calls per trial, 3 trials of about 1.10 ms")
               for line in lines)
    assert timing_lines([{"source": "values", "timing": None}]) == []


def test_n_auto_times_through_the_engine_and_refuses_a_cut_short_second_stage(suite) -> None:
    result, rows = suite(
        """
@pytest.mark.meanband(min_trial_time=0)
def test_auto(trials, fake):
    rng = iter(__import__("numpy").random.default_rng(2).normal(0, 20_000, 10_000).astype(int))
    trials.time(lambda: fake.work(500_000 + int(next(rng)))(), n="auto", band=dict(high="1ms"),
                pilot=8, max_n=40)
    trials.check(high="1ms")

@pytest.mark.meanband(min_trial_time=0, time_limit="3ms")
def test_auto_limited(trials, fake):
    trials.time(fake.work(1_000_000), n="auto", band=dict(high="2ms"), pilot=10)
"""
    )
    row = one(rows, "test_auto")
    assert row["timing"]["k"] == 1 and row["timing"]["calls"] in (1, 2)
    assert len(row["values"]) >= 8
    result.assert_outcomes(passed=1, failed=1)
    result.stdout.fnmatch_lines(["*the time limit stopped n='auto' after 2 of the 10 trials*"])


PROGRESS_SUITE = """
@pytest.mark.meanband(n=40, min_trial_time=0)
def test_slow_call(trials, fake):
    print("from the test")
    trials.time(fake.work(250_000_000))  # 0.25 s a call on the fake clock: 10 s of trials

@pytest.mark.meanband(n=5, min_trial_time=0)
def test_quick_call(trials, fake):
    trials.time(fake.work(1_000_000))
"""


def test_a_long_timing_run_reports_its_progress(suite) -> None:
    # Before: a 0.4 s call ran 13.7 s with nothing between "collected" and "PASSED".
    result, _ = suite(PROGRESS_SUITE)
    assert result.ret == 0
    lines = [line for line in result.outlines if line.startswith("meanband: test_timed.py::")]
    assert lines and all("test_slow_call" in line for line in lines)  # the quick run is silent
    assert any(" of 40 trials timed, " in line and "s so far" in line for line in lines)
    assert lines[-1].startswith("meanband: test_timed.py::test_slow_call: 40 of 40 trials timed")
    assert lines[-1].endswith("s done")
    assert "from the test" not in result.stdout.str()  # the test's own output stays captured


@pytest.mark.parametrize("args", [("-q",), ("-n", "2")], ids=["quiet", "xdist"])
def test_progress_is_silent_under_q_and_in_xdist_workers(suite, args) -> None:
    result, _ = suite(PROGRESS_SUITE, *args)
    assert result.ret == 0
    assert "trials timed" not in result.stdout.str()
