"""The decision of a check: does the interval of the mean lie inside its band?"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.bands import Band
from meanband.stats.decision_rules import (
    DecisionRule,
    GlobalRisks,
    GuardedAcceptance,
    Measurement,
    ProcessPrior,
    SimpleAcceptance,
    apply_decision_rule,
    as_decision_rule,
    global_risks,
    rule_spec,
)
from meanband.stats.diagnostics import Diagnostics, diagnose
from meanband.stats.interval import Interval
from meanband.stats.methods import mean_interval
from meanband.stats.planning import SD_BOUND, sd_upper_bound, trials_needed
from meanband.stats.rules import GUARDED, RULES, RuleOutcome, apply_rule, check_rule
from meanband.stats.sample import as_sample, check_confidence, check_probability
from meanband.stats.uncertainty import (
    InstrumentSpec,
    UncertaintyBudget,
    as_instrument_uncertainty,
    trials_to_decide,
    uncertainty_budget,
)
from meanband.stats.verdict import Verdict

__all__ = [
    "WIDE_MARGIN",
    "Decision",
    "decide",
    "edge_margin",
    "headroom",
    "tolerance_uncertainty_ratio",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


@dataclass(frozen=True, slots=True)
class Decision:
    """The verdict of one check and everything behind it."""

    verdict: Verdict
    band: Band
    interval: Interval
    counter: Interval | None
    diagnostics: Diagnostics
    suggested_n: int | None
    unit: str | None = None
    #: The uncertainty of the mean (Type A, instrument Type B, k, U); None for methods other
    #: than the t interval.
    uncertainty: UncertaintyBudget | None = None
    #: The decision rule applied and the conformance probability.
    rule: RuleOutcome | None = None
    #: The power at which ``suggested_n`` was planned.
    power: float = defaults.POWER
    #: Consumer's and producer's risk of this rule for the stated production process, if any.
    risks: GlobalRisks | None = None

    @property
    def uncertainty_ratio(self) -> float | None:
        """Test uncertainty ratio (T_U - T_L) / (2U) of a two-sided tolerance checked with an
        instrument uncertainty (common practice: 4:1 or more); None for a one-sided limit or
        without an instrument part."""
        return tolerance_uncertainty_ratio(self.uncertainty, self.band)

    @property
    def passed(self) -> bool:
        """True for PASS only."""
        return self.verdict is Verdict.PASS

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only, safe for JSON and for pytest-xdist's report transport."""
        return {
            "verdict": self.verdict.value,
            "band": self.band.to_dict(),
            "interval": self.interval.to_dict(),
            "counter": None if self.counter is None else self.counter.to_dict(),
            "diagnostics": self.diagnostics.to_dict(),
            "suggested_n": self.suggested_n,
            "unit": self.unit,
            "power": float(self.power),
            "uncertainty": None if self.uncertainty is None else self.uncertainty.to_dict(),
            "rule": None if self.rule is None else self.rule.to_dict(),
            "risks": None if self.risks is None else self.risks.to_dict(),
        }


