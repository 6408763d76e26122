"""Judge a check against its baseline: ratio interval, limit and a verdict in plain words."""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import TrialError
from meanband.stats.bands import side_alpha
from meanband.stats.ratio import RatioInterval, judge_ratio, ratio_interval
from meanband.stats.run_noise import Between, TwoLevelRatio, satterthwaite_df
from meanband.stats.verdict import Verdict
from meanband.units import SECONDS

__all__ = [
    "CANNOT_COMPARE",
    "CANNOT_TELL",
    "DEFAULT_MAX_CHANGE",
    "DEFAULT_MAX_INCREASE",
    "NOT_COMPARED",
    "NO_BASELINE",
    "NO_REGRESSION",
    "REGRESSED",
    "Limits",
    "compare_check",
    "compare_samples",
    "compare_with_runs",
    "is_timing",
    "not_compared",
    "unequal_counts",
]

REGRESSED = "regressed"
NO_REGRESSION = "no regression"
CANNOT_TELL = "cannot tell yet"
NO_BASELINE = "no baseline"
#: The baseline ran on a machine or interpreter that times differently.
CANNOT_COMPARE = "cannot compare"
#: Timing counts further apart than this factor are not compared: with skewed, non-log-normal
#: timings and unequal counts (15 against 40) Welch's interval on the logs flagged about 4.5%
#: of checks at the limit against the 2.5% it states (studies/ratio_error_rates.py, see
#: docs/history.md); with equal counts every cell held.
UNEQUAL_COUNTS = 2.0

#: A timing may grow by this fraction of its baseline before it counts as a regression.
DEFAULT_MAX_INCREASE = defaults.MAX_INCREASE
#: A measured value (not a timing) may move by this fraction either way.
DEFAULT_MAX_CHANGE = defaults.MAX_CHANGE

_WORDS = {Verdict.FAIL: REGRESSED, Verdict.PASS: NO_REGRESSION, Verdict.UNDECIDED: CANNOT_TELL}


@dataclass(frozen=True, slots=True)
class Limits:
    """How far a check may move from its baseline: timings up, other values either way."""

    max_increase: float = DEFAULT_MAX_INCREASE
    max_change: float = DEFAULT_MAX_CHANGE

    def band(self, timing: bool) -> tuple[float, float]:
        """The allowed range of current/baseline."""
        if timing:
            return (-math.inf, 1.0 + self.max_increase)
        return (1.0 - self.max_change, 1.0 + self.max_change)


def is_timing(unit: str | None, source: str | None) -> bool:
    """Timings are compared on the log scale and may only grow by ``max_increase``."""
    return unit == SECONDS or source == "time"


def compare_samples(
    current: Iterable[float] | np.ndarray,
    baseline: Iterable[float] | np.ndarray,
    *,
    timing: bool,
    confidence: float = defaults.CONFIDENCE,
    limits: Limits | None = None,
    power: float = defaults.POWER,
) -> dict[str, Any]:
    """Compare ``current`` trials with ``baseline`` trials of the same check.

    The two-sided ``confidence`` interval of current/baseline decides: wholly above the limit is
    ``regressed``, wholly inside the allowed range is ``no regression``, across an edge is
    ``cannot tell yet``. For timings the ratio is of geometric means on the log scale (Welch
    1947 on log values); for other values it is the ratio of means by Fieller (1954). When the
    true ratio sits exactly on the limit, a check is called regressed with probability at most
    (1 - confidence) / 2.

    Returns builtin types only (it becomes the ``"baseline"`` key of a row).
    """
    limits = limits or Limits()
    xc = np.asarray(current, dtype=np.float64)
    xb = np.asarray(baseline, dtype=np.float64)
    positive = bool(np.all(xc > 0) and np.all(xb > 0))
    method = "log" if timing and positive else "fieller"
    interval: RatioInterval = ratio_interval(xc, xb, confidence, method)
    low, high = limits.band(timing)
    status = _WORDS[judge_ratio(interval, low, high)]
    result: dict[str, Any] = {
        "status": status,
        "timing": timing,
        "ratio": interval.to_dict(),
        **_limits_and_means(low, high, interval),
    }
    if status == CANNOT_TELL:
        result["suggested_n"] = _trials_to_decide(xc, xb, interval, (low, high), confidence, power)
    if timing and not positive:
        result["note"] = (
            "some timings are zero or negative, so they were compared as a ratio of means "
            "(Fieller) rather than on the log scale"
        )
    return result


