"""Decision rules for a check (ILAC-G8:2019, JCGM 106:2012): guarded or simple acceptance."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.verdict import Verdict

__all__ = [
    "GUARDED",
    "RULES",
    "SIMPLE",
    "RuleOutcome",
    "apply_rule",
    "check_rule",
    "conformance_probability",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: Guarded acceptance, guard band w = U: PASS only when the interval lies inside the band.
GUARDED = "guarded"
#: Simple acceptance, w = 0: PASS when the mean alone lies inside the band.
SIMPLE = "simple"
RULES = (GUARDED, SIMPLE)

_PASS, _FAIL, _UNDECIDED = Verdict.PASS, Verdict.FAIL, Verdict.UNDECIDED


@dataclass(frozen=True, slots=True)
class RuleOutcome:
    """What a decision rule made of one check.

    ``acceptance_low``/``acceptance_high`` bound the acceptance zone for the mean (the band
    shrunk by the guard band on each finite edge). ``conformance_probability`` is the
    probability that the true mean lies in the band (JCGM 106:2012, clause 7). The specific
    risk of this verdict (JCGM 106:2012, clause 9; sub-clause from memory) is
    ``false_accept_probability``
    = 1 - p_c after a PASS and ``false_reject_probability`` = p_c after a FAIL.
    """

    rule: str
    verdict: Verdict
    guard_band: float
    acceptance_low: float
    acceptance_high: float
    conformance_probability: float | None
    false_accept_probability: float | None
    false_reject_probability: float | None
    #: The ILAC-G8 statement (pass, conditional pass, conditional fail, fail) of a rule given as
    #: a value (``stats/decision_rules.py``); None for the plain guarded and simple rules.
    statement: str | None = None
    #: The check's test uncertainty ratio (tolerance / 2U), where it is defined.
    uncertainty_ratio: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only; an open acceptance edge is written as None."""
        return {
            "rule": self.rule,
            "verdict": self.verdict.value,
            "guard_band": float(self.guard_band),
            "acceptance_low": finite_or_none(self.acceptance_low),
            "acceptance_high": finite_or_none(self.acceptance_high),
            "conformance_probability": _float_or_none(self.conformance_probability),
            "false_accept_probability": _float_or_none(self.false_accept_probability),
            "false_reject_probability": _float_or_none(self.false_reject_probability),
            **({} if self.statement is None else {"statement": self.statement}),
            **({} if self.uncertainty_ratio is None
               else {"uncertainty_ratio": float(self.uncertainty_ratio)}),
        }


def check_rule(rule: str) -> str:
    """Return ``rule`` if it names a decision rule, else raise :class:`TrialError`."""
    if rule not in RULES:
        raise TrialError(
            f"unknown decision rule {rule!r}; choose 'guarded' (the default: the interval must "
            "lie inside the band) or 'simple' (the mean alone is compared with the band)"
        )
    return rule


def conformance_probability(
    mean: float, standard_uncertainty: float, df: float, low: float, high: float
) -> float:
    """Probability that the true mean lies in [low, high], given the estimate ``mean`` with
    standard uncertainty u and ``df`` degrees of freedom.

    p_c = F((high - mean) / u) - F((low - mean) / u), F the Student-t distribution function
    with ``df`` degrees of freedom: the distribution of the true mean given the estimate
    (JCGM 100:2008, G.3; JCGM 101:2008, 6.4.9). With infinite ``df`` this is the Gaussian
    formula of JCGM 106:2012, clause 7 (7.3; one or two tolerance limits, sub-clause from
    memory). An open edge is -inf/+inf. With u = 0 the probability is 1 inside the closed
    band and 0 outside.
    """
    if low > high:
        raise TrialError(f"the band's low edge {low!r} lies above its high edge {high!r}")
    if not (math.isfinite(standard_uncertainty) and standard_uncertainty >= 0):
        raise TrialError(
            f"the standard uncertainty must be finite and >= 0, got {standard_uncertainty!r}"
        )
    if math.isnan(df) or df <= 0:
        raise TrialError(f"degrees of freedom must be > 0 (or inf), got {df!r}")
    if standard_uncertainty == 0.0:
        return 1.0 if low <= mean <= high else 0.0
    dist = distribution(df)
    z_low = (low - mean) / standard_uncertainty
    z_high = (high - mean) / standard_uncertainty
    # Compute the smaller of p_c and 1 - p_c directly, so neither loses digits to cancellation.
    outside = float(dist.cdf(z_low) + dist.sf(z_high))
    if outside < 0.5:
        return 1.0 - outside
    return float(max(dist.cdf(z_high) - dist.cdf(z_low), 0.0))


