"""Study: trials spent by the two-stage rule (n="auto") against a fixed count of equal power.

For a latency budget of 3.0 ms and a true mean ``margin`` below it, with normal trials of a
given sd, this simulates many checks with ``n="auto"`` (Stein's two-stage rule, twostage.py)
and prints:

- the two-stage rule's average total count (pilot + second stage), its share of capped runs,
  and its measured power (share of PASS);
- the fixed count that reaches that same power with the ordinary t interval (the smallest n
  whose noncentral-t power is at least as large, from planning.power_against_edge). This
  fixed count is an oracle: it needs the true sd and margin, which a real suite does not
  know before it runs; the two-stage rule finds its count from the pilot alone;
- the false-PASS rate with the true mean on the budget (at most 1 - C = 5%), for the rule as
  built and for the tempting variant that pools the pilot into the mean.

Run: ``.venv/bin/python studies/two_stage.py [--runs N] [--seed S] [--max-n CAP]``. Nothing here is asserted;
the tests check the error control (tests/test_twostage.py).
"""

from __future__ import annotations

import argparse
import math

import numpy as np
from meanband.stats.planning import power_against_edge
from meanband.stats.twostage import DEFAULT_PILOT, second_stage_counts, verdicts
from scipy import stats

EDGE = 3.0  # ms
CONFIDENCE = 0.95
POWER = 0.9
MAX_N = 1000  # the default cap; --max-n changes it
CELLS = [  # (margin, sd) in ms
    (0.4, 0.4),
    (0.2, 0.4),
    (0.1, 0.4),
    (0.4, 0.8),
    (0.2, 0.8),
    (0.6, 0.4),
]


def simulate(rng: np.random.Generator, mean: float, sd: float, runs: int, *, pooled: bool,
             max_n: int = MAX_N):
    """Totals and PASS flags of ``runs`` two-stage checks, vectorised across runs."""
    pilot = rng.normal(mean, sd, size=(runs, DEFAULT_PILOT))
    pilot_mean, pilot_sd = pilot.mean(axis=1), pilot.std(axis=1, ddof=1)
    second_n, requested = second_stage_counts(
        pilot_mean, pilot_sd, DEFAULT_PILOT, -math.inf, EDGE,
        confidence=CONFIDENCE, power=POWER, max_n=max_n,
    )
    width = int(second_n.max())
    second = rng.normal(mean, sd, size=(runs, width))
    taken = np.arange(width)[None, :] < second_n[:, None]
    if not pooled:
        second_mean = np.where(taken, second, 0.0).sum(axis=1) / second_n
        passed = verdicts(second_mean, pilot_sd, second_n, DEFAULT_PILOT, -math.inf, EDGE,
                          confidence=CONFIDENCE) == "PASS"
    else:
        trials = np.concatenate([pilot, second], axis=1)
        used = np.concatenate([np.ones_like(pilot, dtype=bool), taken], axis=1)
        n = used.sum(axis=1)
        pooled_mean = np.where(used, trials, 0.0).sum(axis=1) / n
        squares = np.where(used, (trials - pooled_mean[:, None]) ** 2, 0.0).sum(axis=1)
        upper = pooled_mean + stats.t.ppf(CONFIDENCE, n - 1) * np.sqrt(squares / (n - 1) / n)
        passed = upper <= EDGE
    capped = requested > second_n
    return DEFAULT_PILOT + second_n, passed, capped


def fixed_n_for_power(effect: float, power: float) -> int | None:
    """Smallest fixed n whose one-sided t test reaches ``power`` (noncentral t)."""
    if power <= 0:
        return None
    counts = np.arange(2, MAX_N + 1)
    reached = power_against_edge(effect, counts, 1.0 - CONFIDENCE) >= power
    return int(counts[np.argmax(reached)]) if reached.any() else None


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=4000, help="simulated checks per row")
    parser.add_argument("--seed", type=int, default=20261201)
    parser.add_argument("--max-n", type=int, default=MAX_N, help="cap on the two-stage total")
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)

    print(f"Budget {EDGE} ms, confidence {CONFIDENCE:.0%}, target power {POWER:.0%}, "
          f"pilot {DEFAULT_PILOT}, max_n {args.max_n}, {args.runs} runs per row")
    header = (f"{'margin':>7} {'sd':>5} {'d/sd':>5} | {'2-stage n':>9} {'capped':>7} "
              f"{'power':>6} | {'fixed n, same power':>19} {'ratio':>6} | {'fixed n at 90%':>14}")
    print(header)
    print("-" * len(header))
    for margin, sd in CELLS:
        totals, passed, capped = simulate(rng, EDGE - margin, sd, args.runs, pooled=False,
                                          max_n=args.max_n)
        power = float(passed.mean())
        same = fixed_n_for_power(margin / sd, power)
        nominal = fixed_n_for_power(margin / sd, POWER)
        ratio = f"{totals.mean() / same:6.2f}" if same else "     -"
        print(f"{margin:7.2f} {sd:5.2f} {margin / sd:5.2f} | {totals.mean():9.1f} "
              f"{capped.mean():7.1%} {power:6.1%} | {same if same else '-':>19} {ratio} | "
              f"{nominal if nominal else '-':>14}")

    print()
    print("False PASS with the true mean on the budget (at most 5% allowed):")
    for sd in (0.4, 0.8):
        _, kept, _ = simulate(rng, EDGE, sd, args.runs, pooled=False, max_n=args.max_n)
        _, pooled, _ = simulate(rng, EDGE, sd, args.runs, pooled=True, max_n=args.max_n)
        se = math.sqrt(0.05 * 0.95 / args.runs)
        print(f"  sd {sd:.1f}: as built (second-stage mean, Stein's interval) {kept.mean():6.2%}"
              f"   pilot pooled into an ordinary t bound {pooled.mean():6.2%}"
              f"   (Monte Carlo SE {se:.2%})")


if __name__ == "__main__":
    main()
