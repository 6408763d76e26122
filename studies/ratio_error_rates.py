"""How often a baseline comparison says "regressed": false alarms at the limit, and power.

For each scenario, draws seeded baseline and current samples, computes the 95% ratio interval
(meanband.stats.ratio.ratio_interval) and counts how often it lies wholly above the limit. When the
true ratio sits exactly on the limit the stated rate is at most (1 - 0.95) / 2 = 2.5%.
Run: .venv/bin/python studies/ratio_error_rates.py [reps]
"""

from __future__ import annotations

import math
import sys

import numpy as np
from meanband.stats.ratio import judge_ratio, ratio_interval
from meanband.stats.verdict import Verdict

REPS = int(sys.argv[1]) if len(sys.argv) > 1 else 4000
LIMIT = 1.05


def lognormal(rng: np.random.Generator, scale: float, spread: float, n: int) -> np.ndarray:
    return rng.lognormal(math.log(scale), spread, n)


def skewed(rng: np.random.Generator, scale: float, spread: float, n: int) -> np.ndarray:
    """A floor plus an exponential tail, scaled as a whole: a timing with occasional slow calls
    (invented). Not lognormal, so it shows how the log method fares on skewed data."""
    return scale * (1.0 + spread * rng.exponential(1.0, n))


def rate(draw, true_ratio: float, spread: float, n_base: int, n_cur: int, method: str,
         seed: int) -> float:
    rng = np.random.default_rng(seed)
    hits = 0
    for _ in range(REPS):
        base = draw(rng, 1.0, spread, n_base)
        cur = draw(rng, true_ratio, spread, n_cur)
        hits += judge_ratio(ratio_interval(cur, base, 0.95, method), high=LIMIT) is Verdict.FAIL
    return hits / REPS


def main() -> None:
    print(f"share of comparisons called 'regressed' (limit {LIMIT}x, 95% interval, {REPS} reps)")
    print(f"{'data':10} {'method':7} {'spread':>6} {'n base/cur':>10}  {'ratio 1.00':>10}  "
          f"{'ratio 1.05 (edge)':>17}  {'ratio 1.20':>10}")
    seed = 0
    for name, draw, method in (("lognormal", lognormal, "log"), ("skewed", skewed, "log"),
                               ("lognormal", lognormal, "fieller")):
        for spread in (0.1, 0.3):
            for n_base, n_cur in ((10, 10), (30, 30), (15, 40)):
                cells = []
                for true_ratio in (1.0, LIMIT, 1.2):
                    seed += 1
                    cells.append(rate(draw, true_ratio, spread, n_base, n_cur, method, seed))
                print(f"{name:10} {method:7} {spread:6.2f} {f'{n_base}/{n_cur}':>10}  "
                      f"{cells[0]:10.4f}  {cells[1]:17.4f}  {cells[2]:10.4f}")
    print(f"binomial standard error of a rate near 0.025: {math.sqrt(0.025 * 0.975 / REPS):.4f}")


if __name__ == "__main__":
    main()
