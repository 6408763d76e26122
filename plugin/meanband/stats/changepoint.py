"""Change points in a series of run means: where a check got slower (or moved), and whether the
shift holds up once we allow for having picked the split on the same data.

Detection is PELT (Killick, Fearnhead & Eckley, 2012, JASA 107:1590) from the ``ruptures``
library (Truong, Oudre & Vayatis, 2020), with the least-squares cost of a change in mean and a
BIC-type penalty ``2 * sigma^2 * log(n)`` (Schwarz, 1978; the penalty Killick et al. use), where
sigma is a robust noise level from the median absolute difference of neighbouring runs, which a
change in mean barely moves. PELT is exact for that penalised cost and linear in the number of
runs in practice.

A split chosen to be where the series differs most always looks significant if it is then tested
as though it had been fixed beforehand. So each change point found is judged on its own with a
permutation test: its two-sample t statistic is referred to the distribution of the *maximum*
t statistic over every split of a shuffled stretch of runs. Under "no change in this stretch"
the runs are exchangeable, and the maximum over all splits reproduces the selection, whichever
split was picked (the max-statistic method of Westfall & Young, 1993; for change points see
Antoch & Hušková, 2001).

The stretches are bounded only by change points already confirmed, never by unconfirmed ones
(bounds found on the same data would let a short stretch of noise pass as a shift). The test
steps down: first the whole series (is there any change at all?), then, after each confirmed
change point, the stretches on either side, with a Bonferroni factor for the number of stretches
under test and Holm's running maximum across steps (Holm, 1979). PELT's other change points keep
their place with the verdict "not established".
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from meanband.errors import TrialError

__all__ = [
    "DEFAULT_ALPHA",
    "DEFAULT_PERMUTATIONS",
    "MIN_SEGMENT",
    "NOT_ESTABLISHED",
    "SHIFT",
    "ChangePoint",
    "Trend",
    "find_change_points",
]

#: A segment between change points holds at least this many runs.
MIN_SEGMENT = 3
#: Family-wise chance of confirming a change point that is not there, per series.
DEFAULT_ALPHA = 0.05
#: Shuffles per change point in the permutation test.
DEFAULT_PERMUTATIONS = 1999
#: Verdicts of one change point.
SHIFT = "shift"
NOT_ESTABLISHED = "not established"
METHOD = "PELT (ruptures, least-squares cost, BIC penalty); max-t permutation test, Holm"
# Normal consistency of the median absolute deviation (common practice: 1 / Phi^-1(0.75)).
_MAD_TO_SD = 1.482602218505602


@dataclass(frozen=True, slots=True)
class ChangePoint:
    """A change in a check's level, starting at run ``index`` of the series (0-based)."""

    index: int
    before: float
    after: float
    #: after / before - 1 on the log scale (a relative shift), after - before on the linear one.
    shift: float
    statistic: float
    #: Permutation p-value of the largest split statistic in the local segment.
    p_value: float
    #: Holm-adjusted over the change points of this series.
    adjusted_p: float
    verdict: str

    @property
    def confirmed(self) -> bool:
        return self.verdict == SHIFT


@dataclass(frozen=True, slots=True)
class Trend:
    """The change points of one series of run means, and how they were found."""

    means: tuple[float, ...]
    scale: str
    noise: float
    penalty: float
    alpha: float
    permutations: int
    change_points: tuple[ChangePoint, ...]
    #: Permutation p-value of "no change anywhere" (max-t over every split of the whole series).
    series_p: float = math.nan
    note: str | None = None
    method: str = METHOD

    @property
    def confirmed(self) -> tuple[ChangePoint, ...]:
        """The change points whose shift holds up after the correction for selection."""
        return tuple(c for c in self.change_points if c.confirmed)


