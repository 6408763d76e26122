"""Study: how often a budget check may look at its trials, and what stopping early saves.

Part 1 reproduces the figures that motivate a confidence sequence: with the true mean exactly
on a one-sided
budget, an ordinary t bound at C = 0.95 passes falsely far more often than 5% when it is looked
at after every trial from 10 to 200, at 10 looks (n = 20, 40, ..., 200), or when a red run is
rerun until green (three tries).

Part 2 puts the anytime-valid bound of sequential.py (Lai 1976; Wang & Ramdas 2023) under
continuous monitoring: it looks after every trial from n = 2 and stops at the first PASS or
FAIL, up to a cap of ``--max-n`` trials. For normal and log-normal trials (both standardised
to mean 0 and sd 1; the log-normal has log-sd 0.5, skewness about 1.75) and C = 0.90, 0.95,
0.99 it prints:

- the false-PASS rate with the true mean on the budget, with its Monte Carlo SE;
- at margins of 0.5, 1 and 2 sd below the budget: the share of PASS (power), the average count
  at the stop and its 90th percentile; beside it the fixed count of the same power (noncentral t,
  meanband.stats.planning.trials_needed) and the fixed count at 90% power; and Stein's two-stage rule
  (meanband.stats.twostage, pilot 10, 90% power at the pilot's margin) with its average count, 90th
  percentile and power.

Part 3 prints the Lan-DeMets group-sequential designs for 5 planned looks (maximum count over
the fixed count, expected count under the planned effect and under none).

Part 4 runs ``n="looks:5"`` as the fixture does (O'Brien-Fleming-type boundaries turned into t
critical values with n - 1 degrees of freedom at each look, stats.sequential.planned_look's
rule), with max_n the fixed count of 90% power at a margin of 0.5 sd times the design's
inflation (at least 50, the fixture's minimum of 10 trials a look): the false-PASS rate with
the mean on the budget, and at a margin of 0.5 sd the power and the average count against that
fixed count.

Run: ``nice -n 19 .venv/bin/python studies/sequential_looks.py [--reps N] [--seed S]``. Nothing
here is asserted; tests/test_sequential.py checks the error control with a small simulation.
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np
from meanband.stats.planning import trials_needed
from meanband.stats.sequential import DEFAULT_TIGHTEST_AT, anytime_multiplier, group_sequential_design
from meanband.stats.twostage import DEFAULT_PILOT, second_stage_counts, verdicts
from scipy import stats

EDGE = 0.0  # the budget, in units of the trials' sd; the true mean sits `margin` below it
CONFIDENCES = (0.90, 0.95, 0.99)
MARGINS = (0.5, 1.0, 2.0)
LOG_SD = 0.5
TWO_STAGE_POWER = 0.9
FIRST_LOOK = 20  # the later first look of part 2a
CHUNK = 2000  # streams simulated at once, to bound memory


def draw(rng: np.random.Generator, shape: tuple[int, int], family: str) -> np.ndarray:
    """Trials with mean 0 and sd 1: normal, or log-normal (log-sd 0.5) standardised."""
    if family == "normal":
        return rng.standard_normal(shape)
    raw = rng.lognormal(0.0, LOG_SD, shape)
    mean = math.exp(LOG_SD**2 / 2)
    sd = math.sqrt((math.exp(LOG_SD**2) - 1) * math.exp(LOG_SD**2))
    return (raw - mean) / sd


def prefix_stats(x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Counts (from 2), means and sems of every prefix, for each stream (row)."""
    n = np.arange(1, x.shape[1] + 1, dtype=np.float64)
    sums = np.cumsum(x, axis=1)
    means = sums / n
    var = np.maximum(np.cumsum(x * x, axis=1) - sums * means, 0.0)[:, 1:] / (n[1:] - 1)
    return n[1:], means[:, 1:], np.sqrt(var / n[1:])


