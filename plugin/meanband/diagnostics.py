"""Checks of what the t interval assumes: enough trials, roughly normal, independent."""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from meanband.errors import TrialError
from meanband.sample import as_sample, deviations, sum_of_products

__all__ = [
    "SHAPIRO_MAX_N",
    "Diagnostics",
    "NormalityTest",
    "dagostino_pearson",
    "diagnose",
    "lag1_autocorrelation",
]

#: Largest n for which scipy's Shapiro-Wilk (Royston 1995, AS R94) gives an accurate p-value.
SHAPIRO_MAX_N = 5000


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
    denominator = sum_of_products(d, d)
    if denominator == 0.0:
        return math.nan
    return sum_of_products(d[:-1], d[1:]) / denominator


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
    if n > 1:
        mean, sd, dev = deviations(x)
    else:
        mean, sd, dev = float(x[0]), math.nan, x
    zero_spread = n > 1 and sd == 0.0
    if n > 2 and not zero_spread:
        from scipy.stats import norm

        # One set of sums over the deviations serves r(1), skewness and K^2: a million trials
        # cost a few passes and no new array, not a pass and a temporary per statistic.
        sum2 = sd * sd * (n - 1)
        lag1 = sum_of_products(dev[:-1], dev[1:]) / sum2 if sum2 > 0 else math.nan
        # Standardise (in place: dev is our own copy) so cubes and fourth powers stay in range.
        z = np.divide(dev, sd, out=dev)
        sum3 = float(np.einsum("i,i,i->", z, z, z))
        squares = np.multiply(z, z, out=z)
        sum4 = sum_of_products(squares, squares)
        # G1 = n / ((n-1)(n-2)) * sum(z^3), z standardised by the n-1 sd (Joanes & Gill 1998).
        skewness = n / ((n - 1) * (n - 2)) * sum3
        # Central moments (divisor n) of z: sum(z^2) is n - 1 by construction.
        normality = _normality(x, sd, ((n - 1) / n, sum3 / n, sum4 / n))
        limit = float(norm.ppf(1.0 - alpha / 2.0)) / math.sqrt(n)
        significant = abs(lag1 + 1.0 / n) > limit
        effective_n = n * (1.0 - lag1) / (1.0 + lag1) if lag1 > -1.0 else float(n)
        effective_n = float(min(max(effective_n, 1.0), n))
    else:
        normality = _normality(x, sd, None)
        skewness, lag1, limit, significant, effective_n = (
            math.nan, math.nan, math.nan, False, float(n)
        )
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


def _normality(
    x: np.ndarray, sd: float, moments: tuple[float, float, float] | None
) -> NormalityTest:
    n = x.size
    if n < 3:
        return NormalityTest("Shapiro-Wilk", math.nan, math.nan, False, f"needs 3 trials, got {n}")
    if moments is None:
        return NormalityTest("Shapiro-Wilk", math.nan, math.nan, False, "all trials are equal")
    if n <= SHAPIRO_MAX_N:
        from scipy.stats import shapiro

        # W does not depend on the scale; dividing by sd keeps AS R94 away from its absolute
        # "range zero" limit when trials are tiny numbers (e.g. 1e-20 s).
        result = shapiro(x / sd)
        return NormalityTest("Shapiro-Wilk", float(result.statistic), float(result.pvalue), True)
    statistic, pvalue = dagostino_pearson(n, *moments)
    return NormalityTest("D'Agostino-Pearson K2", statistic, pvalue, True)


def dagostino_pearson(n: int, m2: float, m3: float, m4: float) -> tuple[float, float]:
    """K^2 and its p-value from the central moments m2, m3, m4 (divisor n) of n >= 8 values.

    K^2 = Z(b1)^2 + Z(b2)^2 (D'Agostino & Pearson 1973), with the skewness transform of
    D'Agostino (1970) and the kurtosis transform of Anscombe & Glynn (1983), as set out by
    D'Agostino, Belanger & D'Agostino (1990); K^2 is chi-squared with 2 df, so p = exp(-K^2/2).
    Computed from moments the caller already has, it matches scipy.stats.normaltest without
    scipy's extra passes over the data.
    """
    if n < 8:
        raise TrialError(f"D'Agostino-Pearson K^2 needs at least 8 values, got {n}")
    b1 = m3 / m2**1.5
    b2 = m4 / m2**2
    # Skewness: D'Agostino (1970).
    y = b1 * math.sqrt((n + 1) * (n + 3) / (6.0 * (n - 2)))
    beta2 = (
        3.0 * (n * n + 27 * n - 70) * (n + 1) * (n + 3)
        / ((n - 2.0) * (n + 5) * (n + 7) * (n + 9))
    )
    w2 = -1.0 + math.sqrt(2.0 * (beta2 - 1.0))
    delta = 1.0 / math.sqrt(0.5 * math.log(w2))
    a = math.sqrt(2.0 / (w2 - 1.0))
    z_skew = delta * math.asinh(y / a)  # = delta * log(y/a + sqrt((y/a)^2 + 1))
    # Kurtosis: Anscombe & Glynn (1983), equations 1-5.
    expected = 3.0 * (n - 1) / (n + 1)
    variance = 24.0 * n * (n - 2) * (n - 3) / ((n + 1) * (n + 1.0) * (n + 3) * (n + 5))
    standard = (b2 - expected) / math.sqrt(variance)
    root_beta1 = (
        6.0 * (n * n - 5 * n + 2) / ((n + 7) * (n + 9))
        * math.sqrt(6.0 * (n + 3) * (n + 5) / (n * (n - 2) * (n - 3)))
    )
    big_a = 6.0 + 8.0 / root_beta1 * (2.0 / root_beta1 + math.sqrt(1.0 + 4.0 / root_beta1**2))
    denominator = 1.0 + standard * math.sqrt(2.0 / (big_a - 4.0))
    if denominator == 0.0:
        return math.nan, math.nan
    term = math.copysign(abs((1.0 - 2.0 / big_a) / denominator) ** (1.0 / 3.0), denominator)
    z_kurt = (1.0 - 2.0 / (9.0 * big_a) - term) / math.sqrt(2.0 / (9.0 * big_a))
    statistic = z_skew * z_skew + z_kurt * z_kurt
    return statistic, math.exp(-statistic / 2.0)
