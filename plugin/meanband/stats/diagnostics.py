"""Checks of what the t interval assumes: enough trials, roughly normal, independent."""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.sample import as_sample, check_probability, deviations, sum_of_products

__all__ = [
    "BIMODAL_THRESHOLD",
    "SHAPIRO_MAX_N",
    "Diagnostics",
    "DriftTest",
    "NormalityTest",
    "bimodality_coefficient",
    "dagostino_pearson",
    "diagnose",
    "dip_test",
    "drift_test",
    "end_means",
    "lag1_autocorrelation",
    "tukey_fences",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: Largest n for which scipy's Shapiro-Wilk (Royston 1995, AS R94) gives an accurate p-value.
SHAPIRO_MAX_N = 5000
#: Sarle's bimodality coefficient of a uniform distribution; larger values suggest two modes
#: (SAS Institute 1990; Pfister et al. 2013).
BIMODAL_THRESHOLD = 5.0 / 9.0
#: Above this many trials the Mann-Kendall test runs on evenly spaced trials: O(n log n) anyway,
#: and 20,000 trials detect any drift worth a note, at a small share of diagnose's time.
DRIFT_MAX_N = 20_000
#: Above this many trials the dip test runs on evenly spaced trials (it sorts them: O(n log n)).
DIP_MAX_N = 20_000
#: Above this many trials Sen's slope (O(n^2) pairs) is taken from evenly spaced trials.
SLOPE_MAX_N = 400


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
    ``first`` and ``last`` are the means of the first and the last third of the trials: what a
    note reports, since a slope extrapolated over a curved trend can overshoot (a timing that
    falls from 13 ms to 2 ms is not "-315%").
    """

    method: str
    statistic: float
    pvalue: float
    slope: float
    change: float
    testable: bool
    used: int = 0
    reason: str = ""
    first: float = math.nan
    last: float = math.nan

    @property
    def relative_change(self) -> float:
        """``last / first - 1``, for positive quantities such as timings (never below -100%);
        nan when the first part's mean is not positive."""
        if not (math.isfinite(self.first) and math.isfinite(self.last)) or self.first <= 0:
            return math.nan
        return self.last / self.first - 1.0

    def rejects(self, alpha: float) -> bool:
        """Whether the test finds a trend at level ``alpha``."""
        return self.testable and self.pvalue < alpha

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only; an undefined statistic is None, so strict JSON can carry it."""
        return {k: (None if isinstance(v, float) and not math.isfinite(v) else v)
                for k, v in asdict(self).items()}


#: The drift field of diagnostics made without a drift test.
NO_DRIFT = DriftTest("Mann-Kendall", math.nan, math.nan, math.nan, math.nan, False, 0,
                     "not computed")


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
    outlier_low: float = math.nan
    outlier_high: float = math.nan
    drift: DriftTest = NO_DRIFT
    bimodality: float = math.nan
    log_skewness: float = math.nan
    log_normality_pvalue: float = math.nan
    log_bimodality: float = math.nan
    log_sd: float = math.nan
    dip: float = math.nan
    dip_pvalue: float = math.nan
    log_dip_pvalue: float = math.nan

    def __post_init__(self) -> None:
        # Rebuilt from ``to_dict()`` output (JSON, a report row): nested tests come back as dicts.
        if isinstance(self.normality, dict):
            object.__setattr__(self, "normality", NormalityTest(**self.normality))
        if isinstance(self.drift, dict):
            object.__setattr__(self, "drift", DriftTest(**self.drift))

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only, safe for JSON and for pytest-xdist's report transport."""
        return asdict(self)


def lag1_autocorrelation(x: np.ndarray, mean: float) -> float:
    """r(1) exactly as NIST StRD defines it: sum of lagged products over the sum of squares."""
    d = x - mean
    scale = float(np.max(np.abs(d))) if d.size else 0.0
    if scale > 0.0 and math.isfinite(scale):
        d = d / scale  # scale before squaring: no underflow near 1e-300, no overflow near 1e300
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
    - skewness G1 and excess kurtosis G2: the adjusted coefficients (Joanes & Gill 1998), and
      the sd, skewness, bimodality and normality p-value of log(x) when every trial is positive;
    - outliers: counted outside Tukey's fences Q1 - 1.5 IQR, Q3 + 1.5 IQR (Tukey 1977), never
      removed;
    - drift: ``drift_test`` (Mann-Kendall with Sen's slope);
    - bimodality: Sarle's coefficient (G1^2 + 1) / (G2 + 3(n-1)^2/((n-2)(n-3))), above 5/9
      suggesting two modes (SAS Institute 1990; Pfister et al. 2013), and Hartigan &
      Hartigan's (1985) dip test of unimodality on x and, for positive trials, on log x.
    """
    alpha = check_probability(alpha, "alpha")
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
        # Standardise first (in place: dev is our own copy), so products, cubes and fourth
        # powers stay in range at any scale (1e-300 or 1e300); sum(z^2) is n - 1.
        z = np.divide(dev, sd, out=dev)
        lag1 = sum_of_products(z[:-1], z[1:]) / (n - 1)
        sum3 = float(np.einsum("i,i,i->", z, z, z))
        squares = np.multiply(z, z, out=z)
        sum4 = sum_of_products(squares, squares)
        # G1 = n / ((n-1)(n-2)) * sum(z^3), z standardised by the n-1 sd (Joanes & Gill 1998).
        skewness = n / ((n - 1) * (n - 2)) * sum3
        kurtosis = _excess_kurtosis(n, sum4)
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
        kurtosis = math.nan
    log_sd, log_skewness, log_kurtosis, log_pvalue = math.nan, math.nan, math.nan, math.nan
    if n > 3 and not zero_spread and bool(np.all(x > 0.0)):
        log_sd, log_skewness, log_kurtosis, log_pvalue = _log_shape(np.log(x))
    dip, dip_pvalue, log_dip_pvalue = math.nan, math.nan, math.nan
    if n > 3 and not zero_spread:
        dip, dip_pvalue = dip_test(x)
        if bool(np.all(x > 0.0)):
            log_dip_pvalue = dip_test(np.log(x))[1]
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
        outlier_low=fences[0],
        outlier_high=fences[1],
        drift=_drift(x),
        bimodality=bimodality_coefficient(skewness, kurtosis, n),
        log_skewness=log_skewness,
        log_normality_pvalue=log_pvalue,
        log_bimodality=bimodality_coefficient(log_skewness, log_kurtosis, n),
        log_sd=log_sd,
        dip=dip,
        dip_pvalue=dip_pvalue,
        log_dip_pvalue=log_dip_pvalue,
    )


def dip_test(values: Iterable[float] | np.ndarray) -> tuple[float, float]:
    """Hartigan & Hartigan's (1985) dip statistic and its p-value against unimodality.

    The dip is the largest distance between the empirical distribution function and the
    nearest unimodal one; the p-value is interpolated in the table of the dip of uniform samples
    (the least favourable unimodal case), as the ``diptest`` package computes it. Above
    ``DIP_MAX_N`` trials the test uses evenly spaced trials.
    """
    import diptest

    x = as_sample(values, minimum=4)
    x = x[_evenly_spaced(x.size, DIP_MAX_N)]
    dip, pvalue = diptest.diptest(x, allow_zero=False)  # the dip is at least 1/(2n)
    return float(dip), float(pvalue)


def _excess_kurtosis(n: int, sum4: float) -> float:
    """G2 from sum(z^4), z standardised by the n-1 sd (Joanes & Gill 1998)."""
    if n < 4:
        return math.nan
    m2 = (n - 1) / n
    g2 = (sum4 / n) / (m2 * m2) - 3.0
    return ((n + 1) * g2 + 6.0) * (n - 1) / ((n - 2) * (n - 3))


def _log_shape(y: np.ndarray) -> tuple[float, float, float, float]:
    """sd, G1, G2 and normality p-value of the log trials ``y`` (an array of our own)."""
    n = y.size
    _, sd, dev = deviations(y)
    if sd == 0.0:
        return sd, math.nan, math.nan, math.nan
    z = np.divide(dev, sd, out=dev)
    sum3 = float(np.einsum("i,i,i->", z, z, z))
    squares = np.multiply(z, z, out=z)
    sum4 = sum_of_products(squares, squares)
    skewness = n / ((n - 1) * (n - 2)) * sum3
    normality = _normality(y, sd, ((n - 1) / n, sum3 / n, sum4 / n))
    return sd, skewness, _excess_kurtosis(n, sum4), normality.pvalue


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


def tukey_fences(x: np.ndarray, k: float = 1.5) -> tuple[float, float]:
    """Tukey's fences Q1 - k IQR and Q3 + k IQR (Tukey 1977); quartiles by linear interpolation.

    The quartiles are numpy's default (linear) percentiles, from four order statistics.
    """
    n = x.size
    stats = _order_statistics(x, [(n - 1) * 0.25, (n - 1) * 0.75])
    q1, q3 = stats
    iqr = q3 - q1
    return float(q1 - k * iqr), float(q3 + k * iqr)


def _order_statistics(x: np.ndarray, positions: list[float]) -> list[float]:
    """Linearly interpolated order statistics at fractional 0-based ``positions``.

    One selection per needed rank, each on the tail left by the one before: a few O(n) passes,
    several times faster on 10^6 trials than a sort or a multi-rank ``np.partition``.
    """
    n = x.size
    ranks = sorted({min(math.floor(p) + step, n - 1) for p in positions for step in (0, 1)})
    work = np.array(x, dtype=np.float64, copy=True)
    value: dict[int, float] = {}
    start = 0
    for rank in ranks:
        tail = work[start:]
        tail.partition(rank - start)
        value[rank] = float(work[rank])
        start = rank + 1
    out = []
    for p in positions:
        low = math.floor(p)
        high = min(low + 1, n - 1)
        out.append(value[low] + (p - low) * (value[high] - value[low]))
    return out


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
    return _drift(as_sample(values, minimum=1))


def _drift(x: np.ndarray) -> DriftTest:
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
    first, last = end_means(x)
    return DriftTest("Mann-Kendall", float(tau.statistic), float(tau.pvalue), slope,
                     slope * (n - 1), True, int(tested.size), first=first, last=last)


def end_means(values: np.ndarray) -> tuple[float, float]:
    """Means of the first and the last third of ``values`` (at least one value each)."""
    part = max(values.size // 3, 1)
    return float(np.mean(values[:part])), float(np.mean(values[-part:]))


def _evenly_spaced(n: int, limit: int) -> np.ndarray:
    if n <= limit:
        return np.arange(n)
    # Spacing above 1, so the rounded positions are distinct.
    spaced: np.ndarray = np.linspace(0, n - 1, limit).round().astype(np.intp)
    return spaced
