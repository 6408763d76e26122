"""The suggested trial count of a result row: the row's figures handed to ``stats.suggest``."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

from meanband import defaults
from meanband.errors import hide_plugin_frames
from meanband.record.sequential import DEFAULT_MAX_N, LOOK_TRIALS
from meanband.stats.stopping_caps import CapAdvice, Stop, advise_cap
from meanband.stats.suggest import Suggestion, suggest_trials

__all__ = ["stop_of_row", "suggestion_for_row", "trial_seconds"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


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
    row: Mapping[str, Any], *, power: float | None = None, earlier: Sequence[Stop] = (),
) -> Suggestion | None:
    """The suggestion for one result row (see the row contract), or None.

    None for a series with no check and for a FAIL. A check whose count the two-stage rule
    chose at run time (``n="auto"``) gets direction ``"auto"`` and no count, with a reason that
    says what to change when it stayed UNDECIDED. ``power`` overrides the row's own setting.
    A check collected until decided gets its cap learned from where it stopped, and from
    ``earlier`` stops of the same check (oldest first; from the history store).
    """
    decision = row.get("decision")
    if row.get("kind") != "check" or not decision:
        return None
    interval = decision["interval"]
    if interval.get("method") == "two-stage":
        return _two_stage_suggestion(row, decision)
    if row.get("sequential"):
        return _until_decided_suggestion(row, decision, earlier)
    settings = row.get("settings") or {}
    if power is None:
        power = settings.get("power", defaults.POWER)
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
        power=float(power) if power is not None else defaults.POWER,
        min_n=int(settings.get("min_n") or 2),
        trial_seconds=trial_seconds(row),
        unit=decision.get("unit") or row.get("unit"),
        sd_df=_spread_df(interval),
        values=row.get("values") or None,
        method=str(interval.get("method") or "t"),
        **_instrument_count(row, decision),
    )


def _spread_df(interval: Mapping[str, Any]) -> float | None:
    """Degrees of freedom of the spread the count is planned with: the interval's own (n - 1 for
    t, fewer for batch means), or None (n - 1) when the row has none usable."""
    df = interval.get("df")
    if isinstance(df, (int, float)) and math.isfinite(df) and df > 0:
        return float(df)
    return None


def _instrument_count(row: Mapping[str, Any], decision: Mapping[str, Any]) -> dict[str, Any]:
    """The decision's own count when an instrument uncertainty shares the budget (whose
    per-trial spread is then the combined uncertainty, not a sample sd), else nothing."""
    budget = row.get("uncertainty") or {}
    if budget.get("type_b"):
        return {"instrument_count": decision.get("suggested_n"),
                "spread": "combined uncertainty x sqrt(n)"}
    return {}


def _two_stage_suggestion(row: Mapping[str, Any], decision: Mapping[str, Any]) -> Suggestion | None:
    verdict = decision["verdict"]
    if verdict == "FAIL":
        return None
    stages = row.get("two_stage") or {}
    n = int(decision["interval"]["n"])
    pilot, power = stages.get("pilot_n", "?"), float(stages.get("power", defaults.POWER))
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


def _until_decided_suggestion(
    row: Mapping[str, Any], decision: Mapping[str, Any], earlier: Sequence[Stop] = (),
) -> Suggestion:
    """A check that stops when decided chose its own count: the suggestion is its cap, learned
    from where this run (and ``earlier`` runs of the check, oldest first) stopped."""
    run = row.get("sequential") or {}
    n = int(decision["interval"]["n"])
    power = float((row.get("settings") or {}).get("power", defaults.POWER))
    if run.get("reason") == "time limit":
        reason = (f"UNDECIDED at n={n}: collection until decided ended at the time limit; "
                  "raise it to let the data decide")
        return Suggestion(None, reason, "auto", n, power, None)
    advice = _cap_advice(row, decision, [*earlier, stop_of_row(row)])
    verdict = decision["verdict"]
    if run.get("reason") == "decided":
        reason = f"count chosen at run time: stopped at {n} trials ({verdict})"
        if advice.direction != "keep":
            reason += f"; {advice.reason}"
    else:
        reason = advice.reason
    # A cap that is kept is still written when it is not the mode's default, so a plan that
    # learned it keeps it (its entry would otherwise vanish and the cap fall back).
    learned = int(run.get("max_n") or 0) != DEFAULT_MAX_N
    cap = advice.max_n if advice.direction != "keep" or learned else None
    return Suggestion(None, reason, "auto", n, power, None, max_n=cap)


def stop_of_row(row: Mapping[str, Any]) -> Stop:
    """Where the row's collection stopped; for an undecided stop, the mean's distance to its
    nearest edge in sds (NaN when the row lacks the figures)."""
    run = row.get("sequential") or {}
    decision = row.get("decision") or {}
    interval = decision.get("interval") or {}
    n = int(run.get("stopped_at") or interval.get("n") or 0)
    if run.get("reason") == "decided":
        return Stop(n, True)
    band = decision.get("band") or {}
    edges = [float(band[k]) for k in ("low", "high")
             if band.get(k) is not None and math.isfinite(float(band[k]))]
    mean, sd = interval.get("mean"), interval.get("sd")
    if not edges or mean is None or not sd:
        return Stop(n, False)
    return Stop(n, False, min(abs(float(mean) - edge) for edge in edges) / float(sd))


def _cap_advice(row: Mapping[str, Any], decision: Mapping[str, Any],
                stops: Sequence[Stop]) -> CapAdvice:
    run = row.get("sequential") or {}
    band = decision.get("band") or {}
    finite = [band.get(k) is not None and math.isfinite(float(band[k])) for k in ("low", "high")]
    side = "two-sided" if all(finite) else ("upper" if finite[1] else "lower")
    planned = run.get("planned") or []
    block = int(run.get("block") or 0) or max(int(planned[0]) if planned else 1, 1)
    floor = (LOOK_TRIALS * len(planned) if planned
             else int(run.get("first_look") or 2) + block)
    return advise_cap(
        stops, cap=int(run.get("max_n") or decision["interval"]["n"]), block=block,
        floor=max(floor, 2), confidence=float(decision["interval"]["confidence"]), side=side,
        ceiling=defaults.MAX_TRIALS,
    )
