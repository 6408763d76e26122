"""Intervals of the arithmetic mean that correct for skewness: candidates for right-skewed timings.

Each method has the signature of the methods in ``meanband.stats.methods``: ``(x, confidence, side) ->
Interval`` with ``side`` one of ``"two-sided"``, ``"upper"``, ``"lower"``, and a vectorised
companion ``*_bounds(samples, confidence, side)`` that takes a 2-D array (one sample per row) and
returns the arrays ``(low, high)``; the 1-D method is the companion applied to one row.

Notation: xbar and s are the mean and the sample standard deviation (n - 1 divisor), sem = s /
sqrt(n), m3 = sum((x - xbar)^3) / n the third central sample moment, g = m3 / s^3 the sample
skewness, and T = (xbar - mu) / sem the Student statistic. ``bootstrap-t`` and ``hall`` are
registered in ``meanband.stats.methods.METHODS``; studies/skewed_budgets.py compares them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.bands import side_alpha
from meanband.stats.interval import Interval, critical_t
from meanband.stats.sample import as_sample, location_scale

__all__ = [
    "BOOTSTRAP_RESAMPLES",
    "BOOTSTRAP_SEED",
    "Pivots",
    "bootstrap_t_bounds",
    "bootstrap_t_interval",
    "hall_bootstrap_bounds",
    "hall_bootstrap_interval",
    "hall_bounds",
    "hall_interval",
    "hall_statistic",
    "johnson_bounds",
    "johnson_interval",
    "resample_pivots",
    "row_moments",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: Seed of the resampling methods' generator: the same trials always give the same interval.
BOOTSTRAP_SEED = 20_261_202
#: Resamples for the bootstrap methods of a single sample.
BOOTSTRAP_RESAMPLES = 9999
_SIDES = ("two-sided", "upper", "lower")
# Bound on the resample-count matrix held in memory at once (values).
_CHUNK_VALUES = 4_000_000


# ---------------------------------------------------------------------------------------------
# Checks and row-wise moments


def _check_level_side(confidence: float, side: str) -> float:
    try:
        level = float(confidence)
    except (TypeError, ValueError) as exc:
        raise TrialError(f"confidence must be a number between 0 and 1, got {confidence!r}") from exc
    if not 0.0 < level < 1.0:  # also refuses NaN
        raise TrialError(f"confidence must lie strictly between 0 and 1, got {confidence!r}")
    if side not in _SIDES:
        raise TrialError(f"unknown side {side!r}; choose one of {', '.join(_SIDES)}")
    return level


def _as_rows(samples: np.ndarray) -> np.ndarray:
    data = np.asarray(samples, dtype=np.float64)
    if data.ndim != 2:
        raise TrialError(
            f"samples must be a 2-D array (one sample per row), got shape {data.shape}; "
            "use the 1-D method for a single sample"
        )
    if data.shape[1] < 3:
        raise TrialError(
            f"a skewness-corrected interval needs at least 3 trials per sample, got {data.shape[1]}; "
            "collect more trials"
        )
    if not bool(np.all(np.isfinite(data))):
        raise TrialError("samples hold NaN or infinite values; drop or re-measure them first")
    return data


def _sample(x: np.ndarray) -> np.ndarray:
    return as_sample(x, minimum=3)


def row_moments(
    data: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Row-wise mean, sd (n - 1), sem and third central moment m3 (divisor n), with deviations.

    Mean and sd follow ``meanband.sample.deviations`` step by step (shift by the first value, a
    second-pass correction of Chan, Golub & LeVeque 1983), so a row's mean and sd equal those of
    ``location_scale`` on the same values, bit for bit.
    """
    n = data.shape[1]
    shift = data[:, :1]
    d = data - shift
    mean_d = np.mean(d, axis=1, keepdims=True)
    d -= mean_d
    correction = np.mean(d, axis=1, keepdims=True)
    mean_d += correction
    d -= correction
    mean = (shift + mean_d)[:, 0]
    sd = np.sqrt(np.add.reduce(d * d, axis=1) / (n - 1))
    sem = sd / math.sqrt(n)
    m3 = np.add.reduce(d * d * d, axis=1) / n
    return mean, sd, sem, m3, d