def why_figures(rng: np.random.Generator, reps: int) -> dict[str, float]:
    """False PASS of a fixed one-sided 95% t bound at the edge, looked at in three ways."""
    ways = ("every trial, n = 10..200", "10 looks, n = 20, 40, ..., 200", "rerun until green, 3 tries")
    hits = dict.fromkeys(ways, 0)
    done = 0
    while done < reps:
        rows = min(CHUNK, reps - done)
        x = rng.standard_normal((rows, 200))
        n, mean, sem = prefix_stats(x)
        passed = mean + stats.t.ppf(0.95, n - 1) * sem <= EDGE  # column j holds n = j + 2
        hits["every trial, n = 10..200"] += int(passed[:, 8:].any(axis=1).sum())
        hits["10 looks, n = 20, 40, ..., 200"] += int(passed[:, 18::20].any(axis=1).sum())
        tries = rng.standard_normal((rows, 3, 20))  # three fresh runs of 20 trials each
        t_mean, t_sd = tries.mean(axis=2), tries.std(axis=2, ddof=1)
        green = t_mean + stats.t.ppf(0.95, 19) * t_sd / math.sqrt(20) <= EDGE
        hits["rerun until green, 3 tries"] += int(green.any(axis=1).sum())
        done += rows
    return {k: v / reps for k, v in hits.items()}


def monitor(rng: np.random.Generator, family: str, margin: float, confidence: float, reps: int,
            max_n: int, multiplier: np.ndarray, first_look: int = 2,
            fixed_at: int = 20) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Continuous monitoring of ``reps`` streams with the anytime bound.

    Returns the stopping counts and verdict codes (1 PASS, -1 FAIL, 0 UNDECIDED at the cap) when
    looking from n = 2, the verdict codes when looking from ``first_look`` on, and the PASS flags
    of an ordinary t bound looked at once, at n = ``fixed_at``, on the same streams.
    """
    counts, codes, late_codes, fixed = [], [], [], []
    critical = stats.t.ppf(confidence, fixed_at - 1)
    done = 0
    while done < reps:
        rows = min(CHUNK, reps - done)
        x = draw(rng, (rows, max_n), family) + (EDGE - margin)
        n, mean, sem = prefix_stats(x)
        with np.errstate(invalid="ignore"):
            reach = np.where(np.isfinite(multiplier), multiplier * sem, np.inf)
        passed, failed = mean + reach <= EDGE, mean - reach > EDGE
        for start, sink in ((2, codes), (first_look, late_codes)):
            decided = (passed | failed) & (n >= start)
            any_decided = decided.any(axis=1)
            first = np.argmax(decided, axis=1)
            code = np.where(any_decided, np.where(passed[np.arange(rows), first], 1, -1), 0)
            sink.append(code)
            if start == 2:
                counts.append(np.where(any_decided, n[first], max_n).astype(np.int64))
        j = fixed_at - 2
        fixed.append(mean[:, j] + critical * sem[:, j] <= EDGE)
        done += rows
    return tuple(np.concatenate(part) for part in (counts, codes, late_codes, fixed))  # type: ignore[return-value]


def two_stage(rng: np.random.Generator, family: str, margin: float, confidence: float, reps: int,
              max_n: int) -> tuple[np.ndarray, np.ndarray]:
    """Totals and PASS flags of Stein's two-stage rule, as built in twostage.py."""
    pilot = draw(rng, (reps, DEFAULT_PILOT), family) + (EDGE - margin)
    pilot_mean, pilot_sd = pilot.mean(axis=1), pilot.std(axis=1, ddof=1)
    second_n, _ = second_stage_counts(pilot_mean, pilot_sd, DEFAULT_PILOT, -math.inf, EDGE,
                                      confidence=confidence, power=TWO_STAGE_POWER, max_n=max_n)
    width = int(second_n.max())
    second = draw(rng, (reps, width), family) + (EDGE - margin)
    taken = np.arange(width)[None, :] < second_n[:, None]
    second_mean = np.where(taken, second, 0.0).sum(axis=1) / second_n
    passed = verdicts(second_mean, pilot_sd, second_n, DEFAULT_PILOT, -math.inf, EDGE,
                      confidence=confidence) == "PASS"
    return DEFAULT_PILOT + second_n, passed


