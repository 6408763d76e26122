"""Interval methods for trials that are not normal: log-t, modified Cox, BCa bootstrap, batch means,
and the skewness-corrected bootstrap-t and Hall intervals (``skewed_intervals.py``).

Each method takes validated trials, a confidence and a side, and returns an ``Interval`` whose
``estimand`` says what it bounds: the arithmetic ``"mean"`` or the ``"geometric mean"``.
``METHODS`` holds every method by name, the t interval included; ``mean_interval`` picks one.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable

import numpy as np

from meanband import defaults
from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.interval import Interval, check_side, critical_t, t_interval
from meanband.stats.sample import as_sample, check_confidence, location_scale
from meanband.stats.skewed_intervals import bootstrap_t_interval, hall_interval

__all__ = [
    "BOOTSTRAP_RESAMPLES",
    "BOOTSTRAP_SEED",
    "MAX_BATCHES",
    "METHODS",
    "batch_count",
    "batch_means_interval",
    "bca_mean_bounds",
    "bootstrap_interval",
    "cox_interval",
    "log_t_interval",
    "mean_interval",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: Seed of the bootstrap's generator: the same trials always give the same interval.
BOOTSTRAP_SEED = 20_260_907
#: Resamples for the BCa interval (scipy.stats.bootstrap's default as well).
BOOTSTRAP_RESAMPLES = 9999
#: Upper limit on the number of batches (Schmeiser 1982: little is gained beyond 30; from
#: memory).
MAX_BATCHES = 30
# Bound on resampled values held in memory at once by the bootstrap.
_BOOTSTRAP_CHUNK = 4_000_000


def _bounds(center: float, reach_low: float, reach_high: float, side: str) -> tuple[float, float]:
    low = -math.inf if side == "upper" else center - reach_low
    high = math.inf if side == "lower" else center + reach_high
    return low, high


#: log of the largest finite float64: exp() of anything above it overflows.
_LARGEST_LOG = math.log(np.finfo(np.float64).max)


def _exp_bounds(low: float, high: float) -> tuple[float, float]:
    """Back-transform log-scale bounds; an open lower end stays -inf as for every upper bound."""
    return (-math.inf if low == -math.inf else math.exp(low)), math.exp(high)


def _positive(x: np.ndarray, method: str) -> np.ndarray:
    if not bool(np.all(x > 0.0)):
        bad = np.flatnonzero(x <= 0.0)
        shown = ", ".join(str(int(i)) for i in bad[:8])
        raise TrialError(
            f"method={method!r} works on the logarithm of the trials and needs every trial > 0; "
            f"{bad.size} of {x.size} are zero or negative (0-based positions {shown}"
            f"{' ...' if bad.size > 8 else ''}); use method='bootstrap' for such data"
        )
    logs: np.ndarray = np.log(x)
    return logs


def log_t_interval(x: np.ndarray, confidence: float, side: str) -> Interval:
    """The t interval of the log trials, back-transformed: bounds the geometric mean.

    exp(mean(log x) +/- t * sd(log x) / sqrt(n)); a statement about the median of a log-normal
    population, not its mean (Limpert, Stahel & Abbt 2001). ``sd``/``sem`` describe the raw trials.
    """
    y = _positive(x, "log-t")
    n = x.size
    log_mean, log_sd = location_scale(y)
    crit = critical_t(confidence, n - 1, side)
    reach = crit * log_sd / math.sqrt(n)
    low, high = _bounds(log_mean, reach, reach, side)
    _, sd = location_scale(x)
    low, high = _exp_bounds(low, high)
    return Interval(
        math.exp(log_mean), low, high, confidence, side, n, float(n - 1), sd,
        sd / math.sqrt(n), "log-t", crit, "geometric mean",
    )


def cox_interval(x: np.ndarray, confidence: float, side: str) -> Interval:
    """Modified Cox interval for the arithmetic mean of log-normal trials.

    With y = log x: exp(ybar + s^2/2 +/- t(n-1) * sqrt(s^2/n + s^4 / (2(n-1)))), Zhou & Gao
    (1997, "modified Cox method"), after Land (1972); the point estimate is exp(ybar + s^2/2).
    Formula from memory of the paper; tested against a hand computation of it.
    """
    y = _positive(x, "cox")
    n = x.size
    log_mean, log_sd = location_scale(y)
    s2 = log_sd * log_sd
    center = log_mean + s2 / 2.0
    crit = critical_t(confidence, n - 1, side)
    reach = crit * math.sqrt(s2 / n + s2 * s2 / (2.0 * (n - 1)))
    low, high = _bounds(center, reach, reach, side)
    _, sd = location_scale(x)
    if center > _LARGEST_LOG or (math.isfinite(high) and high > _LARGEST_LOG):
        raise TrialError(
            f"method='cox': the upper bound exp({high:.4g}) is beyond the largest float64 "
            f"number, because the spread of log(trials) (sd {log_sd:.3g}) is huge for {n} trials; "
            "collect more trials, or use method='bootstrap' or method='t'"
        )
    low, high = _exp_bounds(low, high)
    return Interval(
        math.exp(center), low, high, confidence, side, n, float(n - 1), sd,
        sd / math.sqrt(n), "cox", crit, "mean",
    )


def bca_mean_bounds(
    samples: np.ndarray,
    confidence: float,
    side: str,
    *,
    n_resamples: int = BOOTSTRAP_RESAMPLES,
    rng: np.random.Generator | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """BCa bounds of the mean for each row of ``samples`` (shape ``(rows, n)``), vectorised.

    Bias correction z0 and acceleration a as in Efron & Tibshirani (1993, section 14.3); for the
    mean the jackknife acceleration has the closed form sum(d^3) / (6 sum(d^2)^1.5), d = x - xbar.
    Resample indices are drawn exactly as ``scipy.stats.bootstrap`` draws them, so one row with the
    same generator gives scipy's interval. Every row uses the same resample indices.
    """
    from scipy.special import ndtr, ndtri

    data = np.atleast_2d(np.asarray(samples, dtype=np.float64))
    rows, n = data.shape
    generator = np.random.default_rng(BOOTSTRAP_SEED) if rng is None else rng
    per_chunk = max(1, _BOOTSTRAP_CHUNK // (n * (1 if rows == 1 else 2)))
    theta_b = np.empty((rows, n_resamples))
    for start in range(0, n_resamples, per_chunk):
        count = min(per_chunk, n_resamples - start)
        idx = generator.integers(0, n, (count, n))
        if rows == 1:
            theta_b[0, start:start + count] = data[0][idx].mean(axis=-1)
        else:
            # Resample counts turn the resampled means into one matrix product.
            flat = (idx + n * np.arange(count)[:, np.newaxis]).ravel()
            counts = np.bincount(flat, minlength=count * n).reshape(count, n)
            theta_b[:, start:start + count] = data @ counts.T.astype(np.float64) / n
    theta_hat = data.mean(axis=1, keepdims=True)
    below = np.count_nonzero(theta_b < theta_hat, axis=1)
    at_or_below = np.count_nonzero(theta_b <= theta_hat, axis=1)
    z0 = ndtri((below + at_or_below) / (2.0 * n_resamples))
    d = data - theta_hat
    ss = np.sum(d * d, axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        accel = np.where(ss > 0, np.sum(d * d * d, axis=1) / (6.0 * ss**1.5), 0.0)
    alpha = (1.0 - confidence) / 2.0 if side == "two-sided" else 1.0 - confidence
    z_alpha = float(ndtri(alpha))

    def adjusted(z: float) -> np.ndarray:
        num = z0 + z
        level: np.ndarray = ndtr(z0 + num / (1.0 - accel * num))
        return level

    theta_b.sort(axis=1)
    low = _linear_quantile(theta_b, adjusted(z_alpha))
    high = _linear_quantile(theta_b, adjusted(-z_alpha))
    if side == "upper":
        low = np.full(rows, -np.inf)
    elif side == "lower":
        high = np.full(rows, np.inf)
    return low, high


def _linear_quantile(sorted_rows: np.ndarray, prob: np.ndarray) -> np.ndarray:
    """Row-wise quantile at row-wise probabilities, linear interpolation (numpy's default)."""
    count = sorted_rows.shape[1]
    position = np.clip(np.nan_to_num(prob, nan=0.5), 0.0, 1.0) * (count - 1)
    below = np.floor(position).astype(np.intp)
    above = np.minimum(below + 1, count - 1)
    weight = position - below
    rows = np.arange(sorted_rows.shape[0])
    lower_value = sorted_rows[rows, below]
    value: np.ndarray = lower_value + weight * (sorted_rows[rows, above] - lower_value)
    return value


def bootstrap_interval(
    x: np.ndarray,
    confidence: float,
    side: str,
    *,
    n_resamples: int = BOOTSTRAP_RESAMPLES,
    seed: int = BOOTSTRAP_SEED,
) -> Interval:
    """BCa bootstrap interval of the mean (Efron 1987), seeded so a run is reproducible."""
    n = x.size
    mean, sd = location_scale(x)
    if sd == 0.0:
        low, high = _bounds(mean, 0.0, 0.0, side)
    else:
        lows, highs = bca_mean_bounds(
            x[np.newaxis, :], confidence, side, n_resamples=n_resamples,
            rng=np.random.default_rng(seed),
        )
        low, high = float(lows[0]), float(highs[0])
    return Interval(
        mean, low, high, confidence, side, n, float(n - 1), sd, sd / math.sqrt(n), "bootstrap",
        math.nan, "mean",
    )


def batch_count(n: int) -> int:
    """Number of batches for ``n`` trials: round(n ** (1/3)), at least 2, at most 30.

    The cap follows Schmeiser (1982), who found little to gain beyond 30 batches. Batches of
    about n ** (2/3) trials are long enough that an AR(1) series with phi = 0.5 gives nearly
    independent batch means at n = 30 and 100; the batch size round(sqrt(n)) of Flegal & Jones
    (2010) under-covers there (studies/coverage.py, docs/methods.md).
    """
    if n < 4:
        raise TrialError(f"method='batch-means' needs at least 4 trials (2 batches of 2), got {n}")
    return int(min(MAX_BATCHES, max(2, round(n ** (1.0 / 3.0)))))


def batch_means_interval(x: np.ndarray, confidence: float, side: str) -> Interval:
    """Non-overlapping batch means: a t interval on the means of consecutive batches.

    For autocorrelated series (Conway 1963; Schmeiser 1982). The first n mod b trials, the
    oldest, are left out so all batches have equal size; ``df`` is b - 1.
    """
    n = x.size
    batches = batch_count(n)
    size = n // batches
    used = x[n - batches * size:]
    means = used.reshape(batches, size).mean(axis=1)
    center, batch_sd = location_scale(means)
    crit = critical_t(confidence, batches - 1, side)
    sem = batch_sd / math.sqrt(batches)
    low, high = _bounds(center, crit * sem, crit * sem, side)
    _, sd = location_scale(x)
    return Interval(
        center, low, high, confidence, side, n, float(batches - 1), sd, sem, "batch-means", crit,
        "mean",
    )


IntervalMethod = Callable[[np.ndarray, float, str], Interval]

#: Interval methods by name. Each takes (validated trials, confidence, side).
METHODS: dict[str, IntervalMethod] = {
    "t": t_interval,
    "log-t": log_t_interval,
    "cox": cox_interval,
    "bootstrap": bootstrap_interval,
    "batch-means": batch_means_interval,
    # Skewness-corrected intervals of the mean (docs/skewed-budgets.md): the studentised
    # bootstrap (Efron 1981; Hall 1988) and Hall's transformation (Hall 1992).
    "bootstrap-t": bootstrap_t_interval,
    "hall": hall_interval,
}


def mean_interval(
    values: Iterable[float] | np.ndarray,
    confidence: float = defaults.CONFIDENCE,
    side: str = "two-sided",
    method: str = "t",
) -> Interval:
    """Confidence interval of the mean of ``values``.

    With ``side="two-sided"`` the interval covers the true mean with probability ``confidence``;
    with ``"upper"``/``"lower"`` the single bound does. Zero spread gives ``[mean, mean]``.
    """
    level = check_confidence(confidence)
    check_side(side)
    try:
        compute = METHODS[method]
    except KeyError:
        raise TrialError(
            f"unknown interval method {method!r}; choose one of {', '.join(sorted(METHODS))}"
        ) from None
    return compute(as_sample(values, minimum=2), level, side)
