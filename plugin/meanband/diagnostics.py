"""Checks of what the t interval assumes: enough trials, roughly normal, independent."""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from meanband.sample import as_sample, location_scale

__all__ = [
    "BIMODAL_THRESHOLD",
    "SHAPIRO_MAX_N",
    "Diagnostics",
    "DriftTest",
    "NormalityTest",
    "bimodality_coefficient",
    "diagnose",
    "drift_test",
    "lag1_autocorrelation",
    "tukey_fences",
]

#: Largest n for which scipy's Shapiro-Wilk (Royston 1995, AS R94) gives an accurate p-value.
SHAPIRO_MAX_N = 5000
#: Smallest n for D'Agostino-Pearson's K^2, used above SHAPIRO_MAX_N (D'Agostino & Pearson 1973).
_DAGOSTINO_MIN_N = 20
#: Sarle's bimodality coefficient of a uniform distribution; larger values suggest two modes
#: (SAS Institute 1990; Pfister et al. 2013).
BIMODAL_THRESHOLD = 5.0 / 9.0
#: Above this many trials the Mann-Kendall test runs on evenly spaced trials (O(n log n) anyway,
#: but 10^6 trials would take a noticeable fraction of a second).
DRIFT_MAX_N = 100_000
#: Above this many trials Sen's slope (O(n^2) pairs) is taken from evenly spaced trials.
SLOPE_MAX_N = 1_000


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
class DriftTest:
    """Trend over the order of the trials: Mann-Kendall test and Sen's slope per trial.

    ``change`` is the slope times (n - 1): how far the level moved from first trial to last.
    ``used`` is the number of trials tested (fewer than n when evenly spaced trials stand in).
    """

    method: str
    statistic: float
    pvalue: float
    slope: float
    change: float
    testable: bool
    used: int = 0
    reason: str = ""

    def rejects(self, alpha: float) -> bool:
        """Whether the test finds a trend at level ``alpha``."""
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
    excess_kurtosis: float = math.nan
    outliers: int = 0
    outlier_fences: tuple[float, float] = (math.nan, math.nan)
    drift: DriftTest | None = None
    bimodality: float = math.nan
    log_skewness: float = math.nan
    log_normality_pvalue: float = math.nan
    log_bimodality: float = math.nan
    log_sd: float = math.nan

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only, safe for JSON and for pytest-xdist's report transport."""
        out = asdict(self)
        out["outlier_fences"] = [float(v) for v in self.outlier_fences]
        return out


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
    - skewness G1 and excess kurtosis G2: the adjusted coefficients (Joanes & Gill 1998), and
      the sd, skewness, bimodality and normality p-value of log(x) when every trial is positive;
    - outliers: counted outside Tukey's fences Q1 - 1.5 IQR, Q3 + 1.5 IQR (Tukey 1977), never
      removed;
    - drift: ``drift_test`` (Mann-Kendall with Sen's slope);
    - bimodality: Sarle's coefficient (G1^2 + 1) / (G2 + 3(n-1)^2/((n-2)(n-3))), above 5/9
      suggesting two modes (SAS Institute 1990; Pfister et al. 2013).
    """
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
    kurtosis = _excess_kurtosis(x, mean) if n > 3 and not zero_spread else math.nan
    log_skewness, log_pvalue, log_bimodality, log_spread = math.nan, math.nan, math.nan, math.nan
    if n > 3 and not zero_spread and bool(np.all(x > 0.0)):
        y = np.log(x)
        log_mean, log_sd = location_scale(y)
        log_spread = log_sd
        if log_sd > 0.0:
            log_skewness = _skewness(y, log_mean, log_sd)
            log_pvalue = _normality(y, False).pvalue
            log_bimodality = bimodality_coefficient(
                log_skewness, _excess_kurtosis(y, log_mean), n
            )
    fences = tukey_fences(x)
    outliers = int(np.count_nonzero((x < fences[0]) | (x > fences[1])))
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
        excess_kurtosis=kurtosis,
        outliers=outliers,
        outlier_fences=fences,
        drift=drift_test(x),
        bimodality=bimodality_coefficient(skewness, kurtosis, n),
        log_skewness=log_skewness,
        log_normality_pvalue=log_pvalue,
        log_bimodality=log_bimodality,
        log_sd=log_spread,
    )


def tukey_fences(x: np.ndarray, k: float = 1.5) -> tuple[float, float]:
    """Tukey's fences Q1 - k IQR and Q3 + k IQR (Tukey 1977); quartiles by linear interpolation."""
    q1, q3 = np.percentile(x, [25.0, 75.0])
    iqr = float(q3 - q1)
    return float(q1 - k * iqr), float(q3 + k * iqr)


def bimodality_coefficient(skewness: float, excess_kurtosis: float, n: int) -> float:
    """Sarle's bimodality coefficient from G1 and G2 (SAS Institute 1990; Pfister et al. 2013).

    5/9 for a uniform distribution, 1/3 for a normal one; above 5/9 suggests two modes (or a
    strong skew: a coefficient, not a test).
    """
    if n < 4 or math.isnan(skewness) or math.isnan(excess_kurtosis):
        return math.nan
    return (skewness**2 + 1.0) / (excess_kurtosis + 3.0 * (n - 1) ** 2 / ((n - 2) * (n - 3)))


def drift_test(values: Iterable[float] | np.ndarray) -> DriftTest:
    """Trend of the trials over their order: Mann-Kendall test with Sen's slope.

    Mann-Kendall (Mann 1945; Kendall 1975) is Kendall's tau between trial order and value
    (``scipy.stats.kendalltau``, O(n log n)); it needs no normality, and a single slow trial does
    not make a trend. Above ``DRIFT_MAX_N`` trials the test uses evenly spaced trials; the slope
    (Sen 1968, median of pairwise slopes, ``scipy.stats.theilslopes``) uses at most
    ``SLOPE_MAX_N``. Independent trials are assumed: autocorrelation inflates the false alarms.
    """
    x = as_sample(values, minimum=1)
    n = x.size
    if n < 4:
        return DriftTest("Mann-Kendall", math.nan, math.nan, math.nan, math.nan, False, n,
                         f"needs 4 trials, got {n}")
    if bool(np.all(x == x[0])):
        return DriftTest("Mann-Kendall", math.nan, math.nan, 0.0, 0.0, False, n,
                         "all trials are equal")
    from scipy.stats import kendalltau, theilslopes

    order = np.arange(n, dtype=np.float64)
    tested = _evenly_spaced(n, DRIFT_MAX_N)
    tau = kendalltau(order[tested], x[tested])
    sloped = _evenly_spaced(n, SLOPE_MAX_N)
    slope = float(theilslopes(x[sloped], order[sloped]).slope)
    return DriftTest("Mann-Kendall", float(tau.statistic), float(tau.pvalue), slope,
                     slope * (n - 1), True, int(tested.size))


def _evenly_spaced(n: int, limit: int) -> np.ndarray:
    if n <= limit:
        return np.arange(n)
    return np.unique(np.linspace(0, n - 1, limit).round().astype(np.intp))


def _skewness(x: np.ndarray, mean: float, sd: float) -> float:
    n = x.size
    z = (x - mean) / sd
    # G1 = n / ((n-1)(n-2)) * sum(z^3) with z standardised by the n-1 sd (Joanes & Gill 1998).
    return float(n / ((n - 1) * (n - 2)) * float(np.sum(z * z * z)))


def _excess_kurtosis(x: np.ndarray, mean: float) -> float:
    n = x.size
    d = x - mean
    m2 = float(np.mean(d * d))
    g2 = float(np.mean(d**4)) / (m2 * m2) - 3.0
    # G2 = ((n+1) g2 + 6)(n-1) / ((n-2)(n-3)) (Joanes & Gill 1998).
    return ((n + 1) * g2 + 6.0) * (n - 1) / ((n - 2) * (n - 3))


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
