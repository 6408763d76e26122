"""Suggested trial counts: how many trials each check needs to decide at a stated power."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from meanband.errors import TrialError
from meanband.stats.planning import power_against_edge, trials_needed
from meanband.stats.sample import check_confidence
from meanband.units import SECONDS, format_value

__all__ = [
    "DEFAULT_POWER",
    "MIN_SAVING",
    "Suggestion",
    "check_power",
    "suggest_trials",
    "suggestion_for_row",
    "trial_seconds",
]

#: Power asked of a suggested count unless the settings say otherwise.
DEFAULT_POWER = 0.9

#: A cut of fewer than this share of the trials is within the noise of the estimated mean and
#: sd: suggesting it would churn the plan from run to run, so the count is kept instead.
MIN_SAVING = 0.1

_N_CEILING = 100_000


@dataclass(frozen=True, slots=True)
class Suggestion:
    """A trial count for one check and why.

    ``direction`` is ``"more"``, ``"fewer"`` or ``"keep"`` (a count), ``"none"`` when no count
    decides the check, or ``"auto"`` when the two-stage rule chose it (``n`` is None then).
    ``power_now`` is the power of the current count.
    """

    n: int | None
    reason: str
    direction: str
    current_n: int
    power: float
    power_now: float | None
    saves_seconds: float | None = None

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
        return out


def check_power(power: Any, where: str = "power") -> float:
    """Return ``power`` as a float strictly between 0 and 1, or raise naming ``where``."""
    try:
        value = float(power)
    except (TypeError, ValueError) as exc:
        raise TrialError(f"{where} must be a number between 0 and 1, got {power!r}") from exc
    if not (0.0 < value < 1.0):
        hint = f"; did you mean {value / 100:g}?" if 1.0 < value < 100.0 else ""
        raise TrialError(f"{where} must lie strictly between 0 and 1, got {power!r}{hint}")
    return value


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
) -> Suggestion | None:
    """The count that decides a check at ``power``, from its mean, sd and band.

    The count is the one-sample t test's at the edge nearest the mean, with the effect
    (mean - edge) / sd taken from this run (noncentral t; see ``planning.trials_needed``). A
    FAIL gets no suggestion: the interval already lies wholly outside the band, and more
    trials only confirm it. A PASS whose count could shrink by at least ``MIN_SAVING`` of its
    trials gets the smaller count, with the CI seconds saved when ``trial_seconds`` is known.
    When the check carries an instrument (Type B) uncertainty, pass the count its decision
    computed with it as ``instrument_count`` (None: no count decides it); the t test alone
    would promise a decision that the instrument's own uncertainty can forbid.
    """
    level = check_confidence(confidence)
    power = check_power(power)
    verdict = str(verdict)
    if verdict not in ("PASS", "FAIL", "UNDECIDED"):
        raise TrialError(f"unknown verdict {verdict!r}; expected PASS, FAIL or UNDECIDED")
    if verdict == "FAIL":
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
    power_now = _power(margin, sd, n, alpha)
    floor = max(int(min_n), 2)

    if isinstance(instrument_count, str):
        needed = trials_needed(
            sd, margin=margin, confidence=level, side=side, power=power, n_max=_N_CEILING
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
                f"lies {format_value(margin, unit)} from the edge, small beside its sd "
                f"{format_value(sd, unit)}"
            )
        return Suggestion(None, reason, "none", n, power, power_now)
    by_power, needed = needed, max(needed, floor)

    if verdict == "UNDECIDED":
        count = max(needed, n + 1)
        reason = (
            f"UNDECIDED at n={n}; about {count} trials would decide it with {power:.0%} power "
            f"(mean {format_value(mean, unit)}, sd {format_value(sd, unit)}, "
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


def _power(margin: float, sd: float, n: int, alpha: float) -> float:
    if sd == 0:
        return 1.0 if margin > 0 else 0.0
    return float(power_against_edge(margin / sd, n, alpha))


def trial_seconds(row: Mapping[str, Any]) -> float | None:
    """Wall-clock seconds one more trial of a timing row costs, or None when unknown.

    The mean seconds per call times the calls per trial (the timing engine's ``k``): the
    marginal cost of a trial, leaving out fixed costs such as calibration and warm-up that a
    smaller count does not save. Only timing rows have one: a sample's callable may wait on
    an instrument whose time the trials do not measure.
    """
    if row.get("source") != "time":
        return None
    values = row.get("values") or []
    if not values:
        return None
    timing = row.get("timing") or {}
    calls = timing.get("k") or 1
    return float(sum(values) / len(values)) * float(calls)


def suggestion_for_row(
    row: Mapping[str, Any], *, power: float | None = None
) -> Suggestion | None:
    """The suggestion for one result row (see the row contract), or None.

    None for a series with no check and for a FAIL. A check whose count the two-stage rule
    chose at run time (``n="auto"``) gets direction ``"auto"`` and no count, with a reason that
    says what to change when it stayed UNDECIDED. ``power`` overrides the row's own setting.
    """
    decision = row.get("decision")
    if row.get("kind") != "check" or not decision:
        return None
    interval = decision["interval"]
    if interval.get("method") == "two-stage":
        return _two_stage_suggestion(row, decision)
    settings = row.get("settings") or {}
    if power is None:
        power = settings.get("power", DEFAULT_POWER)
    if (row.get("rule") or {}).get("rule") == "simple" and decision["verdict"] != "FAIL":
        # Simple acceptance compares the mean alone: the power of the interval says nothing
        # about it, so the count is kept (its risk is the rule's false-acceptance probability).
        n = int(interval["n"])
        reason = (f"{decision['verdict']} at n={n} under simple acceptance, which compares the "
                  "mean alone: the count is kept")
        return Suggestion(n, reason, "keep", n, float(power), None)
    band = decision["band"]
    return suggest_trials(
        verdict=decision["verdict"],
        mean=float(interval["mean"]),
        # The spread the decision planned with (bands.decide): sem * sqrt(n) is the sd for the
        # t interval and the long-run spread for batch means, so both counts agree.
        sd=float(interval["sem"]) * math.sqrt(int(interval["n"])),
        n=int(interval["n"]),
        low=float(band["low"]),
        high=float(band["high"]),
        confidence=float(interval["confidence"]),
        power=float(power) if power is not None else DEFAULT_POWER,
        min_n=int(settings.get("min_n") or 2),
        trial_seconds=trial_seconds(row),
        unit=decision.get("unit") or row.get("unit"),
        **_instrument_count(row, decision),
    )


def _instrument_count(row: Mapping[str, Any], decision: Mapping[str, Any]) -> dict[str, Any]:
    """The decision's own count when an instrument uncertainty shares the budget, else nothing."""
    budget = row.get("uncertainty") or {}
    if budget.get("type_b"):
        return {"instrument_count": decision.get("suggested_n")}
    return {}


def _two_stage_suggestion(row: Mapping[str, Any], decision: Mapping[str, Any]) -> Suggestion | None:
    verdict = decision["verdict"]
    if verdict == "FAIL":
        return None
    stages = row.get("two_stage") or {}
    n = int(decision["interval"]["n"])
    pilot, power = stages.get("pilot_n", "?"), float(stages.get("power", DEFAULT_POWER))
    if verdict == "PASS":
        reason = f"count chosen at run time by the two-stage rule (pilot {pilot} + {n})"
    elif stages.get("capped"):
        reason = (
            f"UNDECIDED at n={n} after a pilot of {pilot}: the two-stage rule was capped at "
            f"max_n={stages.get('max_n')}; raise max_n to let it decide"
        )
    else:
        reason = (
            f"UNDECIDED at n={n} after a pilot of {pilot}: the mean is likely nearer the edge "
            "than the pilot's margin; a larger pilot= gives a better margin"
        )
    return Suggestion(None, reason, "auto", n, power, None)
