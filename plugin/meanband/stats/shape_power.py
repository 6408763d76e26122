"""Trial counts planned by simulation from a pilot's own values, so the trials' shape counts.

The noncentral t power assumes normal trials; on skewed trials (a log-normal timing, say) the t
interval's bound moves with the sd, and a count planned for normal trials passes less often than
it states. Here the rerun is simulated instead: its trials are the pilot's standardised values,
resampled, scaled to the planning sd (the pilot sd's upper bound, ``planning.sd_upper_bound``)
and shifted to the pilot's mean, and the t interval decides each simulated rerun. This is
simulation-based sample-size determination (Arnold et al. 2011, BMC Medical Research
Methodology 11:94) with the pilot's empirical distribution as the trial model (a residual
bootstrap; Efron & Tibshirani 1993).
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Callable

import numpy as np

__all__ = ["RERUNS", "SIMULATION_CEILING", "simulated_count", "simulated_power"]

#: Simulated reruns per candidate count: a power near 90% is then known to about +-1.5%.
RERUNS = 400
#: Above this count the normal-theory count stands: the t interval's error from skewness falls
#: as 1/sqrt(n) (Hall 1992, ch. 2), and simulating larger reruns costs more than a summary line.
SIMULATION_CEILING = 400


def simulated_power(
    values: np.ndarray,
    n: int,
    *,
    low: float,
    high: float,
    confidence: float,
    planning_sd: float,
) -> float:
    """Simulated chance that a rerun of ``n`` trials decides correctly (see the module), from
    the same draws as :func:`simulated_count` for counts up to four times the ceiling."""
    top = max(n, 4 * SIMULATION_CEILING)
    return _power_function(values, low, high, confidence, planning_sd, top)(n)


def simulated_count(
    values: np.ndarray,
    *,
    low: float,
    high: float,
    confidence: float,
    power: float,
    start: int,
    planning_sd: float,
    n_max: int,
) -> int:
    """The smallest count near ``start`` whose simulated chance of a correct decision reaches
    ``power``.

    ``start`` is the normal-theory count; the search brackets it and bisects. The random draws
    are seeded from the values themselves, so the same row always gives the same count, and
    shared between candidate counts (common random numbers), so the simulated power is smooth
    in the count. Returns ``start`` itself when it exceeds :data:`SIMULATION_CEILING` (or the
    values cannot be resampled), and at most four times that ceiling (or ``n_max``).
    """
    x = np.asarray(values, dtype=np.float64)
    if start > SIMULATION_CEILING or x.size < 3 or not float(x.std(ddof=1)) > 0:
        return start
    top = min(n_max, 4 * SIMULATION_CEILING)
    power_at = _power_function(x, low, high, confidence, planning_sd, 4 * SIMULATION_CEILING)

    def reaches(n: int) -> bool:
        return power_at(n) >= power

    if reaches(start):
        hi, lo = start, start // 2
        while lo >= 2 and reaches(lo):
            hi, lo = lo, lo // 2
        if lo < 2:
            return 2
    else:
        lo, hi = start, min(2 * start, top)
        while not reaches(hi):
            if hi >= top:
                return top
            lo, hi = hi, min(2 * hi, top)
    while hi - lo > 1:  # reaches(hi) holds, reaches(lo) does not
        mid = (lo + hi) // 2
        if reaches(mid):
            hi = mid
        else:
            lo = mid
    return hi


def _power_function(
    values: np.ndarray, low: float, high: float, confidence: float, planning_sd: float, top: int,
) -> Callable[[int], float]:
    """The simulated power as a function of the count, with its draws fixed once."""
    from scipy.special import stdtrit

    x = np.asarray(values, dtype=np.float64)
    m = x.size
    mean, sd = float(x.mean()), float(x.std(ddof=1))
    two_sided = math.isfinite(low) and math.isfinite(high)
    # Resampled standardised values have mean 0 and variance 1 (the 1/m bootstrap variance).
    shape = (x - mean) / (sd * math.sqrt((m - 1) / m))
    seed = int.from_bytes(hashlib.blake2b(x.tobytes(), digest_size=8).digest(), "little")
    rng = np.random.default_rng(seed)
    inside = low < mean < high
    picks = rng.integers(0, m, size=(RERUNS, top))
    q = 0.5 + confidence / 2.0 if two_sided else confidence

    def power_at(n: int) -> float:
        trials = mean + planning_sd * shape[picks[:, :n]]
        centre = trials.mean(axis=1)
        reach = float(stdtrit(n - 1, q)) * trials.std(axis=1, ddof=1) / math.sqrt(n)
        lower, upper = centre - reach, centre + reach
        passed = (lower >= low) & (upper <= high)
        failed = (upper < low) | (lower > high)
        return float(np.mean(passed if inside else failed))

    return power_at
