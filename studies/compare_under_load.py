"""Does the interleaved comparison still see a 10% difference while the machine is busy?

Times two busy loops of about 50 µs (the second 10% longer) with meanband.collect.paired, ROUNDS
times, with LOAD processes spinning on the CPUs meanwhile, and counts how often the verdicts
come out right: "longer / shorter at most 1.02x" must FAIL and "shorter / longer at most 0.98x"
must PASS. Prints the miss count and the spread of the intervals.
Run: .venv/bin/python studies/compare_under_load.py [rounds] [load processes]
"""

from __future__ import annotations

import multiprocessing as mp
import os
import sys

import numpy as np
from meanband.collect.paired import time_pairs
from meanband.stats.ratio import check_ratio
from meanband.stats.verdict import Verdict

ROUNDS = int(sys.argv[1]) if len(sys.argv) > 1 else 40
LOAD = int(sys.argv[2]) if len(sys.argv) > 2 else (os.cpu_count() or 2)


def spin(k: int) -> None:
    for _ in range(k):
        pass


def shorter() -> None:
    spin(5000)


def longer() -> None:
    spin(5500)


def hog(stop) -> None:
    while not stop.is_set():
        spin(10_000)


def main() -> None:
    stop = mp.Event()
    hogs = [mp.Process(target=hog, args=(stop,)) for _ in range(LOAD)]
    for h in hogs:
        h.start()
    misses = 0
    lows, highs = [], []
    try:
        for seed in range(ROUNDS):
            times = time_pairs(longer, shorter, 60, seed=seed)
            slower = check_ratio(times.first, times.second, at_most=1.02)
            faster = check_ratio(times.second, times.first, at_most=0.98)
            misses += not (slower.verdict is Verdict.FAIL and faster.verdict is Verdict.PASS)
            lows.append(slower.interval.low)
            highs.append(slower.interval.high)
    finally:
        stop.set()
        for h in hogs:
            h.join()
    print(f"{ROUNDS} rounds of 60 pairs with {LOAD} load processes: {misses} wrong verdicts")
    print(f"interval of longer/shorter: low end median {np.median(lows):.3f} "
          f"(min {min(lows):.3f}), high end median {np.median(highs):.3f} (max {max(highs):.3f})")


if __name__ == "__main__":
    main()