def find_change_points(
    means: Sequence[float] | np.ndarray,
    *,
    scale: str = "auto",
    alpha: float = DEFAULT_ALPHA,
    permutations: int = DEFAULT_PERMUTATIONS,
    seed: int = 0,
) -> Trend:
    """Find change points in ``means`` (one mean per run, oldest first) and judge each.

    ``scale`` is ``"log"`` (shifts are relative: right for timings and other positive
    amounts), ``"linear"``, or ``"auto"`` (log when every mean is positive). ``seed`` fixes the
    shuffles, so the same history always gives the same verdicts.
    """
    values = np.asarray(means, dtype=np.float64)
    if values.ndim != 1:
        raise TrialError(f"run means must be one series, got an array of shape {values.shape}")
    if not np.all(np.isfinite(values)):
        raise TrialError("run means must be finite; drop runs whose mean is NaN or infinite")
    if not 0.0 < alpha < 1.0:
        raise TrialError(f"alpha must lie in (0, 1), got {alpha!r}")
    if permutations < 99:
        raise TrialError(f"use at least 99 permutations, got {permutations}")
    if scale == "auto":
        scale = "log" if values.size and np.all(values > 0) else "linear"
    if scale not in ("log", "linear"):
        raise TrialError(f"scale must be 'log', 'linear' or 'auto', got {scale!r}")
    if scale == "log" and np.any(values <= 0):
        raise TrialError("the log scale needs positive run means; use scale='linear'")
    signal = np.log(values) if scale == "log" else values
    common = dict(means=tuple(float(v) for v in values), scale=scale, alpha=float(alpha),
                  permutations=int(permutations))
    if signal.size < 2 * MIN_SEGMENT:
        return Trend(noise=math.nan, penalty=math.nan, change_points=(),
                     note=f"{signal.size} run(s): change points need at least "
                     f"{2 * MIN_SEGMENT}", **common)  # type: ignore[arg-type]
    noise = _noise_level(signal)
    if noise == 0.0:
        return Trend(noise=0.0, penalty=0.0, change_points=(),
                     note="every run has the same mean", **common)  # type: ignore[arg-type]
    penalty = 2.0 * noise**2 * math.log(signal.size)
    breaks = _pelt(signal, penalty)
    rng = np.random.default_rng(seed)
    nulls: dict[tuple[int, int], np.ndarray] = {}

    def test(where: int, start: int, stop: int) -> tuple[float, float]:
        if (start, stop) not in nulls:
            nulls[start, stop] = _null_maxima(signal[start:stop], permutations, rng)
        statistic = _statistic_at(signal[start:stop], where - start)
        return statistic, _p_value(statistic, nulls[start, stop])

    whole = signal - signal.mean()
    series_p = _p_value(float(_split_statistics(whole[None, :])[0].max()),
                        _null_maxima(signal, permutations, rng))
    # Step down: test every unconfirmed change point inside the stretch bounded by the change
    # points confirmed so far; confirm the strongest while it passes alpha over the number of
    # stretches under test (Bonferroni across stretches, Holm's running maximum across steps).
    confirmed: set[int] = set()
    judged: dict[int, tuple[float, float, float]] = {}
    running = 0.0
    while pending := [w for w in breaks if w not in confirmed]:
        bounds = sorted(confirmed | {0, signal.size})
        stretch = {w: (max(e for e in bounds if e < w), min(e for e in bounds if e > w))
                   for w in pending}
        stretches = len(set(stretch.values()))
        results = {w: test(w, *stretch[w]) for w in pending}
        for w, (statistic, p_value) in results.items():
            judged[w] = (statistic, p_value, max(running, min(1.0, stretches * p_value)))
        best = min(pending, key=lambda w: (results[w][1], -results[w][0]))  # ties: larger t
        running = judged[best][2]
        if running > alpha:
            break
        confirmed.add(best)
    edges = [0, *breaks, signal.size]
    points = []
    for j, where in enumerate(breaks, start=1):
        statistic, p_value, p_adj = judged[where]
        before = float(np.mean(values[edges[j - 1]:where]))
        after = float(np.mean(values[where:edges[j + 1]]))
        if scale == "log":
            left = float(np.mean(signal[edges[j - 1]:where]))
            right = float(np.mean(signal[where:edges[j + 1]]))
            before, after, shift = math.exp(left), math.exp(right), math.expm1(right - left)
        else:
            shift = after - before
        points.append(ChangePoint(
            index=where, before=before, after=after, shift=shift, statistic=statistic,
            p_value=p_value, adjusted_p=p_adj,
            verdict=SHIFT if where in confirmed else NOT_ESTABLISHED,
        ))
    return Trend(noise=noise, penalty=penalty, change_points=tuple(points), series_p=series_p,
                 **common)  # type: ignore[arg-type]