def _limits_and_means(
    low: float, high: float, interval: RatioInterval | TwoLevelRatio
) -> dict[str, Any]:
    """The allowed range and the two sides' means and counts, as every comparison row has them."""
    return {
        "limit_low": None if math.isinf(low) else low,
        "limit_high": high,
        "current_mean": interval.mean_current,
        "baseline_mean": interval.mean_baseline,
        "n_current": interval.n_current,
        "n_baseline": interval.n_baseline,
    }


def _trials_to_decide(
    xc: np.ndarray, xb: np.ndarray, interval: RatioInterval, band: tuple[float, float],
    confidence: float, power: float,
) -> int | None:
    """Trials per run (the same in both) that would likely decide an undecided comparison.

    On the scale the interval is built on (logs for the log method, the ratio itself by the
    delta method otherwise) the difference of two means of n trials each has the spread of one
    mean of n trials with sd sqrt(s_c^2 + s_b^2); the count then follows from the noncentral t
    power of planning.trials_needed.
    """
    from meanband.stats.planning import trials_needed

    if not interval.bounded:
        return None
    edges = [e for e in band if math.isfinite(e)]
    if interval.method == "log":
        sd = math.hypot(float(np.std(np.log(xc), ddof=1)), float(np.std(np.log(xb), ddof=1)))
        margin = min(abs(math.log(interval.ratio) - math.log(e)) for e in edges)
    else:
        cv_c = float(np.std(xc, ddof=1)) / abs(interval.mean_current)
        cv_b = float(np.std(xb, ddof=1)) / abs(interval.mean_baseline)
        sd = abs(interval.ratio) * math.hypot(cv_c, cv_b)
        margin = min(abs(interval.ratio - e) for e in edges)
    if not (sd > 0 and margin > 0 and math.isfinite(sd)):
        return None
    return trials_needed(sd, margin=margin, confidence=confidence, side="two-sided", power=power)


#: Status of a check that was not compared with its baseline, and the words that say why.
NOT_COMPARED = "not compared"


def not_compared(
    source: str | None, has_baseline: bool, unit: str | None, baseline_unit: str | None,
    baseline_run: str,
) -> dict[str, Any] | None:
    """Why a check is not compared with its baseline (status and reason), or None when it is:
    an in-run comparison is its own gate, a check new since the baseline has nothing to
    compare with, and a changed unit makes the ratio meaningless."""
    if source == "compare":
        return {"status": NOT_COMPARED, "reason": "an in-run comparison is its own gate"}
    if not has_baseline:
        return {"status": NO_BASELINE, "reason": f"{baseline_run} has no trials for this check"}
    if baseline_unit != unit:
        return {"status": NOT_COMPARED,
                "reason": f"the unit changed from {baseline_unit or 'none'} to {unit or 'none'} "
                          f"since {baseline_run}"}
    return None


def unequal_counts(n_current: int, n_baseline: int, baseline_run: str) -> dict[str, Any] | None:
    """A ``not compared`` entry when the trial counts differ by more than :data:`UNEQUAL_COUNTS`
    times (per run), else None."""
    low, high = sorted((int(n_current), int(n_baseline)))
    if low > 0 and high / low <= UNEQUAL_COUNTS:
        return None
    return {"status": NOT_COMPARED,
            "reason": f"this run has {n_current} trials and {baseline_run} {n_baseline} per run: "
                      f"counts more than {UNEQUAL_COUNTS:g}x apart make the ratio interval "
                      "unreliable on skewed timings; use the same n in both (a plan file keeps it)"}


def compare_check(
    current: Iterable[float] | np.ndarray,
    baseline: Iterable[float] | np.ndarray | None,
    *,
    unit: str | None,
    source: str | None,
    baseline_unit: str | None = None,
    baseline_run: str = "the baseline run",
    confidence: float = defaults.CONFIDENCE,
    limits: Limits | None = None,
    power: float = defaults.POWER,
) -> dict[str, Any]:
    """A check against the same check of a stored run, with the rules for what is not compared.

    ``baseline`` is None when the stored run has no such check. An in-run comparison is its own
    gate; a check whose unit changed, or whose trials cannot be compared, gets ``not compared``
    with the reason. Otherwise :func:`compare_samples` decides. Builtin types only.
    """
    unmatched = not_compared(source, baseline is not None, unit, baseline_unit, baseline_run)
    if unmatched is not None or baseline is None:
        return unmatched or {}
    try:
        return compare_samples(current, baseline, timing=is_timing(unit, source),
                               confidence=confidence, limits=limits, power=power)
    except TrialError as exc:
        return {"status": NOT_COMPARED, "reason": str(exc)}


