"""Suggested trial counts: how many trials each check needs to decide at a stated power."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.planning import (
    SD_BOUND,
    power_against_edge,
    power_inside_band,
    sd_upper_bound,
    trials_needed,
)
from meanband.stats.sample import check_confidence, check_probability
from meanband.stats.verdict import Verdict
from meanband.units import SECONDS, format_value

__all__ = [
    "DEFAULT_POWER",
    "MIN_SAVING",
    "Suggestion",
    "check_power",
    "suggest_trials",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: Power asked of a suggested count unless the settings say otherwise.
DEFAULT_POWER = defaults.POWER

#: A cut of fewer than this share of the trials is within the noise of the estimated mean and
#: sd: suggesting it would churn the plan from run to run, so the count is kept instead.
MIN_SAVING = 0.1

_N_CEILING = 100_000


@dataclass(frozen=True, slots=True)
class Suggestion:
    """A trial count for one check and why.

    ``direction`` is ``"more"``, ``"fewer"`` or ``"keep"`` (a count), ``"none"`` when no count
    decides the check, or ``"auto"`` when the two-stage rule chose it (``n`` is None then).
    ``power_now`` is the power of the current count. ``max_n`` is a new cap for a check that
    stops when decided (``stats/stopping_caps.py``), when its stops call for one.
    """

    n: int | None
    reason: str
    direction: str
    current_n: int
    power: float
    power_now: float | None
    saves_seconds: float | None = None
    max_n: int | None = None

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only (the row crosses from xdist workers); no key for a missing saving."""
        out: dict[str, Any] = {
            "n": self.n,
            "reason": self.reason,
            "direction": self.direction,
            "current_n": self.current_n,
            "power": float(self.power),
            "power_now": None if self.power_now is None else float(self.power_now),
        }
        if self.saves_seconds is not None:
            out["saves_seconds"] = float(self.saves_seconds)
        if self.max_n is not None:
            out["max_n"] = int(self.max_n)
        return out


def check_power(power: Any, where: str = "power") -> float:
    """Return ``power`` as a float strictly between 0 and 1, or raise naming ``where``."""
    return check_probability(power, where)


