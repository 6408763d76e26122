"""Run-to-run noise: the two-level model of a check's trials, and the ratio interval it gives.

A timing is noisy at two levels: trials scatter inside a run, and whole runs move against each
other (CPU frequency, neighbours, cache and memory layout). With trials ``y_ij`` (logs of
timings) of run ``j``, the model is ``y_ij = mu + a_j + e_ij`` with run effects ``a_j`` of
variance ``tau^2`` and trial noise ``e_ij`` of variance ``sigma_j^2`` (Kalibera and Jones 2013,
"Rigorous benchmarking in reasonable time", use the same hierarchy). ``tau^2`` is estimated by
the method of moments of the one-way random-effects analysis of variance (Searle, Casella and
McCulloch 1992, ch. 3): the sample variance of the run means less the part the trial noise
explains. A new run is compared with the mean of the baseline runs; its difference carries
``tau^2`` once for the new run and ``tau^2 / K`` for the mean of K baseline runs.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import TrialError
from meanband.stats.sample import as_sample, check_confidence

__all__ = [
    "ASSUMED_RUN_NOISE",
    "Between",
    "RunLevel",
    "TwoLevelRatio",
    "between_runs",
    "pool_between",
    "position_shift",
    "run_level",
    "satterthwaite_df",
    "two_level_ratio",
]

#: The run-to-run spread assumed when nothing measured it (one stored run, no calibration):
#: 3% on the log scale; docs/history.md gives the A/A figures behind it.
ASSUMED_RUN_NOISE = defaults.ASSUMED_RUN_NOISE


@dataclass(frozen=True, slots=True)
class RunLevel:
    """One run's summary on the comparison scale: mean, within-run variance and count."""

    mean: float
    variance: float
    n: int

    @property
    def mean_variance(self) -> float:
        """The variance of this run's mean from trial noise alone."""
        return self.variance / self.n


@dataclass(frozen=True, slots=True)
class Between:
    """An estimate of the between-run variance ``tau^2`` and where it came from.

    ``source`` is ``"baseline runs"`` (this check's stored runs), ``"suite"`` (pooled over the
    run's checks), ``"calibration"`` (a stored A/A noise floor) or ``"assumed"``
    (:data:`ASSUMED_RUN_NOISE`); ``df`` is inf for an assumed value.
    """

    variance: float
    df: float
    source: str
    runs: int

    @property
    def sd(self) -> float:
        return math.sqrt(self.variance)


@dataclass(frozen=True, slots=True)
class TwoLevelRatio:
    """Interval of current / baseline when the baseline is a set of runs.

    ``difference`` and ``se`` are on the log scale (``log=True``) or relative to the baseline
    mean; ``df`` is the Welch-Satterthwaite degrees of freedom of all the variance parts.
    """

    ratio: float
    low: float
    high: float
    confidence: float
    difference: float
    se: float
    df: float
    log: bool
    between_sd: float
    between_source: str
    baseline_runs: int
    n_current: int
    n_baseline: int
    mean_current: float
    mean_baseline: float

    def one_sided_p(self, limit: float, *, above: bool) -> float:
        """P-value of "the ratio is at most ``limit``" (``above``) or "at least ``limit``"."""
        from scipy import stats

        edge = self._scale(limit)
        if self.se == 0.0:
            beyond = self.difference > edge if above else self.difference < edge
            return 0.0 if beyond else 1.0
        t = (self.difference - edge) / self.se
        return float(stats.t.sf(t, self.df) if above else stats.t.cdf(t, self.df))

    def _scale(self, ratio: float) -> float:
        if self.log:
            return math.log(ratio) if ratio > 0 else -math.inf
        return ratio - 1.0

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only, for the row's ``baseline`` entry."""
        return {k: (float(v) if isinstance(v, float | np.floating) else v)
                for k, v in asdict(self).items()}


def run_level(values: Sequence[float] | np.ndarray, *, log: bool, scale: float = 1.0) -> RunLevel:
    """A run's trials summarised on the comparison scale (logs, or values / ``scale``)."""
    x = as_sample(values, minimum=2)
    y = np.log(x) if log else x / scale
    return RunLevel(float(np.mean(y)), float(np.var(y, ddof=1)), int(y.size))


def between_runs(runs: Sequence[RunLevel]) -> Between | None:
    """``tau^2`` from this check's own runs by the ANOVA method of moments, or None for one run.

    With equal counts ``n`` this is ``(MSB - MSW) / n`` of the one-way random-effects ANOVA;
    with unequal counts each run mean's own trial variance is taken off. A negative estimate is
    truncated at zero (the runs agree better than their trial noise says).
    """
    if len(runs) < 2:
        return None
    means = np.array([r.mean for r in runs])
    spread = float(np.var(means, ddof=1))
    noise = float(np.mean([r.mean_variance for r in runs]))
    return Between(max(0.0, spread - noise), float(len(runs) - 1), "baseline runs", len(runs))


