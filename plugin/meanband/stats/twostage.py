"""Adaptive trial counts for a check: Stein's two-stage procedure (Stein 1945).

A pilot of ``n0`` trials gives a standard deviation ``s0`` (n0 - 1 degrees of freedom) and a
margin ``d0``, the distance from the pilot mean to the band edge nearest it. The second stage
then takes

    N2 = ceil(((t[n0-1](1 - a) + t[n0-1](power)) * s0 / d0) ** 2)

fresh trials (at least 2, and at most ``max_n - n0``), where ``a`` is the level of the check at
that edge (1 - C for a budget, (1 - C) / 2 per edge of a two-sided band). The verdict uses
Stein's statistic: the interval is ``mean2 -/+ t[n0-1] * s0 / sqrt(N2)`` with ``mean2`` the mean
of the second-stage trials only.

What this guarantees, for normally distributed trials and whatever the true sd:

- coverage: the interval covers the true mean with probability exactly C (one-sided bounds:
  exactly C each), because sqrt(N2) * (mean2 - mean) / s0 follows Student's t with n0 - 1
  degrees of freedom whatever N2 the pilot chose (Stein 1945). So a true mean on or beyond an
  edge is passed with probability at most 1 - C for a budget and (1 - C) / 2 per edge of a
  two-sided band. This holds with or without the cap.
- power: given the pilot mean, if the true mean lies at least ``d0`` from the nearest edge, the
  test at that edge decides (PASS inside, FAIL outside) with probability at least ``power``,
  over the pilot's sd and the second stage (Stein's argument: sqrt(N2) * d0 / s0 >= t(1 - a) +
  t(power), and the pilot's mean and sd are independent for normal trials). Runs that the cap
  cut short are not covered: the probability can fall by up to the chance of a capped run,
  and a capped run says so.
- width: the interval's reach t[n0-1] * s0 / sqrt(N2) is at most d0 * t(1 - a) / (t(1 - a) +
  t(power)), fixed by the pilot rather than left to chance.

The pilot's mean is left out of the verdict on purpose: the count depends on it, and a
mean over pilot and second stage together would let a lucky pilot both shorten the run and
pull the verdict its way, which raises the false-PASS rate above 1 - C.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.bands import Band, side_alpha
from meanband.stats.decision import Decision
from meanband.stats.diagnostics import diagnose
from meanband.stats.interval import Interval
from meanband.stats.sample import (
    ArrayEquality,
    as_sample,
    check_confidence,
    check_probability,
    location_scale,
)
from meanband.stats.verdict import Verdict

__all__ = [
    "DEFAULT_MAX_N",
    "DEFAULT_PILOT",
    "MIN_SECOND",
    "StagePlan",
    "TwoStageRun",
    "check_max_n",
    "decide_two_stage",
    "plan_second_stage",
    "run_two_stage",
    "second_stage_counts",
    "stein_interval",
    "verdicts",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: Pilot size when none is given: enough degrees of freedom (9) that t's tail stays modest.
DEFAULT_PILOT = 10
#: Ceiling on the total count when ``max_n`` is not given, so a mean on an edge cannot run forever.
DEFAULT_MAX_N = 1000
#: Fewest second-stage trials: the second stage must yield a mean and a spread to diagnose.
MIN_SECOND = 2


@dataclass(frozen=True, slots=True)
class StagePlan:
    """What the pilot says: its statistics and the second-stage count (capped or not)."""

    pilot_n: int
    pilot_mean: float
    pilot_sd: float
    margin: float
    second_n: int
    requested_n: int | None
    max_n: int
    confidence: float
    side: str
    power: float

    @property
    def total_n(self) -> int:
        """Trials taken in both stages."""
        return self.pilot_n + self.second_n

    @property
    def capped(self) -> bool:
        """True when ``max_n`` cut the second stage short of Stein's count."""
        return self.requested_n is None or self.requested_n > self.second_n

    def note(self) -> str:
        """One line for the summary: the counts, and whether the cap bound."""
        if self.capped:
            asked = "an unbounded count" if self.requested_n is None else f"{self.requested_n}"
            return (
                f"two-stage: the pilot of {self.pilot_n} trials asked for {asked} more; "
                f"capped at max_n={self.max_n} ({self.second_n} more), so the "
                f"{self.power:.0%} power is not assured"
            )
        return (
            f"two-stage: pilot of {self.pilot_n} trials, then {self.second_n} more for "
            f"{self.power:.0%} power at the pilot's margin"
        )

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only."""
        return {
            "pilot_n": int(self.pilot_n),
            "pilot_mean": float(self.pilot_mean),
            "pilot_sd": float(self.pilot_sd),
            "margin": float(self.margin),
            "second_n": int(self.second_n),
            "requested_n": None if self.requested_n is None else int(self.requested_n),
            "max_n": int(self.max_n),
            "capped": bool(self.capped),
            "power": float(self.power),
        }


def check_max_n(max_n: Any, pilot_n: int) -> int:
    """Return ``max_n`` as an int that leaves room for a pilot and a second stage."""
    if isinstance(max_n, bool) or not isinstance(max_n, (int, np.integer)):
        raise TrialError(f"max_n must be a whole number of trials, got {max_n!r}")
    if max_n < pilot_n + MIN_SECOND:
        raise TrialError(
            f"max_n={max_n} leaves no room for a second stage after a pilot of {pilot_n} "
            f"trials; give max_n >= {pilot_n + MIN_SECOND} or a smaller pilot"
        )
    return int(max_n)


def _nearest_margin(mean: np.ndarray, low: float, high: float) -> np.ndarray:
    distances = [np.abs(mean - edge) for edge in (low, high) if math.isfinite(edge)]
    if not distances:
        raise TrialError("a two-stage count needs a band with at least one finite edge")
    return np.minimum.reduce(distances) if len(distances) > 1 else distances[0]


def second_stage_counts(
    pilot_mean: float | np.ndarray,
    pilot_sd: float | np.ndarray,
    pilot_n: int,
    low: float,
    high: float,
    *,
    confidence: float,
    power: float,
    max_n: int,
) -> tuple[np.ndarray, np.ndarray]:
    """Stein's second-stage counts, vectorised over pilots.

    Returns ``(second_n, requested)``: the counts to take (within ``MIN_SECOND`` and
    ``max_n - pilot_n``) and Stein's counts before the cap (float, ``inf`` when the pilot
    mean sits on the edge).
    """
    from scipy.stats import t as student_t

    level = check_confidence(confidence)
    side = _side(low, high)
    df = pilot_n - 1
    reach = student_t.ppf(1.0 - side_alpha(level, side), df) + student_t.ppf(power, df)
    sd = np.asarray(pilot_sd, dtype=np.float64)
    margin = _nearest_margin(np.asarray(pilot_mean, dtype=np.float64), low, high)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(sd == 0, 0.0, reach * sd / margin)
    requested = np.ceil(np.square(ratio))
    ceiling = max_n - pilot_n
    second = np.clip(np.nan_to_num(requested, nan=ceiling, posinf=ceiling), MIN_SECOND, ceiling)
    return second.astype(np.int64), requested


def plan_second_stage(
    pilot: Iterable[float] | np.ndarray,
    band: Band,
    *,
    confidence: float = defaults.CONFIDENCE,
    power: float = defaults.POWER,
    max_n: int = DEFAULT_MAX_N,
) -> StagePlan:
    """From the pilot trials, the second-stage count that decides ``band`` at ``power``."""
    level = check_confidence(confidence)
    power = check_probability(power, "power")
    x = as_sample(pilot, minimum=2)
    max_n = check_max_n(max_n, x.size)
    mean, sd = location_scale(x)
    second, requested = second_stage_counts(
        mean, sd, x.size, band.low, band.high, confidence=level, power=power, max_n=max_n
    )
    asked = float(requested)
    return StagePlan(
        pilot_n=int(x.size),
        pilot_mean=mean,
        pilot_sd=sd,
        margin=float(_nearest_margin(np.asarray(mean), band.low, band.high)),
        second_n=int(second),
        requested_n=None if not math.isfinite(asked) else max(int(asked), MIN_SECOND),
        max_n=max_n,
        confidence=level,
        side=band.side,
        power=float(power),
    )


def _side(low: float, high: float) -> str:
    if math.isfinite(low) and math.isfinite(high):
        return "two-sided"
    return "upper" if math.isfinite(high) else "lower"


def _stein_reach(pilot_sd: Any, second_n: Any, pilot_n: int, level: float, side: str) -> Any:
    from scipy.stats import t as student_t

    q = (1.0 + level) / 2.0 if side == "two-sided" else level
    critical = float(student_t.ppf(q, pilot_n - 1))
    return critical, critical * np.asarray(pilot_sd) / np.sqrt(np.asarray(second_n))


def verdicts(
    second_mean: float | np.ndarray,
    pilot_sd: float | np.ndarray,
    second_n: int | np.ndarray,
    pilot_n: int,
    low: float,
    high: float,
    *,
    confidence: float,
) -> np.ndarray:
    """Verdicts ("PASS", "FAIL", "UNDECIDED") of Stein's interval, vectorised over runs.

    The same three-state rule as ``bands.decide``: two-sided, the interval inside the band is
    PASS and wholly outside it FAIL; a budget, the bound at C inside is PASS and the opposite
    bound at C beyond the edge is FAIL; anything else is UNDECIDED.
    """
    level = check_confidence(confidence)
    side = _side(low, high)
    mean = np.asarray(second_mean, dtype=np.float64)
    _, reach = _stein_reach(pilot_sd, second_n, pilot_n, level, side)
    lower, upper = mean - reach, mean + reach
    if side == "two-sided":
        inside = (low <= lower) & (upper <= high)
        beyond = (upper < low) | (lower > high)
    elif side == "upper":
        inside, beyond = upper <= high, lower > high
    else:
        inside, beyond = lower >= low, upper < low
    out = np.where(inside, Verdict.PASS.value, np.where(beyond, Verdict.FAIL.value, Verdict.UNDECIDED.value))
    return np.asarray(out)


def stein_interval(
    second: Iterable[float] | np.ndarray, plan: StagePlan, side: str | None = None
) -> Interval:
    """Stein's interval: the second-stage mean -/+ t[n0-1] * s0 / sqrt(N2)."""
    x = as_sample(second, minimum=1)
    side = plan.side if side is None else side
    mean = location_scale(x)[0] if x.size > 1 else float(x[0])
    critical, reach = _stein_reach(plan.pilot_sd, x.size, plan.pilot_n, plan.confidence, side)
    reach = float(reach)
    return Interval(
        mean=mean,
        low=-math.inf if side == "upper" else mean - reach,
        high=math.inf if side == "lower" else mean + reach,
        confidence=plan.confidence,
        side=side,
        n=int(x.size),
        df=float(plan.pilot_n - 1),
        sd=plan.pilot_sd,
        sem=plan.pilot_sd / math.sqrt(x.size),
        method="two-stage",
        critical=critical,
    )


