"""How much slower (or larger) one sample is than another: the confidence interval of a ratio."""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.sample import as_sample, check_confidence, location_scale
from meanband.stats.verdict import Verdict

__all__ = [
    "RATIO_METHODS",
    "Difference",
    "RatioCheck",
    "RatioInterval",
    "check_ratio",
    "judge_ratio",
    "mean_difference",
    "paired_mean_ratio_interval",
    "paired_ratio_interval",
    "parse_fraction",
    "ratio_interval",
    "side_blind_outliers",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: A measurement longer than this many times its side's median is a candidate interruption
#: (a descheduling costs a time slice, milliseconds, against measurements of tens of µs).
INTERRUPTION_FENCE = 5.0
#: Candidates are dropped only when they fall on both sides alike; a two-sided binomial test
#: below this level says they belong to one callable (a slow path) and they are kept.
SIDE_BLIND_ALPHA = 0.01

#: How the ratio interval is computed: on the log scale (Welch 1947 on log values, for positive
#: data such as timings), by Fieller's theorem (Fieller 1954) or by the delta method.
RATIO_METHODS = ("log", "fieller", "delta")


@dataclass(frozen=True, slots=True)
class Difference:
    """Interval of ``mean(a) - mean(b)`` from two independent samples, with its t statistic."""

    estimate: float
    low: float
    high: float
    confidence: float
    se: float
    df: float
    statistic: float
    pooled: bool


@dataclass(frozen=True, slots=True)
class RatioInterval:
    """Two-sided interval of ``current / baseline``.

    ``estimand`` says what the ratio is of: ``"geometric means"`` for the log method (equal to the
    ratio of means when both samples have the same spread on the log scale), ``"means"`` for
    Fieller and the delta method, ``"paired geometric means"`` for the paired log ratios,
    ``"paired means"`` for the paired Fieller interval of the in-run comparison. ``bounded``
    is False when the data cannot bound the ratio (Fieller with a baseline mean that is not
    clearly away from zero); then ``low`` is -inf and ``high`` +inf.
    """

    ratio: float
    low: float
    high: float
    confidence: float
    method: str
    df: float
    n_current: int
    n_baseline: int
    mean_current: float
    mean_baseline: float
    estimand: str
    bounded: bool = True

    def contains(self, value: float) -> bool:
        """Whether ``value`` lies inside the interval."""
        return bool(self.low <= value <= self.high)

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only, safe for JSON and for pytest-xdist's report transport."""
        return {
            k: (float(v) if isinstance(v, float | np.floating) else v)
            for k, v in asdict(self).items()
        }


def mean_difference(
    a: Iterable[float] | np.ndarray,
    b: Iterable[float] | np.ndarray,
    confidence: float = defaults.CONFIDENCE,
    *,
    pooled: bool = False,
) -> Difference:
    """Two-sided interval of ``mean(a) - mean(b)``.

    Unequal variances by default: standard error sqrt(s_a^2/n_a + s_b^2/n_b) with the
    Welch-Satterthwaite degrees of freedom (Welch 1947; Satterthwaite 1946). ``pooled=True`` gives
    the classical equal-variance test with n_a + n_b - 2 degrees of freedom (Student 1908).
    """
    level = check_confidence(confidence)
    xa, xb = as_sample(a, minimum=2), as_sample(b, minimum=2)
    na, nb = xa.size, xb.size
    mean_a, sd_a = location_scale(xa)
    mean_b, sd_b = location_scale(xb)
    va, vb = sd_a**2 / na, sd_b**2 / nb
    estimate = mean_a - mean_b
    if pooled:
        df = float(na + nb - 2)
        pooled_var = ((na - 1) * sd_a**2 + (nb - 1) * sd_b**2) / df
        se = math.sqrt(pooled_var * (1.0 / na + 1.0 / nb))
    else:
        se = math.sqrt(va + vb)
        df = _welch_df(va, na, vb, nb)
    return _difference(estimate, se, df, level, pooled)


def _welch_df(va: float, na: int, vb: float, nb: int) -> float:
    """Welch-Satterthwaite degrees of freedom of va + vb (Welch 1947, eq. 9; Satterthwaite 1946)."""
    denominator = va**2 / (na - 1) + vb**2 / (nb - 1)
    if denominator == 0.0:
        return math.inf  # both samples without spread: the difference is known exactly
    return (va + vb) ** 2 / denominator


def _difference(estimate: float, se: float, df: float, level: float, pooled: bool) -> Difference:
    from scipy.stats import t as student_t

    if se == 0.0:
        statistic = math.copysign(math.inf, estimate) if estimate else math.nan
        return Difference(estimate, estimate, estimate, level, 0.0, df, statistic, pooled)
    crit = float(student_t.ppf((1.0 + level) / 2.0, df))
    reach = crit * se
    return Difference(
        estimate, estimate - reach, estimate + reach, level, se, df, estimate / se, pooled
    )


def ratio_interval(
    current: Iterable[float] | np.ndarray,
    baseline: Iterable[float] | np.ndarray,
    confidence: float = defaults.CONFIDENCE,
    method: str = "log",
) -> RatioInterval:
    """Two-sided interval of the ratio ``current / baseline`` from two independent samples.

    ``"log"``: Welch's interval (Welch 1947) for the difference of the mean logarithms,
    exponentiated; the estimand is the ratio of geometric means. This is the usual analysis of
    ratios of positive, right-skewed quantities such as timings (log-scale comparison as in
    bioequivalence work, Schuirmann 1987). Needs positive values.

    ``"fieller"``: Fieller's theorem (Fieller 1954) for the ratio of two independent means, with
    Welch-Satterthwaite degrees of freedom evaluated at the point ratio. Exact for normal data;
    unbounded when the baseline mean is not clearly away from zero.

    ``"delta"``: ratio +/- t * ratio * sqrt(v_c/m_c^2 + v_b/m_b^2), the first-order (delta
    method) standard error of a ratio; simple, symmetric, good when both means are far from zero.
    """
    level = check_confidence(confidence)
    if method not in RATIO_METHODS:
        raise TrialError(
            f"unknown ratio method {method!r}; choose one of {', '.join(RATIO_METHODS)}"
        )
    xc, xb = as_sample(current, minimum=2), as_sample(baseline, minimum=2)
    if method == "log":
        return _log_ratio(xc, xb, level)
    mean_c, sd_c = location_scale(xc)
    mean_b, sd_b = location_scale(xb)
    if mean_b == 0.0:
        raise TrialError(
            "the baseline mean is exactly 0, so a ratio to it is undefined; compare differences "
            "instead, or measure a quantity that is not centred on zero"
        )
    vc, vb = sd_c**2 / xc.size, sd_b**2 / xb.size
    ratio = mean_c / mean_b
    if method == "fieller":
        return _fieller(xc.size, xb.size, mean_c, mean_b, vc, vb, level)
    df = _welch_df(vc, xc.size, ratio**2 * vb, xb.size)
    crit = _two_sided_t(level, df)
    # Var(m_c / m_b) ~ v_c / m_b^2 + m_c^2 v_b / m_b^4 (first-order Taylor expansion).
    se = math.sqrt(vc / mean_b**2 + ratio**2 * vb / mean_b**2)
    return RatioInterval(
        ratio, ratio - crit * se, ratio + crit * se, level, "delta", df, xc.size, xb.size,
        mean_c, mean_b, "means",
    )


def _two_sided_t(level: float, df: float) -> float:
    from scipy.stats import t as student_t

    if math.isinf(df):
        from scipy.stats import norm

        return float(norm.ppf((1.0 + level) / 2.0))
    return float(student_t.ppf((1.0 + level) / 2.0, df))


def _log_ratio(xc: np.ndarray, xb: np.ndarray, level: float) -> RatioInterval:
    for name, x in (("current", xc), ("baseline", xb)):
        if np.any(x <= 0.0):
            bad = int(np.count_nonzero(x <= 0.0))
            raise TrialError(
                f"{bad} of the {name} trials are zero or negative, so their logarithm is "
                "undefined; the log-scale ratio needs positive values (timings are); use "
                "method='fieller' for values that can be zero or negative"
            )
    diff = mean_difference(np.log(xc), np.log(xb), level)
    mean_c, _ = location_scale(xc)
    mean_b, _ = location_scale(xb)
    return RatioInterval(
        math.exp(diff.estimate), math.exp(diff.low), math.exp(diff.high), level, "log",
        diff.df, xc.size, xb.size, mean_c, mean_b, "geometric means",
    )


def _fieller(
    nc: int, nb: int, mean_c: float, mean_b: float, vc: float, vb: float, level: float
) -> RatioInterval:
    """Fieller (1954): the set of rho with (m_c - rho m_b)^2 <= t^2 (v_c + rho^2 v_b)."""
    ratio = mean_c / mean_b
    df = _welch_df(vc, nc, ratio**2 * vb, nb)
    crit = _two_sided_t(level, df)
    t2 = crit**2
    # g < 1 means the baseline mean is significantly away from zero; otherwise the confidence
    # set is the whole line or the outside of an interval (Fieller 1954, section 3).
    a = mean_b**2 - t2 * vb
    discriminant = mean_c**2 * vb + mean_b**2 * vc - t2 * vc * vb
    if a <= 0.0 or discriminant < 0.0:
        return RatioInterval(
            ratio, -math.inf, math.inf, level, "fieller", df, nc, nb, mean_c, mean_b, "means",
            bounded=False,
        )
    root = crit * math.sqrt(discriminant)
    low, high = (mean_c * mean_b - root) / a, (mean_c * mean_b + root) / a
    return RatioInterval(
        ratio, low, high, level, "fieller", df, nc, nb, mean_c, mean_b, "means"
    )


def paired_ratio_interval(
    current: Iterable[float] | np.ndarray,
    baseline: Iterable[float] | np.ndarray,
    confidence: float = defaults.CONFIDENCE,
) -> RatioInterval:
    """Interval of the ratio from paired trials: Student's t on the log ratios of the pairs.

    Pair i holds two trials taken next to each other, so slow drift of the machine (clock
    boosts, other load) multiplies both and cancels in log(current_i / baseline_i); the paired
    analysis (Student 1908) then works on what is left. Estimand: the ratio of geometric means.
    """
    level = check_confidence(confidence)
    xc, xb = as_sample(current, minimum=2), as_sample(baseline, minimum=2)
    if xc.size != xb.size:
        raise TrialError(
            f"paired trials need the same count on both sides, got {xc.size} and {xb.size}"
        )
    if np.any(xc <= 0.0) or np.any(xb <= 0.0):
        raise TrialError("paired log ratios need positive trials (timings); got zero or negative")
    d = np.log(xc) - np.log(xb)
    mean_d, sd_d = location_scale(d)
    n = d.size
    df = float(n - 1)
    reach = _two_sided_t(level, df) * sd_d / math.sqrt(n)
    mean_c, _ = location_scale(xc)
    mean_b, _ = location_scale(xb)
    return RatioInterval(
        math.exp(mean_d), math.exp(mean_d - reach), math.exp(mean_d + reach), level, "paired-log",
        df, n, n, mean_c, mean_b, "paired geometric means",
    )


def paired_mean_ratio_interval(
    current: Iterable[float] | np.ndarray,
    baseline: Iterable[float] | np.ndarray,
    confidence: float = defaults.CONFIDENCE,
) -> RatioInterval:
    """Interval of the ratio of means ``sum(current) / sum(baseline)`` from paired trials.

    Fieller's theorem for paired data (Fieller 1954): the set of rho with
    ``(mean(c) - rho mean(b))^2 <= t^2 var(c_i - rho b_i) / n``, t with n - 1 df. Exact for
    bivariate-normal pairs. Every call counts, so a slow path that some calls take moves the
    estimate (the ratio of geometric means or of quickest rounds hides it). Drift of the whole
    machine multiplies both sides of a pair alike, c_i = s_i a, b_i = s_i b, and cancels in the
    pivot c_i - rho b_i at rho = a / b, as in the log-ratio analysis.
    """
    level = check_confidence(confidence)
    xc, xb = as_sample(current, minimum=2), as_sample(baseline, minimum=2)
    if xc.size != xb.size:
        raise TrialError(
            f"paired trials need the same count on both sides, got {xc.size} and {xb.size}"
        )
    n = xc.size
    mean_c, mean_b = float(np.mean(xc)), float(np.mean(xb))
    if mean_b <= 0.0:
        raise TrialError("the ratio of paired means needs a positive baseline mean (timings)")
    cov = np.cov(np.vstack([xc, xb]), ddof=1)
    vc, vb, vcb = float(cov[0, 0]) / n, float(cov[1, 1]) / n, float(cov[0, 1]) / n
    df = float(n - 1)
    crit = _two_sided_t(level, df)
    t2 = crit**2
    ratio = mean_c / mean_b
    # Quadratic in rho: (m_b^2 - t^2 v_b) rho^2 - 2 (m_c m_b - t^2 v_cb) rho + (m_c^2 - t^2 v_c) <= 0.
    a = mean_b**2 - t2 * vb
    half_b = mean_c * mean_b - t2 * vcb
    c = mean_c**2 - t2 * vc
    discriminant = half_b**2 - a * c
    if a <= 0.0 or discriminant < 0.0:
        return RatioInterval(
            ratio, -math.inf, math.inf, level, "paired-fieller", df, n, n, mean_c, mean_b,
            "paired means", bounded=False,
        )
    root = math.sqrt(discriminant)
    return RatioInterval(
        ratio, (half_b - root) / a, (half_b + root) / a, level, "paired-fieller", df, n, n,
        mean_c, mean_b, "paired means",
    )


def side_blind_outliers(
    first: np.ndarray,
    second: np.ndarray,
    *,
    fence: float = INTERRUPTION_FENCE,
    alpha: float = SIDE_BLIND_ALPHA,
) -> np.ndarray:
    """Which rounds an interruption of the machine spoiled: a boolean mask over the rounds.

    ``first`` and ``second`` hold one measurement per round (any shape, the same for both).
    Interference from the rest of the machine does not know which callable runs, and the order
    within a round is random, so its long measurements fall on both sides alike; a slow path
    belongs to one callable. A measurement above ``fence`` times its side's median is a
    candidate; the candidates' rounds are dropped unless a two-sided binomial test (p = 1/2,
    common practice) at ``alpha`` says they pile up on one side, in which case they are a
    property of that callable and all are kept. Candidates too few to tell (one or two) are
    taken for interruptions: a slow path that rare and that long is below what n pairs resolve.
    """
    from scipy.stats import binomtest

    a, b = np.asarray(first, dtype=float), np.asarray(second, dtype=float)
    long_a = a > fence * np.median(a)
    long_b = b > fence * np.median(b)
    k_a, k_b = int(np.count_nonzero(long_a)), int(np.count_nonzero(long_b))
    if k_a + k_b == 0 or binomtest(k_a, k_a + k_b, 0.5).pvalue < alpha:
        return np.zeros(a.shape, dtype=bool)
    return np.asarray(long_a | long_b)


def judge_ratio(interval: RatioInterval, low: float = -math.inf, high: float = math.inf) -> Verdict:
    """PASS when the ratio interval lies inside ``[low, high]``, FAIL when wholly outside it,
    UNDECIDED when it straddles an edge or is unbounded."""
    if low > high:
        raise TrialError(f"the ratio band's low edge {low!r} lies above its high edge {high!r}")
    if interval.high < low or interval.low > high:
        return Verdict.FAIL
    if low <= interval.low and interval.high <= high and interval.bounded:
        return Verdict.PASS
    return Verdict.UNDECIDED


def parse_fraction(text: str | float, what: str) -> float:
    """A relative amount written ``"5%"`` or ``0.05``; refuses negative or unreadable values,
    and a bare number above 1, which is almost always a percentage written without its sign."""
    from meanband.units import read_fraction

    try:
        value, percent = read_fraction(text, what)
    except TrialError:
        raise TrialError(
            f"cannot read {what}={text!r} as a relative amount; write e.g. '5%' or 0.05"
        ) from None
    if not math.isfinite(value) or value < 0.0:
        raise TrialError(f"{what} must be a finite amount >= 0, got {text!r}; write e.g. '5%'")
    if not percent and value > 1.0:
        raise TrialError(
            f"{what}={text!r} would mean {value:.0%}: a bare number is a fraction (0.05 is 5%); "
            f"did you mean '{value:g}%'? Write an amount above 100% with its sign, e.g. '150%'"
        )
    return value


@dataclass(frozen=True)
class RatioCheck:
    """The verdict on ``first / second`` against ``[at_least, at_most]``."""

    verdict: Verdict
    interval: RatioInterval
    at_least: float
    at_most: float

    @property
    def passed(self) -> bool:
        """True for PASS only."""
        return self.verdict is Verdict.PASS


def check_ratio(
    first: np.ndarray,
    second: np.ndarray,
    *,
    at_most: float | None = None,
    at_least: float | None = None,
    confidence: float = defaults.CONFIDENCE,
) -> RatioCheck:
    """Judge the ratio of paired means ``first / second``: PASS when its two-sided interval
    (``paired_mean_ratio_interval``) lies in ``[at_least, at_most]``, FAIL when wholly outside,
    UNDECIDED when it straddles an edge."""
    if at_most is None and at_least is None:
        raise TrialError(
            "a comparison needs a limit: at_most= (e.g. 1.05 for 'at most 5% slower') "
            "and/or at_least="
        )
    high = math.inf if at_most is None else _limit(at_most, "at_most")
    low = -math.inf if at_least is None else _limit(at_least, "at_least")
    if low > high:
        raise TrialError(f"at_least={at_least!r} lies above at_most={at_most!r}; swap them")
    interval = paired_mean_ratio_interval(first, second, confidence)
    return RatioCheck(judge_ratio(interval, low, high), interval, low, high)


def _limit(value: Any, name: str) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise TrialError(f"{name} must be a ratio such as 1.05, got {value!r}") from None
    if not math.isfinite(number) or number <= 0:
        raise TrialError(f"{name} must be a positive finite ratio such as 1.05, got {value!r}")
    return number