def pool_between(estimates: Sequence[Between]) -> Between | None:
    """One ``tau^2`` for the whole suite: the df-weighted mean of the checks' estimates."""
    usable = [e for e in estimates if math.isfinite(e.df) and e.df > 0]
    if not usable:
        return None
    df = sum(e.df for e in usable)
    variance = sum(e.variance * e.df for e in usable) / df
    return Between(variance, df, "suite", max(e.runs for e in usable))


def two_level_ratio(
    current: Sequence[float] | np.ndarray,
    baseline_runs: Sequence[Sequence[float] | np.ndarray],
    between: Between,
    *,
    log: bool,
    confidence: float = defaults.CONFIDENCE,
) -> TwoLevelRatio:
    """Two-sided interval of current / baseline, where the baseline is the mean of its runs.

    ``Var(d) = tau^2 (1 + 1/K) + s_c^2 / n_c + sum_j s_j^2 / n_j / K^2`` with ``d`` the current
    run mean less the mean of the K baseline run means; its degrees of freedom combine the parts
    by Welch-Satterthwaite (Satterthwaite 1946). With ``tau^2 = 0`` and one baseline run this is
    Welch's interval of the two run means.
    """
    level = check_confidence(confidence)
    if not baseline_runs:
        raise TrialError("a baseline needs at least one stored run")
    raw_current = as_sample(current, minimum=2)
    raw_runs = [as_sample(run, minimum=2) for run in baseline_runs]
    if log and (np.any(raw_current <= 0) or any(np.any(r <= 0) for r in raw_runs)):
        raise TrialError("the log scale needs positive trials; compare on the relative scale")
    scale = 1.0
    if not log:
        scale = abs(float(np.mean([np.mean(r) for r in raw_runs])))
        if scale == 0.0:
            raise TrialError("the baseline mean is zero, so a relative change is undefined")
    now = run_level(raw_current, log=log, scale=scale)
    then = [run_level(r, log=log, scale=scale) for r in raw_runs]
    k = len(then)
    difference = now.mean - float(np.mean([r.mean for r in then]))
    parts = [
        (between.variance * (1.0 + 1.0 / k), between.df),
        (now.mean_variance, float(now.n - 1)),
        (sum(r.mean_variance for r in then) / k**2, float(sum(r.n - 1 for r in then))),
    ]
    variance = sum(v for v, _ in parts)
    se = math.sqrt(variance)
    df = satterthwaite_df(parts)
    from scipy import stats

    half = float(stats.t.ppf(0.5 + level / 2.0, df)) * se if se > 0 else 0.0
    if log:
        ratio, low, high = (math.exp(difference), math.exp(difference - half),
                            math.exp(difference + half))
    else:
        ratio, low, high = 1.0 + difference, 1.0 + difference - half, 1.0 + difference + half
    mean_current = float(np.mean(raw_current))
    mean_baseline = float(np.mean([np.mean(r) for r in raw_runs]))
    return TwoLevelRatio(
        ratio, low, high, level, difference, se, df, log, between.sd, between.source, k,
        now.n, sum(r.n for r in then), mean_current, mean_baseline,
    )


def satterthwaite_df(parts: Sequence[tuple[float, float]]) -> float:
    """Welch-Satterthwaite degrees of freedom of a sum of variance parts ``(variance, df)``:
    :func:`meanband.stats.uncertainty.welch_satterthwaite` on their standard deviations, and
    infinite when every part is zero (nothing is estimated)."""
    from meanband.stats.uncertainty import welch_satterthwaite

    if sum(v for v, _ in parts) <= 0.0:
        return math.inf
    return welch_satterthwaite([math.sqrt(v) for v, _ in parts], [df for _, df in parts])


def position_shift(runs: Sequence[Sequence[float] | np.ndarray]) -> tuple[float, float] | None:
    """Whether position in a run biases a check: the mean log change from the first half of
    each run's trials to the second, and the two-sided p-value of a one-sample t test of those
    changes across runs. None with fewer than two runs of four trials or more."""
    shifts = []
    for run in runs:
        x = np.asarray(run, dtype=np.float64)
        if x.size < 4 or np.any(x <= 0):
            continue
        half = x.size // 2
        shifts.append(float(np.mean(np.log(x[half:])) - np.mean(np.log(x[:half]))))
    if len(shifts) < 2:
        return None
    from scipy import stats

    mean = float(np.mean(shifts))
    if float(np.std(shifts, ddof=1)) == 0.0:
        return mean, (1.0 if mean == 0.0 else 0.0)
    return mean, float(stats.ttest_1samp(shifts, 0.0).pvalue)