def planned(rng: np.random.Generator, family: str, margin: float, confidence: float, reps: int,
            looks: list[int], bounds: tuple[float, ...]) -> tuple[np.ndarray, np.ndarray]:
    """PASS flags and counts used of planned looks at ``looks`` with z ``bounds`` (t per look)."""
    x = draw(rng, (reps, looks[-1]), family) + (EDGE - margin)
    _n, means, sems = prefix_stats(x)
    passed = np.zeros(reps, dtype=bool)
    decided = np.zeros(reps, dtype=bool)
    used = np.full(reps, looks[-1], dtype=np.float64)
    for count, z in zip(looks, bounds, strict=True):
        i = count - 2
        critical = stats.t.isf(stats.norm.sf(z), count - 1)
        upper = means[:, i] + critical * sems[:, i]
        lower = means[:, i] - critical * sems[:, i]
        now_pass = ~decided & (upper <= EDGE)
        now_fail = ~decided & (lower > EDGE)
        passed |= now_pass
        used[now_pass | now_fail] = count
        decided |= now_pass | now_fail
    return passed, used


def _rate(flags: np.ndarray) -> str:
    """A share and its Monte Carlo SE, e.g. '4.1% +- 0.2%'."""
    rate = float(np.mean(flags))
    se = math.sqrt(max(rate, 1.0 / flags.size) * (1.0 - rate) / flags.size)
    return f"{rate:.2%} +- {se:.2%}"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=20000, help="simulated checks per cell")
    parser.add_argument("--seed", type=int, default=20261202)
    parser.add_argument("--max-n", type=int, default=1000, help="cap on the trials of one check")
    parser.add_argument("--tightest-at", type=int, default=DEFAULT_TIGHTEST_AT)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)
    started = time.perf_counter()
    counts_to_cap = np.arange(2, args.max_n + 1)

    print(f"Part 1. True mean on a one-sided 95% budget, normal trials, fixed t bound; {args.reps} runs each")
    se = math.sqrt(0.05 * 0.95 / args.reps)
    for way, rate in why_figures(rng, args.reps).items():
        print(f"  {way:<32} false PASS {rate:6.1%}  (5% if looked at once; MC SE about "
              f"{math.sqrt(rate * (1 - rate) / args.reps):.1%})")
    print(f"  (one look, for comparison: 5.0% exactly; MC SE at 5% is {se:.2%})")

    print()
    print(f"Part 2. Budget check looked at after every trial (anytime bound, tightest_at="
          f"{args.tightest_at}), cap {args.max_n}; {args.reps} runs per cell")
    print("  2a. False PASS with the true mean on the budget (at most 1 - C allowed), with MC SE")
    later = f"looks from n={FIRST_LOOK}"
    print(f"  {'trials':<10} {'C':>5} {'1 - C':>6} | {'looks from n=2':>16} | {later:>17} | "
          f"{'at cap':>6} | {'t once, n=20':>15} | {'two-stage':>15}")
    for family in ("normal", "lognormal"):
        for confidence in CONFIDENCES:
            multiplier = anytime_multiplier(counts_to_cap, confidence, "upper", args.tightest_at)
            _, codes, late, fixed = monitor(rng, family, 0.0, confidence, args.reps, args.max_n, multiplier,
                                            FIRST_LOOK)
            _, stein = two_stage(rng, family, 0.0, confidence, args.reps, args.max_n)
            cells = [_rate(codes == 1), _rate(late == 1), f"{(codes == 0).mean():6.1%}", _rate(fixed),
                     _rate(stein)]
            print(f"  {family:<10} {confidence:5.2f} {1 - confidence:6.2f} | {cells[0]:>16} | "
                  f"{cells[1]:>17} | {cells[2]} | {cells[3]:>15} | {cells[4]:>15}")

    print()
    print("  2b. True mean below the budget by a margin (in sd): counts to a verdict")
    header = (f"  {'trials':<10} {'C':>5} {'margin':>6} | {'anytime: PASS':>13} {'mean n':>7} {'p90':>5} | "
              f"{'fixed n, same power':>19} {'fixed n, 90%':>12} | {'two-stage: PASS':>15} {'mean n':>7} "
              f"{'p90':>5}")
    print(header)
    print("  " + "-" * (len(header) - 2))
    for family in ("normal", "lognormal"):
        for confidence in CONFIDENCES:
            multiplier = anytime_multiplier(counts_to_cap, confidence, "upper", args.tightest_at)
            for margin in MARGINS:
                counts, codes, _, _ = monitor(rng, family, margin, confidence, args.reps, args.max_n,
                                              multiplier)
                power = float((codes == 1).mean())
                same = trials_needed(1.0, margin=margin, confidence=confidence, side="upper",
                                     power=min(power, 0.999))
                note = "*" if power > 0.999 else " "
                nominal = trials_needed(1.0, margin=margin, confidence=confidence, side="upper", power=0.9)
                totals, stein = two_stage(rng, family, margin, confidence, args.reps, args.max_n)
                print(f"  {family:<10} {confidence:5.2f} {margin:6.1f} | {power:13.1%} {counts.mean():7.1f} "
                      f"{np.percentile(counts, 90):5.0f} | {same:>18}{note} {nominal:>12} | "
                      f"{stein.mean():15.1%} {totals.mean():7.1f} {np.percentile(totals, 90):5.0f}")
    print("  * the anytime rule's power exceeds 99.9%; the fixed count shown is the one for 99.9%.")

    print()
    print("Part 3. Lan-DeMets designs, 5 equally spaced looks, one-sided, 90% power")
    print(f"  {'shape':<15} {'1 - C':>6} | {'boundaries (z)':<38} | {'max n / fixed n':>15} "
          f"{'E[n] / fixed n, effect':>22} {'no effect':>9}")
    for shape in ("obrien-fleming", "pocock"):
        for confidence in (0.95, 0.975):
            design = group_sequential_design(5, confidence=confidence, shape=shape, power=0.9)
            bounds = " ".join(f"{b:.3f}" for b in design.bounds)
            print(f"  {shape:<15} {1 - confidence:6.3f} | {bounds:<38} | {design.inflation:15.3f} "
                  f"{design.expected_fraction:22.3f} {design.expected_fraction_null:9.3f}")
    print()
    print("Part 4. n='looks:5' (O'Brien-Fleming type, t per look) on a budget; margin 0.5 sd for power")
    print(f"  {'trials':<10} {'C':>5} {'1 - C':>6} | {'false PASS at edge':>18} | "
          f"{'power':>6} {'mean n':>7} {'max n':>6} | {'fixed n, 90%':>12}")
    for family in ("normal", "lognormal"):
        for confidence in CONFIDENCES:
            fixed = trials_needed(1.0, margin=0.5, confidence=confidence, side="upper", power=0.9)
            design = group_sequential_design(5, confidence=confidence, power=0.9)
            top = max(50, math.ceil(design.inflation * fixed))
            looks = [math.ceil(f * top) for f in design.fractions]
            edge, _ = planned(rng, family, 0.0, confidence, args.reps, looks, design.bounds)
            passed, used = planned(rng, family, 0.5, confidence, args.reps, looks, design.bounds)
            print(f"  {family:<10} {confidence:5.2f} {1 - confidence:6.2f} | {_rate(edge):>18} | "
                  f"{passed.mean():6.1%} {used.mean():7.1f} {top:6d} | {fixed:>12}")
    print()
    print(f"(seed {args.seed}, {time.perf_counter() - started:.0f} s)")


if __name__ == "__main__":
    main()
