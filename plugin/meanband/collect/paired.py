"""In-run comparison: time two callables in interleaved pairs and judge the ratio of their times.

On a shared CI machine the speed of the whole machine drifts (frequency scaling, neighbours,
thermal limits) by more than the effects worth gating on, so an absolute budget or a comparison
with a run from yesterday is at the mercy of that drift. Timing the two callables next to each
other, in a random order within each pair, exposes both to the same drift; the log ratio of each
pair cancels it, and Student's t on those paired log ratios (Student 1908) gives an interval of
the ratio whose width reflects only the noise that is left.
"""

from __future__ import annotations

import gc
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband.collect.clock import get_clock
from meanband.errors import TrialError
from meanband.stats.bands import Verdict
from meanband.stats.ratio import RatioInterval, judge_ratio, paired_ratio_interval

__all__ = ["PairedTimes", "RatioCheck", "check_ratio", "compare_callables", "time_pairs"]

#: Each timed measurement lasts at least this long (calls are batched to reach it), so the
#: clock's resolution and the cost of reading it stay small next to what is measured.
MIN_MEASUREMENT = 20e-6
_MAX_BATCH = 1_000_000


@dataclass(frozen=True)
class PairedTimes:
    """Seconds per call of two callables, pair by pair (each side's quickest round), and
    whether ``first`` ran first in the pair's first round."""

    first: np.ndarray
    second: np.ndarray
    first_went_first: np.ndarray
    batch: int


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


def time_pairs(
    first: Callable[[], Any],
    second: Callable[[], Any],
    n: int,
    *,
    repeats: int = 5,
    warmup: int = 2,
    seed: int | None = None,
    clock: Callable[[], int] | None = None,
) -> PairedTimes:
    """Time ``n`` pairs; each pair is ``repeats`` rounds of one call batch of each callable, in
    a random order per round, and keeps each side's quickest round.

    Interference from the rest of the machine (preemption, interrupts) only ever adds time, so
    the quickest of a few adjacent rounds is the pair's undisturbed time and one descheduling
    cannot throw a pair off (common practice in timing, from memory). Calls are batched (the
    same batch size for both) so each measurement lasts at least ``MIN_MEASUREMENT``; ``warmup``
    pairs run first and are dropped. Garbage collection is off while timing. ``clock`` reads
    integer nanoseconds; by default the wall clock of ``meanband.collect.clock``.
    """
    if clock is None:
        clock = get_clock("wall").read
    for value, what, least in ((n, "n", 2), (repeats, "repeats", 1), (warmup, "warmup", 0)):
        if isinstance(value, bool) or not isinstance(value, int) or value < least:
            raise TrialError(f"a comparison needs {what} >= {least} (a whole number), got {value!r}")
    rng = np.random.default_rng(seed)
    batch = _batch_size(first, second, clock)
    total = n + warmup
    order = rng.random((total, repeats)) < 0.5
    a = np.empty((total, repeats))
    b = np.empty((total, repeats))
    gc_was_on = gc.isenabled()
    gc.collect()
    gc.disable()
    try:
        for i in range(total):
            for j in range(repeats):
                if order[i, j]:
                    a[i, j] = _measure(first, batch, clock)
                    b[i, j] = _measure(second, batch, clock)
                else:
                    b[i, j] = _measure(second, batch, clock)
                    a[i, j] = _measure(first, batch, clock)
    finally:
        if gc_was_on:
            gc.enable()
    scale = 1e-9 / batch
    return PairedTimes(
        a[warmup:].min(axis=1) * scale, b[warmup:].min(axis=1) * scale,
        order[warmup:, 0].copy(), batch,
    )


def _measure(fn: Callable[[], Any], batch: int, clock: Callable[[], int]) -> float:
    start = clock()
    for _ in range(batch):
        fn()
    return float(clock() - start)


def _batch_size(
    first: Callable[[], Any], second: Callable[[], Any], clock: Callable[[], int]
) -> int:
    """Calls per measurement so that the quicker callable takes at least MIN_MEASUREMENT."""
    quickest = min(_measure(first, 1, clock), _measure(second, 1, clock)) * 1e-9
    if quickest >= MIN_MEASUREMENT:
        return 1
    return min(math.ceil(MIN_MEASUREMENT / max(quickest, 1e-9)), _MAX_BATCH)


def check_ratio(
    first: np.ndarray,
    second: np.ndarray,
    *,
    at_most: float | None = None,
    at_least: float | None = None,
    confidence: float = 0.95,
) -> RatioCheck:
    """Judge the paired ratio ``first / second``: PASS when its two-sided interval lies in
    ``[at_least, at_most]``, FAIL when wholly outside, UNDECIDED when it straddles an edge."""
    if at_most is None and at_least is None:
        raise TrialError(
            "a comparison needs a limit: at_most= (e.g. 1.05 for 'at most 5% slower') "
            "and/or at_least="
        )
    high = math.inf if at_most is None else _limit(at_most, "at_most")
    low = -math.inf if at_least is None else _limit(at_least, "at_least")
    if low > high:
        raise TrialError(f"at_least={at_least!r} lies above at_most={at_most!r}; swap them")
    interval = paired_ratio_interval(first, second, confidence)
    return RatioCheck(judge_ratio(interval, low, high), interval, low, high)


