"""Cost of the timing engine, as ratios measured in one run (never absolute times).

Prints three figures:

1. per-trial overhead: the engine with calibration off (k = 1) on a do-nothing callable,
   against a bare loop of two ``perf_counter_ns`` reads around the same call that stores each
   difference into a preallocated ``array("q")``. Each side's cost per trial is the slope between
   a short and a long run, so fixed costs (GC pass, drift test) cancel; the figure is the median
   over interleaved rounds of the engine/bare ratio. Target <= 1.15.
2. efficiency: time inside the callable (the kept trials' timed regions) over the wall time of
   the whole timing call, calibration, warm-up and bookkeeping included, for callables of about
   1 us, 100 us and 10 ms. Target >= 0.8 each.
3. agreement: the engine's per-call mean against the standard library's ``timeit``
   (``Timer.autorange`` once; then, each round, ``Timer.repeat(repeat=1, number=autorange's
   number // 4)`` between two engine runs of the same span) on the same callables, for a fixed
   time per callable; the figure is the median over rounds of (mean of the two engine runs) /
   timeit. Short sandwiched rounds share the swings of a shared machine, and many of them make
   the median steady. Target within 5%. Shown for the wall clock (the target) and, as
   a cross-check that excludes time lost to other processes, for the CPU clock on both sides.

The load average is printed before and after: on a machine shared with other work every figure
is noisier, and the agreement most of all.

Run: ``.venv/bin/python benchmarks/bench_timing.py`` (``--quick`` for a shorter run,
``--strict`` to exit with status 1 when a target is missed).
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time
import timeit
from array import array

from meanband.collect.clock import measure
from meanband.collect.timing import time_calls

OVERHEAD_TARGET = 1.15
EFFICIENCY_TARGET = 0.8
AGREEMENT_TARGET = 0.05


def do_nothing() -> None:
    return None


def busy(size: int):
    """A callable summing ``range(size)``: pure interpreter work with a steady cost."""
    span = range(size)

    def work() -> int:
        return sum(span)

    return work


def sized(seconds: float):
    """A busy callable of about ``seconds`` per call, sized with ``timeit`` on this machine."""
    size = 16
    while True:
        work = busy(size)
        number, total = timeit.Timer(work).autorange()
        per_call = total / number
        if per_call >= seconds * 0.7:
            return work, per_call
        size = max(size * 2, int(size * seconds / per_call))


def bare_loop(fn, trials: int) -> int:
    """Two clock reads around each call, differences stored in a preallocated array (ns)."""
    read = time.perf_counter_ns
    out = array("q", bytes(8 * trials))
    begin = read()
    for i in range(trials):
        t0 = read()
        fn()
        out[i] = read() - t0
    return read() - begin


def engine_loop(fn, trials: int, info) -> int:
    read = time.perf_counter_ns
    begin = read()
    time_calls(fn, n=trials, loops=1, warmup=0, clock_info=info)
    return read() - begin


def quartiles(values: list[float]) -> str:
    """The middle half of the per-round figures, so the reader sees how noisy the run was."""
    low, _, high = statistics.quantiles(values, n=4)
    return f"middle half {low:.3f} to {high:.3f}"


def overhead(info, short: int, long: int, rounds: int) -> tuple[float, float, float, str]:
    engine, bare, ratios = [], [], []
    for turn in range(rounds):
        if turn % 2:
            b_short, b_long = bare_loop(do_nothing, short), bare_loop(do_nothing, long)
            e_short = engine_loop(do_nothing, short, info)
            e_long = engine_loop(do_nothing, long, info)
        else:
            e_short = engine_loop(do_nothing, short, info)
            e_long = engine_loop(do_nothing, long, info)
            b_short, b_long = bare_loop(do_nothing, short), bare_loop(do_nothing, long)
        engine.append((e_long - e_short) / (long - short))
        bare.append((b_long - b_short) / (long - short))
        ratios.append(engine[-1] / bare[-1])
    return (
        statistics.median(ratios), statistics.median(engine), statistics.median(bare),
        quartiles(ratios),
    )


def efficiency(fn, info, n: int, warmup: int) -> float:
    read = time.perf_counter_ns
    begin = read()
    result = time_calls(fn, n=n, warmup=warmup, clock_info=info)
    wall = (read() - begin) * 1e-9
    inside = float(result.values.sum()) * result.loops
    return inside / wall


def agreement(fn, clock: str, info, seconds: float) -> tuple[float, float, float, int]:
    timer = timeit.Timer(fn, timer=CLOCK_SECONDS[clock])
    number, span = timer.autorange()
    number = max(1, number // 4)
    per_call = span / (number * 4)
    # The engine times for about as long as the timeit repeat: n trials of max(1 ms, a call).
    n = max(5, round(number * per_call / max(1e-3, per_call)))
    ours, theirs, ratios = [], [], []

    def ours_once() -> float:
        timing = time_calls(fn, n=n, warmup=1, clock=clock, clock_info=info)
        return float(timing.values.mean())

    until = time.perf_counter() + seconds
    while time.perf_counter() < until or len(ratios) < 5:
        before = ours_once()
        reference = timer.repeat(repeat=1, number=number)[0] / number
        mine = (before + ours_once()) / 2
        ours.append(mine)
        theirs.append(reference)
        ratios.append(mine / reference)
    return (
        statistics.median(ratios) - 1.0,
        statistics.median(ours),
        statistics.median(theirs),
        f"{len(ratios)} rounds, ratio {quartiles(ratios)}",
    )


CLOCK_SECONDS = {"wall": time.perf_counter, "cpu": time.process_time}


def load() -> str:
    try:
        return "load average " + ", ".join(f"{x:.2f}" for x in os.getloadavg()) + f" on {os.cpu_count()} cpus"
    except OSError:
        return "load average unavailable"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer rounds")
    parser.add_argument(
        "--strict", action="store_true", help="exit with status 1 when a target is missed"
    )
    options = parser.parse_args(argv)
    rounds = 5 if options.quick else 15
    seconds = 3.0 if options.quick else 12.0
    print(f"before: {load()}")
    infos = {name: measure(name) for name in ("wall", "cpu")}
    info = infos["wall"]
    time_calls(do_nothing, n=10, clock_info=info)  # first use imports scipy: not a timing cost
    for clock in infos.values():
        print(
            f"clock {clock.clock}: {clock.source}, step {clock.resolution_ns:.0f} ns, "
            f"read {clock.read_cost_ns:.1f} ns"
        )

    ratio, e, b, spread = overhead(info, 10_000, 110_000, 3 * rounds)
    ok = ratio <= OVERHEAD_TARGET
    print(
        f"per-trial overhead  engine/bare = {ratio:.3f}  (engine {e:.1f} ns, bare {b:.1f} ns "
        f"per trial; {spread}; target <= {OVERHEAD_TARGET})  {'ok' if ok else 'MISSED'}"
    )
    all_ok = ok

    callables = {label: sized(seconds) for label, seconds in
                 (("~1 us", 1e-6), ("~100 us", 1e-4), ("~10 ms", 1e-2))}
    for label, (fn, per_call) in callables.items():
        values = [efficiency(fn, info, n=30, warmup=2) for _ in range(rounds)]
        value = statistics.median(values)
        ok = value >= EFFICIENCY_TARGET
        all_ok &= ok
        print(
            f"efficiency {label:>8} ({per_call * 1e6:9.2f} us/call)  inside/wall = {value:.3f}  "
            f"(target >= {EFFICIENCY_TARGET})  {'ok' if ok else 'MISSED'}"
        )
    for clock in ("wall", "cpu"):
        for label, (fn, _) in callables.items():
            delta, mine, reference, rounds_text = agreement(fn, clock, infos[clock], seconds)
            ok = abs(delta) <= AGREEMENT_TARGET
            if clock == "wall":
                all_ok &= ok
            print(
                f"agreement {clock:>4} {label:>8}  engine/timeit - 1 = {delta:+.2%}  "
                f"({rounds_text}; engine {mine * 1e6:.3f} us, timeit {reference * 1e6:.3f} us; "
                f"target within {AGREEMENT_TARGET:.0%})  {'ok' if ok else 'MISSED'}"
            )
    print(f"after: {load()}")
    print("all targets met" if all_ok else "some targets missed (see MISSED above)")
    return 1 if options.strict and not all_ok else 0


if __name__ == "__main__":
    sys.exit(main())