def suggest_trials(
    *,
    verdict: str,
    mean: float,
    sd: float,
    n: int,
    low: float,
    high: float,
    confidence: float,
    power: float = DEFAULT_POWER,
    min_n: int = 2,
    trial_seconds: float | None = None,
    unit: str | None = None,
    instrument_count: int | str | None = "none given",
    spread: str = "sd",
    sd_df: float | None = None,
    values: Sequence[float] | np.ndarray | None = None,
    method: str = "t",
) -> Suggestion | None:
    """The count that decides a check at ``power``, from its mean, sd and band.

    ``spread`` names ``sd`` in the words: ``"sd"`` for a sample's, another name when it is a
    combined uncertainty scaled to one trial. The count is the one-sample t test's at the edge
    nearest the mean (for a mean inside a
    two-sided band, the two one-sided tests' at both edges at once), with the effect
    (mean - edge) / sd taken from this run (noncentral t; see ``planning.trials_needed``). This
    run's sd is an estimate with ``sd_df`` degrees of freedom (n - 1 unless given, e.g. fewer for
    batch means): the count is planned with its ``SD_BOUND`` upper confidence bound (Browne
    1995, ``planning.sd_upper_bound``), and so is ``power_now``. Among the rules measured in
    studies/suggested_power.py (the sd as known, this bound, the power averaged over the sd as
    Julious & Owen 2006, and over the mean too) it landed the delivered power nearest the
    planned one. A FAIL gets no suggestion: the interval already lies
    wholly outside the band, and more trials only confirm it. A PASS whose count could shrink
    by at least ``MIN_SAVING`` of its trials gets the smaller count, with the CI seconds saved
    when ``trial_seconds`` is known.
    When the check carries an instrument (Type B) uncertainty, pass the count its decision
    computed with it as ``instrument_count`` (None: no count decides it); the t test alone
    would promise a decision that the instrument's own uncertainty can forbid.

    Give the trials as ``values`` (and the interval ``method``) to plan with their shape: for
    the t interval the count and ``power_now`` then come from reruns simulated from the values
    themselves (``stats.shape_power``), since skewed trials pass less often than the normal
    theory says. Other methods keep the normal-theory count, a stated proxy.
    """
    level = check_confidence(confidence)
    power = check_power(power)
    try:
        verdict = Verdict(str(verdict))
    except ValueError:
        raise TrialError(f"unknown verdict {verdict!r}; expected PASS, FAIL or UNDECIDED") from None
    if verdict is Verdict.FAIL:
        return None
    if n < 2:
        raise TrialError(f"a suggestion needs the count of a check with at least 2 trials, got {n}")
    if not (math.isfinite(mean) and math.isfinite(sd) and sd >= 0):
        raise TrialError(f"mean and sd must be finite (sd >= 0), got mean={mean!r}, sd={sd!r}")
    edges = [edge for edge in (low, high) if math.isfinite(edge)]
    if not edges:
        raise TrialError("a suggestion needs a band with at least one finite edge")
    side = "two-sided" if len(edges) == 2 else ("upper" if math.isfinite(high) else "lower")
    margin = min(abs(mean - edge) for edge in edges)
    alpha = (1.0 - level) / 2.0 if side == "two-sided" else 1.0 - level
    # A mean inside a two-sided band must clear both edges at once: plan with both.
    far = max(high - mean, mean - low) if side == "two-sided" and low < mean < high else None
    pilot_df = float(n - 1) if sd_df is None else float(sd_df)
    if not (pilot_df > 0 and math.isfinite(pilot_df)):
        raise TrialError(f"sd_df must be a positive number of degrees of freedom, got {sd_df!r}")
    planning_sd = sd_upper_bound(sd, pilot_df, SD_BOUND)
    power_now = _power(margin, planning_sd, n, alpha, far)
    floor = max(int(min_n), 2)

    if isinstance(instrument_count, str):
        needed = trials_needed(
            planning_sd, margin=margin, confidence=level, side=side, power=power,
            n_max=_N_CEILING, other_margin=far,
        )
    else:
        needed = instrument_count
    if needed is None:
        if not isinstance(instrument_count, str) and margin > 0:
            reason = (
                f"{verdict} at n={n}; more trials will not decide it: the instrument's own "
                "uncertainty leaves too little room between the mean and the edge"
            )
        elif margin == 0:
            reason = f"{verdict} at n={n}; the mean sits on the band edge: no count decides it"
        else:
            reason = (
                f"{verdict} at n={n}; more than {_N_CEILING:,} trials would be needed: the mean "
                f"lies {format_value(margin, unit)} from the edge, small beside its {spread} "
                f"{format_value(sd, unit)}"
            )
        return Suggestion(None, reason, "none", n, power, power_now)
    sample = _resampled(values, n, method, instrument_count)
    if sample is not None:
        from meanband.stats.shape_power import (
            SIMULATION_CEILING,
            simulated_count,
            simulated_power,
        )

        needed = simulated_count(sample, low=low, high=high, confidence=level, power=power,
                                 start=needed, planning_sd=planning_sd, n_max=_N_CEILING)
        if n <= SIMULATION_CEILING:
            power_now = simulated_power(sample, n, low=low, high=high, confidence=level,
                                        planning_sd=planning_sd)
    by_power, needed = needed, max(needed, floor)

    if verdict is Verdict.UNDECIDED:
        count = max(needed, n + 1)
        reason = (
            f"UNDECIDED at n={n}; about {count} trials would decide it with {power:.0%} power "
            f"(mean {format_value(mean, unit)}, {spread} {format_value(sd, unit)}, "
            f"{format_value(margin, unit)} from the edge)"
        )
        return Suggestion(count, reason, "more", n, power, power_now)
    if needed > n and by_power <= n:
        reason = (
            f"PASS at n={n}; {by_power} trials would pass with {power:.0%} power, but min_n asks "
            f"for {needed} so that the assumption checks have trials to work on"
        )
        return Suggestion(needed, reason, "more", n, power, power_now)
    if needed > n:
        reason = (
            f"PASS at n={n}, but a rerun passes with only {power_now:.0%} power; "
            f"about {needed} trials reach {power:.0%}"
        )
        return Suggestion(needed, reason, "more", n, power, power_now)
    if n - needed >= max(1.0, MIN_SAVING * n):
        saves = None if trial_seconds is None else (n - needed) * float(trial_seconds)
        reason = (
            f"PASS at n={n} with a wide margin; about {needed} trials would still pass with "
            f"{power:.0%} power"
        )
        if saves is not None:
            reason += f", saving about {format_value(saves, SECONDS, 2)} per run"
        return Suggestion(needed, reason, "fewer", n, power, power_now, saves)
    reason = (
        f"PASS at n={n}; the count is about right ({power_now:.0%} power, {needed} would give "
        f"{power:.0%})"
    )
    return Suggestion(n, reason, "keep", n, power, power_now)


def _resampled(
    values: Sequence[float] | np.ndarray | None, n: int, method: str,
    instrument_count: int | str | None,
) -> np.ndarray | None:
    """The trials to simulate reruns from, or None where the normal theory stands: no values,
    a method other than t, or an instrument uncertainty in the budget."""
    if values is None or method != "t" or not isinstance(instrument_count, str):
        return None
    sample = np.asarray(values, dtype=np.float64)
    if sample.ndim != 1 or sample.size != n or not np.all(np.isfinite(sample)):
        raise TrialError(
            f"values must be the check's {n} finite trials, got {sample.size} of shape "
            f"{sample.shape}"
        )
    return sample


def _power(margin: float, sd: float, n: int, alpha: float, far: float | None) -> float:
    if sd == 0:
        return 1.0 if margin > 0 else 0.0
    if far is not None:
        return power_inside_band(margin / sd, far / sd, n, alpha)
    return float(power_against_edge(margin / sd, n, alpha))
