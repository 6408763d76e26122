"""An in-run comparison: time two callables in interleaved pairs, judge their time ratio, and
record the check as a result row."""

from __future__ import annotations

import functools
import math
from collections.abc import Callable
from typing import Any

import numpy as np

from meanband import defaults
from meanband.collect.clock import get_clock
from meanband.collect.paired import time_pairs
from meanband.errors import TrialError, hide_plugin_frames
from meanband.record.row import DecisionRecord, IntervalRecord, ResultRow, build_row
from meanband.stats.ratio import RatioCheck, check_ratio
from meanband.stats.verdict import Verdict

__all__ = ["callable_name", "compare_callables"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


def compare_callables(
    new: Callable[..., Any],
    old: Callable[..., Any],
    *,
    args: tuple[Any, ...] = (),
    kwargs: dict[str, Any] | None = None,
    setup: Callable[[], Any] | None = None,
    n: int,
    at_most: float | None,
    at_least: float | None,
    confidence: float,
    power: float = defaults.POWER,
    repeats: int = 5,
    warmup: int = 2,
    seed: int | None = None,
    name: str | None = None,
    nodeid: str = "",
    settings: dict[str, Any] | None = None,
    clock: str = "wall",
) -> tuple[RatioCheck, ResultRow, str]:
    """Time ``new`` against ``old`` and judge the ratio; return the check, its result row
    (builtin types only) and the message a failure should carry."""
    from meanband.stats.diagnostics import diagnose
    from meanband.stats.planning import trials_needed

    # Validate the limits and the names before spending time on the callables.
    check_ratio(np.ones(2), np.ones(2), at_most=at_most, at_least=at_least)
    new_name, old_name = callable_name(new), callable_name(old)
    if name is None and (new_name is None or old_name is None or new_name == old_name):
        unnamed = "a lambda or a callable without a name" if None in (new_name, old_name) else (
            f"two callables both called {new_name}")
        raise TrialError(
            f"cannot name this comparison's row from {unnamed}; pass name=, e.g. "
            "trials.compare(new, old, at_most=1.05, name='parse v2 / v1')"
        )
    timer = get_clock(clock)
    times = time_pairs(new, old, n, repeats=repeats, warmup=warmup, seed=seed, clock=timer.read,
                       args=args, kwargs=kwargs, setup=setup)
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
    label = name or f"{new_name} / {old_name}"
    new_name, old_name = new_name or "first", old_name or "second"
    interval: IntervalRecord = {
        "mean": iv.ratio, "low": iv.low, "high": iv.high, "confidence": iv.confidence,
        "side": "two-sided", "n": iv.n_current, "df": iv.df,
        # Spread on the ratio scale by the delta method, for display precision only.
        "sd": iv.ratio * sd_log, "sem": iv.ratio * sd_log / math.sqrt(iv.n_current),
        "method": iv.method, "critical": math.nan, "estimand": "time ratio",
    }
    decision: DecisionRecord = {
        "verdict": result.verdict.value,
        "band": {"low": result.at_least, "high": result.at_most, "unit": "x"},
        "interval": interval,
        "counter": None,
        "diagnostics": diagnose(logs).to_dict(),
        "suggested_n": suggested,
        "unit": "x",
        "power": float(power),
    }
    row = build_row(
        nodeid=nodeid, series=label, unit="x", source="compare",
        values=times.first / times.second, decision=decision, settings=settings,
        timing={"clock": timer.name, "k": times.batch, "interleaved": True, "repeats": repeats,
                "setup": setup is not None},
        comparison={
            "new": new_name,
            "old": old_name,
            "new_values": times.first.tolist(),
            "old_values": times.second.tolist(),
            "new_first": int(np.count_nonzero(times.first_went_first)),
            "ratio": iv.to_dict(),
            "at_most": None if math.isinf(result.at_most) else result.at_most,
            "at_least": None if math.isinf(result.at_least) else result.at_least,
        },
    )
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


def callable_name(fn: Callable[..., Any]) -> str | None:
    """A readable name for a row: the function's qualified name without ``<locals>``, a
    partial's function with its bound arguments (``parse(strict=True)``), a callable object's
    class; None for a lambda, which has no name to give."""
    if isinstance(fn, functools.partial):
        inner = callable_name(fn.func)
        if inner is None:
            return None
        bound = [_short(a) for a in fn.args] + [f"{k}={_short(v)}" for k, v in fn.keywords.items()]
        return f"{inner}({', '.join(bound)})"
    name = getattr(fn, "__qualname__", None) or getattr(fn, "__name__", None)
    if not isinstance(name, str):
        return type(fn).__name__
    if "<lambda>" in name:
        return None
    return name.rsplit("<locals>.", 1)[-1]


def _short(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 20 else text[:17] + "..."
