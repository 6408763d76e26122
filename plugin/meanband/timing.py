"""The timing engine: repeated timed trials of a callable, in seconds per call."""

from __future__ import annotations

import gc
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from meanband.units import parse_duration

__all__ = ["TimedRun", "time_trials"]


@dataclass(frozen=True)
class TimedRun:
    """Trials of one timing call: kept values, discarded warm-up values and details."""

    values: np.ndarray
    warmup: np.ndarray
    details: dict[str, Any] = field(default_factory=dict)


def time_trials(
    fn: Callable[..., Any],
    args: tuple[Any, ...],
    kwargs: dict[str, Any],
    *,
    n: int,
    warmup: int | str = 0,
) -> TimedRun:
    """Time ``n`` calls of ``fn(*args, **kwargs)`` one call per trial, after a warm-up.

    Garbage collection is done before and kept off during the trials, then restored.
    """
    clock = time.perf_counter_ns
    warm = _time_calls(fn, args, kwargs, _warmup_count(warmup, fn, args, kwargs), clock)
    gc_was_on = gc.isenabled()
    gc.collect()
    gc.disable()
    try:
        kept = _time_calls(fn, args, kwargs, n, clock)
    finally:
        if gc_was_on:
            gc.enable()
    return TimedRun(kept * 1e-9, warm * 1e-9, {"clock": "perf_counter_ns", "k": 1})


def _time_calls(
    fn: Callable[..., Any],
    args: tuple[Any, ...],
    kwargs: dict[str, Any],
    count: int,
    clock: Callable[[], int],
) -> np.ndarray:
    out = np.empty(count, dtype=np.float64)
    for i in range(count):
        start = clock()
        fn(*args, **kwargs)
        out[i] = clock() - start
    return out


def _warmup_count(
    warmup: int | str, fn: Callable[..., Any], args: tuple[Any, ...], kwargs: dict[str, Any]
) -> int:
    if isinstance(warmup, int):
        return warmup
    budget = parse_duration(warmup)
    start = time.perf_counter()
    fn(*args, **kwargs)
    once = max(time.perf_counter() - start, 1e-9)
    return max(int(budget / once), 1)