def _limit(value: Any, name: str) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise TrialError(f"{name} must be a ratio such as 1.05, got {value!r}") from None
    if not math.isfinite(number) or number <= 0:
        raise TrialError(f"{name} must be a positive finite ratio such as 1.05, got {value!r}")
    return number


def compare_callables(
    new: Callable[[], Any],
    old: Callable[[], Any],
    *,
    n: int,
    at_most: float | None,
    at_least: float | None,
    confidence: float,
    power: float = 0.9,
    repeats: int = 5,
    warmup: int = 2,
    seed: int | None = None,
    name: str | None = None,
    nodeid: str = "",
    settings: dict[str, Any] | None = None,
    clock: str = "wall",
) -> tuple[RatioCheck, dict[str, Any], str]:
    """Time ``new`` against ``old`` and judge the ratio; return the check, its result row
    (builtin types only) and the message a failure should carry."""
    from meanband.stats.diagnostics import diagnose
    from meanband.stats.planning import trials_needed

    # Validate the limits before spending time on the callables.
    check_ratio(np.ones(2), np.ones(2), at_most=at_most, at_least=at_least)
    timer = get_clock(clock)
    times = time_pairs(new, old, n, repeats=repeats, warmup=warmup, seed=seed, clock=timer.read)
    result = check_ratio(
        times.first, times.second, at_most=at_most, at_least=at_least, confidence=confidence
    )
    iv = result.interval
    logs = np.log(times.first) - np.log(times.second)
    sd_log = float(np.std(logs, ddof=1))
    suggested = None
    if result.verdict is Verdict.UNDECIDED and iv.bounded:
        edges = [e for e in (result.at_least, result.at_most) if math.isfinite(e)]
        margin = min(abs(math.log(iv.ratio) - math.log(e)) for e in edges)
        suggested = trials_needed(
            sd_log, margin=margin, confidence=confidence, side="two-sided", power=power
        ) if margin > 0 and sd_log > 0 else None
    new_name, old_name = _name(new), _name(old)
    label = name or f"{new_name} / {old_name}"
    interval = {
        "mean": iv.ratio, "low": iv.low, "high": iv.high, "confidence": iv.confidence,
        "side": "two-sided", "n": iv.n_current, "df": iv.df,
        # Spread on the ratio scale by the delta method, for display precision only.
        "sd": iv.ratio * sd_log, "sem": iv.ratio * sd_log / math.sqrt(iv.n_current),
        "method": iv.method, "critical": math.nan, "estimand": "time ratio",
    }
    decision = {
        "verdict": result.verdict.value,
        "band": {"low": result.at_least, "high": result.at_most, "unit": "x"},
        "interval": interval,
        "counter": None,
        "diagnostics": diagnose(logs).to_dict(),
        "suggested_n": suggested,
        "unit": "x",
    }
    row = {
        "nodeid": nodeid,
        "series": label,
        "kind": "check",
        "unit": "x",
        "source": "compare",
        "values": (times.first / times.second).tolist(),
        "warmup": [],
        "decision": decision,
        "notes": [],
        "settings": dict(settings or {}),
        "timing": {
            "clock": timer.name, "k": times.batch, "interleaved": True, "repeats": repeats,
        },
        "comparison": {
            "new": new_name,
            "old": old_name,
            "new_values": times.first.tolist(),
            "old_values": times.second.tolist(),
            "new_first": int(np.count_nonzero(times.first_went_first)),
            "ratio": iv.to_dict(),
            "at_most": None if math.isinf(result.at_most) else result.at_most,
            "at_least": None if math.isinf(result.at_least) else result.at_least,
        },
    }
    return result, row, _message(result, label, suggested)


def _message(result: RatioCheck, label: str, suggested: int | None) -> str:
    iv = result.interval
    level = f"{iv.confidence * 100:g}%"
    allowed = _allowed(result.at_least, result.at_most)
    head = (
        f"{label}: time ratio {iv.ratio:.4g}x, {level} interval [{iv.low:.4g}, {iv.high:.4g}] "
        f"from {iv.n_current} interleaved pairs; allowed {allowed}"
    )
    if result.verdict is Verdict.PASS:
        return head + ": PASS"
    if result.verdict is Verdict.FAIL:
        side = "above" if iv.low > result.at_most else "below"
        return f"{head}: FAIL, the whole interval lies {side} the allowed range"
    more = (
        f"; about {suggested} pairs would likely decide it" if suggested
        else "; the ratio sits on the limit, more pairs are unlikely to decide it"
    )
    return f"{head}: UNDECIDED, the interval straddles a limit{more}"


def _allowed(low: float, high: float) -> str:
    if math.isinf(low):
        return f"at most {high:g}x"
    if math.isinf(high):
        return f"at least {low:g}x"
    return f"{low:g}x to {high:g}x"


def _name(fn: Callable[..., Any]) -> str:
    return getattr(fn, "__name__", None) or type(fn).__name__
