"""The clocks that timing trials read; one module owns them so tests can substitute their own."""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import asdict, dataclass
from typing import Any

from meanband.errors import TrialError, hide_plugin_frames

__all__ = ["CLOCKS", "Clock", "ClockInfo", "get_clock", "measure"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


@dataclass(frozen=True, slots=True)
class Clock:
    """A clock: ``read()`` returns integer nanoseconds from an arbitrary, fixed origin."""

    name: str
    read: Callable[[], int]
    source: str
    #: The resolution the platform states for the clock (``time.get_clock_info``), if known.
    stated_resolution_ns: float | None = None


#: Clocks by the name a user writes (``--meanband-clock``, marker ``clock=``). ``wall`` counts
#: everything that happens while a call runs; ``cpu`` counts only this process's CPU time, for
#: work that must not be charged for waiting (I/O, sleep, a busy neighbour holding the core).
#: Tests replace an entry (``monkeypatch.setitem(CLOCKS, "wall", fake)``) to make time
#: deterministic.
CLOCKS: dict[str, Clock] = {
    "wall": Clock(
        "wall", time.perf_counter_ns, "time.perf_counter_ns",
        time.get_clock_info("perf_counter").resolution * 1e9,
    ),
    "cpu": Clock(
        "cpu", time.process_time_ns, "time.process_time_ns",
        time.get_clock_info("process_time").resolution * 1e9,
    ),
}


def get_clock(name: str | Clock) -> Clock:
    """The clock called ``name`` (a :class:`Clock` passes through unchanged)."""
    if isinstance(name, Clock):
        return name
    try:
        return CLOCKS[name]
    except (KeyError, TypeError):
        raise TrialError(
            f"unknown clock {name!r}; choose one of {', '.join(sorted(CLOCKS))} "
            "('wall' for elapsed time, 'cpu' for this process's CPU time)"
        ) from None


@dataclass(frozen=True, slots=True)
class ClockInfo:
    """What one read of a clock costs and the smallest step it was seen to take."""

    clock: str
    source: str
    #: The clock's step. When back-to-back reads sometimes return the same value the clock is
    #: coarser than a read, and this is the smallest positive difference seen; otherwise the
    #: clock ticks faster than it can be read, and this is the stated resolution (or, when
    #: none is stated, the smallest difference seen: an upper bound).
    resolution_ns: float
    #: Time one read takes (the cheapest of several batches of back-to-back reads).
    read_cost_ns: float

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only."""
        return asdict(self)


#: Reads spent looking for the clock's step, and ticks wanted before stopping early.
_STEP_READS = 100_000
_STEP_TICKS = 200
_COST_BATCHES = 5
_COST_LOOPS = 2_000


def measure(clock: str | Clock) -> ClockInfo:
    """Measure a clock's step and read cost; a clock that never advances is an error.

    Costs a few milliseconds, so callers measure once per session (the plugin keeps the result
    on the config).
    """
    clock = get_clock(clock)
    read = clock.read
    step, repeats = _smallest_step(read)
    if step is None:
        raise TrialError(
            f"clock {clock.name!r} ({clock.source}) did not advance in {_STEP_READS} reads; "
            "it cannot time trials: choose another clock with --meanband-clock"
        )
    best = float("inf")
    for _ in range(_COST_BATCHES):
        start = read()
        for _ in range(_COST_LOOPS):
            # Ten reads per loop turn, so the loop's own cost is a tenth of a read or less.
            read(); read(); read(); read(); read()  # noqa: E702
            read(); read(); read(); read(); read()  # noqa: E702
        best = min(best, (read() - start) / (10 * _COST_LOOPS + 1))
    resolution = float(step)
    if not repeats and clock.stated_resolution_ns is not None:
        resolution = min(resolution, float(clock.stated_resolution_ns))
    return ClockInfo(clock.name, clock.source, resolution, float(best))


def _smallest_step(read: Callable[[], int]) -> tuple[int | None, int]:
    """Smallest positive difference of back-to-back reads, and how often two reads were equal."""
    smallest: int | None = None
    ticks = repeats = 0
    previous = read()
    for _ in range(_STEP_READS):
        now = read()
        if now == previous:
            repeats += 1
        else:
            step = now - previous
            if step > 0 and (smallest is None or step < smallest):
                smallest = step
            ticks += 1
            if ticks >= _STEP_TICKS:
                break
            previous = now
    return smallest, repeats
