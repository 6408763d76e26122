"""Progress of a long series taken one value at a time (a slow callable, an instrument)."""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Any

from meanband.collect.timing import PROGRESS_AFTER, PROGRESS_EVERY, Progress
from meanband.errors import hide_plugin_frames

__all__ = ["take_with_progress"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


def take_with_progress(
    take_one: Callable[[int], Any], count: int, progress: Progress | None,
    clock: Callable[[], float] = time.perf_counter,
) -> list[Any]:
    """``take_one(i)`` for i in 0..count-1; once the series has lasted ``PROGRESS_AFTER``
    seconds, ``progress(done, count, seconds)`` about every ``PROGRESS_EVERY`` seconds and once
    at the end, between values (never inside one)."""
    out: list[Any] = []
    start = clock()
    due = start + PROGRESS_AFTER
    reported = False
    for i in range(count):
        out.append(take_one(i))
        if progress is not None and i + 1 < count:
            now = clock()
            if now >= due:
                progress(i + 1, count, now - start)
                reported = True
                due = now + PROGRESS_EVERY
    if reported and progress is not None:
        progress(count, count, clock() - start)
    return out