def _skewness(m3: np.ndarray, sd: np.ndarray) -> np.ndarray:
    """g = m3 / s^3; zero for rows of zero spread (they give the point interval, as t does)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(sd > 0.0, m3 / (sd * sd * sd), 0.0)


def _open_ends(low: np.ndarray, high: np.ndarray, side: str) -> tuple[np.ndarray, np.ndarray]:
    if side == "upper":
        low = np.full_like(low, -np.inf)
    elif side == "lower":
        high = np.full_like(high, np.inf)
    return low, high


def _interval(x: np.ndarray, low: float, high: float, confidence: float, side: str, method: str,
              critical: float) -> Interval:
    n = x.size
    mean, sd = location_scale(x)
    return Interval(mean, low, high, confidence, side, n, float(n - 1), sd, sd / math.sqrt(n),
                    method, critical, "mean")


# ---------------------------------------------------------------------------------------------
# Johnson (1978)


def johnson_bounds(samples: np.ndarray, confidence: float, side: str) -> tuple[np.ndarray, np.ndarray]:
    """Johnson's (1978) modified-t bounds for each row: xbar + m3 / (6 s^2 n) +/- t(n-1) sem.

    Johnson's statistic is t1 = (xbar - mu + m3/(6 s^2 n) + m3/(3 s^4) (xbar - mu)^2) / sem
    (Johnson 1978, JASA 73, eq. 2.6 as far as recalled). The interval drops the quadratic term,
    which is of order 1/n, as is usual in its use (from memory; Zhou & Dinh 2005 quote it so):
    both bounds move up by the bias term m3 / (6 s^2 n), the width is that of t.
    """
    level = _check_level_side(confidence, side)
    data = _as_rows(samples)
    mean, sd, sem, m3, _ = row_moments(data)
    n = data.shape[1]
    with np.errstate(invalid="ignore", divide="ignore"):
        bias = np.where(sd > 0.0, m3 / (6.0 * sd * sd * n), 0.0)
    center = mean + bias
    reach = critical_t(level, n - 1, side) * sem
    return _open_ends(center - reach, center + reach, side)


def johnson_interval(x: np.ndarray, confidence: float, side: str) -> Interval:
    """Johnson's (1978) skewness-corrected t interval of the mean (see ``johnson_bounds``)."""
    x = _sample(x)
    low, high = johnson_bounds(x[np.newaxis, :], confidence, side)
    return _interval(x, float(low[0]), float(high[0]), float(confidence), side, "johnson",
                     critical_t(confidence, x.size - 1, side))


# ---------------------------------------------------------------------------------------------
# Hall (1992)


def hall_statistic(t: np.ndarray, skewness: np.ndarray, n: int) -> np.ndarray:
    """Hall's (1992) transformed statistic T1 = T + g T^2/(3 sqrt n) + g^2 T^3/(27 n) + g/(6 sqrt n).

    Hall (1992, JRSS B 54, 221-228): with S = T / sqrt(n), g(S) = S + g S^2/3 + g^2 S^3/27 +
    g/(6n) and T1 = sqrt(n) g(S); from memory. It is Johnson's statistic with a cubic term added
    so that T1 rises with T everywhere: dT1/dT = (1 + g T/(3 sqrt n))^2 >= 0.
    """
    root_n = math.sqrt(n)
    value: np.ndarray = t + skewness * t * t / (3.0 * root_n) + skewness**2 * t**3 / (27.0 * n) \
        + skewness / (6.0 * root_n)
    return value


def _hall_inverse(q: np.ndarray, skewness: np.ndarray, n: int) -> np.ndarray:
    """The T with T1(T) = q, in closed form: T = 3v / (a^2 + a + 1), a = cbrt(1 + g v / sqrt n).

    With v = q - g/(6 sqrt n); (1 + g T/(3 sqrt n))^3 = 1 + g v/sqrt(n) is the cube that Hall's
    transformation completes. Written with a^3 - 1 = (a - 1)(a^2 + a + 1) so that it keeps its
    digits for small g and gives T = q exactly when g = 0.
    """
    root_n = math.sqrt(n)
    v = q - skewness / (6.0 * root_n)
    with np.errstate(invalid="ignore", over="ignore"):
        a = np.cbrt(1.0 + skewness * v / root_n)
        t = v * (3.0 / (a * a + a + 1.0))
    return np.where(np.isinf(q), q, t)  # T1 is unbounded both ways: an infinite quantile stays so


