"""Checks of what the t interval assumes: enough trials, roughly normal, independent."""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from meanband.errors import TrialError
from meanband.sample import as_sample, location_scale

__all__ = ["SHAPIRO_MAX_N", "Diagnostics", "NormalityTest", "diagnose", "lag1_autocorrelation"]

#: Largest n for which scipy's Shapiro-Wilk (Royston 1995, AS R94) gives an accurate p-value.
SHAPIRO_MAX_N = 5000
#: Smallest n for D'Agostino-Pearson's K^2, used above SHAPIRO_MAX_N (D'Agostino & Pearson 1973).
_DAGOSTINO_MIN_N = 20


@dataclass(frozen=True, slots=True)
class NormalityTest:
    """Outcome of a normality test; ``testable`` is False when the data cannot be tested."""

    method: str
    statistic: float
    pvalue: float
    testable: bool
    reason: str = ""

    def rejects(self, alpha: float) -> bool:
        """Whether the test rejects normality at level ``alpha``."""
        return self.testable and self.pvalue < alpha


@dataclass(frozen=True, slots=True)
class Diagnostics:
    """What the data say about the assumptions behind the t interval."""

    n: int
    mean: float
    sd: float
    zero_spread: bool
    skewness: float
    normality: NormalityTest
    lag1: float
    lag1_limit: float
    lag1_significant: bool
    effective_n: float

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only, safe for JSON and for pytest-xdist's report transport."""
        return asdict(self)


def lag1_autocorrelation(x: np.ndarray, mean: float) -> float:
    """r(1) exactly as NIST StRD defines it: sum of lagged products over the sum of squares."""
    d = x - mean
    denominator = float(np.dot(d, d))
    if denominator == 0.0:
        return math.nan
    return float(np.dot(d[:-1], d[1:])) / denominator


def diagnose(values: Iterable[float] | np.ndarray, *, alpha: float = 0.05) -> Diagnostics:
    """Diagnose a sample of trials.

    - normality: Shapiro-Wilk for 3 <= n <= 5000, D'Agostino-Pearson K^2 above; below 3 (or
      with zero spread) the result says "not testable" instead of raising;
    - independence: lag-1 autocorrelation r(1), called significant when it lies outside
      -1/n +/- z(1 - alpha/2)/sqrt(n), the large-sample limits for white noise (Box & Jenkins
      1976, section 2.1.6); the effective sample size n(1 - r)/(1 + r) assumes an AR(1) process
      (Bayley & Hammersley 1946) and is capped at n, so a negative r never inflates it;
    - skewness: the adjusted Fisher-Pearson coefficient G1 (Joanes & Gill 1998).
    """
    if not 0.0 < alpha < 1.0:
        raise TrialError(f"alpha must lie strictly between 0 and 1, got {alpha!r}")
    x = as_sample(values, minimum=1)
    n = x.size
    mean, sd = location_scale(x) if n > 1 else (float(x[0]), math.nan)
    zero_spread = n > 1 and sd == 0.0
    normality = _normality(x, zero_spread)
    skewness = _skewness(x, mean, sd) if n > 2 and not zero_spread else math.nan
    if n > 2 and not zero_spread:
        from scipy.stats import norm

        lag1 = lag1_autocorrelation(x, mean)
        limit = float(norm.ppf(1.0 - alpha / 2.0)) / math.sqrt(n)
        significant = abs(lag1 + 1.0 / n) > limit
        effective_n = n * (1.0 - lag1) / (1.0 + lag1) if lag1 > -1.0 else float(n)
        effective_n = float(min(max(effective_n, 1.0), n))
    else:
        lag1, limit, significant, effective_n = math.nan, math.nan, False, float(n)
    return Diagnostics(
        n=n,
        mean=mean,
        sd=sd,
        zero_spread=zero_spread,
        skewness=skewness,
        normality=normality,
        lag1=lag1,
        lag1_limit=limit,
        lag1_significant=bool(significant),
        effective_n=effective_n,
    )


def _skewness(x: np.ndarray, mean: float, sd: float) -> float:
    n = x.size
    z = (x - mean) / sd
    # G1 = n / ((n-1)(n-2)) * sum(z^3) with z standardised by the n-1 sd (Joanes & Gill 1998).
    return float(n / ((n - 1) * (n - 2)) * float(np.sum(z * z * z)))


def _normality(x: np.ndarray, zero_spread: bool) -> NormalityTest:
    n = x.size
    if n < 3:
        return NormalityTest("Shapiro-Wilk", math.nan, math.nan, False, f"needs 3 trials, got {n}")
    if zero_spread:
        return NormalityTest("Shapiro-Wilk", math.nan, math.nan, False, "all trials are equal")
    if n <= SHAPIRO_MAX_N:
        from scipy.stats import shapiro

        result = shapiro(x)
        return NormalityTest("Shapiro-Wilk", float(result.statistic), float(result.pvalue), True)
    from scipy.stats import normaltest

    result = normaltest(x)
    return NormalityTest(
        "D'Agostino-Pearson K2", float(result.statistic), float(result.pvalue), True
    )
