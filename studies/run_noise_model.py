"""The two-level baseline comparison on simulated suites: false alarms per run and detection.

Each simulated run of a 12-check suite draws, per check, a run effect (shared by all checks of
the run, plus one of the check's own) and 20 log-normal trials. The baseline is the newest K
runs; the comparison is meanband's (stats.regression.compare_with_runs with the run-to-run
variance chosen as store.baseline does, Holm across the run: alpha / m while the check runs,
then the full step-down). Prints, per scenario, the share of runs of unchanged code with any
false "regressed" and the share of runs in which a 20% slowdown of one check is caught, next to
the old single-run comparison (Welch on the logs of the newest run, no adjustment).

Run: .venv/bin/python studies/run_noise_model.py [repetitions]   (default 1000, about a minute)
"""

from __future__ import annotations

import math
import sys

import numpy as np
from meanband.stats.multiplicity import adjusted_rejections, immediate_threshold
from meanband.stats.regression import REGRESSED, compare_samples, compare_with_runs
from meanband.stats.run_noise import between_runs, pool_between, run_level
from meanband.store.baseline import choose_between
from scipy import stats

REPS = int(sys.argv[1]) if len(sys.argv) > 1 else 1000
CHECKS, TRIALS, ALPHA = 12, 20, 0.025
SCENARIOS = [  # (name, shared run sd, own run sd, trial sd), all on the log scale
    ("quiet machine: 1% own run noise", 0.0, 0.01, 0.05),
    ("3% own run noise per check", 0.0, 0.03, 0.05),
    ("3% machine-wide + 1% own", 0.03, 0.01, 0.05),
    ("8% machine-wide + 2% own (busy CI)", 0.08, 0.02, 0.08),
]


def suite_run(rng: np.random.Generator, shared: float, own: float, sigma: float,
              slow: np.ndarray) -> list[np.ndarray]:
    machine = rng.normal(0.0, shared)
    return [np.exp(math.log(1e-3) + math.log(slow[c]) + machine + rng.normal(0.0, own)
                   + rng.normal(0.0, sigma, TRIALS)) for c in range(CHECKS)]


def judge(current: list[np.ndarray], baseline: list[list[np.ndarray]]) -> set[int]:
    """Indices of the checks meanband calls regressed (at the check or at the end)."""
    own = [between_runs([run_level(run[c], log=True) for run in baseline])
           for c in range(CHECKS)]
    pooled = pool_between([b for b in own if b is not None])
    threshold = immediate_threshold(ALPHA, CHECKS, "holm")
    p_values, found = [], set()
    for c in range(CHECKS):
        between = choose_between(own[c], pooled, None, 0.03)
        result = compare_with_runs(current[c], [run[c] for run in baseline], between,
                                   timing=True, threshold=threshold)
        p_values.append(result["p_value"])
        if result["status"] == REGRESSED:
            found.add(c)
    late = adjusted_rejections(p_values, ALPHA, "holm", CHECKS)
    return found | {c for c, rejected in enumerate(late) if rejected}


def judge_old(current: list[np.ndarray], newest: list[np.ndarray]) -> set[int]:
    return {c for c in range(CHECKS)
            if compare_samples(current[c], newest[c], timing=True)["status"] == REGRESSED}


def share(hits: int) -> str:
    ci = stats.binomtest(hits, REPS).proportion_ci(0.95)
    return f"{hits / REPS:6.1%} [{ci.low:.1%}, {ci.high:.1%}]"


def main() -> None:
    rng = np.random.default_rng(20261203)
    same = np.ones(CHECKS)
    slower = same.copy()
    slower[0] = 1.2
    print(f"{REPS} simulated runs per cell, {CHECKS} checks of {TRIALS} trials, Holm at "
          f"{ALPHA} one-sided; [95% binomial interval]")
    for name, shared, own, sigma in SCENARIOS:
        for k in (1, 3, 5):
            false_new = false_old = caught = 0
            for _ in range(REPS):
                baseline = [suite_run(rng, shared, own, sigma, same) for _ in range(k)]
                unchanged = suite_run(rng, shared, own, sigma, same)
                false_new += bool(judge(unchanged, baseline))
                false_old += bool(judge_old(unchanged, baseline[0]))
                caught += 0 in judge(suite_run(rng, shared, own, sigma, slower), baseline)
            print(f"{name}, K={k}: any false 'regressed' {share(false_new)} (old way "
                  f"{share(false_old)}); 20% slowdown caught {share(caught)}")


if __name__ == "__main__":
    main()