def hall_bounds(samples: np.ndarray, confidence: float, side: str) -> tuple[np.ndarray, np.ndarray]:
    """Bounds from Hall's (1992) cubic transformation of Johnson's statistic, with t(n-1) quantiles.

    mu = xbar - sem * T where T1(T) = -/+ t(n-1); Hall refers T1 to the normal law; the Student
    quantile is used here so that zero skewness gives the plain t interval exactly.
    """
    level = _check_level_side(confidence, side)
    data = _as_rows(samples)
    n = data.shape[1]
    mean, sd, sem, m3, _ = row_moments(data)
    g = _skewness(m3, sd)
    crit = critical_t(level, n - 1, side)
    high = mean - sem * _hall_inverse(np.full_like(g, -crit), g, n)
    low = mean - sem * _hall_inverse(np.full_like(g, crit), g, n)
    return _open_ends(low, high, side)


def hall_interval(x: np.ndarray, confidence: float, side: str) -> Interval:
    """Hall's (1992) transformation interval of the mean (see ``hall_bounds``)."""
    x = _sample(x)
    low, high = hall_bounds(x[np.newaxis, :], confidence, side)
    return _interval(x, float(low[0]), float(high[0]), float(confidence), side, "hall",
                     critical_t(confidence, x.size - 1, side))


# ---------------------------------------------------------------------------------------------
# Bootstrap-t and bootstrap-calibrated Hall


@dataclass(frozen=True, slots=True)
class Pivots:
    """Sorted bootstrap distributions, one row per sample: Student's T* and Hall's T1*."""

    student: np.ndarray
    hall: np.ndarray


_CANCELLATION = 1e-12  # relative rounding floor of e2 - e1^2 (eps is 2.2e-16; a wide margin)


