"""The cap of a check that stops when decided, learned from where its earlier runs stopped.

A check collected with ``n="until-decided"`` (or planned looks) runs until its anytime-valid
interval decides the band, at most ``max_n`` trials. The cap does not touch the guarantee: the
confidence sequence holds at every n, so stopping at any cap keeps the false-PASS rate at most
1 - C. What the cap sets is cost and power: too low, and a check that needs a few more trials
ends UNDECIDED; too high, and a mean that drifted onto its edge spends every trial up to the
cap each run. Earlier stops say what the check needs:

- a run that reached the cap UNDECIDED: the count at which the anytime bound of its own mean
  and spread would have decided (``trials_to_decide``), with headroom, unless no count up to the
  ceiling decides (the mean sits on the edge);
- runs that all decided: a cap of ``HEADROOM`` times the latest stops leaves room for a
  slower run and bounds what a mean on its edge can cost.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.planning import smallest_count
from meanband.stats.sample import check_confidence
from meanband.stats.sequential import DEFAULT_TIGHTEST_AT, anytime_multiplier

__all__ = [
    "HEADROOM",
    "MIN_CHANGE",
    "CapAdvice",
    "Stop",
    "advise_cap",
    "trials_to_decide",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: Room a learned cap leaves above where the runs stopped. A run's stopping count varies from
#: run to run with its sample (common practice: a margin of 2x over the observed need); for a
#: capped run the plug-in count rests on an estimated margin, so it gets the same room.
HEADROOM = 2.0
#: A cap is changed only when it moves by at least this share, so a plan does not churn from
#: run to run (the same rule as the suggested counts' MIN_SAVING).
MIN_CHANGE = 0.1


@dataclass(frozen=True, slots=True)
class Stop:
    """Where one run of a check stopped: its count, whether it decided, and, for a run that did
    not, its distance to the nearest edge in units of its sd (``effect``; NaN when unknown)."""

    n: int
    decided: bool
    effect: float = math.nan


@dataclass(frozen=True, slots=True)
class CapAdvice:
    """A cap for the next run: ``direction`` is ``"raise"``, ``"lower"`` or ``"keep"``;
    ``max_n`` is the suggested cap (the current one when kept)."""

    max_n: int
    direction: str
    reason: str


def trials_to_decide(
    effect: float,
    *,
    confidence: float,
    side: str,
    ceiling: int,
    tightest_at: int = DEFAULT_TIGHTEST_AT,
) -> int | None:
    """Smallest n at which the anytime bound's reach w_n / sqrt(n), in sds, is at most
    ``effect``: where a mean ``effect`` sds from the edge (with that sd) is decided. None when
    no n up to ``ceiling`` reaches it. w_n / sqrt(n) falls with n once finite, so a search over
    n finds the first count."""
    level = check_confidence(confidence)
    if not (math.isfinite(effect) and effect > 0):
        return None
    if isinstance(ceiling, bool) or not isinstance(ceiling, int) or ceiling < 2:
        raise TrialError(f"the ceiling must be a whole number of trials >= 2, got {ceiling!r}")

    def reach(n: int) -> float:
        w = float(anytime_multiplier(np.array([n]), level, side, tightest_at)[0])
        return w / math.sqrt(n)

    return smallest_count(lambda n: reach(n) <= effect, ceiling)


def _round_up(count: float, block: int) -> int:
    return int(math.ceil(count / block) * block)


def advise_cap(
    stops: Sequence[Stop],
    *,
    cap: int,
    block: int,
    floor: int,
    confidence: float,
    side: str,
    ceiling: int,
) -> CapAdvice:
    """The cap the next run should use, from ``stops`` (newest last) and the current ``cap``.

    The newest run decides the direction: reached the cap undecided, the cap rises to what its
    own figures need (kept when no count up to ``ceiling`` would decide); decided, the cap
    falls to ``HEADROOM`` times the largest stop of the runs given, never below ``floor`` (the
    fewest trials the mode can look with), and only when that cuts at least ``MIN_CHANGE``.
    Counts are rounded up to whole ``block``s.
    """
    if not stops:
        raise TrialError("a cap is learned from at least one run of the check")
    if cap < 2 or block < 1 or floor < 2:
        raise TrialError(f"cap, block and floor must be positive counts, got {cap}, {block}, "
                         f"{floor}")
    latest = stops[-1]
    if not latest.decided:
        needed = trials_to_decide(latest.effect, confidence=confidence, side=side,
                                  ceiling=ceiling)
        if needed is None:
            return CapAdvice(cap, "keep", (
                f"UNDECIDED at the cap max_n={cap}: the mean sits too close to the edge for any "
                f"count up to {ceiling:,} to decide it; a higher cap would spend trials without "
                "deciding"))
        proposed = min(_round_up(HEADROOM * needed, block), ceiling)
        if proposed <= cap:
            return CapAdvice(cap, "keep", (
                f"UNDECIDED at the cap max_n={cap}, which its figures say should have been "
                f"enough (about {needed}): a slower run, kept at max_n={cap}"))
        return CapAdvice(proposed, "raise", (
            f"UNDECIDED at the cap max_n={cap}: its mean and spread would decide at about "
            f"{needed} trials; max_n={proposed} leaves room for a slower run"))
    counts = [int(s.n) for s in stops if s.decided]
    proposed = min(max(_round_up(HEADROOM * max(counts), block), floor), ceiling)
    runs = f"the last {len(counts)} runs" if len(counts) > 1 else "this run"
    stopped = ", ".join(str(c) for c in counts[-5:])
    if proposed <= cap * (1.0 - MIN_CHANGE):
        return CapAdvice(proposed, "lower", (
            f"{runs} decided at {stopped} trials: max_n={proposed} ({HEADROOM:g}x) bounds what "
            f"a mean on its edge would cost, down from {cap}"))
    return CapAdvice(cap, "keep", f"{runs} decided at {stopped} trials: max_n={cap} is about right")
