"""How often does a unit whose true mean sits exactly on a limit PASS? (simulation study)

For a one-sided upper limit at confidence C, guarded acceptance (w = U) should PASS such a unit
at most 1 - C of the time, and simple acceptance about half of the time. The instrument's
calibration error is drawn from N(0, u_B) once per simulated unit; the stated u_B may itself
carry nu_B degrees of freedom. The budget (u_A, u_c, Welch-Satterthwaite nu_eff, one-sided
k) is written out vectorised here, the same formulas as meanband.stats.uncertainty, whose tests check
them one by one. Run: python studies/false_pass_at_the_edge.py
"""

from __future__ import annotations

import math

import numpy as np
from scipy.stats import t as student_t

REPS = 200_000
CONFIDENCE = 0.95
LIMIT = 0.0  # the true mean sits on it


def false_pass_rates(n: int, sd: float, u_b: float, nu_b: float, seed: int) -> tuple[float, float]:
    rng = np.random.default_rng(seed)
    bias = rng.normal(0.0, u_b, REPS)
    readings = rng.normal(LIMIT, sd, size=(REPS, n)) + bias[:, None]
    mean = readings.mean(axis=1)
    if math.isinf(nu_b):
        stated = np.full(REPS, u_b)
        denominator_b = 0.0
    else:
        stated = u_b * np.sqrt(rng.chisquare(nu_b, REPS) / nu_b)
        denominator_b = stated**4 / nu_b
    u_a = readings.std(axis=1, ddof=1) / math.sqrt(n)
    u_c = np.hypot(u_a, stated)
    nu_eff = u_c**4 / (u_a**4 / (n - 1) + denominator_b)
    expanded = student_t.ppf(CONFIDENCE, nu_eff) * u_c  # one-sided k
    guarded = float(np.mean(mean + expanded <= LIMIT))
    simple = float(np.mean(mean <= LIMIT))
    return guarded, simple


def main() -> None:
    print(f"true mean on an upper limit; confidence {CONFIDENCE}; {REPS} units per row")
    header = f"{'n':>4} {'sd':>6} {'u_B':>6} {'nu_B':>6} {'guarded':>9} {'simple':>8}"
    print(f"{header}  (guarded bound {1 - CONFIDENCE:.3f})")
    for n, sd, u_b, nu_b in [
        (5, 1.0, 0.0, math.inf), (10, 1.0, 0.3, math.inf), (10, 1.0, 0.5, 8.0),
        (30, 1.0, 0.2, 4.0), (6, 1.0, 1.0, 12.0), (50, 0.1, 0.05, math.inf),
    ]:
        guarded, simple = false_pass_rates(n, sd, u_b if u_b else 1e-300, nu_b, seed=n)
        print(f"{n:>4} {sd:>6g} {u_b:>6g} {nu_b:>6g} {guarded:>9.4f} {simple:>8.4f}")


if __name__ == "__main__":
    main()
