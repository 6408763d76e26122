"""Judge a check against its baseline: ratio interval, limit and a verdict in plain words."""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import TrialError
from meanband.stats.ratio import RatioInterval, judge_ratio, ratio_interval
from meanband.stats.verdict import Verdict
from meanband.units import SECONDS

__all__ = [
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
    "is_timing",
]

REGRESSED = "regressed"
NO_REGRESSION = "no regression"
CANNOT_TELL = "cannot tell yet"
NO_BASELINE = "no baseline"

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
        "limit_low": None if math.isinf(low) else low,
        "limit_high": high,
        "current_mean": interval.mean_current,
        "baseline_mean": interval.mean_baseline,
        "n_current": interval.n_current,
        "n_baseline": interval.n_baseline,
    }
    if status == CANNOT_TELL:
        result["suggested_n"] = _trials_to_decide(xc, xb, interval, (low, high), confidence, power)
    if timing and not positive:
        result["note"] = (
            "some timings are zero or negative, so they were compared as a ratio of means "
            "(Fieller) rather than on the log scale"
        )
    return result


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
    if source == "compare":
        return {"status": NOT_COMPARED, "reason": "an in-run comparison is its own gate"}
    if baseline is None:
        return {"status": NO_BASELINE, "reason": f"{baseline_run} has no trials for this check"}
    if baseline_unit != unit:
        return {"status": NOT_COMPARED,
                "reason": f"the unit changed from {baseline_unit or 'none'} to {unit or 'none'} "
                          f"since {baseline_run}"}
    try:
        return compare_samples(current, baseline, timing=is_timing(unit, source),
                               confidence=confidence, limits=limits, power=power)
    except TrialError as exc:
        return {"status": NOT_COMPARED, "reason": str(exc)}
