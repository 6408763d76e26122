"""The clocks that timing trials read; one module owns them so tests can substitute their own."""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import asdict, dataclass
from typing import Any

from meanband.errors import TrialError

__all__ = ["CLOCKS", "Clock", "ClockInfo", "get_clock", "measure"]


@dataclass(frozen=True, slots=True)
class Clock:
    """A clock: ``read()`` returns integer nanoseconds from an arbitrary, fixed origin."""

    name: str
    read: Callable[[], int]
    source: str


#: Clocks by the name a user writes (``--meanband-clock``, marker ``clock=``). ``wall`` counts
#: everything that happens while a call runs; ``cpu`` counts only this process's CPU time, for
#: work that must not be charged for waiting (I/O, sleep, a busy neighbour holding the core).
#: Tests replace an entry (``monkeypatch.setitem(CLOCKS, "wall", fake)``) to make time
#: deterministic.
CLOCKS: dict[str, Clock] = {
    "wall": Clock("wall", time.perf_counter_ns, "time.perf_counter_ns"),
    "cpu": Clock("cpu", time.process_time_ns, "time.process_time_ns"),
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
    #: Smallest positive difference seen between consecutive reads: an upper bound on the
    #: clock's resolution, and the granularity a trial's duration actually has.
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
    step = _smallest_step(read)
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
    return ClockInfo(clock.name, clock.source, float(step), float(best))


def _smallest_step(read: Callable[[], int]) -> int | None:
    smallest: int | None = None
    ticks = 0
    previous = read()
    for _ in range(_STEP_READS):
        now = read()
        if now != previous:
            step = now - previous
            if step > 0 and (smallest is None or step < smallest):
                smallest = step
            ticks += 1
            if ticks >= _STEP_TICKS:
                break
            previous = now
    return smallest