def compare_with_runs(
    current: Iterable[float] | np.ndarray,
    baseline_runs: list[np.ndarray],
    between: Between,
    *,
    timing: bool,
    confidence: float = defaults.CONFIDENCE,
    limits: Limits | None = None,
    threshold: float | None = None,
    power: float = defaults.POWER,
) -> dict[str, Any]:
    """Compare ``current`` trials with a baseline of several runs, run-to-run noise included.

    The interval is :func:`meanband.stats.run_noise.two_level_ratio`. A check is ``regressed``
    when the p-value of "within the limit" is at most ``threshold`` (the one-sided
    ``(1 - confidence) / 2`` unless a suite-level adjustment lowers it), ``no regression`` when
    the interval lies inside the allowed range, and ``cannot tell yet`` otherwise.
    Builtin types only.
    """
    from meanband.stats.run_noise import two_level_ratio

    limits = limits or Limits()
    xc = np.asarray(current, dtype=np.float64)
    positive = bool(np.all(xc > 0) and all(np.all(r > 0) for r in baseline_runs))
    interval = two_level_ratio(xc, baseline_runs, between, log=positive, confidence=confidence)
    low, high = limits.band(timing)
    p_value = interval.one_sided_p(high, above=True)
    if math.isfinite(low):
        p_value = min(p_value, interval.one_sided_p(low, above=False))
    alpha = side_alpha(interval.confidence, "two-sided")
    limit = alpha if threshold is None else threshold
    if p_value <= limit:
        status = REGRESSED
    elif low <= interval.low and interval.high <= high:
        status = NO_REGRESSION
    else:
        status = CANNOT_TELL
    result: dict[str, Any] = {
        "status": status,
        "timing": timing,
        "ratio": {
            "ratio": interval.ratio, "low": interval.low, "high": interval.high,
            "confidence": interval.confidence, "df": interval.df, "bounded": True,
            "method": "two-level log" if positive else "two-level relative",
            "estimand": "geometric means" if positive else "means",
        },
        **_limits_and_means(low, high, interval),
        "p_value": p_value,
        "threshold": limit,
        "noise": {"between_sd": interval.between_sd, "source": interval.between_source,
                  "runs": interval.baseline_runs, "df": between.df},
    }
    if status == CANNOT_TELL:
        result.update(_runs_or_trials_to_decide(xc, baseline_runs, interval, between,
                                                (low, high), power))
    if timing and not positive:
        words = ("some timings are zero or negative, so they were compared on the relative "
                 "scale rather than the log scale")
        result["note"] = f"{result['note']}; {words}" if result.get("note") else words
    return result


def _runs_or_trials_to_decide(
    xc: np.ndarray, baseline_runs: list[np.ndarray], interval: TwoLevelRatio, between: Between,
    band: tuple[float, float], power: float,
) -> dict[str, Any]:
    """Trials per run that would likely decide an undecided comparison, or why none would.

    The run-to-run part of the variance, ``tau^2 (1 + 1/K)``, does not shrink with more trials:
    when it alone leaves the interval wider than the distance to the nearest edge, more trials
    cannot decide and the note says what can. Otherwise the count n per run solves
    ``(t_(1-a/2) + t_power) * sqrt(run part + s_c^2 / n + s_b^2 / (n K)) = distance``, with t
    at the Welch-Satterthwaite df of those parts, found by fixed-point iteration from the normal
    approximation (as in :mod:`meanband.stats.planning`).
    """
    from scipy import stats

    edges = [interval._scale(e) for e in band if math.isfinite(e)]
    distance = min(abs(interval.difference - e) for e in edges)
    run_part = between.variance * (1.0 + 1.0 / interval.baseline_runs)
    k = interval.baseline_runs
    scale = 1.0 if interval.log else abs(interval.mean_baseline)
    pooled = np.concatenate(baseline_runs)
    var_c = float(np.var(np.log(xc) if interval.log else xc / scale, ddof=1))
    var_b = float(np.var(np.log(pooled) if interval.log else pooled / scale, ddof=1))
    df = math.inf
    n = 2
    for _ in range(20):
        reach = float(stats.t.ppf(0.5 + interval.confidence / 2.0, df) + stats.t.ppf(power, df))
        needed = (distance / reach) ** 2 - run_part if distance > 0 else -1.0
        if needed <= 0:
            return {"suggested_n": None, "note": (
                f"run-to-run noise ({between.sd:.1%} between runs, {between.source}) leaves the "
                "interval wider than its distance to the limit, so more trials per run will not "
                "decide it; more baseline runs, an A/A calibration or a quieter machine can")}
        following = max(2, math.ceil((var_c + var_b / k) / needed))
        df = satterthwaite_df([(run_part, between.df), (var_c / following, following - 1.0),
                                (var_b / (following * k), k * (following - 1.0))])
        if following == n:
            break
        n = following
    return {"suggested_n": n}

