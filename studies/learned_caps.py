"""What a cap learned from earlier stops buys and costs, for n="until-decided" on a budget.

For normal trials (sd 1) whose mean lies delta sds below a one-sided 95% budget, each check
looks after every trial from 10 on (as ``trials.sample`` does) until the anytime bound decides.
Five earlier runs teach the cap (``stats/stopping_caps.advise_cap``); then, against the
default cap of 200:

- the trials a run spends when nothing changed, and how often it still decides;
- the trials a run spends once the mean has moved onto the budget (the case a cap bounds);
- the false-PASS rate with the mean on the budget under the learned cap (stated 5%).

Run: ``python studies/learned_caps.py [RUNS]`` (default 4000 streams a cell, about a minute).
"""

from __future__ import annotations

import math
import sys

import numpy as np
from meanband.stats.sequential import anytime_multiplier
from meanband.stats.stopping_caps import Stop, advise_cap

CONFIDENCE = 0.95
FIRST_LOOK = 10
DEFAULT_CAP = 200
BLOCK = 1
FLOOR = FIRST_LOOK + BLOCK


def stopping(streams: np.ndarray, budget: float, cap: int) -> tuple[np.ndarray, np.ndarray]:
    """Where each stream stops (its count) and its verdict code (1 PASS, -1 FAIL, 0 UNDECIDED)."""
    x = streams[:, :cap]
    counts = np.arange(1, cap + 1, dtype=np.float64)
    sums = np.cumsum(x, axis=1)
    means = sums / counts
    squares = np.cumsum(x * x, axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        sd = np.sqrt(np.maximum(squares - sums * means, 0.0) / (counts - 1.0))
    n = np.arange(2, cap + 1)
    w = np.concatenate([[np.inf], anytime_multiplier(n, CONFIDENCE, "upper")])
    reach = w * sd / np.sqrt(counts)
    looked = counts >= FIRST_LOOK
    passes = looked & (means + reach <= budget)
    fails = looked & (means - reach > budget)
    decided = passes | fails
    first = np.where(decided.any(axis=1), decided.argmax(axis=1), cap - 1)
    rows = np.arange(x.shape[0])
    verdict = np.where(passes[rows, first], 1, np.where(fails[rows, first], -1, 0))
    return first + 1, verdict


def main() -> None:
    runs = int(sys.argv[1]) if len(sys.argv) > 1 else 4000
    rng = np.random.default_rng(20_261_203)
    print(f"{runs} streams a cell; budget one-sided at C = {CONFIDENCE}; look after every trial "
          f"from {FIRST_LOOK}; default cap {DEFAULT_CAP}")
    print(f"{'delta':>6} {'learned':>8} {'mean n':>14} {'decided %':>16} {'n on edge':>14} "
          f"{'edge PASS %':>12}")
    print(f"{'':>6} {'cap':>8} {'default/learn':>14} {'default/learned':>16} "
          f"{'ratio':>14} {'learned':>12}")
    for delta in (0.5, 1.0, 2.0, 4.0):
        # Five earlier runs teach the cap; the median cap over 200 histories is shown.
        caps = []
        for _ in range(200):
            history = rng.normal(0.0, 1.0, (5, DEFAULT_CAP))
            stops, _verdicts = stopping(history, delta, DEFAULT_CAP)
            advice = advise_cap([Stop(int(s), bool(v != 0), math.nan) for s, v in
                                 zip(stops, _verdicts, strict=True)], cap=DEFAULT_CAP,
                                block=BLOCK, floor=FLOOR, confidence=CONFIDENCE, side="upper",
                                ceiling=1_000_000)
            caps.append(advice.max_n)
        cap = int(np.median(caps))
        same = rng.normal(0.0, 1.0, (runs, DEFAULT_CAP))
        n_default, v_default = stopping(same, delta, DEFAULT_CAP)
        n_learned, v_learned = stopping(same, delta, cap)
        edge = rng.normal(0.0, 1.0, (runs, DEFAULT_CAP))
        n_edge_default, _ = stopping(edge, 0.0, DEFAULT_CAP)
        n_edge_learned, v_edge = stopping(edge, 0.0, cap)
        false_pass = float(np.mean(v_edge == 1))
        se = math.sqrt(0.05 * 0.95 / runs)
        print(f"{delta:>6.1f} {cap:>8d} {n_default.mean():>6.1f}/{n_learned.mean():<7.1f} "
              f"{100 * np.mean(v_default != 0):>7.1f}/{100 * np.mean(v_learned != 0):<8.1f} "
              f"{n_edge_default.mean() / n_edge_learned.mean():>13.1f}x "
              f"{100 * false_pass:>7.2f} ({100 * se:.2f})")
    print("n on edge ratio: trials a run spends with the mean on the budget, default cap over "
          "learned cap; edge PASS: stated at most 5% (Monte-Carlo SE in brackets)")


if __name__ == "__main__":
    main()