def resample_pivots(
    samples: np.ndarray, *, n_resamples: int = BOOTSTRAP_RESAMPLES, rng: np.random.Generator | None = None
) -> Pivots:
    """T* = (xbar* - xbar) / sem* and T1* = Hall's T1 at T* with g*, for each row (Efron 1981; Hall 1992).

    Resample indices are drawn as ``scipy.stats.bootstrap`` draws them (``integers(0, n, (B, n))``);
    the resampled moments come from resample counts as matrix products. A resample of zero
    spread gives T* = +/-inf (0 if its mean equals xbar), an extreme that quantiles handle.
    """
    data = _as_rows(samples)
    if n_resamples < 99:
        raise TrialError(f"n_resamples must be at least 99 for a bootstrap interval, got {n_resamples}")
    generator = np.random.default_rng(BOOTSTRAP_SEED) if rng is None else rng
    rows, n = data.shape
    _, _, _, _, d = row_moments(data)
    d2, d3 = d * d, d * d * d
    student = np.empty((rows, n_resamples))
    hall = np.empty((rows, n_resamples))
    per_chunk = max(1, _CHUNK_VALUES // n)
    for start in range(0, n_resamples, per_chunk):  # a loop over blocks of resamples, not trials
        count = min(per_chunk, n_resamples - start)
        idx = generator.integers(0, n, (count, n))
        flat = (idx + n * np.arange(count)[:, np.newaxis]).ravel()
        weights = np.bincount(flat, minlength=count * n).reshape(count, n).T.astype(np.float64) / n
        e1, e2, e3 = d @ weights, d2 @ weights, d3 @ weights  # resampled raw moments of d
        var_n = e2 - e1 * e1
        # e2 - e1^2 cancels: a resample of tied values leaves rounding of order eps * e2, which
        # would read as a tiny spread and an enormous T*. Below that noise the spread is zero.
        var_n = np.where(var_n > _CANCELLATION * e2, var_n, 0.0)
        sd_star = np.sqrt(var_n * n / (n - 1))
        m3_star = e3 - 3.0 * e1 * e2 + 2.0 * e1**3
        with np.errstate(invalid="ignore", divide="ignore"):
            t_star = np.nan_to_num(e1 / (sd_star / math.sqrt(n)), nan=0.0, posinf=np.inf, neginf=-np.inf)
            g_star = np.where(sd_star > 0.0, m3_star / sd_star**3, 0.0)
        # In the bootstrap world xbar plays mu and xbar* plays xbar: T* is the analogue of T.
        student[:, start:start + count] = t_star
        with np.errstate(invalid="ignore", over="ignore"):
            # T1 rises with T without bound, so an infinite T* stays infinite with its sign.
            t1_star = np.where(np.isfinite(t_star), hall_statistic(t_star, g_star, n), t_star)
            hall[:, start:start + count] = t1_star
    student.sort(axis=1)
    hall.sort(axis=1)
    return Pivots(student, hall)


def _quantile(sorted_rows: np.ndarray, prob: float) -> np.ndarray:
    """Row-wise quantile with linear interpolation (numpy's and scipy.stats.quantile's default)."""
    count = sorted_rows.shape[1]
    position = prob * (count - 1)
    below = math.floor(position)
    above = min(below + 1, count - 1)
    weight = position - below
    lower = sorted_rows[:, below]
    upper = sorted_rows[:, above]
    with np.errstate(invalid="ignore"):
        between = lower + weight * (upper - lower)
    # Equal ends need no interpolation; next to an infinite end (a resample of zero spread) the
    # interpolated value is that infinity, its limit, where numpy would give NaN.
    between = np.where(np.isinf(upper) & (weight > 0.0), upper, between)
    return np.where((weight == 0.0) | (lower == upper) | np.isinf(lower), lower, between)


def bootstrap_t_bounds(
    samples: np.ndarray,
    confidence: float,
    side: str,
    *,
    pivots: Pivots | None = None,
    n_resamples: int = BOOTSTRAP_RESAMPLES,
    rng: np.random.Generator | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Studentised bootstrap (bootstrap-t) bounds: [xbar - q(1-a) sem, xbar - q(a) sem].

    q are quantiles of T* (Efron 1981; Hall 1988; Efron & Tibshirani 1993, section 12.5). Pass
    ``pivots`` from ``resample_pivots`` to reuse one bootstrap for several confidences.
    """
    level = _check_level_side(confidence, side)
    data = _as_rows(samples)
    mean, sd, sem, _, _ = row_moments(data)
    piv = resample_pivots(data, n_resamples=n_resamples, rng=rng) if pivots is None else pivots
    a = side_alpha(level, side)
    with np.errstate(invalid="ignore"):
        high = np.where(sd > 0.0, mean - _quantile(piv.student, a) * sem, mean)
        low = np.where(sd > 0.0, mean - _quantile(piv.student, 1.0 - a) * sem, mean)
    return _open_ends(low, high, side)


def hall_bootstrap_bounds(
    samples: np.ndarray,
    confidence: float,
    side: str,
    *,
    pivots: Pivots | None = None,
    n_resamples: int = BOOTSTRAP_RESAMPLES,
    rng: np.random.Generator | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Hall's (1992) transformation with bootstrap quantiles of T1* in place of t(n-1).

    Hall (1992) proposes calibrating T1 by the bootstrap; Zhou & Dinh (2005, Biostatistics 6)
    found this among the best intervals for skewed means (both from memory).
    """
    level = _check_level_side(confidence, side)
    data = _as_rows(samples)
    n = data.shape[1]
    mean, sd, sem, m3, _ = row_moments(data)
    g = _skewness(m3, sd)
    piv = resample_pivots(data, n_resamples=n_resamples, rng=rng) if pivots is None else pivots
    a = side_alpha(level, side)
    with np.errstate(invalid="ignore"):
        high = np.where(sd > 0.0, mean - sem * _hall_inverse(_quantile(piv.hall, a), g, n), mean)
        low = np.where(sd > 0.0, mean - sem * _hall_inverse(_quantile(piv.hall, 1.0 - a), g, n), mean)
    return _open_ends(low, high, side)


def bootstrap_t_interval(x: np.ndarray, confidence: float, side: str) -> Interval:
    """Studentised bootstrap interval of the mean, seeded so that a run is reproducible."""
    x = _sample(x)
    low, high = bootstrap_t_bounds(x[np.newaxis, :], confidence, side,
                                   rng=np.random.default_rng(BOOTSTRAP_SEED))
    return _interval(x, float(low[0]), float(high[0]), float(confidence), side, "bootstrap-t", math.nan)


def hall_bootstrap_interval(x: np.ndarray, confidence: float, side: str) -> Interval:
    """Hall's transformation calibrated by the bootstrap (see ``hall_bootstrap_bounds``), seeded."""
    x = _sample(x)
    low, high = hall_bootstrap_bounds(x[np.newaxis, :], confidence, side,
                                      rng=np.random.default_rng(BOOTSTRAP_SEED))
    return _interval(x, float(low[0]), float(high[0]), float(confidence), side, "hall-bootstrap",
                     math.nan)
