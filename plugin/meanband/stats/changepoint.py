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
permutation test of the *maximum* two-sample t statistic over every split of its local segment
(the runs between its neighbouring change points): under "no change there" the runs of that
segment are exchangeable, so shuffling them and taking the largest statistic over all splits
reproduces the selection (the max-statistic method of Westfall & Young, 1993; for change points
see Antoch & Hušková, 2001). The p-values of the change points of one series are then adjusted
by Holm's step-down method (Holm, 1979), so the chance of confirming any false change point in a
series is at most ``alpha``.

The local segments are themselves bounded by change points found on the same data, which can
make a stretch of noise look like a shift in a short segment. So a series first has to pass the
same max-t permutation test over all of its runs (is there any change at all?) before any of its
change points is confirmed: a gate that keeps the chance of a false confirmation in a series with
no change at most ``alpha`` (a closed test: Marcus, Peritz & Gabriel, 1976).
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
    _statistic, series_p = _max_t_test(signal, MIN_SEGMENT, permutations, rng)
    edges = [0, *breaks, signal.size]
    raw: list[tuple[int, float, float]] = []
    for j, where in enumerate(breaks, start=1):
        segment = signal[edges[j - 1]:edges[j + 1]]
        statistic, p_value = _max_t_test(segment, where - edges[j - 1], permutations, rng)
        raw.append((where, statistic, p_value))
    adjusted = _holm([p for _w, _s, p in raw])
    points = []
    for (where, statistic, p_value), p_adj, j in zip(raw, adjusted, range(1, len(raw) + 1),
                                                     strict=True):
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
            verdict=SHIFT if max(p_adj, series_p) <= alpha else NOT_ESTABLISHED,
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


def _max_t_test(
    segment: np.ndarray, split: int, permutations: int, rng: np.random.Generator
) -> tuple[float, float]:
    """The t statistic at ``split`` and the permutation p-value of the max over all splits."""
    centred = segment - segment.mean()  # exact cancellation for shuffles of large values
    observed_all = _split_statistics(centred[None, :])[0]
    observed = float(observed_all[split - MIN_SEGMENT])
    largest = float(observed_all.max())
    shuffled = rng.permuted(np.broadcast_to(centred, (permutations, centred.size)), axis=1)
    null = _split_statistics(shuffled).max(axis=1)
    # The split PELT chose is judged by the largest statistic of its segment (normally itself).
    exceed = int(np.count_nonzero(null >= largest * (1.0 - 1e-12)))
    return observed, (1.0 + exceed) / (1.0 + permutations)


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