def decide_two_stage(
    pilot: Iterable[float] | np.ndarray,
    second: Iterable[float] | np.ndarray,
    band: Band,
    plan: StagePlan,
    *,
    alpha: float = 0.05,
) -> Decision:
    """The check's Decision from both stages (diagnostics over all trials of both)."""
    first = as_sample(pilot, minimum=2)
    rest = as_sample(second, minimum=1)
    if first.size != plan.pilot_n:
        raise TrialError(
            f"the plan was made from a pilot of {plan.pilot_n} trials, got {first.size}"
        )
    interval = stein_interval(rest, plan)
    counter = None
    if band.side != "two-sided":
        counter = stein_interval(rest, plan, "lower" if band.side == "upper" else "upper")
    verdict = verdicts(
        interval.mean, plan.pilot_sd, rest.size, plan.pilot_n, band.low, band.high,
        confidence=plan.confidence,
    )
    diagnostics = diagnose(np.concatenate([first, rest]), alpha=alpha)
    return Decision(
        Verdict(str(verdict)), band, interval, counter, diagnostics, None, band.unit,
        power=plan.power,
    )


@dataclass(frozen=True, eq=False)
class TwoStageRun(ArrayEquality):
    """Trials of both stages and the plan the pilot made."""

    pilot: np.ndarray
    second: np.ndarray
    plan: StagePlan

    @property
    def values(self) -> np.ndarray:
        """All trials, pilot first."""
        return np.concatenate([self.pilot, self.second])


def run_two_stage(
    collect: Callable[[int], np.ndarray],
    band: Band,
    *,
    pilot_n: int = DEFAULT_PILOT,
    confidence: float = defaults.CONFIDENCE,
    power: float = defaults.POWER,
    max_n: int = DEFAULT_MAX_N,
) -> TwoStageRun:
    """Collect a pilot with ``collect(pilot_n)``, plan, then collect the second stage."""
    if isinstance(pilot_n, bool) or not isinstance(pilot_n, (int, np.integer)) or pilot_n < 2:
        raise TrialError(f"pilot must be a whole number of trials >= 2, got {pilot_n!r}")
    check_max_n(max_n, int(pilot_n))
    pilot = as_sample(collect(int(pilot_n)), minimum=int(pilot_n))
    plan = plan_second_stage(pilot, band, confidence=confidence, power=power, max_n=max_n)
    second = as_sample(collect(plan.second_n), minimum=plan.second_n)
    return TwoStageRun(pilot, second, plan)