def decide(
    values: Iterable[float] | np.ndarray,
    band: Band,
    *,
    confidence: float = defaults.CONFIDENCE,
    method: str = defaults.METHOD,
    power: float = defaults.POWER,
    alpha: float = defaults.NORMALITY_ALPHA,
    instrument_uncertainty: InstrumentSpec = None,
    rule: str | DecisionRule = GUARDED,
    process: ProcessPrior | tuple[float, float] | None = None,
) -> Decision:
    """Decide a check at ``confidence``.

    Two-sided band: the two-sided interval must lie inside (PASS), wholly outside on an edge
    (FAIL) or straddles an edge (UNDECIDED). A budget (one open edge): the one-sided bound at
    ``confidence`` must be inside for PASS; the opposite one-sided bound beyond the edge is FAIL.
    This is guarded acceptance with the guard band equal to the expanded uncertainty
    (ILAC-G8:2019; JCGM 106:2012, clause 8).

    ``instrument_uncertainty`` (a standard uncertainty in the trials' unit, ``(u, df)`` or an
    :class:`~meanband.stats.uncertainty.InstrumentUncertainty`) is combined with the Type A
    uncertainty of the mean (JCGM 100:2008): the interval becomes mean +/- U. ``rule="simple"``
    compares the mean alone with the band (simple acceptance, no UNDECIDED). Any other rule, a
    string such as ``"guarded:0.5"`` or ``"specific-risk:0.01"`` or a rule value from
    :mod:`meanband.stats.decision_rules`, is applied to the GUM budget of the t interval, and its
    ILAC-G8 statement is kept (conditional pass and conditional fail are UNDECIDED).

    ``process`` (a ``ProcessPrior`` or ``(mean, sd)`` of the true values the production process
    makes) adds the rule's global risks (JCGM 106:2012, clause 9): the consumer's risk, the
    producer's risk and the share of good units the gate turns away.
    """
    level = check_confidence(confidence)
    power = check_probability(power, "power")
    valued = None if isinstance(rule, str) and rule in RULES else as_decision_rule(rule)
    if valued is None:
        check_rule(str(rule))
    instrument = as_instrument_uncertainty(instrument_uncertainty)
    x = as_sample(values, minimum=2)
    side = band.side
    budget: UncertaintyBudget | None = None
    if method == "t":
        budget = uncertainty_budget(x, level, side, instrument)
    elif instrument is not None and instrument.standard > 0:
        raise TrialError(
            f"instrument_uncertainty combines with the t interval only (JCGM 100); this check "
            f"uses method={method!r}: use method='t' or leave instrument_uncertainty out"
        )
    combined = budget if budget is not None and budget.has_instrument else None
    interval = combined.interval() if combined is not None else mean_interval(x, level, side, method)
    counter: Interval | None = None
    low, high = interval.low, interval.high
    if side != "two-sided":
        opposite = "lower" if side == "upper" else "upper"
        if combined is not None:
            counter = combined.interval(opposite)
        else:
            counter = mean_interval(x, level, opposite, method)
        # The bounds that decide a budget: the one-sided bound and its opposite counterpart.
        if side == "upper":
            low, high = counter.low, interval.high
        else:
            low, high = interval.low, counter.high
    if valued is None:
        outcome = apply_rule(
            str(rule), mean=interval.mean, low=low, high=high, band_low=band.low,
            band_high=band.high,
            standard_uncertainty=None if budget is None else budget.combined,
            df=None if budget is None else budget.effective_df,
        )
    else:
        if budget is None:
            raise TrialError(
                f"decision rule {rule_spec(valued)!r} works on the uncertainty budget of the t "
                f"interval (JCGM 106); this check uses method={method!r}: use method='t'"
            )
        outcome = _valued_outcome(valued, budget, band)
    verdict = Verdict(outcome.verdict)
    diagnostics = diagnose(x, alpha=alpha)
    suggested = None
    if verdict is not Verdict.FAIL:
        margin = edge_margin(interval.mean, band)
        if combined is not None:
            suggested = trials_to_decide(
                interval.sd, margin, instrument, confidence=level, side=side, power=power
            )
        else:
            # sem * sqrt(n) is the sd per trial that the method's interval implies: the plain
            # sd for independent trials, the long-run sd for batch means of correlated ones;
            # planned with its upper confidence bound, as the suggestions are (Browne 1995).
            spread = interval.sem * math.sqrt(interval.n)
            df = interval.df if math.isfinite(interval.df) and interval.df > 0 else interval.n - 1
            suggested = trials_needed(
                sd_upper_bound(spread, df, SD_BOUND) if df > 0 else spread, margin=margin,
                confidence=level, side=side, power=power,
            )
    ratio = tolerance_uncertainty_ratio(budget, band)
    if ratio is not None:
        outcome = dataclasses.replace(outcome, uncertainty_ratio=ratio)
    risks = None
    if process is not None:
        if budget is None:
            raise TrialError("process= gives the global risks of the t interval's rule; use method='t'")
        prior = process if isinstance(process, ProcessPrior) else ProcessPrior(*process)
        risks = global_risks(
            prior, budget.combined, band.low, band.high,
            guard_band=valued if valued is not None else (
                SimpleAcceptance() if rule == "simple" else GuardedAcceptance()),
            coverage_factor=budget.coverage_factor, df=budget.effective_df,
        )
    return Decision(
        verdict, band, interval, counter, diagnostics, suggested, band.unit, budget, outcome, power,
        risks,
    )


#: A check passes "with a wide margin" when its interval could reach this many times as far
#: from the mean before it crossed an edge: a violated assumption (skewed or correlated
#: trials) would have to widen the interval threefold to change the verdict (common practice,
#: no source: the autocorrelation notes of typical runs name factors of 1.3 to 4).
WIDE_MARGIN = 3.0


def headroom(mean: float, low: float, high: float, band_low: float, band_high: float) -> float:
    """How many times its own reach the interval ``[low, high]`` about ``mean`` could grow
    before crossing the band's nearest finite edge: above 1 inside the band, below 1 across it.

    The reach on each side is the bound's distance from the mean; an open bound (a one-sided
    interval) has no reach on its side, and an edge on that side is not checked by the bound.
    """
    ratios = []
    for edge, bound, sign in ((band_high, high, 1.0), (band_low, low, -1.0)):
        if not math.isfinite(edge) or not math.isfinite(bound):
            continue
        reach = sign * (bound - mean)
        room = sign * (edge - mean)
        if reach <= 0:
            ratios.append(math.inf if room > 0 else 0.0)
        else:
            ratios.append(room / reach)
    return min(ratios) if ratios else math.nan


def edge_margin(mean: float, band: Band) -> float:
    """Distance from the mean to the band edge that decides the check (the nearest one)."""
    distances = [abs(mean - edge) for edge in (band.low, band.high) if math.isfinite(edge)]
    return min(distances)


def _valued_outcome(rule: DecisionRule, budget: UncertaintyBudget, band: Band) -> RuleOutcome:
    """A decision rule given as a value, as the row records a rule's outcome."""
    conformity = apply_decision_rule(rule, Measurement.from_budget(budget), band.low, band.high)
    verdict = Verdict(conformity.verdict)
    accept = conformity.specific_risk if conformity.risk_kind == "false accept" else None
    reject = conformity.specific_risk if conformity.risk_kind == "false reject" else None
    return RuleOutcome(
        rule=rule_spec(rule), verdict=verdict, guard_band=conformity.guard_band,
        acceptance_low=conformity.acceptance_low, acceptance_high=conformity.acceptance_high,
        conformance_probability=conformity.conformance_probability,
        false_accept_probability=accept if verdict is Verdict.PASS else None,
        false_reject_probability=reject if verdict is Verdict.FAIL else None,
        statement=conformity.statement,
    )


def tolerance_uncertainty_ratio(budget: UncertaintyBudget | None, band: Band) -> float | None:
    """(T_U - T_L) / (2U) of a two-sided tolerance with an instrument part in U (common
    practice); None for a one-sided limit or without an instrument uncertainty."""
    if budget is None or not budget.has_instrument or budget.expanded <= 0:
        return None
    if not (math.isfinite(band.low) and math.isfinite(band.high)):
        return None
    return (band.high - band.low) / (2.0 * budget.expanded)
