"""Paired timing: two callables timed in interleaved pairs, in a random order within each round.

On a shared CI machine the speed of the whole machine drifts (frequency scaling, neighbours,
thermal limits) by more than the effects worth gating on. Timing the two callables next to each
other exposes both to the same drift, which cancels in the ratio of each pair. The trials run on
the timing engine's own loop, calibration and garbage-collection handling (``timing.py``).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband.collect.clock import get_clock
from meanband.collect.timing import bind_call, calibrate, quiet_gc, trial_ns
from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.ratio import side_blind_outliers
from meanband.stats.sample import ArrayEquality

__all__ = ["MAX_BATCH", "MIN_MEASUREMENT", "PairedTimes", "time_pairs"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: Each timed measurement lasts at least this long (calls are batched to reach it), so the
#: clock's resolution and the cost of reading it stay small next to what is measured.
MIN_MEASUREMENT = 20e-6
#: Most calls one measurement batches: enough for any callable Python can call (a call costs
#: tens of nanoseconds), few enough that a clock standing still cannot stall calibration.
MAX_BATCH = 100_000


@dataclass(frozen=True, eq=False)
class PairedTimes(ArrayEquality):
    """Seconds per call of two callables, pair by pair: the mean over the pair's rounds of all
    calls, after dropping rounds an interruption spoiled (``dropped`` counts them); whether
    ``first`` ran first in the pair's first round; and every round's measurement (``*_rounds``,
    seconds per call, one row a pair, NaN where dropped)."""

    first: np.ndarray
    second: np.ndarray
    first_went_first: np.ndarray
    batch: int
    first_rounds: np.ndarray
    second_rounds: np.ndarray
    dropped: int


def time_pairs(
    first: Callable[..., Any],
    second: Callable[..., Any],
    n: int,
    *,
    repeats: int = 5,
    warmup: int = 2,
    seed: int | None = None,
    clock: Callable[[], int] | None = None,
    args: tuple[Any, ...] = (),
    kwargs: dict[str, Any] | None = None,
    setup: Callable[[], Any] | None = None,
) -> PairedTimes:
    """Time ``n`` pairs; each pair is ``repeats`` rounds of one call batch of each callable, in
    a random order per round, and keeps the mean of every round's calls.

    The mean of all calls is what the comparison bounds: a quickest round would hide a slow
    path that some calls take. Interruptions of the machine (a descheduling costs milliseconds)
    are told apart from a slow path because they fall on both sides alike: rounds they spoil
    are dropped by ``meanband.stats.ratio.side_blind_outliers``. Calls are batched (the
    same batch size for both, calibrated by the timing engine) so each measurement lasts at least
    ``MIN_MEASUREMENT``; ``warmup`` pairs run first and are dropped. Garbage collection is off
    while timing. ``clock`` reads integer nanoseconds; by default the wall clock. Both
    callables are called with ``*args, **kwargs``; ``setup`` runs before every call, outside
    the timed region, and a value it returns (not None) is passed as the first argument, as in
    ``trials.time``.
    """
    read = get_clock("wall").read if clock is None else clock
    for value, what, least in ((n, "n", 2), (repeats, "repeats", 1), (warmup, "warmup", 0)):
        if isinstance(value, bool) or not isinstance(value, int) or value < least:
            raise TrialError(f"a comparison needs {what} >= {least} (a whole number), got {value!r}")
    rng = np.random.default_rng(seed)
    total = n + warmup
    order = rng.random((total, repeats)) < 0.5
    a = np.empty((total, repeats))
    b = np.empty((total, repeats))
    call_a, runner_a = bind_call(first, args, kwargs, setup)
    call_b, runner_b = bind_call(second, args, kwargs, setup)
    with quiet_gc():
        target = MIN_MEASUREMENT * 1e9
        batch = max(calibrate(call_a, read, target, max_loops=MAX_BATCH, runner=runner_a),
                    calibrate(call_b, read, target, max_loops=MAX_BATCH, runner=runner_b))
        for i in range(total):
            for j in range(repeats):
                if order[i, j]:
                    a[i, j] = trial_ns(call_a, batch, read, runner_a)
                    b[i, j] = trial_ns(call_b, batch, read, runner_b)
                else:
                    b[i, j] = trial_ns(call_b, batch, read, runner_b)
                    a[i, j] = trial_ns(call_a, batch, read, runner_a)
    scale = 1e-9 / batch
    return paired_means(a[warmup:] * scale, b[warmup:] * scale, order[warmup:, 0].copy(), batch)


def paired_means(
    first_rounds: np.ndarray, second_rounds: np.ndarray, first_went_first: np.ndarray, batch: int
) -> PairedTimes:
    """Pair means of the rounds no interruption spoiled; a pair left with no round is dropped."""
    spoiled = side_blind_outliers(first_rounds, second_rounds)
    a = np.where(spoiled, np.nan, first_rounds)
    b = np.where(spoiled, np.nan, second_rounds)
    whole = ~np.all(spoiled, axis=1)
    return PairedTimes(
        np.nanmean(a[whole], axis=1), np.nanmean(b[whole], axis=1), first_went_first[whole],
        batch, a, b, int(np.count_nonzero(spoiled)),
    )
