"""The clock registry and the measurement of a clock's step and read cost."""

from __future__ import annotations

import pytest
from meanband.collect.clock import CLOCKS, Clock, get_clock, measure
from meanband.errors import TrialError


class SteppingClock:
    """Advances by ``step`` ns on every read: its step and read cost are both ``step``."""

    def __init__(self, step: int) -> None:
        self.now = 0
        self.step = step

    def read(self) -> int:
        self.now += self.step
        return self.now


def test_the_two_named_clocks_read_integer_nanoseconds() -> None:
    for name in ("wall", "cpu"):
        clock = get_clock(name)
        first, second = clock.read(), clock.read()
        assert isinstance(first, int) and second >= first
    assert CLOCKS["wall"].source == "time.perf_counter_ns"
    assert CLOCKS["cpu"].source == "time.process_time_ns"


def test_a_clock_object_passes_through() -> None:
    clock = Clock("fake", SteppingClock(3).read, "test")
    assert get_clock(clock) is clock


def test_an_unknown_clock_name_is_an_error_that_lists_the_choices() -> None:
    with pytest.raises(TrialError, match=r"unknown clock 'monotonic'.*cpu, wall"):
        get_clock("monotonic")


def test_measure_finds_the_step_and_read_cost_of_a_deterministic_clock() -> None:
    info = measure(Clock("fake", SteppingClock(37).read, "test"))
    assert info.clock == "fake"
    assert info.resolution_ns == 37.0
    # Each batch spans 10 * loops + 1 reads of 37 ns each.
    assert info.read_cost_ns == pytest.approx(37.0)
    assert info.to_dict() == {
        "clock": "fake",
        "source": "test",
        "resolution_ns": 37.0,
        "read_cost_ns": info.read_cost_ns,
    }


class CoarseClock(SteppingClock):
    """Time moves ``step`` ns per read, but the clock shows it in ticks of ``tick`` ns."""

    def __init__(self, step: int, tick: int) -> None:
        super().__init__(step)
        self.tick = tick

    def read(self) -> int:
        return super().read() // self.tick * self.tick


def test_a_clock_coarser_than_a_read_reports_its_tick() -> None:
    info = measure(Clock("coarse", CoarseClock(40, 1000).read, "test", stated_resolution_ns=1.0))
    # Back-to-back reads repeat a value, so the stated 1 ns is not believed: the tick is.
    assert info.resolution_ns == 1000.0
    assert info.read_cost_ns == pytest.approx(40.0, rel=0.01)


def test_a_clock_finer_than_a_read_reports_its_stated_resolution() -> None:
    info = measure(Clock("fine", SteppingClock(40).read, "test", stated_resolution_ns=1.0))
    assert info.resolution_ns == 1.0
    assert info.read_cost_ns == pytest.approx(40.0)


def test_a_clock_that_never_advances_is_an_error() -> None:
    with pytest.raises(TrialError, match="did not advance"):
        measure(Clock("stuck", lambda: 5, "test"))


def test_measure_of_the_real_wall_clock_gives_positive_figures() -> None:
    info = measure("wall")
    assert info.resolution_ns > 0
    assert info.read_cost_ns > 0