def _noise_level(signal: np.ndarray) -> float:
    """Robust run-to-run noise: MAD of first differences over sqrt(2); a shift in mean moves
    one difference only. Falls back to their standard deviation when over half are equal."""
    steps = np.diff(signal)
    mad = float(np.median(np.abs(steps - np.median(steps)))) * _MAD_TO_SD / math.sqrt(2.0)
    if mad > 0.0:
        return mad
    return float(np.std(steps)) / math.sqrt(2.0)


def _pelt(signal: np.ndarray, penalty: float) -> list[int]:
    """Indices where a new segment starts (excluding 0 and the end)."""
    import ruptures

    algo = ruptures.Pelt(model="l2", min_size=MIN_SEGMENT, jump=1).fit(signal.reshape(-1, 1))
    return [int(b) for b in algo.predict(pen=penalty)[:-1]]


def _split_statistics(rows: np.ndarray) -> np.ndarray:
    """|Welch-free pooled two-sample t| at every allowed split of every row of ``rows``."""
    n = rows.shape[1]
    k = np.arange(MIN_SEGMENT, n - MIN_SEGMENT + 1)
    sums, squares = np.cumsum(rows, axis=1), np.cumsum(rows**2, axis=1)
    total, total_sq = sums[:, -1:], squares[:, -1:]
    left_sum, left_sq = sums[:, k - 1], squares[:, k - 1]
    right_sum, right_sq = total - left_sum, total_sq - left_sq
    left_mean, right_mean = left_sum / k, right_sum / (n - k)
    within = (left_sq - k * left_mean**2) + (right_sq - (n - k) * right_mean**2)
    pooled = np.sqrt(np.maximum(within, 0.0) / (n - 2))
    scale = pooled * np.sqrt(1.0 / k + 1.0 / (n - k))
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.abs(left_mean - right_mean) / scale
    return np.where(scale > 0, t, np.where(np.abs(left_mean - right_mean) > 0, np.inf, 0.0))


def _statistic_at(segment: np.ndarray, split: int) -> float:
    centred = segment - segment.mean()
    return float(_split_statistics(centred[None, :])[0][split - MIN_SEGMENT])


def _null_maxima(segment: np.ndarray, permutations: int, rng: np.random.Generator) -> np.ndarray:
    """The largest split statistic of each of ``permutations`` shuffles of ``segment``."""
    centred = segment - segment.mean()  # exact cancellation for shuffles of large values
    shuffled = rng.permuted(np.broadcast_to(centred, (permutations, centred.size)), axis=1)
    maxima: np.ndarray = _split_statistics(shuffled).max(axis=1)
    return maxima


def _p_value(statistic: float, null_maxima: np.ndarray) -> float:
    """Permutation p-value (Phipson & Smyth, 2010: count the observed arrangement too)."""
    exceed = int(np.count_nonzero(null_maxima >= statistic * (1.0 - 1e-12)))
    return (1.0 + exceed) / (1.0 + null_maxima.size)


def _holm(p_values: Sequence[float]) -> list[float]:
    """Holm's step-down adjusted p-values (Holm, 1979), in the order given."""
    m = len(p_values)
    order = sorted(range(m), key=lambda i: p_values[i])
    adjusted = [0.0] * m
    running = 0.0
    for rank, i in enumerate(order):
        running = max(running, min(1.0, (m - rank) * p_values[i]))
        adjusted[i] = running
    return adjusted
