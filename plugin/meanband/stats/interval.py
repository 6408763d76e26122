"""The confidence interval of a mean whose spread is only estimated (Student 1908)."""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.sample import check_confidence, location_scale

__all__ = ["SIDES", "Interval", "check_side", "critical_t", "t_interval"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

SIDES = ("two-sided", "upper", "lower")


@dataclass(frozen=True, slots=True)
class Interval:
    """A confidence interval (or one-sided bound) for the mean of the trials.

    ``side="upper"`` is a one-sided upper bound (``low`` is ``-inf``); ``side="lower"`` a
    one-sided lower bound (``high`` is ``+inf``). ``estimand`` says what the interval is about
    (``"mean"`` for the t interval; other methods may bound e.g. the geometric mean).
    """

    mean: float
    low: float
    high: float
    confidence: float
    side: str
    n: int
    df: float
    sd: float
    sem: float
    method: str
    critical: float = math.nan
    estimand: str = "mean"

    def half_width(self) -> float:
        """Distance from the mean to the finite bound (the larger one when two-sided)."""
        if self.side == "upper":
            return self.high - self.mean
        if self.side == "lower":
            return self.mean - self.low
        return max(self.high - self.mean, self.mean - self.low)

    def contains(self, value: float) -> bool:
        """Whether ``value`` lies inside the interval (closed at its finite ends)."""
        return bool(self.low <= value <= self.high)

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only, safe for JSON and for pytest-xdist's report transport."""
        return {k: (v if not isinstance(v, float) else float(v)) for k, v in asdict(self).items()}


def critical_t(confidence: float, df: float, side: str = "two-sided") -> float:
    """Student-t critical value: the (1+C)/2 quantile two-sided, the C quantile one-sided."""
    level = check_confidence(confidence)
    check_side(side)
    if not df > 0:  # also refuses NaN, for which scipy would quietly return NaN
        raise TrialError(f"degrees of freedom must be positive, got {df!r}; use n - 1 for n trials")
    q = (1.0 + level) / 2.0 if side == "two-sided" else level
    if math.isinf(df):
        from scipy.stats import norm

        return float(norm.ppf(q))
    from scipy.stats import t as student_t

    return float(student_t.ppf(q, df))


def t_interval(x: np.ndarray, confidence: float, side: str) -> Interval:
    """The classical interval mean +/- t(n-1) * s / sqrt(n); ``x`` is already validated."""
    n = x.size
    mean, sd = location_scale(x)
    sem = sd / math.sqrt(n)
    df = float(n - 1)
    crit = critical_t(confidence, df, side)
    reach = crit * sem
    low = -math.inf if side == "upper" else mean - reach
    high = math.inf if side == "lower" else mean + reach
    return Interval(mean, low, high, confidence, side, n, df, sd, sem, "t", crit, "mean")


def check_side(side: str) -> str:
    if side not in SIDES:
        raise TrialError(f"unknown side {side!r}; choose one of {', '.join(SIDES)}")
    return side
