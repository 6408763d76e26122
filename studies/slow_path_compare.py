"""Does the in-run comparison see a slow path, and does it still shrug off the machine's noise?

Simulates the rounds of ``meanband.collect.paired`` (one call per measurement, 5 rounds a pair)
and judges them with the code in use (``paired_means`` + ``check_ratio``) and, beside it, the
previous estimator (each side's quickest round, Student's t on the paired log ratios).
Scenarios: "slow path", new takes 2x on 10% of its calls (mean 1.10x), gate "at most 1.05";
"edge", new is exactly 1.05x old, gate "at most 1.05" (a PASS is false, stated at most 2.5% for
the two-sided 95% interval's high edge) under machine noise: per-measurement log-normal jitter
(sigma 0.05), a random-walk drift of the machine's speed shared by the pair, and interruptions
(1% of measurements take 50x longer, on either side).
Run: nice -n 19 .venv/bin/python studies/slow_path_compare.py [replications]   (about a minute)
"""

from __future__ import annotations

import sys

import numpy as np
from meanband.collect.paired import paired_means
from meanband.stats.ratio import check_ratio, paired_ratio_interval
from meanband.stats.verdict import Verdict

REPS = int(sys.argv[1]) if len(sys.argv) > 1 else 2000
ROUNDS = 5


def rounds(rng: np.random.Generator, n: int, ratio: float, slow_share: float, noisy: bool):
    shape = (n, ROUNDS)
    drift = np.exp(np.cumsum(rng.normal(0.0, 0.02, n)))[:, None] if noisy else np.ones((n, 1))
    jitter = 0.05 if noisy else 0.01
    old = 50e-6 * drift * rng.lognormal(0.0, jitter, shape)
    new = ratio * 50e-6 * drift * rng.lognormal(0.0, jitter, shape)
    new = new * np.where(rng.random(shape) < slow_share, 2.0, 1.0)
    if noisy:
        old = old + np.where(rng.random(shape) < 0.01, 50 * 50e-6, 0.0)
        new = new + np.where(rng.random(shape) < 0.01, 50 * 50e-6, 0.0)
    return new, old


def judge_both(new: np.ndarray, old: np.ndarray) -> tuple[Verdict, Verdict]:
    times = paired_means(new, old, np.ones(new.shape[0], dtype=bool), 1)
    now = check_ratio(times.first, times.second, at_most=1.05).verdict
    quickest = paired_ratio_interval(new.min(axis=1), old.min(axis=1))
    before = (Verdict.PASS if quickest.high <= 1.05 else
              Verdict.FAIL if quickest.low > 1.05 else Verdict.UNDECIDED)
    return before, now


def main() -> None:
    rng = np.random.default_rng(20261202)
    print(f"{REPS} simulated comparisons a cell, {ROUNDS} rounds a pair, one call a measurement")
    print(f"{'scenario':34} {'n':>4} {'before PASS':>12} {'after PASS':>11} {'after FAIL':>11}")
    cells = [("slow path 2x on 10%, quiet", 1.0, 0.1, False),
             ("slow path 2x on 10%, noisy", 1.0, 0.1, True),
             ("edge 1.05x, noisy (stated 2.5%)", 1.05, 0.0, True)]
    for label, ratio, share, noisy in cells:
        for n in (20, 60, 100):
            counts = {"before": np.zeros(3), "after": np.zeros(3)}
            for _ in range(REPS):
                before, now = judge_both(*rounds(rng, n, ratio, share, noisy))
                for key, v in (("before", before), ("after", now)):
                    counts[key][[Verdict.PASS, Verdict.FAIL, Verdict.UNDECIDED].index(v)] += 1
            b, a = counts["before"] / REPS * 100, counts["after"] / REPS * 100
            print(f"{label:34} {n:>4} {b[0]:>11.1f}% {a[0]:>10.1f}% {a[1]:>10.1f}%")
    se = 100 * np.sqrt(0.025 * 0.975 / REPS)
    print(f"Monte-Carlo SE at 2.5%: {se:.2f} points; a test fails on FAIL and on UNDECIDED alike")


if __name__ == "__main__":
    main()
