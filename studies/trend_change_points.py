"""How often the trend's change points are false, and how often a real shift is found.

Draws seeded series of 40 run means (lognormal run-to-run noise around an invented 2 ms timing)
and runs meanband.stats.changepoint.find_change_points on each:
- pure noise: the rate of series in which PELT places any change point, and the rate in which
  one is *confirmed* (at most alpha = 5% by construction of the permutation verdict);
- a planted 15% slowdown from run 25 on: the rate at which a confirmed change point sits at run
  25 exactly, within one run of it, and the rate of series with a confirmed change point besides
  the one nearest run 25 (a false extra one).
Run: .venv/bin/python studies/trend_change_points.py [series per scenario]
"""

from __future__ import annotations

import sys
import time

import numpy as np
from meanband.stats.changepoint import find_change_points

SERIES = int(sys.argv[1]) if len(sys.argv) > 1 else 1000
RUNS, SHIFT_AT, SHIFT, PERMUTATIONS = 40, 25, 0.15, 999


def series(rng: np.random.Generator, noise: float, shifted: bool) -> np.ndarray:
    means = 2e-3 * np.exp(rng.normal(0.0, noise, RUNS))
    if shifted:
        means[SHIFT_AT:] *= 1.0 + SHIFT
    return means


def main() -> None:
    started = time.perf_counter()
    print(f"{SERIES} series of {RUNS} runs per row; {PERMUTATIONS} permutations; alpha 0.05")
    print(f"{'noise (sd of log mean)':>24} {'noise: placed':>14} {'noise: confirmed':>17} "
          f"{'15% shift: exact':>17} {'within 1 run':>13} {'false extra':>12}")
    for noise in (0.02, 0.03, 0.05, 0.08):
        rng = np.random.default_rng(int(noise * 1000))
        placed = confirmed = exact = near = extra = 0
        for i in range(SERIES):
            trend = find_change_points(series(rng, noise, False), permutations=PERMUTATIONS, seed=i)
            placed += bool(trend.change_points)
            confirmed += bool(trend.confirmed)
            trend = find_change_points(series(rng, noise, True), permutations=PERMUTATIONS, seed=i)
            where = [c.index for c in trend.confirmed]
            exact += SHIFT_AT in where
            near += any(abs(w - SHIFT_AT) <= 1 for w in where)
            extra += len(where) > 1
        print(f"{noise:>24.0%} {placed / SERIES:>14.1%} {confirmed / SERIES:>17.1%} "
              f"{exact / SERIES:>17.1%} {near / SERIES:>13.1%} {extra / SERIES:>12.1%}")
    print(f"({time.perf_counter() - started:.0f} s)")


if __name__ == "__main__":
    main()
