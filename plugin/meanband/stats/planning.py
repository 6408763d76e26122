"""How many trials a goal needs: a target half-width, or a decisive verdict at a stated power."""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.sample import check_confidence, check_probability

__all__ = [
    "SD_BOUND",
    "expected_power",
    "power_against_edge",
    "power_inside_band",
    "sd_upper_bound",
    "smallest_count",
    "trials_needed",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

_N_MIN = 2

#: Confidence of the upper bound on a pilot's sd that suggested counts are planned with
#: (Browne 1995): the value that landed the delivered power nearest the planned one among the
#: rules of studies/suggested_power.py.
SD_BOUND = 0.8


def trials_needed(
    sd: float,
    *,
    half_width: float | None = None,
    margin: float | None = None,
    confidence: float = defaults.CONFIDENCE,
    side: str = "two-sided",
    power: float = defaults.POWER,
    n_max: int = 1_000_000,
    other_margin: float | None = None,
    sd_df: float | None = None,
    pilot_n: int | None = None,
) -> int | None:
    """Smallest trial count that meets a goal, given a planning standard deviation ``sd``.

    Give exactly one goal:

    - ``half_width``: the interval's half-width t(n-1) * sd / sqrt(n) is at most this; t's
      dependence on n is solved exactly by search, not by plugging in z;
    - ``margin``: the distance between the mean (from a pilot) and a band edge; returns the n
      at which a one-sided t test at the edge rejects with probability ``power`` when the true
      mean sits ``margin`` away, from the noncentral t distribution. The test's level is
      1 - confidence for a one-sided budget (``side="upper"``/``"lower"``) and
      (1 - confidence) / 2 per edge for a two-sided band. For a two-sided band with the mean
      inside it, give the distance to the far edge as ``other_margin``: the n then makes the
      whole interval land inside the band with probability ``power`` (both edges at once,
      ``power_inside_band``), not just clear the near edge.

    ``sd_df``: the planning sd is a pilot's sample sd with this many degrees of freedom, not a
    known value. The ``margin`` goal then asks for ``power`` on average over the true sd that the
    pilot leaves possible (``expected_power``, Julious & Owen 2006), which a count planned from a
    plug-in sd misses by several points (studies/suggested_power.py). With ``pilot_n`` too, the
    margin is the pilot's estimate from that many trials, and the average runs over the mean as
    well (the assurance; see ``expected_power``).

    Returns None when no n up to ``n_max`` meets the goal (for instance a zero margin).
    """
    level = check_confidence(confidence)
    power = check_probability(power, "power")
    if side not in ("two-sided", "upper", "lower"):
        raise TrialError(f"unknown side {side!r}; choose one of two-sided, upper, lower")
    if not math.isfinite(sd) or sd < 0:
        raise TrialError(f"the planning standard deviation must be finite and >= 0, got {sd!r}")
    if (half_width is None) == (margin is None):
        raise TrialError("give exactly one goal: half_width=... or margin=...")
    if half_width is not None:
        if not (half_width > 0 and math.isfinite(half_width)):
            raise TrialError(f"half_width must be a positive number, got {half_width!r}")
        if sd == 0:
            return _N_MIN
        return smallest_count(lambda n: _half_width(sd, n, level, side) <= half_width, n_max)
    assert margin is not None
    if not math.isfinite(margin):
        raise TrialError(f"margin must be a finite number, got {margin!r}")
    margin = abs(margin)
    if margin == 0:
        return None
    if sd == 0:
        return _N_MIN
    alpha = (1.0 - level) / 2.0 if side == "two-sided" else 1.0 - level
    far: float | None = None
    if side == "two-sided" and other_margin is not None:
        if not (math.isfinite(other_margin) and other_margin > 0):
            raise TrialError(f"other_margin must be a positive finite distance, got {other_margin!r}")
        far = float(other_margin) / sd
    if sd_df is not None:
        if not (sd_df > 0 and math.isfinite(sd_df)):
            raise TrialError(f"sd_df must be a positive number of degrees of freedom, got {sd_df!r}")
        df = float(sd_df)
        return smallest_count(
            lambda n: expected_power(margin / sd, n, alpha, df, far, pilot_n) >= power, n_max
        )
    if far is not None:
        near = margin / sd
        return smallest_count(lambda n: power_inside_band(near, far, n, alpha) >= power, n_max)
    return smallest_count(lambda n: power_against_edge(margin / sd, n, alpha) >= power, n_max)


def sd_upper_bound(sd: float, df: float, confidence: float = SD_BOUND) -> float:
    """The one-sided upper confidence bound s sqrt(df / chi2_(1-confidence)(df)) on the true sd
    from a sample sd with ``df`` degrees of freedom (the chi-square interval for a variance,
    NIST/SEMATECH e-Handbook 7.2.3.1).

    Planning a count with it instead of s makes the count reach its power with probability at
    least ``confidence`` over the pilot's sd (Browne 1995, Statistics in Medicine 14:1933-1940).
    """
    from scipy.special import chdtri

    level = check_probability(confidence, "confidence of the sd bound")
    if not (math.isfinite(df) and df > 0):
        raise TrialError(f"the sd's degrees of freedom must be a positive number, got {df!r}")
    return float(sd) * math.sqrt(df / float(chdtri(df, level)))


#: Quantile points of the chi distribution used to integrate over the sample sd (the midpoint
#: rule on quantiles; 512 points agree with 4,000 to about 1e-5 and cost an eighth).
_SD_POINTS = 512
#: Quantile points of the pilot sd's chi-square law in ``expected_power``.
_PILOT_POINTS = 64
#: Quantile points of the rerun's own sd in ``expected_power`` for a band (both edges).
_RERUN_POINTS = 256
#: Quantile points of the sd and of the mean when ``expected_power`` averages over both.
_ASSURANCE_SD_POINTS = 16
_ASSURANCE_MEAN_POINTS = 24


def expected_power(
    effect: float,
    n: int,
    alpha: float,
    sd_df: float,
    far_effect: float | None = None,
    pilot_n: int | None = None,
) -> float:
    """Power of ``n`` trials averaged over the true sd that a pilot sd with ``sd_df`` degrees of
    freedom leaves possible (Julious & Owen 2006, Pharmaceutical Statistics 5:29-37).

    ``effect`` (and ``far_effect``, the far edge of a two-sided band with the mean inside) is
    margin / s in units of the pilot's sd s. Given s, the true sd sigma is taken as
    s * sqrt(df / chi2(df)) (the reference-prior posterior that Julious & Owen average over),
    so the effect in true units is effect * s / sigma; the power of the one-sided t test
    (noncentral t), or of the two one-sided tests for a band (``power_inside_band``), is
    averaged over a grid of that law's quantiles.

    With ``pilot_n`` (the pilot's count) the pilot's mean is uncertain too: the true mean is
    taken as mean + sigma z / sqrt(pilot_n), z standard normal, and the average is the
    probability that the rerun decides correctly (passes where the true mean is inside, fails
    where it is beyond an edge): the assurance of O'Hagan, Stevens & Campbell (2005,
    Pharmaceutical Statistics 4:187-201) under the reference prior.
    """
    # scipy.special directly: the distributions' wrappers cost more than the sums here.
    from scipy.special import chdtri, nctdtr, ndtr, ndtri, stdtrit

    df = float(sd_df)
    points = _PILOT_POINTS if pilot_n is None else _ASSURANCE_SD_POINTS
    u = (np.arange(points) + 0.5) / points
    shrink = np.sqrt(chdtri(df, 1.0 - u) / df)  # s / sigma at each quantile
    rerun_df = float(n - 1)
    critical = float(stdtrit(rerun_df, 1.0 - alpha))
    root_n = math.sqrt(n)
    near = effect * shrink
    far = None if far_effect is None else far_effect * shrink
    if pilot_n is not None:
        z = ndtri((np.arange(_ASSURANCE_MEAN_POINTS) + 0.5) / _ASSURANCE_MEAN_POINTS)
        step = z / math.sqrt(pilot_n)
        # near edge first: the mean moves by z sigma / sqrt(pilot_n) towards it or away.
        near = (near[:, None] - step[None, :]).ravel()
        if far is not None:
            far = (far[:, None] + step[None, :]).ravel()
    if far is None:
        # Beyond the edge (near < 0) the correct decision is FAIL, at the same level.
        return float(np.mean(1.0 - nctdtr(rerun_df, np.abs(near) * root_n, critical)))
    inside = (near > 0) & (far > 0)
    out = np.empty(near.shape)
    beyond = np.abs(np.minimum(near, far)[~inside]) * root_n
    out[~inside] = 1.0 - nctdtr(rerun_df, beyond, critical)
    rerun_points = _RERUN_POINTS if pilot_n is None else _RERUN_POINTS // 4
    v = (np.arange(rerun_points) + 0.5) / rerun_points
    ratio = np.sqrt(chdtri(rerun_df, 1.0 - v) / rerun_df)[None, :]  # the rerun's s' / sigma
    low, high = near[inside][:, None], far[inside][:, None]
    both = ndtr(root_n * high - critical * ratio) - ndtr(-root_n * low + critical * ratio)
    out[inside] = np.mean(np.clip(both, 0.0, None), axis=1)
    return float(np.mean(out))


def power_inside_band(low_effect: float, high_effect: float, n: int, alpha: float) -> float:
    """Exact probability that the two-sided t interval lies inside a band, which is the power of
    the two one-sided tests (Schuirmann 1987) at level ``alpha`` each.

    The true mean lies ``low_effect`` sd above the low edge and ``high_effect`` sd below the
    high edge. Given the sample sd s, the mean is normal, so the probability is
    Phi(sqrt(n) high - c s/sigma) - Phi(-sqrt(n) low + c s/sigma) where positive (c the t
    quantile), averaged over s/sigma ~ sqrt(chi2(n-1)/(n-1)) (Owen 1965 gives the same
    integral in closed form); the average is taken on a grid of the chi law's quantiles.
    """
    from scipy.special import chdtri, ndtr, stdtrit

    df = float(n - 1)
    critical = float(stdtrit(df, 1.0 - alpha))
    u = (np.arange(_SD_POINTS) + 0.5) / _SD_POINTS
    ratio = np.sqrt(chdtri(df, 1.0 - u) / df)
    root_n = math.sqrt(n)
    inside = ndtr(root_n * high_effect - critical * ratio) - ndtr(
        -root_n * low_effect + critical * ratio
    )
    return float(np.mean(np.clip(inside, 0.0, None)))


def power_against_edge(effect: float | np.ndarray, n: int | np.ndarray, alpha: float) -> np.ndarray:
    """Power of the one-sided one-sample t test at level ``alpha`` for effect size margin/sd."""
    from scipy.stats import nct
    from scipy.stats import t as student_t

    n_arr = np.asarray(n, dtype=np.float64)
    df = n_arr - 1.0
    critical = student_t.ppf(1.0 - alpha, df)
    return np.asarray(nct.sf(critical, df, np.asarray(effect) * np.sqrt(n_arr)))


def _half_width(sd: float, n: int | np.ndarray, level: float, side: str) -> np.ndarray:
    from scipy.stats import t as student_t

    q = (1.0 + level) / 2.0 if side == "two-sided" else level
    n_arr = np.asarray(n, dtype=np.float64)
    return np.asarray(student_t.ppf(q, n_arr - 1.0) * sd / np.sqrt(n_arr))


def smallest_count(meets: Callable[[int], Any], n_max: int) -> int | None:
    """Smallest n in [2, n_max] for which the monotone predicate ``meets`` holds."""
    if bool(meets(_N_MIN)):
        return _N_MIN
    high = _N_MIN
    while not bool(meets(high)):
        if high >= n_max:
            return None
        high = min(high * 2, n_max)
    low = high // 2  # meets(low) is False
    while high - low > 1:
        mid = (low + high) // 2
        if bool(meets(mid)):
            high = mid
        else:
            low = mid
    return high