def apply_rule(
    rule: str,
    *,
    mean: float,
    low: float,
    high: float,
    band_low: float,
    band_high: float,
    standard_uncertainty: float | None = None,
    df: float | None = None,
) -> RuleOutcome:
    """Apply a decision rule to one check.

    ``low``/``high`` are the bounds at the check's confidence that decide it: the two-sided
    interval for a two-sided band; for a budget the one-sided bound and its opposite one-sided
    counterpart (e.g. ``[mean - U, mean + U]`` with one-sided k).

    - ``guarded`` (ILAC-G8:2019, 4.2.2-4.2.3; JCGM 106:2012, clause 8; sub-clauses from
      memory): guard band w = U. PASS when ``band_low <= low`` and ``high <= band_high``
      (the interval lies inside), FAIL when the interval lies wholly beyond an edge,
      UNDECIDED otherwise (ILAC-G8's conditional pass and conditional fail, from memory).
      A PASS then has probability of false acceptance at most 1 - C for a budget and at
      most (1 - C) / 2 at each edge of a two-sided band.
    - ``simple`` (ILAC-G8:2019, 4.2.1; JCGM 106:2012, clause 8): w = 0. PASS when the mean
      lies in the closed band, FAIL otherwise. The false-acceptance probability can approach
      50 % near an edge.

    ``standard_uncertainty`` and ``df`` give the conformance probability; without them it is
    None (an interval method that is not the t interval).
    """
    check_rule(rule)
    if rule == GUARDED:
        below, above = mean - low, high - mean
        if band_low <= low and high <= band_high:
            verdict = _PASS
        elif high < band_low or low > band_high:
            verdict = _FAIL
        else:
            verdict = _UNDECIDED
    else:
        below = above = 0.0
        verdict = _PASS if band_low <= mean <= band_high else _FAIL
    probability = None
    if standard_uncertainty is not None and df is not None:
        probability = conformance_probability(mean, standard_uncertainty, df, band_low, band_high)
    false_accept = false_reject = None
    if probability is not None:
        if verdict == _PASS:
            false_accept = _outside(
                mean, standard_uncertainty, df, band_low, band_high, probability
            )
        elif verdict == _FAIL:
            false_reject = probability
    return RuleOutcome(
        rule=rule,
        verdict=verdict,
        guard_band=max((w for w in (below, above) if math.isfinite(w)), default=0.0),
        acceptance_low=band_low + below,
        acceptance_high=band_high - above,
        conformance_probability=probability,
        false_accept_probability=false_accept,
        false_reject_probability=false_reject,
    )


def _outside(
    mean: float, u: float | None, df: float | None, low: float, high: float, p_c: float
) -> float:
    """1 - p_c, computed from the tails when p_c is close to 1."""
    if not u or df is None:
        return 1.0 - p_c
    return outside_probability(mean, u, df, low, high)


def outside_probability(y: float, u: float, df: float, low: float, high: float) -> float:
    """The probability beyond ``[low, high]`` of a t (or normal) with centre ``y`` and scale
    ``u``, from the two tails, so a tiny risk keeps its digits."""
    if u == 0.0:
        return 0.0 if low <= y <= high else 1.0
    dist = distribution(df)
    return float(dist.cdf((low - y) / u) + dist.sf((high - y) / u))


def distribution(df: float) -> Any:
    """Student's t with ``df`` degrees of freedom; the normal distribution for infinite df."""
    if math.isinf(df):
        from scipy.stats import norm

        return norm
    from scipy.stats import t as student_t

    return student_t(df)


def finite_or_none(value: float) -> float | None:
    """A finite number as a float, an infinite or NaN one as None (for JSON rows)."""
    return float(value) if math.isfinite(value) else None


def _float_or_none(value: float | None) -> float | None:
    return None if value is None else float(value)
